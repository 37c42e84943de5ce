/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "cli.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

volatile sig_atomic_t cli_interrupted = 0;

static void on_signal(int sig)
{
    (void)sig;
    cli_interrupted = 1;
}

void cli_catch_signals(void)
{
    struct sigaction sa;
    memset(&sa, 0, sizeof(sa));
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    sigaction(SIGHUP, &sa, NULL);
    /* A file grown past its size limit (ulimit -f) and a pipe whose reader
     * left would end the process with a temporary file left behind: as
     * errors (EFBIG, EPIPE) the write fails, the run says so and cleans up. */
    struct sigaction ign;
    memset(&ign, 0, sizeof(ign));
    ign.sa_handler = SIG_IGN;
    sigemptyset(&ign.sa_mask);
    sigaction(SIGXFSZ, &ign, NULL);
    sigaction(SIGPIPE, &ign, NULL);
}

void cli_err(char *err, size_t len, const char *fmt, ...)
{
    if (err == NULL || len == 0) {
        return;
    }
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, len, fmt, ap); /* NOLINT(clang-analyzer-valist.Uninitialized): started above */
    va_end(ap);
    /* One line: a file name with a newline in it must not break the message. */
    for (char *c = err; *c; ++c) {
        if (*c == '\n' || *c == '\r') {
            *c = ' ';
        }
    }
}

void cli_path_ext(const char *path, char *ext, size_t len)
{
    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    const char *dot = strrchr(base, '.');
    ext[0] = '\0';
    if (dot == NULL || dot == base) {
        return;
    }
    size_t i = 0;
    for (const char *c = dot + 1; *c && i + 1 < len; ++c) {
        ext[i++] = (char)tolower((unsigned char)*c);
    }
    ext[i] = '\0';
}

char *cli_dir_of(const char *path)
{
    const char *slash = strrchr(path, '/');
    if (slash == NULL) {
        return strdup(".");
    }
    if (slash == path) {
        return strdup("/");
    }
    return strndup(path, (size_t)(slash - path));
}

/* @p dir joined with @p name, newly allocated. */
static char *join(const char *dir, const char *name)
{
    const size_t n = strlen(dir) + strlen(name) + 2;
    char *p = malloc(n);
    if (p) {
        const int root = strcmp(dir, "/") == 0;
        snprintf(p, n, "%s%s%s", dir, root ? "" : "/", name);
    }
    return p;
}

/* Most symbolic links followed, as the kernel's own limit (common practice:
 * Linux stops at 40). */
#define MAX_LINKS 40

char *cli_resolve(const char *path)
{
    char *cur = strdup(path);
    for (int hop = 0; cur != NULL && hop < MAX_LINKS; ++hop) {
        char *r = realpath(cur, NULL);
        if (r) {
            free(cur);
            return r;
        }
        if (errno != ENOENT) {
            break;
        }
        struct stat st;
        char *dir = cli_dir_of(cur);
        if (dir == NULL) {
            break;
        }
        if (lstat(cur, &st) == 0 && S_ISLNK(st.st_mode)) {
            /* a link to nothing yet: go on from its target */
            char buf[4096];
            const ssize_t n = readlink(cur, buf, sizeof(buf) - 1);
            if (n <= 0) {
                free(dir);
                break;
            }
            buf[n] = '\0';
            char *next = buf[0] == '/' ? strdup(buf) : join(dir, buf);
            free(dir);
            free(cur);
            cur = next;
            continue;
        }
        /* the last component does not exist: its directory must */
        const char *slash = strrchr(cur, '/');
        const char *base = slash ? slash + 1 : cur;
        char *rd = realpath(dir, NULL);
        free(dir);
        if (rd == NULL || base[0] == '\0' || strcmp(base, ".") == 0 || strcmp(base, "..") == 0) {
            free(rd);
            break;
        }
        char *out = join(rd, base);
        free(rd);
        free(cur);
        return out;
    }
    free(cur);
    return NULL;
}

int cli_same_file(const char *a, const char *b)
{
    struct stat sa, sb;
    const int ea = stat(a, &sa) == 0, eb = stat(b, &sb) == 0;
    if (ea && eb) {
        return sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
    }
    if (ea || eb) {
        return 0;
    }
    /* neither exists yet: the same name once every link is followed */
    char *ra = cli_resolve(a), *rb = cli_resolve(b);
    const int same = ra && rb && strcmp(ra, rb) == 0;
    free(ra);
    free(rb);
    return same;
}

int cli_outputs_clash(const char *a, const char *b)
{
    if (strcmp(a, b) != 0 && !cli_same_file(a, b)) {
        return 0;
    }
    /* a character device (/dev/null, a terminal) may take both */
    struct stat st;
    return !(stat(a, &st) == 0 && S_ISCHR(st.st_mode));
}

/* Whether @p t (trimmed, @p n bytes) is a decimal number: an optional sign,
 * digits with at most one point (at least one digit), an optional exponent. */
static int decimal(const char *t, size_t n)
{
    size_t i = 0, digits = 0;
    if (i < n && (t[i] == '+' || t[i] == '-')) {
        ++i;
    }
    for (; i < n && isdigit((unsigned char)t[i]); ++i) {
        ++digits;
    }
    if (i < n && t[i] == '.') {
        for (++i; i < n && isdigit((unsigned char)t[i]); ++i) {
            ++digits;
        }
    }
    if (digits == 0) {
        return 0;
    }
    if (i < n && (t[i] == 'e' || t[i] == 'E')) {
        ++i;
        if (i < n && (t[i] == '+' || t[i] == '-')) {
            ++i;
        }
        size_t e = 0;
        for (; i < n && isdigit((unsigned char)t[i]); ++i) {
            ++e;
        }
        if (e == 0) {
            return 0;
        }
    }
    return i == n;
}

int cli_number(const char *text, double *out)
{
    while (*text && isspace((unsigned char)*text)) {
        ++text;
    }
    size_t n = strlen(text);
    while (n > 0 && isspace((unsigned char)text[n - 1])) {
        --n;
    }
    char buf[64];
    if (n == 0 || n >= sizeof(buf) || !decimal(text, n)) {
        return -1;
    }
    memcpy(buf, text, n);
    buf[n] = '\0';
    char *end = NULL;
    const double v = strtod(buf, &end);
    if (*end != '\0' || !isfinite(v)) {
        return -2; /* beyond a double's range */
    }
    *out = v;
    return 0;
}

int cli_number_in(const char *what, const char *text, double lo, double hi, int whole, double *out,
                  char *err, size_t len)
{
    double v;
    const char *kind = whole ? "a whole number" : "a number";
    const int rc = cli_number(text, &v);
    if (rc == -1) {
        cli_err(err, len, "%s '%s': not a decimal number; %s from %g to %g", what, text, kind, lo,
                hi);
        return -1;
    }
    if (rc != 0 || v < lo || v > hi || (whole && v != floor(v))) {
        cli_err(err, len, "%s %s: out of range; %s from %g to %g", what, text, kind, lo, hi);
        return -1;
    }
    *out = v;
    return 0;
}
