/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "render.h"

#include "atomic.h"
#include "cli.h"
#include "progress.h"
#include "report.h"

#include <sndfile.h>

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <unistd.h>

/* Frames per block. The stage's output does not depend on the block size
 * (tests/dsp/test_robustness.c, "buffers"), so this only trades memory for calls. */
#define BLOCK 4096

/* Files at least this long (s) get a progress bar on a terminal. */
#define PROGRESS_MIN_SECONDS 5.0

int cli_check_input(const char *path, char *err, size_t len)
{
    struct stat st;
    if (stat(path, &st) != 0) {
        cli_err(err, len, "%s: %s", path, strerror(errno));
        return -1;
    }
    if (S_ISDIR(st.st_mode)) {
        cli_err(err, len, "%s: is a directory, not an audio file", path);
        return -1;
    }
    const int fd = open(path, O_RDONLY);
    if (fd < 0) {
        cli_err(err, len, "%s: cannot read: %s", path, strerror(errno));
        return -1;
    }
    close(fd);
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    SNDFILE *f = sf_open(path, SFM_READ, &info);
    if (f == NULL) {
        cli_err(err, len, "%s: not an audio file libsndfile can decode (%s)", path,
                sf_strerror(NULL));
        return -1;
    }
    sf_close(f);
    return 0;
}

static void format_name(int format, char *buf, size_t len)
{
    SF_FORMAT_INFO major = {.format = format & SF_FORMAT_TYPEMASK};
    SF_FORMAT_INFO sub = {.format = format & SF_FORMAT_SUBMASK};
    const int ok_major = sf_command(NULL, SFC_GET_FORMAT_INFO, &major, sizeof(major)) == 0;
    const int ok_sub = sf_command(NULL, SFC_GET_FORMAT_INFO, &sub, sizeof(sub)) == 0;
    snprintf(buf, len, "%s, %s", ok_major ? major.name : "?", ok_sub ? sub.name : "?");
}

/* The output keeps the input's container and encoding. An output name whose
 * extension belongs to another container would mislabel the file: refuse it. */
static int check_extension(const char *out, int in_format, char *err, size_t len)
{
    char ext[16];
    cli_path_ext(out, ext, sizeof(ext));
    if (ext[0] == '\0') {
        return 0;
    }
    SF_FORMAT_INFO in_major = {.format = in_format & SF_FORMAT_TYPEMASK};
    if (sf_command(NULL, SFC_GET_FORMAT_INFO, &in_major, sizeof(in_major)) != 0) {
        return 0;
    }
    if (in_major.extension && strcasecmp(ext, in_major.extension) == 0) {
        return 0;
    }
    int count = 0;
    sf_command(NULL, SFC_GET_FORMAT_MAJOR_COUNT, &count, sizeof(count));
    for (int i = 0; i < count; ++i) {
        SF_FORMAT_INFO fi = {.format = i};
        if (sf_command(NULL, SFC_GET_FORMAT_MAJOR, &fi, sizeof(fi)) != 0 || !fi.extension) {
            continue;
        }
        if (strcasecmp(ext, fi.extension) == 0 &&
            (fi.format & SF_FORMAT_TYPEMASK) != (in_format & SF_FORMAT_TYPEMASK)) {
            cli_err(err, len, "%s: the output keeps the input's format (%s); name it .%s, not .%s",
                    out, in_major.name, in_major.extension, ext);
            return -1;
        }
    }
    return 0;
}

/* Refuse an output (or report) that is the input or the other output. */
static int check_paths(const CliRenderJob *job, char *err, size_t len)
{
    if (strcmp(job->in_path, job->out_path) == 0 || cli_same_file(job->in_path, job->out_path)) {
        cli_err(err, len, "%s: is the input file; choose another output", job->out_path);
        return -1;
    }
    if (job->report_path) {
        if (strcmp(job->report_path, job->in_path) == 0 ||
            cli_same_file(job->in_path, job->report_path)) {
            cli_err(err, len, "%s: is the input file; choose another report", job->report_path);
            return -1;
        }
        if (strcmp(job->report_path, job->out_path) == 0 ||
            cli_same_file(job->out_path, job->report_path)) {
            cli_err(err, len, "%s: is the audio output; choose another report", job->report_path);
            return -1;
        }
    }
    return 0;
}

static void copy_strings(SNDFILE *in, SNDFILE *out)
{
    for (int t = SF_STR_FIRST; t <= SF_STR_LAST; ++t) {
        const char *s = sf_get_string(in, t);
        if (s) {
            sf_set_string(out, t, s); /* a format without the field ignores it */
        }
    }
}

/* Per-render working state. */
typedef struct {
    SNDFILE *in, *out;
    OsStage **stage;
    float *inter, *chan;
    int channels;
} Work;

