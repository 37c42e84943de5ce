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

/** Route SIGINT, SIGTERM and SIGHUP to cli_interrupted instead of ending the
 *  process, and ignore SIGXFSZ and SIGPIPE (writes then fail with EFBIG or
 *  EPIPE and the run cleans up). */
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

/** The directory part of @p path ("." if none, "/" for the root), newly allocated. */
char *cli_dir_of(const char *path);

/** The absolute path of @p path with every symbolic link followed, also where
 *  the last component, or a link's final target, does not exist yet; NULL if a
 *  directory on the way does not exist or the links loop. Newly allocated. */
char *cli_resolve(const char *path);

/** 1 if @p a and @p b are the same file: both exist with the same device and
 *  inode (whatever path, symbolic or hard link names them), or neither exists
 *  yet and both resolve to the same name (cli_resolve()); else 0. */
int cli_same_file(const char *a, const char *b);

/** 1 if two outputs of one run named @p a and @p b would write the same file
 *  (cli_same_file(), or the same string), unless that file is a character
 *  device, which takes both (/dev/null). */
int cli_outputs_clash(const char *a, const char *b);

/** Parse a number as every option and --set value is parsed: decimal only (an
 *  optional sign, digits with at most one point, an optional exponent: 5,
 *  -0.5, 1e3), spaces around it ignored; no hexadecimal, no inf or nan.
 *  Returns 0 with *out set, -1 if @p text is not such a number, -2 if it is
 *  one beyond a double's range (1e400). */
int cli_number(const char *text, double *out);

/** cli_number() within [@p lo, @p hi] (and whole if @p whole), or -1 with a
 *  message: "@p what '@p text': not a decimal number; ..." or "... out of
 *  range; a number from lo to hi". */
int cli_number_in(const char *what, const char *text, double lo, double hi, int whole, double *out,
                  char *err, size_t len);

#endif
