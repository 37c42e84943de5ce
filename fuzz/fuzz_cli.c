/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* libFuzzer harness of the command line's option parser and audio reader,
 * through the public entry points of the cli/ headers only.
 *
 * Input layout: a flag byte, an input-name byte, an output-name byte, a
 * report byte, a 16-bit length L, then L bytes of command line (arguments
 * separated by NUL bytes, after an implicit "outstage"), then the bytes of an
 * audio file.
 *
 * 1. cli_args_parse() on the command line; --set and --preset values (or,
 *    when the line does not parse, every argument holding '=') go through
 *    cli_settings_preset() and cli_settings_assign().
 * 2. The audio bytes are written to in.EXT in a private directory (under
 *    /dev/shm when there is one: cli/atomic.c fsyncs every output), then
 *    cli_check_input() and cli_render() read them, writing out.EXT (and a
 *    JSON report) into the same directory, with the stage the command line
 *    names and its settings.
 *
 * A finding (abort) is:
 * - an error that is not one non-empty line, or success with a parsed line
 *   that breaks CliArgs' documented shape (positional counts, numbers finite
 *   or NAN, pointers into argv);
 * - settings accepted that are not finite or lie outside their port's range
 *   (settings.h: nothing is clamped there);
 * - cli_check_input() and libsndfile disagreeing on whether the file decodes;
 * - cli_render() succeeding on what it must refuse (output = input, output a
 *   directory or in a missing one, a report that is the input or the output,
 *   an input libsndfile cannot open), or reporting other channels, rate or
 *   frames than the input has; an output that libsndfile cannot read back, or
 *   with non-finite samples; a report that is not valid JSON (RFC 8259);
 * - after a failed render, any file left behind or an existing output changed
 *   (render.h: no output or report is created or changed on failure); the
 *   input changed in any case;
 * - any AddressSanitizer, UndefinedBehaviorSanitizer or leak report.
 *
 * The rendering work per input is bounded (MAX_WORK oversampled steps, at
 * most MAX_CHANNELS channels); larger files are only checked, not rendered. */

#include "cli.h"
#include "options.h"
#include "render.h"
#include "settings.h"

#include "fuzz_data.h"

#include <sndfile.h>

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* Most channels x frames x oversampling factor one input may render. */
#define MAX_WORK 65536
#define MAX_CHANNELS 16
/* Most arguments split from the command line (more than CLI_MAX_SETS). */
#define MAX_ARGS 160
#define PATH_LEN 512

/* Input names: libsndfile tells most formats by their header, a few by the name. */
static const char *const in_exts[] = {"wav", "aiff", "aif", "flac", "au",  "snd", "caf",
                                      "w64", "ogg",  "oga", "rf64", "voc", "sf",  "paf",
                                      "mat", "xi",   "htk", "nist", "avr", "sds", "wve",
                                      "mpc", "iff",  "svx", "raw",  "txt", "WAV", ""};
#define N_IN_EXTS (sizeof(in_exts) / sizeof(in_exts[0]))

/* Output names: the input's own, other containers, unknown, none. */
static const char *const out_exts[] = {"wav", "aiff", "flac", "au",  "caf", "w64", "rf64",
                                       "ogg", "opus", "mp3",  "txt", "WAV", "",    "json"};
#define N_OUT_EXTS (sizeof(out_exts) / sizeof(out_exts[0]))

static char dir[PATH_LEN];

static void empty_dir(void)
{
    DIR *d = opendir(dir);
    if (d == NULL) {
        return;
    }
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        if (strcmp(e->d_name, ".") != 0 && strcmp(e->d_name, "..") != 0) {
            char p[PATH_LEN * 2];
            snprintf(p, sizeof(p), "%s/%s", dir, e->d_name);
            unlink(p);
        }
    }
    closedir(d);
}

static void remove_dir(void)
{
    if (dir[0] == '\0') {
        return;
    }
    empty_dir();
    rmdir(dir);
    dir[0] = '\0';
}

int LLVMFuzzerInitialize(int *argc, char ***argv);

