/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "spice_util.h"

#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

void sp_put(SpSubst *s, const char *name, const char *fmt, ...)
{
    const int max = (int)(sizeof(s->item) / sizeof(s->item[0]));
    if (s->n >= max) {
        fprintf(stderr, "spice: too many placeholders (%s)\n", name);
        abort();
    }
    va_list ap;
    va_start(ap, fmt);
    s->item[s->n].name = name;
    const int len = vsnprintf(s->item[s->n].value, sizeof(s->item[s->n].value), fmt, ap);
    va_end(ap);
    if (len < 0 || (size_t)len >= sizeof(s->item[s->n].value)) {
        fprintf(stderr, "spice: value of %s too long\n", name);
        abort();
    }
    ++s->n;
}

char *sp_read_text(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        return NULL;
    }
    size_t cap = 4096, len = 0;
    char *buf = malloc(cap);
    size_t got;
    while (buf && (got = fread(buf + len, 1, cap - len - 1, f)) > 0) {
        len += got;
        if (cap - len - 1 == 0) {
            char *nb = realloc(buf, cap * 2);
            if (!nb) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = nb;
            cap *= 2;
        }
    }
    fclose(f);
    if (buf) {
        buf[len] = '\0';
    }
    return buf;
}

int sp_write_netlist(const char *tmpl_path, const SpSubst *s, const char *out)
{
    char *tmpl = sp_read_text(tmpl_path);
    if (!tmpl) {
        fprintf(stderr, "spice: cannot read the netlist template %s\n", tmpl_path);
        return -1;
    }
    FILE *f = fopen(out, "w");
    if (!f) {
        free(tmpl);
        return -1;
    }
    int rc = 0;
    const char *p = tmpl;
    while (*p) {
        const char *at = strchr(p, '@');
        if (!at) {
            fputs(p, f);
            break;
        }
        fwrite(p, 1, (size_t)(at - p), f);
        const char *end = strchr(at + 1, '@');
        const size_t len = end ? (size_t)(end - at - 1) : 0;
        int found = -1;
        for (int i = 0; i < s->n && end; ++i) {
            if (strlen(s->item[i].name) == len && strncmp(s->item[i].name, at + 1, len) == 0) {
                found = i;
            }
        }
        if (found < 0) {
            fprintf(stderr, "spice: unknown placeholder at \"%.20s\" in %s\n", at, tmpl_path);
            rc = -1;
            break;
        }
        fputs(s->item[found].value, f);
        p = end + 1;
    }
    if (fclose(f) != 0) {
        rc = -1;
    }
    free(tmpl);
    return rc;
}

const char *sp_find_ngspice(void)
{
    const char *env = getenv("OS_NGSPICE");
    if (env) {
        return *env && access(env, X_OK) == 0 ? env : NULL;
    }
    const char *path = getenv("PATH");
    static char buf[1024];
    while (path && *path) {
        const char *end = strchr(path, ':');
        const size_t len = end ? (size_t)(end - path) : strlen(path);
        snprintf(buf, sizeof(buf), "%.*s/ngspice", (int)len, path);
        if (len > 0 && access(buf, X_OK) == 0) {
            return buf;
        }
        path = end ? end + 1 : NULL;
    }
    return NULL;
}

int sp_run(const char *ngspice, const char *dir, const char *netlist, const char *log)
{
    const pid_t pid = fork();
    if (pid < 0) {
        return -1;
    }
    if (pid == 0) {
        if (chdir(dir) != 0) {
            _exit(126);
        }
        const int in = open("/dev/null", O_RDONLY);
        const int fd = open(log, O_WRONLY | O_CREAT | O_TRUNC, 0644);
        if (in < 0 || fd < 0) {
            _exit(126);
        }
        dup2(in, STDIN_FILENO);
        dup2(fd, STDOUT_FILENO);
        dup2(fd, STDERR_FILENO);
        close(in);
        close(fd);
        execl(ngspice, "ngspice", "-b", netlist, (char *)NULL);
        _exit(127);
    }
    int status = 0;
    while (waitpid(pid, &status, 0) < 0) {
        if (errno != EINTR) {
            return -1;
        }
    }
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

void sp_print_log_tail(const char *path)
{
    char *text = sp_read_text(path);
    if (!text) {
        return;
    }
    const size_t len = strlen(text);
    fprintf(stderr, "--- %s (end) ---\n%s\n---\n", path, text + (len > 2000 ? len - 2000 : 0));
    free(text);
}

double *sp_read_table(const char *path, size_t cols, size_t *rows)
{
    *rows = 0;
    FILE *f = fopen(path, "r");
    if (!f) {
        return NULL;
    }
    char line[1024];
    size_t cap = 4096, n = 0;
    double *v = malloc(cap * cols * sizeof(*v));
    int ok = v != NULL && fgets(line, sizeof(line), f) != NULL;
    while (ok) {
        if (n == cap) {
            double *nv = realloc(v, 2 * cap * cols * sizeof(*v));
            if (!nv) {
                ok = 0;
                break;
            }
            v = nv;
            cap *= 2;
        }
        size_t c = 0;
        while (c < cols && fscanf(f, "%lf", &v[n * cols + c]) == 1) {
            ++c;
        }
        if (c == 0) {
            break; /* end of the table */
        }
        if (c < cols) {
            fprintf(stderr, "spice: %s: row %zu has %zu of %zu numbers\n", path, n, c, cols);
            ok = 0;
            break;
        }
        ++n;
    }
    fclose(f);
    if (!ok || n == 0) {
        free(v);
        return NULL;
    }
    *rows = n;
    return v;
}

int sp_mkdtemp(char *dir, size_t len, const char *tag)
{
    const char *tmp = getenv("TMPDIR");
    snprintf(dir, len, "%s/outstage-%s-XXXXXX", tmp && *tmp ? tmp : "/tmp", tag);
    if (!mkdtemp(dir)) {
        fprintf(stderr, "spice: mkdtemp %s: %s\n", dir, strerror(errno));
        return -1;
    }
    return 0;
}

void sp_cleanup(const char *dir, const char *const *files, size_t n, int keep, const char *name)
{
    const char *env = getenv("OS_SPICE_KEEP");
    if (keep || (env && strcmp(env, "1") == 0)) {
        fprintf(stderr, "spice: %s: files kept in %s\n", name, dir);
        return;
    }
    char path[1024];
    for (size_t i = 0; i < n; ++i) {
        snprintf(path, sizeof(path), "%s/%s", dir, files[i]);
        unlink(path);
    }
    rmdir(dir);
}
