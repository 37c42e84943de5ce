/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* A file that appears whole or not at all: written to a temporary file in the
 * destination's directory (created with mkstemp, so never an existing file),
 * flushed to disk with fsync, then renamed over the destination, which POSIX
 * makes atomic within one file system. On any failure the temporary file is
 * removed and an existing destination is left as it was. */

#ifndef CLI_ATOMIC_H
#define CLI_ATOMIC_H

#include <stddef.h>

/** One file being written. */
typedef struct {
    char *path; /**< destination */
    char *tmp;  /**< temporary file beside it */
    int fd;     /**< open on tmp, or -1 */
} CliAtomic;

/** Create the temporary file for @p path. Returns 0, or -1 with a message naming
 *  @p path (directory missing, not writable, ...). */
int cli_atomic_open(CliAtomic *a, const char *path, char *err, size_t len);

/** fsync and close the temporary file and rename it to the destination, then
 *  fsync the directory. Returns 0, or -1 with a message (the temporary file is
 *  removed). If @p a->fd was already closed by its writer, pass it as -1. */
int cli_atomic_commit(CliAtomic *a, char *err, size_t len);

/** Close and remove the temporary file; frees @p a. Accepts a closed or never
 *  opened CliAtomic (zeroed). */
void cli_atomic_abort(CliAtomic *a);

#endif