int LLVMFuzzerInitialize(int *argc, char ***argv)
{
    (void)argc;
    (void)argv;
    const char *base = getenv("FUZZ_TMPDIR");
    struct stat st;
    if (base == NULL && stat("/dev/shm", &st) == 0 && S_ISDIR(st.st_mode) &&
        access("/dev/shm", W_OK) == 0) {
        base = "/dev/shm";
    }
    if (base == NULL) {
        base = getenv("TMPDIR");
    }
    if (base == NULL) {
        base = "/tmp";
    }
    snprintf(dir, sizeof(dir), "%s/outstage-fuzz-XXXXXX", base);
    if (mkdtemp(dir) == NULL) {
        fprintf(stderr, "fuzz_cli: cannot make a directory in %s: %s\n", base, strerror(errno));
        exit(1);
    }
    atexit(remove_dir);
    return 0;
}

/* An error message must be one line, not empty, and terminated within its buffer. */
static void check_message(const char *what, const char *err, size_t len)
{
    const size_t n = strnlen(err, len);
    if (n == len) {
        fuzz_fail("%s: error message not terminated", what);
    }
    if (n == 0) {
        fuzz_fail("%s: failed without a message", what);
    }
    if (strchr(err, '\n') || strchr(err, '\r')) {
        fuzz_fail("%s: message of more than one line: %s", what, err);
    }
}

static int inside(const char *p, const char *buf, size_t len)
{
    return p >= buf && p < buf + len;
}

static void check_args(const CliArgs *a, int argc, const char *buf, size_t len)
{
    if ((unsigned)a->command >= (unsigned)CLI_CMD_COUNT) {
        fuzz_fail("cli_args_parse: command %d", (int)a->command);
    }
    if (a->n_pos < 0 || a->n_pos > 4 || a->n_sets < 0 || a->n_sets > CLI_MAX_SETS ||
        a->n_pos + a->n_sets > argc) {
        fuzz_fail("cli_args_parse: %d positional arguments, %d sets from %d arguments", a->n_pos,
                  a->n_sets, argc);
    }
    static const int lo[] = {3, 1, 3, 0, 0}, hi[] = {3, 1, 3, 1, 0};
    if (a->command <= CLI_CMD_LIST && (a->n_pos < lo[a->command] || a->n_pos > hi[a->command])) {
        fuzz_fail("cli_args_parse: command %d accepted with %d positional arguments",
                  (int)a->command, a->n_pos);
    }
    for (int i = 0; i < a->n_pos; ++i) {
        if (!inside(a->pos[i], buf, len)) {
            fuzz_fail("cli_args_parse: positional argument %d points outside argv", i);
        }
    }
    for (int i = 0; i < a->n_sets; ++i) {
        if (!inside(a->sets[i], buf, len)) {
            fuzz_fail("cli_args_parse: --set %d points outside argv", i);
        }
    }
    const char *strs[] = {a->preset, a->report, a->wav};
    for (int i = 0; i < 3; ++i) {
        if (strs[i] && !inside(strs[i], buf, len)) {
            fuzz_fail("cli_args_parse: option value %d points outside argv", i);
        }
    }
    const double nums[] = {a->freq, a->rate, a->from, a->to, a->step, a->level, a->seconds};
    for (int i = 0; i < 7; ++i) {
        if (isinf(nums[i])) {
            fuzz_fail("cli_args_parse: number %d accepted as %g", i, nums[i]);
        }
    }
    if (a->jobs < 0 || a->jobs > 64) {
        fuzz_fail("cli_args_parse: --jobs %d", a->jobs);
    }
    if (a->json && a->csv) {
        fuzz_fail("cli_args_parse: --json and --csv both accepted");
    }
}

