/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "progress.h"

#include <stdio.h>
#include <time.h>
#include <unistd.h>

#define WIDTH 30

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

void cli_progress_start(CliProgress *p, const char *what, int wanted)
{
    p->active = wanted && isatty(STDERR_FILENO);
    p->last = -1.0;
    p->what = what;
}

void cli_progress_update(CliProgress *p, double done, double total)
{
    if (!p->active || !(total > 0.0)) {
        return;
    }
    const double t = now();
    if (p->last >= 0.0 && t - p->last < 0.1) {
        return;
    }
    p->last = t;
    double share = done / total;
    share = share < 0.0 ? 0.0 : share > 1.0 ? 1.0 : share;
    char bar[WIDTH + 1];
    const int full = (int)(share * WIDTH);
    for (int i = 0; i < WIDTH; ++i) {
        bar[i] = i < full ? '#' : '.';
    }
    bar[WIDTH] = '\0';
    fprintf(stderr, "\r%s [%s] %3d %%", p->what, bar, (int)(100.0 * share));
    fflush(stderr);
}

void cli_progress_end(CliProgress *p)
{
    if (p->active && p->last >= 0.0) {
        /* Carriage return, erase to the end of the line (ECMA-48 EL). */
        fputs("\r\033[K", stderr);
        fflush(stderr);
    }
    p->active = 0;
}
