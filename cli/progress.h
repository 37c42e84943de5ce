/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* A progress bar on standard error, drawn only when standard error is a
 * terminal (never into a pipe or a log), at most ten times a second. */

#ifndef CLI_PROGRESS_H
#define CLI_PROGRESS_H

/** One bar. */
typedef struct {
    int active;       /**< drawing at all */
    double last;      /**< time of the last draw, s */
    const char *what; /**< label, e.g. the output file */
} CliProgress;

/** Start a bar labelled @p what if @p wanted and stderr is a terminal. */
void cli_progress_start(CliProgress *p, const char *what, int wanted);

/** Show @p done of @p total (any unit). */
void cli_progress_update(CliProgress *p, double done, double total);

/** Erase the bar. */
void cli_progress_end(CliProgress *p);

#endif
