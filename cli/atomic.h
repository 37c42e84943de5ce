/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* An output that appears whole or not at all, without harming what the name
 * stood for before:
 * - a regular file (new, or replacing one) is written to a temporary file in
 *   the destination's directory (created with mkstemp, so never an existing
 *   file), flushed to disk with fsync, then renamed over the destination, which
 *   POSIX makes atomic within one file system; a file it replaces keeps its
 *   mode (and, where allowed, its owner); one without write permission is
 *   refused unless cli_atomic_force() was set (--force);
 * - a symbolic link is followed: its final target is what gets written (so the
 *   link stays a link), by the rule above;
 * - a character device or a FIFO (/dev/null, /dev/stdout, a pipe) is written in
 *   place: it cannot be replaced, and renaming over it would destroy the node;
 *   one that cannot seek (a FIFO, a pipe) gets the whole file at commit from a
 *   spool in $TMPDIR (or /tmp), since most audio headers are finished last;
 * - a directory, a block device or a socket is refused.
 * On any failure the temporary file is removed and an existing destination is
 * left as it was (a device or FIFO may have received part of the data). */

#ifndef CLI_ATOMIC_H
#define CLI_ATOMIC_H

#include <stddef.h>

/** One file being written. */
typedef struct {
    char *path;   /**< destination as named */
    char *target; /**< what is written: path, or a symlink's final target */
    char *tmp;    /**< temporary file beside the target, or NULL when in place */
    int fd;       /**< open on tmp (or on the device / FIFO), or -1 */
    int in_place; /**< 1: a device or FIFO, written through fd directly */
    int spooled;  /**< 1: fd is a spool file, copied to sink at commit */
    int sink;     /**< the device or FIFO when spooled */
} CliAtomic;

/** Allow replacing write-protected regular files (--force). */
void cli_atomic_force(int on);

/** Open @p path for writing, by the rules above. Returns 0, or -1 with a
 *  message naming @p path (directory missing, not writable, write-protected,
 *  ...). */
int cli_atomic_open(CliAtomic *a, const char *path, char *err, size_t len);

/** Whether the output is seekable (a regular file, or a device that seeks,
 *  such as /dev/null); a FIFO is not. */
int cli_atomic_seekable(const CliAtomic *a);

/** Finish: a temporary file is fsynced, closed and renamed to the target,
 *  then the directory fsynced; a device or FIFO is closed. Returns 0, or -1
 *  with a message (the temporary file is removed). If @p a->fd was already
 *  closed by its writer, pass it as -1. */
int cli_atomic_commit(CliAtomic *a, char *err, size_t len);

/** Close and remove the temporary file; frees @p a. Accepts a closed or never
 *  opened CliAtomic (zeroed). */
void cli_atomic_abort(CliAtomic *a);

#endif
