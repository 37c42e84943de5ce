/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "spice_util.h"

#include "os_bjt.h"
#include "os_opamp.h"

#include <errno.h>
#include <math.h>
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

void sp_circuit_of(const OsStage *s, double amp, double freq, SpCircuit *k)
{
    k->vin_amp = amp * (double)os_stage_get(s, OS_P_FULLSCALE) *
                 pow(10.0, (double)os_stage_get(s, OS_P_DRIVE) / 20.0);
    k->freq = freq;
    k->gain_db = (double)os_stage_get(s, OS_P_GAIN);
    k->rail = (double)os_stage_get(s, OS_P_RAIL);
    k->headroom = (double)os_stage_get(s, OS_P_HEADROOM);
    k->ilimit = (double)os_stage_get(s, OS_P_ILIMIT) * 1e-3;
    k->load = (double)os_stage_get(s, OS_P_LOAD);
    k->gbw = (double)os_stage_get(s, OS_P_GBW) * 1e6;
    k->slew = (double)os_stage_get(s, OS_P_SLEW) * 1e6;
    /* os_bjt.h: Is = 0.1 A / (exp(vbe / VT) - 1), VT at 300.15 K. */
    k->is = OS_BJT_IC_REF / expm1((double)os_stage_get(s, OS_P_VBE) / OS_VT);
    k->beta = (double)os_stage_get(s, OS_P_BETA);
    k->bias = (double)os_stage_get(s, OS_P_BIAS);
    k->emitter_r = (double)os_stage_get(s, OS_P_EMITTER_R);
    k->loop = os_stage_get(s, OS_P_LOOP) >= 0.5f;
    k->speaker = os_stage_get(s, OS_P_LOAD_MODEL) >= 0.5f;
    k->le = (double)os_stage_get(s, OS_P_SPEAKER_LE) * 1e-3;
    k->fs = (double)os_stage_get(s, OS_P_SPEAKER_FS);
    k->qms = (double)os_stage_get(s, OS_P_SPEAKER_QMS);
    k->qes = (double)os_stage_get(s, OS_P_SPEAKER_QES);
    k->source[0] = '\0';
}

void sp_put_circuit(SpSubst *sub, const SpCircuit *k, int follower)
{
    sp_put(sub, "VIN_AMP", "%.17g", k->vin_amp);
    sp_put(sub, "FREQ", "%.17g", k->freq);
    sp_put(sub, "GAIN_DB", "%.17g", k->gain_db);
    sp_put(sub, "RAIL", "%.17g", k->rail);
    sp_put(sub, "HEADROOM", "%.17g", k->headroom);
    sp_put(sub, "ILIMIT", "%.17g", k->ilimit);
    sp_put(sub, "RLOAD", "%.17g", k->load);
    if (k->speaker) {
        /* the voice coil Re + Le, then the motional parallel R-L-C from the
         * Thiele-Small parameters (Small 1972): Res = Re Qms / Qes,
         * Cmes = Qes / (2 pi fs Re), Lces = 1 / ((2 pi fs)^2 Cmes); with
         * Le = 0 the coil's resistor joins the branch directly */
        const double ws = 2.0 * M_PI * k->fs;
        const double res = k->load * k->qms / k->qes, cmes = k->qes / (ws * k->load);
        const double lces = 1.0 / (ws * ws * cmes);
        if (k->le > 0.0) {
            sp_put(sub, "LOAD_NET",
                   "Rl out nle {rload}\nLe nle nm %.17g\nRes nm 0 %.17g\nLces nm 0 %.17g\n"
                   "Cmes nm 0 %.17g",
                   k->le, res, lces, cmes);
        } else {
            sp_put(sub, "LOAD_NET",
                   "Rl out nm {rload}\nRes nm 0 %.17g\nLces nm 0 %.17g\nCmes nm 0 %.17g", res,
                   lces, cmes);
        }
    } else {
        sp_put(sub, "LOAD_NET", "Rl out 0 {rload}");
    }
    sp_put(sub, "GBW", "%.17g", k->gbw);
    sp_put(sub, "SLEW", "%.17g", k->slew);
    sp_put(sub, "OS_OPAMP_A0", "%.17g", OS_OPAMP_A0);
    sp_put(sub, "OS_VSENSE", "%.17g", OS_VSENSE);
    sp_put(sub, "OS_SWING_KNEE", "%.17g", OS_SWING_KNEE);
    sp_put(sub, "OS_SWING_MIN_SHARE", "%.17g", OS_SWING_MIN_SHARE);
    sp_put(sub, "OS_EXP_MAX", "%.17g", OS_EXP_MAX);
    /* G = 1 (0 dB): no R2, fb joined to the feedback node. */
    const char *node = follower && !k->loop ? "pin" : "out";
    if (k->gain_db == 0.0) {
        sp_put(sub, "FEEDBACK_R2", "Vfb %s fb 0", node);
    } else {
        sp_put(sub, "FEEDBACK_R2", "R2 %s fb {r2}", node);
    }
    if (k->source[0]) {
        sp_put(sub, "SOURCE", "%s", k->source);
    } else if (follower) {
        sp_put(sub, "SOURCE", "Vin in 0 DC 0 SIN(0 {vin_amp} {freq})");
    } else {
        sp_put(sub, "SOURCE", "Vin in 0 SIN(0 {vin_amp} {freq})");
    }
    if (follower) {
        sp_put(sub, "IS", "%.17g", k->is);
        sp_put(sub, "BETA", "%.17g", k->beta);
        sp_put(sub, "BIAS", "%.17g", k->bias);
        sp_put(sub, "EMITTER_R", "%.17g", k->emitter_r);
    }
}

size_t sp_put_transient(SpSubst *sub, int follower, double dt, double tstop, double tmax,
                        const char *table)
{
    sp_put(sub, "OUTFILE", "%s", table);
    if (follower) {
        sp_put(sub, "ANALYSIS", "tran %.17g %.17g 0 %.17g\nlinearize v(out) v(in) v(pin) v(x)", dt,
               tstop, tmax);
        return 5;
    }
    sp_put(sub, "TSTEP", "%.17g", dt);
    sp_put(sub, "TMAX", "%.17g", tmax);
    sp_put(sub, "TSTOP", "%.17g", tstop);
    return 3;
}