static void work_free(Work *w)
{
    if (w->stage) {
        for (int c = 0; c < w->channels; ++c) {
            os_stage_free(w->stage[c]);
        }
    }
    free(w->stage);
    free(w->inter);
    free(w->chan);
    if (w->in) {
        sf_close(w->in);
    }
    if (w->out) {
        sf_close(w->out);
    }
    memset(w, 0, sizeof(*w));
}

/* Run @p n interleaved frames of w->inter through each channel's stage, in
 * place, adding to the meters. */
static void process_block(Work *w, CliRenderResult *res, uint32_t n)
{
    OsMeters m;
    for (int c = 0; c < w->channels; ++c) {
        for (uint32_t i = 0; i < n; ++i) {
            w->chan[i] = w->inter[(size_t)i * (size_t)w->channels + (size_t)c];
        }
        os_stage_process(w->stage[c], w->chan, w->chan, n);
        os_stage_meters(w->stage[c], &m);
        CliChannelStats *s = &res->ch[c];
        s->peak_current = fmax(s->peak_current, m.peak_current);
        /* Sums of meter x frames; divided by the frame count at the end. */
        s->limiting += m.limiting * n;
        s->load_power += m.load_power * n;
        s->dissipation += m.dissipation * n;
        for (uint32_t i = 0; i < n; ++i) {
            w->inter[(size_t)i * (size_t)w->channels + (size_t)c] = w->chan[i];
        }
    }
}

/* Count what leaves: peaks and samples beyond full scale. */
static void output_levels(const float *x, uint32_t n, int channels, CliRenderResult *res)
{
    for (uint32_t i = 0; i < n; ++i) {
        for (int c = 0; c < channels; ++c) {
            const double v = fabs((double)x[(size_t)i * (size_t)channels + (size_t)c]);
            res->ch[c].out_peak = fmax(res->ch[c].out_peak, v);
            res->ch[c].clipped += v > 1.0;
        }
    }
}

static int write_report(const CliRenderJob *job, const CliRenderResult *res, CliAtomic *rep,
                        char *err, size_t len)
{
    if (cli_atomic_open(rep, job->report_path, err, len) != 0) {
        return -1;
    }
    FILE *f = fdopen(rep->fd, "w");
    if (f == NULL) {
        cli_err(err, len, "%s: cannot write: %s", job->report_path, strerror(errno));
        cli_atomic_abort(rep);
        return -1;
    }
    cli_report_render(f, job, res);
    const int bad = fflush(f) != 0 || ferror(f) || fsync(rep->fd) != 0;
    const int e = errno;
    fclose(f);
    rep->fd = -1;
    if (bad) {
        cli_err(err, len, "%s: cannot write: %s", job->report_path, strerror(e));
        cli_atomic_abort(rep);
        return -1;
    }
    return 0;
}

/* The loop: read, process, write; the latency flushed at the end when
 * compensating. */
static int run(const CliRenderJob *job, Work *w, CliRenderResult *res, sf_count_t total, char *err,
               size_t len)
{
    const sf_count_t skip = job->compensate ? (sf_count_t)res->latency : 0;
    sf_count_t read_total = 0, flushed = 0, processed = 0, written = 0;
    int eof = 0;
    CliProgress bar;
    cli_progress_start(&bar, job->out_path,
                       job->progress && (double)total >= PROGRESS_MIN_SECONDS * res->rate);
    while (!cli_interrupted) {
        sf_count_t n = 0;
        if (!eof) {
            n = sf_readf_float(w->in, w->inter, BLOCK);
            if (n <= 0) {
                eof = 1;
                if (sf_error(w->in) != SF_ERR_NO_ERROR) {
                    cli_err(err, len, "%s: cannot decode: %s", job->in_path, sf_strerror(w->in));
                    cli_progress_end(&bar);
                    return -1;
                }
            }
            read_total += n > 0 ? n : 0;
        }
        if (eof) {
            /* Zeros push the last `skip` frames out of the delay line. */
            n = skip - flushed < BLOCK ? skip - flushed : BLOCK;
            if (n <= 0) {
                break;
            }
            memset(w->inter, 0, (size_t)n * (size_t)w->channels * sizeof(float));
            flushed += n;
        }
        process_block(w, res, (uint32_t)n);
        processed += n;
        /* Drop the first `skip` output frames. */
        sf_count_t from = 0;
        if (processed - n < skip) {
            from = skip - (processed - n) < n ? skip - (processed - n) : n;
        }
        const float *o = w->inter + (size_t)from * (size_t)w->channels;
        const sf_count_t m = n - from;
        if (m > 0) {
            output_levels(o, (uint32_t)m, w->channels, res);
            if (sf_writef_float(w->out, o, m) != m) {
                cli_err(err, len, "%s: cannot write: %s", job->out_path, sf_strerror(w->out));
                cli_progress_end(&bar);
                return -1;
            }
            written += m;
        }
        cli_progress_update(&bar, (double)read_total, (double)total);
    }
    cli_progress_end(&bar);
    if (cli_interrupted) {
        cli_err(err, len, "%s: interrupted; nothing written", job->out_path);
        return -1;
    }
    res->frames = (uint64_t)written;
    for (int c = 0; c < w->channels; ++c) {
        CliChannelStats *s = &res->ch[c];
        const double frames = (double)(processed > 0 ? processed : 1);
        s->limiting /= frames;
        s->load_power /= frames;
        s->dissipation /= frames;
    }
    return 0;
}

