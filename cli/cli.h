/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What every part of the command-line tool shares: error messages handed back
 * in a caller's buffer (main prints them, one line each), the interrupt flag
 * that long loops poll so that an interrupted run removes its temporary files,
 * and small path helpers. */

#ifndef CLI_H
#define CLI_H

#include <signal.h>
#include <stddef.h>

/** Room for one error message. */
#define CLI_ERR_LEN 1024

/** Exit status: a run that failed (file, decoding, writing). */
#define CLI_EXIT_FAILURE 1
/** Exit status: the command line is wrong (usage, unknown symbol, value out of range). */
#define CLI_EXIT_USAGE 2

/** Set by SIGINT, SIGTERM and SIGHUP once cli_catch_signals() has run. */
extern volatile sig_atomic_t cli_interrupted;

/** Route SIGINT, SIGTERM and SIGHUP to cli_interrupted instead of ending the process. */
void cli_catch_signals(void);

/** printf-style message into @p err (at most @p len bytes, always terminated). */
void cli_err(char *err, size_t len, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

/** The extension of @p path after its last dot in the last component, lower-cased
 *  into @p ext (at most @p len bytes); "" if there is none. */
void cli_path_ext(const char *path, char *ext, size_t len);

/** 1 if @p a and @p b exist and are the same file (device and inode), else 0. */
int cli_same_file(const char *a, const char *b);

#endif
