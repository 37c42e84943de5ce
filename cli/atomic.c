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

static int force_replace = 0;

void cli_atomic_force(int on)
{
    force_replace = on;
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
    free(a->target);
    free(a->tmp);
    a->path = a->target = a->tmp = NULL;
    a->fd = -1;
    a->in_place = 0;
    a->spooled = 0;
    a->sink = -1;
}

/* A device or FIFO: written where it is. Opening a FIFO waits for a reader.
 * One that cannot seek is written through a spool. */
static int open_in_place(CliAtomic *a, char *err, size_t len)
{
    const int fd = open(a->target, O_WRONLY | O_NOCTTY | O_CLOEXEC);
    if (fd < 0) {
        cli_err(err, len, "%s: cannot write: %s", a->path, strerror(errno));
        release(a);
        return -1;
    }
    a->in_place = 1;
    if (lseek(fd, 0, SEEK_CUR) >= 0) {
        a->fd = fd;
        return 0;
    }
    const char *dir = getenv("TMPDIR");
    char spool[4096];
    snprintf(spool, sizeof(spool), "%s/outstage-spool.XXXXXX", dir && *dir ? dir : "/tmp");
    a->fd = mkstemp(spool);
    if (a->fd < 0) {
        cli_err(err, len, "%s: cannot spool for it in %s: %s", a->path, dir && *dir ? dir : "/tmp",
                strerror(errno));
        close(fd);
        release(a);
        return -1;
    }
    unlink(spool); /* gone with its descriptor */
    a->spooled = 1;
    a->sink = fd;
    return 0;
}

/* Copy the spool to the sink. */
static int drain(CliAtomic *a)
{
    if (lseek(a->fd, 0, SEEK_SET) != 0) {
        return -1;
    }
    char buf[65536];
    for (;;) {
        const ssize_t n = read(a->fd, buf, sizeof(buf));
        if (n < 0 && errno == EINTR) {
            continue;
        }
        if (n < 0) {
            return -1;
        }
        if (n == 0) {
            return 0;
        }
        for (ssize_t done = 0; done < n;) {
            const ssize_t w = write(a->sink, buf + done, (size_t)(n - done));
            if (w < 0 && errno == EINTR) {
                continue;
            }
            if (w <= 0) {
                return -1;
            }
            done += w;
        }
    }
}

/* A regular file, new or replacing @p old (NULL if new): a temporary file
 * beside it, with the mode the result should have. */
static int open_temporary(CliAtomic *a, const struct stat *old, char *err, size_t len)
{
    char *dir = cli_dir_of(a->target);
    const char *slash = strrchr(a->target, '/');
    const char *base = slash ? slash + 1 : a->target;
    const size_t n = (dir ? strlen(dir) : 0) + strlen(base) + 16;
    a->tmp = dir ? malloc(n) : NULL;
    if (dir == NULL || a->tmp == NULL) {
        free(dir);
        cli_err(err, len, "%s: out of memory", a->path);
        release(a);
        return -1;
    }
    /* Hidden, beside the target, so that rename() stays within one file system. */
    snprintf(a->tmp, n, "%s/.%s.XXXXXX", dir, base);
    a->fd = mkstemp(a->tmp);
    if (a->fd < 0) {
        const int e = errno;
        struct stat st;
        if (stat(dir, &st) != 0) {
            cli_err(err, len, "%s: cannot write: directory %s: %s", a->path, dir, strerror(errno));
        } else if (!S_ISDIR(st.st_mode)) {
            cli_err(err, len, "%s: cannot write: %s is not a directory", a->path, dir);
        } else {
            cli_err(err, len, "%s: cannot write in %s: %s", a->path, dir, strerror(e));
        }
        free(dir);
        free(a->tmp);
        a->tmp = NULL; /* mkstemp created nothing */
        release(a);
        return -1;
    }
    free(dir);
    if (old) {
        /* the file it replaces keeps its mode, and its owner where we may */
        if (fchown(a->fd, old->st_uid, old->st_gid) != 0) {
            (void)0; /* not the owner: the file becomes ours, as any rewrite would */
        }
        fchmod(a->fd, old->st_mode & 07777);
    } else {
        /* mkstemp makes the file 0600; give it the mode a plain creat() would. */
        pthread_once(&umask_once, read_umask);
        fchmod(a->fd, (mode_t)(0666 & ~process_umask));
    }
    return 0;
}

