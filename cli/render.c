/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "render.h"

#include "atomic.h"
#include "audio_write.h"
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

int cli_render_check_paths(const CliRenderJob *job, char *err, size_t len)
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
        if (cli_outputs_clash(job->out_path, job->report_path)) {
            cli_err(err, len, "%s: is the audio output %s; choose another report", job->report_path,
                    job->out_path);
            return -1;
        }
    }
    return cli_audio_ext_check(job->out_path, err, len);
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

/* The input's channel layout (a WAVE_FORMAT_EXTENSIBLE mask, a CAF or AIFF
 * channel layout), where libsndfile reads one and the output's container
 * holds one. */
static void copy_channel_map(SNDFILE *in, SNDFILE *out, int channels)
{
    int map[1024]; /* libsndfile's most channels (SF_MAX_CHANNELS) */
    if (channels <= 0 || channels > 1024) {
        return;
    }
    if (sf_command(in, SFC_GET_CHANNEL_MAP_INFO, map, (int)((size_t)channels * sizeof(int))) ==
        SF_TRUE) {
        sf_command(out, SFC_SET_CHANNEL_MAP_INFO, map, (int)((size_t)channels * sizeof(int)));
    }
}

/* The frames the file's header announces, which libsndfile does not report
 * when the data is shorter (info.frames is what is there): read from its log,
 * where the WAV family's reader notes "data : N (should be M)" (bytes; the
 * frame size from "Block Align") and the AIFF reader "Frame count read from
 * 'COMM' chunk (N)". Other containers (FLAC's STREAMINFO) report the header's
 * count as info.frames; reading then comes up short. */
static uint64_t announced_frames(SNDFILE *in, const SF_INFO *info)
{
    uint64_t frames = (uint64_t)(info->frames > 0 ? info->frames : 0);
    char log[8192];
    if (sf_command(in, SFC_GET_LOG_INFO, log, (int)sizeof(log)) <= 0) {
        return frames;
    }
    log[sizeof(log) - 1] = '\0';
    long long n = 0, m = 0, align = 0;
    const char *d = strstr(log, "\ndata : ");
    const char *b = strstr(log, "Block Align");
    if (d && sscanf(d, "\ndata : %lld (should be %lld)", &n, &m) == 2 && b &&
        sscanf(b, "Block Align : %lld", &align) == 1 && align > 0 && n > m) {
        const uint64_t said = (uint64_t)(n / align);
        return said > frames ? said : frames;
    }
    const char *c = strstr(log, "Frame count read from 'COMM' chunk (");
    if (c && sscanf(c, "Frame count read from 'COMM' chunk (%lld)", &n) == 1 && n > 0 &&
        (uint64_t)n > frames) {
        return (uint64_t)n;
    }
    return frames;
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
        s->peak_load_v = fmax(s->peak_load_v, m.peak_load_v);
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
    /* a stream on a copy of the descriptor: the atomic file keeps its own for
     * the commit (a spool's data is copied from it then) */
    const int fd = dup(rep->fd);
    FILE *f = fd >= 0 ? fdopen(fd, "w") : NULL;
    if (f == NULL) {
        cli_err(err, len, "%s: cannot write: %s", job->report_path, strerror(errno));
        if (fd >= 0) {
            close(fd);
        }
        cli_atomic_abort(rep);
        return -1;
    }
    cli_report_render(f, job, res);
    int bad = fflush(f) != 0 || ferror(f);
    int e = errno;
    if (fclose(f) != 0 && !bad) {
        bad = 1;
        e = errno;
    }
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
    res->read_frames = (uint64_t)read_total;
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
    if (cli_render_check_paths(job, err, len) != 0 ||
        cli_check_input(job->in_path, err, len) != 0) {
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
    res->header_frames = announced_frames(w.in, &info);
    int oformat;
    if (cli_audio_format_for(job->out_path, info.format, info.channels, info.samplerate, &oformat,
                             err, len) != 0) {
        work_free(&w);
        return -1;
    }
    res->format = oformat;
    cli_audio_format_name(oformat, res->format_name, sizeof(res->format_name));
    SF_INFO oinfo = info;
    oinfo.frames = 0;
    oinfo.format = oformat;
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
    res->output_volts = os_stage_output_volts(w.stage[0]);

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
    copy_channel_map(w.in, w.out, info.channels);

    int rc = run(job, &w, res, info.frames, err, len);
    if (rc == 0 && res->frames == 0 && !cli_audio_empty_ok(oformat)) {
        /* libsndfile writes these headers with the first frames: no frames,
         * no header, a file nothing reads (found by fuzz/fuzz_cli.c). */
        cli_err(err, len,
                "%s: the input holds no frames, and an empty %s cannot be written (a WAV, AIFF or "
                "CAF can)",
                job->out_path, res->format_name);
        rc = -1;
    }
    if (rc == 0) {
        sf_write_sync(w.out);
        if (sf_close(w.out) != 0) {
            cli_err(err, len, "%s: cannot write: %s", job->out_path, sf_strerror(NULL));
            rc = -1;
        }
        w.out = NULL;
        if (rc == 0 && (out.tmp || out.spooled) &&
            cli_audio_fix_aiff_pad(out.fd, oformat, (long long)res->frames, info.channels) < 0) {
            cli_err(err, len, "%s: cannot write: %s", job->out_path, strerror(errno));
            rc = -1;
        }
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