int cli_render(const CliRenderJob *job, CliRenderResult *res, char *err, size_t len)
{
    memset(res, 0, sizeof(*res));
    if (check_paths(job, err, len) != 0 || cli_check_input(job->in_path, err, len) != 0) {
        return -1;
    }
    Work w;
    memset(&w, 0, sizeof(w));
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    w.in = sf_open(job->in_path, SFM_READ, &info);
    if (w.in == NULL) {
        cli_err(err, len, "%s: not an audio file libsndfile can decode (%s)", job->in_path,
                sf_strerror(NULL));
        return -1;
    }
    res->channels = w.channels = info.channels;
    res->rate = info.samplerate;
    res->format = info.format;
    format_name(info.format, res->format_name, sizeof(res->format_name));
    if (check_extension(job->out_path, info.format, err, len) != 0) {
        work_free(&w);
        return -1;
    }
    SF_INFO oinfo = info;
    oinfo.frames = 0;
    if (!sf_format_check(&oinfo)) {
        cli_err(err, len, "%s: libsndfile reads but cannot write its format (%s)", job->in_path,
                res->format_name);
        work_free(&w);
        return -1;
    }
    res->ch = calloc((size_t)info.channels, sizeof(CliChannelStats));
    w.stage = calloc((size_t)info.channels, sizeof(OsStage *));
    w.inter = malloc((size_t)BLOCK * (size_t)info.channels * sizeof(float));
    w.chan = malloc((size_t)BLOCK * sizeof(float));
    if (!res->ch || !w.stage || !w.inter || !w.chan) {
        cli_err(err, len, "%s: out of memory", job->in_path);
        work_free(&w);
        return -1;
    }
    char why[CLI_ERR_LEN];
    for (int c = 0; c < info.channels; ++c) {
        w.stage[c] = cli_stage_new(&job->settings, (double)info.samplerate, why, sizeof(why));
        if (w.stage[c] == NULL) {
            cli_err(err, len, "%s: %s", job->in_path, why);
            work_free(&w);
            return -1;
        }
    }
    res->latency = os_stage_latency(w.stage[0]);

    CliAtomic out, rep;
    memset(&rep, 0, sizeof(rep));
    rep.fd = -1;
    if (cli_atomic_open(&out, job->out_path, err, len) != 0) {
        work_free(&w);
        return -1;
    }
    w.out = sf_open_fd(out.fd, SFM_WRITE, &oinfo, SF_FALSE);
    if (w.out == NULL) {
        cli_err(err, len, "%s: cannot write %s: %s", job->out_path, res->format_name,
                sf_strerror(NULL));
        cli_atomic_abort(&out);
        work_free(&w);
        return -1;
    }
    /* Integer formats: clip beyond full scale rather than wrap around. */
    sf_command(w.out, SFC_SET_CLIPPING, NULL, SF_TRUE);
    copy_strings(w.in, w.out);

    int rc = run(job, &w, res, info.frames, err, len);
    if (rc == 0) {
        sf_write_sync(w.out);
        if (sf_close(w.out) != 0) {
            cli_err(err, len, "%s: cannot write: %s", job->out_path, sf_strerror(NULL));
            rc = -1;
        }
        w.out = NULL;
    }
    if (rc == 0 && job->report_path) {
        rc = write_report(job, res, &rep, err, len);
    }
    if (rc == 0) {
        rc = cli_atomic_commit(&out, err, len);
        if (rc == 0 && job->report_path) {
            rc = cli_atomic_commit(&rep, err, len);
        }
    }
    if (rc != 0) {
        if (w.out) {
            sf_close(w.out); /* before its descriptor goes */
            w.out = NULL;
        }
        cli_atomic_abort(&out);
        cli_atomic_abort(&rep);
    }
    work_free(&w);
    return rc;
}

void cli_render_result_free(CliRenderResult *res)
{
    free(res->ch);
    res->ch = NULL;
}