int cli_atomic_open(CliAtomic *a, const char *path, char *err, size_t len)
{
    memset(a, 0, sizeof(*a));
    a->sink = -1;
    a->fd = -1;
    a->path = strdup(path);
    if (a->path == NULL) {
        cli_err(err, len, "%s: out of memory", path);
        return -1;
    }
    struct stat st;
    if (lstat(path, &st) == 0 && S_ISLNK(st.st_mode) &&
        !(stat(path, &st) == 0 && !S_ISREG(st.st_mode))) {
        /* write the link's final target, not a file in the link's place (a
         * link to a device or pipe, /dev/stdout, is opened through the link) */
        a->target = cli_resolve(path);
        if (a->target == NULL) {
            cli_err(err, len, "%s: cannot write: the symbolic link leads nowhere writable (%s)",
                    path, strerror(errno ? errno : ENOENT));
            release(a);
            return -1;
        }
    } else {
        a->target = strdup(path);
        if (a->target == NULL) {
            cli_err(err, len, "%s: out of memory", path);
            release(a);
            return -1;
        }
    }
    if (stat(a->target, &st) != 0) {
        if (errno != ENOENT) {
            cli_err(err, len, "%s: cannot write: %s", path, strerror(errno));
            release(a);
            return -1;
        }
        return open_temporary(a, NULL, err, len);
    }
    if (S_ISDIR(st.st_mode)) {
        cli_err(err, len, "%s: is a directory", path);
        release(a);
        return -1;
    }
    if (S_ISCHR(st.st_mode) || S_ISFIFO(st.st_mode)) {
        return open_in_place(a, err, len);
    }
    if (!S_ISREG(st.st_mode)) {
        cli_err(err, len, "%s: is a %s; refusing to write audio onto it", path,
                S_ISBLK(st.st_mode) ? "block device" : "socket");
        release(a);
        return -1;
    }
    /* Root may write anything: the file's own permission bits say whether its
     * owner meant it to be kept. */
    if (!force_replace && ((st.st_mode & 0222) == 0 || access(a->target, W_OK) != 0)) {
        cli_err(err, len, "%s: is write-protected; choose another output, or --force to replace it",
                path);
        release(a);
        return -1;
    }
    return open_temporary(a, &st, err, len);
}

int cli_atomic_seekable(const CliAtomic *a)
{
    return a->fd >= 0 && lseek(a->fd, 0, SEEK_CUR) >= 0;
}

int cli_atomic_commit(CliAtomic *a, char *err, size_t len)
{
    if (a->in_place) {
        int bad = 0, e = 0;
        if (a->spooled) {
            /* the writer may have closed the spool already: then it is lost */
            bad = a->fd < 0 || drain(a) != 0;
            e = a->fd < 0 ? EBADF : errno;
            if (a->fd >= 0) {
                close(a->fd);
            }
            a->fd = a->sink;
            a->sink = -1;
            a->spooled = 0;
        }
        if (a->fd >= 0 && close(a->fd) != 0 && !bad) {
            bad = 1;
            e = errno;
        }
        a->fd = -1;
        if (bad) {
            cli_err(err, len, "%s: cannot write: %s", a->path, strerror(e));
            release(a);
            return -1;
        }
        release(a);
        return 0;
    }
    if (a->fd >= 0) {
        if (fsync(a->fd) != 0 || close(a->fd) != 0) {
            cli_err(err, len, "%s: cannot write: %s", a->path, strerror(errno));
            a->fd = -1;
            cli_atomic_abort(a);
            return -1;
        }
        a->fd = -1;
    }
    if (rename(a->tmp, a->target) != 0) {
        cli_err(err, len, "%s: cannot write: %s", a->path, strerror(errno));
        cli_atomic_abort(a);
        return -1;
    }
    /* Make the rename itself durable. */
    char *dir = cli_dir_of(a->target);
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
    if (a->spooled && a->sink >= 0) {
        close(a->sink);
    }
    if (a->tmp && !a->in_place) {
        unlink(a->tmp);
    }
    release(a);
}