/* Every value the settings hold is finite and within its port's range. */
static void check_settings(const CliSettings *s, const char *after)
{
    for (int p = 0; p < OS_P_COUNT; ++p) {
        const OsPortInfo *port = os_port_for_param(s->kind, (OsParam)p);
        if (port == NULL) {
            continue;
        }
        const float v = s->value[p];
        if (!(v >= port->min && v <= port->max)) {
            fuzz_fail("settings: %s = %g after '%s', outside %g .. %g", port->symbol, (double)v,
                      after, (double)port->min, (double)port->max);
        }
        if (port->points && (port->flags & (OS_PF_ENUMERATION | OS_PF_TOGGLE))) {
            int ok = 0;
            for (const OsScalePoint *pt = port->points; pt->label; ++pt) {
                ok |= v == pt->value;
            }
            if (!ok) {
                fuzz_fail("settings: %s = %g after '%s', not one of its values", port->symbol,
                          (double)v, after);
            }
        }
    }
}

static void assign(CliSettings *s, const char *text)
{
    char err[CLI_ERR_LEN];
    memset(err, 'x', sizeof(err));
    if (cli_settings_assign(s, text, err, sizeof(err)) != 0) {
        check_message("cli_settings_assign", err, sizeof(err));
    }
    check_settings(s, text);
}

/* --- a strict JSON (RFC 8259) check of the report ------------------------ */

typedef struct {
    const char *p, *end;
    int depth;
} Json;

static void json_ws(Json *j)
{
    while (j->p < j->end && (*j->p == ' ' || *j->p == '\t' || *j->p == '\n' || *j->p == '\r')) {
        ++j->p;
    }
}

static int json_value(Json *j);

static int json_lit(Json *j, const char *word)
{
    const size_t n = strlen(word);
    if ((size_t)(j->end - j->p) < n || memcmp(j->p, word, n) != 0) {
        return -1;
    }
    j->p += n;
    return 0;
}

static int json_digits(Json *j)
{
    const char *s = j->p;
    while (j->p < j->end && *j->p >= '0' && *j->p <= '9') {
        ++j->p;
    }
    return j->p > s ? 0 : -1;
}

static int json_number(Json *j)
{
    if (j->p < j->end && *j->p == '-') {
        ++j->p;
    }
    if (j->p < j->end && *j->p == '0') {
        ++j->p;
    } else if (json_digits(j) != 0) {
        return -1;
    }
    if (j->p < j->end && *j->p == '.') {
        ++j->p;
        if (json_digits(j) != 0) {
            return -1;
        }
    }
    if (j->p < j->end && (*j->p == 'e' || *j->p == 'E')) {
        ++j->p;
        if (j->p < j->end && (*j->p == '+' || *j->p == '-')) {
            ++j->p;
        }
        if (json_digits(j) != 0) {
            return -1;
        }
    }
    return 0;
}

static int json_string(Json *j)
{
    if (j->p >= j->end || *j->p != '"') {
        return -1;
    }
    for (++j->p; j->p < j->end; ++j->p) {
        const unsigned char c = (unsigned char)*j->p;
        if (c == '"') {
            ++j->p;
            return 0;
        }
        if (c < 0x20) {
            return -1;
        }
        if (c == '\\') {
            if (++j->p >= j->end) {
                return -1;
            }
            if (*j->p == 'u') {
                for (int k = 0; k < 4; ++k) {
                    if (++j->p >= j->end || !strchr("0123456789abcdefABCDEF", *j->p)) {
                        return -1;
                    }
                }
            } else if (!strchr("\"\\/bfnrt", *j->p)) {
                return -1;
            }
        } else if (c >= 0x80) {
            /* UTF-8: a lead byte and its continuation bytes */
            const int more = c >= 0xF0 ? 3 : c >= 0xE0 ? 2 : c >= 0xC2 ? 1 : -1;
            if (more < 0 || c > 0xF4) {
                return -1;
            }
            for (int k = 0; k < more; ++k) {
                if (++j->p >= j->end || ((unsigned char)*j->p & 0xC0) != 0x80) {
                    return -1;
                }
            }
        }
    }
    return -1;
}

static int json_members(Json *j, char close, int keyed)
{
    ++j->p;
    json_ws(j);
    if (j->p < j->end && *j->p == close) {
        ++j->p;
        return 0;
    }
    for (;;) {
        json_ws(j);
        if (keyed) {
            if (json_string(j) != 0) {
                return -1;
            }
            json_ws(j);
            if (j->p >= j->end || *j->p != ':') {
                return -1;
            }
            ++j->p;
        }
        if (json_value(j) != 0) {
            return -1;
        }
        json_ws(j);
        if (j->p < j->end && *j->p == ',') {
            ++j->p;
            continue;
        }
        if (j->p < j->end && *j->p == close) {
            ++j->p;
            return 0;
        }
        return -1;
    }
}

