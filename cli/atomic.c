/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "atomic.h"

#include "cli.h"

#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* The directory part of @p path ("." if none), newly allocated. */
static char *dir_of(const char *path)
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

/* The process's umask, read once: umask() can only be read by setting it, which
 * would race with the demo's threads creating files. */
static mode_t process_umask;
static pthread_once_t umask_once = PTHREAD_ONCE_INIT;

static void read_umask(void)
{
    process_umask = umask(0);
    umask(process_umask);
}

static void release(CliAtomic *a)
{
    free(a->path);
    free(a->tmp);
    a->path = a->tmp = NULL;
    a->fd = -1;
}

int cli_atomic_open(CliAtomic *a, const char *path, char *err, size_t len)
{
    memset(a, 0, sizeof(*a));
    a->fd = -1;
    struct stat st;
    if (stat(path, &st) == 0 && S_ISDIR(st.st_mode)) {
        cli_err(err, len, "%s: is a directory", path);
        return -1;
    }
    char *dir = dir_of(path);
    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    a->path = strdup(path);
    const size_t n = (dir ? strlen(dir) : 0) + strlen(base) + 16;
    a->tmp = dir ? malloc(n) : NULL;
    if (dir == NULL || a->path == NULL || a->tmp == NULL) {
        free(dir);
        release(a);
        cli_err(err, len, "%s: out of memory", path);
        return -1;
    }
    /* Hidden, beside the destination, so that rename() stays within one file system. */
    snprintf(a->tmp, n, "%s/.%s.XXXXXX", dir, base);
    a->fd = mkstemp(a->tmp);
    if (a->fd < 0) {
        const int e = errno;
        if (stat(dir, &st) != 0) {
            cli_err(err, len, "%s: cannot write: directory %s: %s", path, dir, strerror(errno));
        } else if (!S_ISDIR(st.st_mode)) {
            cli_err(err, len, "%s: cannot write: %s is not a directory", path, dir);
        } else {
            cli_err(err, len, "%s: cannot write in %s: %s", path, dir, strerror(e));
        }
        free(dir);
        release(a);
        return -1;
    }
    free(dir);
    /* mkstemp makes the file 0600; give it the mode a plain creat() would. */
    pthread_once(&umask_once, read_umask);
    fchmod(a->fd, (mode_t)(0666 & ~process_umask));
    return 0;
}

int cli_atomic_commit(CliAtomic *a, char *err, size_t len)
{
    if (a->fd >= 0) {
        if (fsync(a->fd) != 0 || close(a->fd) != 0) {
            cli_err(err, len, "%s: cannot write: %s", a->path, strerror(errno));
            a->fd = -1;
            cli_atomic_abort(a);
            return -1;
        }
        a->fd = -1;
    }
    if (rename(a->tmp, a->path) != 0) {
        cli_err(err, len, "%s: cannot write: %s", a->path, strerror(errno));
        cli_atomic_abort(a);
        return -1;
    }
    /* Make the rename itself durable. */
    char *dir = dir_of(a->path);
    if (dir) {
        const int dfd = open(dir, O_RDONLY);
        if (dfd >= 0) {
            fsync(dfd);
            close(dfd);
        }
        free(dir);
    }
    release(a);
    return 0;
}

void cli_atomic_abort(CliAtomic *a)
{
    if (a->fd >= 0) {
        close(a->fd);
    }
    if (a->tmp) {
        unlink(a->tmp);
    }
    release(a);
}
