/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "cli.h"

#include <ctype.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

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

int cli_same_file(const char *a, const char *b)
{
    struct stat sa, sb;
    if (stat(a, &sa) != 0 || stat(b, &sb) != 0) {
        return 0;
    }
    return sa.st_dev == sb.st_dev && sa.st_ino == sb.st_ino;
}