static int json_value(Json *j)
{
    json_ws(j);
    if (j->p >= j->end || ++j->depth > 64) {
        return -1;
    }
    int rc;
    switch (*j->p) {
    case '{':
        rc = json_members(j, '}', 1);
        break;
    case '[':
        rc = json_members(j, ']', 0);
        break;
    case '"':
        rc = json_string(j);
        break;
    case 't':
        rc = json_lit(j, "true");
        break;
    case 'f':
        rc = json_lit(j, "false");
        break;
    case 'n':
        rc = json_lit(j, "null");
        break;
    default:
        rc = json_number(j);
        break;
    }
    --j->depth;
    return rc;
}

/* --- files ---------------------------------------------------------------- */

static void write_file(const char *path, const uint8_t *data, size_t n)
{
    const int fd = open(path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    if (fd < 0 || (n > 0 && write(fd, data, n) != (ssize_t)n) || close(fd) != 0) {
        fprintf(stderr, "fuzz_cli: cannot write %s: %s\n", path, strerror(errno));
        abort();
    }
}

/* The file's bytes, newly allocated (NULL if it cannot be read), *n its size. */
static uint8_t *read_file(const char *path, size_t *n)
{
    *n = 0;
    FILE *f = fopen(path, "rb");
    if (f == NULL) {
        return NULL;
    }
    size_t cap = 4096, used = 0;
    uint8_t *buf = malloc(cap);
    while (buf) {
        used += fread(buf + used, 1, cap - used, f);
        if (used < cap) {
            break;
        }
        uint8_t *more = realloc(buf, cap * 2);
        if (more == NULL) {
            free(buf);
            buf = NULL;
            break;
        }
        buf = more;
        cap *= 2;
    }
    fclose(f);
    *n = used;
    return buf;
}

static int same_bytes(const char *path, const uint8_t *data, size_t n)
{
    size_t m;
    uint8_t *got = read_file(path, &m);
    const int same = got && m == n && (n == 0 || memcmp(got, data, n) == 0);
    free(got);
    return same;
}

/* Names in the directory other than @p keep[0..n): the count, the first in @p first. */
static int strays(const char *const *keep, int n, char *first, size_t len)
{
    int count = 0;
    first[0] = '\0';
    DIR *d = opendir(dir);
    if (d == NULL) {
        return 0;
    }
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0) {
            continue;
        }
        int kept = 0;
        for (int i = 0; i < n; ++i) {
            kept |= keep[i] && strcmp(e->d_name, keep[i]) == 0;
        }
        if (!kept && count++ == 0) {
            snprintf(first, len, "%s", e->d_name);
        }
    }
    closedir(d);
    return count;
}

/* What the harness itself decodes of the input, to bound the work and to
 * check what cli_render() reports. */
typedef struct {
    int opens;
    SF_INFO info;
    sf_count_t frames; /* decoded, up to the work bound + 1 */
} Probe;

static void probe(const char *path, Probe *p, sf_count_t max_frames)
{
    memset(p, 0, sizeof(*p));
    SNDFILE *f = sf_open(path, SFM_READ, &p->info);
    if (f == NULL) {
        return;
    }
    p->opens = 1;
    if (p->info.channels > 0 && p->info.channels <= MAX_CHANNELS) {
        float buf[1024];
        const sf_count_t per = 1024 / p->info.channels;
        while (p->frames <= max_frames) {
            const sf_count_t n = sf_readf_float(f, buf, per);
            if (n <= 0) {
                break;
            }
            p->frames += n;
        }
    }
    sf_close(f);
}

/* Encodings whose files hold exactly the frames written (no codec padding). */
static int exact_length(int format)
{
    switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8:
    case SF_FORMAT_PCM_16:
    case SF_FORMAT_PCM_24:
    case SF_FORMAT_PCM_32:
    case SF_FORMAT_FLOAT:
    case SF_FORMAT_DOUBLE:
    case SF_FORMAT_ULAW:
    case SF_FORMAT_ALAW:
        return 1;
    default:
        return 0;
    }
}

/* Read back a rendered output: it decodes, keeps channels and rate, holds
 * finite samples and, for plain encodings, the frames cli_render() wrote. */
static void check_output(const char *path, const CliRenderResult *res)
{
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    if ((res->format & SF_FORMAT_TYPEMASK) == SF_FORMAT_RAW) {
        /* headerless (an input libsndfile took as raw by its name): read as written */
        info.format = res->format;
        info.channels = res->channels;
        info.samplerate = res->rate;
    }
    SNDFILE *f = sf_open(path, SFM_READ, &info);
    if (f == NULL) {
        fuzz_fail("cli_render wrote %s (%llu frames, %s), which libsndfile cannot read back: %s",
                  path, (unsigned long long)res->frames, res->format_name, sf_strerror(NULL));
    }
    if (info.channels != res->channels || info.samplerate != res->rate) {
        fuzz_fail("cli_render wrote %d channels at %d Hz, reported %d at %d", info.channels,
                  info.samplerate, res->channels, res->rate);
    }
    float buf[1024];
    const sf_count_t per = 1024 / info.channels;
    sf_count_t frames = 0, n;
    while ((n = sf_readf_float(f, buf, per)) > 0) {
        for (sf_count_t i = 0; i < n * info.channels; ++i) {
            if (!isfinite(buf[i])) {
                fuzz_fail("cli_render wrote a sample %g at frame %lld", (double)buf[i],
                          (long long)(frames + i / info.channels));
            }
        }
        frames += n;
    }
    sf_close(f);
    if (exact_length(info.format) && (uint64_t)frames != res->frames) {
        fuzz_fail("cli_render reported %llu frames; the file holds %lld",
                  (unsigned long long)res->frames, (long long)frames);
    }
}

static void check_report(const char *path)
{
    size_t n;
    uint8_t *text = read_file(path, &n);
    if (text == NULL) {
        fuzz_fail("cli_render succeeded without writing its report %s", path);
    }
    Json j = {(const char *)text, (const char *)text + n, 0};
    const int bad = json_value(&j) != 0 || (json_ws(&j), j.p != j.end);
    if (bad) {
        fuzz_fail("report %s is not valid JSON at byte %ld: %.*s", path,
                  (long)(j.p - (const char *)text), (int)(n < 2000 ? n : 2000), (const char *)text);
    }
    free(text);
}

/* --- one input ------------------------------------------------------------ */

/* How the output and report are named, and what cli_render must then do. */
enum { OUT_OWN, OUT_OTHER, OUT_BARE, OUT_IS_INPUT, OUT_DIR, OUT_MISSING_DIR, OUT_DOT_INPUT, N_OUT };
enum { REP_NONE, REP_FILE, REP_IS_INPUT, REP_IS_OUTPUT, REP_MISSING_DIR, N_REP };

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    FuzzData d = {data, size};
    const uint8_t flags = fuzz_u8(&d);
    const char *in_ext = in_exts[fuzz_u8(&d) % N_IN_EXTS];
    const uint8_t out_byte = fuzz_u8(&d);
    const uint8_t rep_byte = fuzz_u8(&d);
    size_t line_len;
    const uint8_t *line = fuzz_bytes(&d, fuzz_u16(&d), &line_len);
    size_t file_len;
    const uint8_t *file = fuzz_bytes(&d, SIZE_MAX, &file_len);

    /* 1. The command line: "outstage" and the arguments between NUL bytes. */
    char *buf = malloc(line_len + 1);
    char *argv[MAX_ARGS + 2];
    int argc = 0;
    argv[argc++] = (char *)"outstage";
    memcpy(buf, line, line_len);
    buf[line_len] = '\0';
    for (size_t i = 0; i <= line_len && argc < MAX_ARGS + 1; ++i) {
        if (i == 0 || buf[i - 1] == '\0') {
            if (i == line_len && i > 0) {
                break; /* a trailing NUL ends the last argument */
            }
            argv[argc++] = buf + i;
        }
    }
    argv[argc] = NULL;
    CliArgs a;
    char err[CLI_ERR_LEN];
    memset(err, 'x', sizeof(err));
    const int parsed = cli_args_parse(argc, argv, &a, err, sizeof(err));
    if (parsed != 0 && parsed != -1) {
        fuzz_fail("cli_args_parse returned %d", parsed);
    }
    if (parsed != 0) {
        check_message("cli_args_parse", err, sizeof(err));
    } else {
        check_args(&a, argc, buf, line_len + 1);
    }

    /* The stage and settings the line asks for. */
    OsStageKind kind = flags & 1 ? OS_STAGE_PUSHPULL : OS_STAGE_OPAMP;
    const int staged =
        parsed == 0 && a.n_pos >= 1 &&
        (a.command == CLI_CMD_RENDER || a.command == CLI_CMD_MEASURE || a.command == CLI_CMD_PLOT);
    if (staged && cli_stage_parse(a.pos[0], &kind) != 0) {
        kind = flags & 1 ? OS_STAGE_PUSHPULL : OS_STAGE_OPAMP;
    }
    CliSettings s;
    cli_settings_init(&s, kind);
    check_settings(&s, "cli_settings_init");
    if (parsed == 0) {
        if (a.preset) {
            memset(err, 'x', sizeof(err));
            if (cli_settings_preset(&s, a.preset, err, sizeof(err)) != 0) {
                check_message("cli_settings_preset", err, sizeof(err));
            }
            check_settings(&s, a.preset);
        }
        for (int i = 0; i < a.n_sets; ++i) {
            assign(&s, a.sets[i]);
        }
    } else {
        for (int i = 1; i < argc; ++i) {
            if (strchr(argv[i], '=')) {
                assign(&s, argv[i]);
            }
        }
    }

    /* 2. The audio file. */
    char in_name[32], in_path[PATH_LEN], out_name[64], out_path[PATH_LEN * 2];
    char rep_path[PATH_LEN * 2];
    snprintf(in_name, sizeof(in_name), "in%s%s", in_ext[0] ? "." : "", in_ext);
    snprintf(in_path, sizeof(in_path), "%s/%s", dir, in_name);
    write_file(in_path, file, file_len);

    memset(err, 'x', sizeof(err));
    const int checked = cli_check_input(in_path, err, sizeof(err));
    if (checked != 0) {
        check_message("cli_check_input", err, sizeof(err));
    }
    Probe pr;
    probe(in_path, &pr, MAX_WORK);
    if ((checked == 0) != pr.opens) {
        fuzz_fail("cli_check_input says %d, libsndfile %s the file", checked,
                  pr.opens ? "opens" : "does not open");
    }

    if (flags & 2) {
        /* what does not exist, and a directory, are refused */
        char missing[PATH_LEN * 2];
        snprintf(missing, sizeof(missing), "%s/missing.wav", dir);
        memset(err, 'x', sizeof(err));
        if (cli_check_input(missing, err, sizeof(err)) == 0 ||
            cli_check_input(dir, err, sizeof(err)) == 0) {
            fuzz_fail("cli_check_input accepted a missing file or a directory");
        }
        check_message("cli_check_input", err, sizeof(err));
    }

    /* The work cli_render would do; beyond the bound, oversample at 1x, then skip. */
    const double work = (double)pr.frames * pr.info.channels * (double)s.value[OS_P_OVERSAMPLE];
    if (pr.opens && work > MAX_WORK) {
        s.value[OS_P_OVERSAMPLE] = 1.0f;
    }
    const int render = !pr.opens || (pr.info.channels <= MAX_CHANNELS &&
                                     (double)pr.frames * pr.info.channels <= MAX_WORK);
    if (render) {
        const int out_mode = out_byte % N_OUT;
        const char *out_ext = out_exts[(out_byte / N_OUT) % N_OUT_EXTS];
        int must_fail = !pr.opens;
        switch (out_mode) {
        case OUT_OWN:
            snprintf(out_name, sizeof(out_name), "out%s%s", in_ext[0] ? "." : "", in_ext);
            break;
        case OUT_OTHER:
            snprintf(out_name, sizeof(out_name), "out%s%s", out_ext[0] ? "." : "", out_ext);
            break;
        case OUT_BARE:
            snprintf(out_name, sizeof(out_name), "out");
            break;
        case OUT_IS_INPUT:
            snprintf(out_name, sizeof(out_name), "%s", in_name);
            must_fail = 1;
            break;
        case OUT_DOT_INPUT:
            snprintf(out_name, sizeof(out_name), "./%s", in_name);
            must_fail = 1;
            break;
        case OUT_DIR:
            out_name[0] = '\0';
            must_fail = 1;
            break;
        default:
            snprintf(out_name, sizeof(out_name), "missing/out.wav");
            must_fail = 1;
            break;
        }
        if (out_mode == OUT_DIR) {
            snprintf(out_path, sizeof(out_path), "%s", dir);
        } else {
            snprintf(out_path, sizeof(out_path), "%s/%s", dir, out_name);
        }
        /* An output that exists already, with bytes of our own. */
        static const uint8_t old[] = "an existing output that a failed run must not change";
        const int existing = (flags & 4) && out_mode <= OUT_BARE;
        if (existing) {
            write_file(out_path, old, sizeof(old));
        }
        const int rep_mode = rep_byte % N_REP;
        const char *report = NULL;
        switch (rep_mode) {
        case REP_FILE:
            snprintf(rep_path, sizeof(rep_path), "%s/report.json", dir);
            report = rep_path;
            break;
        case REP_IS_INPUT:
            report = in_path;
            must_fail = 1;
            break;
        case REP_IS_OUTPUT:
            report = out_path;
            must_fail = 1;
            break;
        case REP_MISSING_DIR:
            snprintf(rep_path, sizeof(rep_path), "%s/missing/report.json", dir);
            report = rep_path;
            must_fail = 1;
            break;
        default:
            break;
        }

        CliRenderJob job = {.in_path = in_path,
                            .out_path = out_path,
                            .report_path = report,
                            .settings = s,
                            .compensate = (flags >> 3) & 1,
                            .progress = 0};
        CliRenderResult res;
        memset(err, 'x', sizeof(err));
        const int rc = cli_render(&job, &res, err, sizeof(err));
        if (rc != 0) {
            check_message("cli_render", err, sizeof(err));
            const char *keep[] = {in_name, existing ? out_name : NULL};
            char stray[256];
            if (strays(keep, 2, stray, sizeof(stray)) != 0) {
                fuzz_fail("cli_render failed (%s) and left %s behind", err, stray);
            }
            if (existing && !same_bytes(out_path, old, sizeof(old))) {
                fuzz_fail("cli_render failed (%s) and changed the existing output", err);
            }
        } else {
            if (must_fail) {
                fuzz_fail("cli_render succeeded where it must refuse: output mode %d, report "
                          "mode %d, input %s",
                          out_mode, rep_mode, pr.opens ? "decodes" : "does not decode");
            }
            if (res.channels != pr.info.channels || res.rate != pr.info.samplerate ||
                res.frames != (uint64_t)pr.frames) {
                fuzz_fail("cli_render reports %d channels, %d Hz, %llu frames; the input has %d, "
                          "%d Hz, %lld",
                          res.channels, res.rate, (unsigned long long)res.frames, pr.info.channels,
                          pr.info.samplerate, (long long)pr.frames);
            }
            check_output(out_path, &res);
            if (report) {
                check_report(report);
            }
            const char *keep[] = {in_name, out_name, report ? "report.json" : NULL};
            char stray[256];
            if (strays(keep, 3, stray, sizeof(stray)) != 0) {
                fuzz_fail("cli_render left %s behind", stray);
            }
        }
        cli_render_result_free(&res);
    }
    if (!same_bytes(in_path, file, file_len)) {
        fuzz_fail("the input file was changed");
    }
    empty_dir();
    free(buf);
    return 0;
}
