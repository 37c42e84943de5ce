/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The cheap floor: a plain static curve applied sample by sample at the host
 * rate, with no oversampling and no state. Our own few lines, at the same
 * levels as the stages' defaults, so that its cost and its aliasing sit beside
 * the circuit simulation's:
 *   clamp:     y = max(-c, min(c, x))
 *   tanh:      y = c tanh(x / c)
 *   dead zone: y = x - d for x > d, x + d for x < -d, else 0
 * with c = ilimit x R_load / (G x fullscale) (the op-amp stage's current limit
 * into its default load: 25 mA x 32 ohm / 2 V = 0.4 FS) and d = vbe / (G x
 * fullscale) (the follower's turn-on voltage seen at the output of the
 * push-pull stage with the pair outside the loop: 0.65 V / 2 V = 0.325 FS). */

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alias.h"
#include "bench.h"

static double port_default(OsStageKind kind, OsParam p)
{
    const OsPortInfo *info = os_port_for_param(kind, p);
    return info ? (double)info->def : (double)NAN;
}

/* Output volts per full-scale unit at the defaults: G x fullscale. */
static double volts_per_fs(OsStageKind kind)
{
    return pow(10.0, port_default(kind, OS_P_GAIN) / 20.0) * port_default(kind, OS_P_FULLSCALE);
}

static double curve_level(BenchCurve c)
{
    if (c == BENCH_DEADZONE) {
        return port_default(OS_STAGE_PUSHPULL, OS_P_VBE) / volts_per_fs(OS_STAGE_PUSHPULL);
    }
    return 1e-3 * port_default(OS_STAGE_OPAMP, OS_P_ILIMIT) *
           port_default(OS_STAGE_OPAMP, OS_P_LOAD) / volts_per_fs(OS_STAGE_OPAMP);
}

const char *bench_curve_name(BenchCurve c)
{
    static const char *const names[] = {"static clamp", "static tanh", "static dead zone"};
    return (unsigned)c < BENCH_CURVE_COUNT ? names[c] : "?";
}

size_t bench_curve_tone(BenchCurve c)
{
    const char *want = c == BENCH_DEADZONE ? "pushpull_b_loop0" : "opamp_limit";
    size_t nt = 0;
    const AlTone *t = al_tones(&nt);
    for (size_t i = 0; i < nt; ++i) {
        if (strcmp(t[i].name, want) == 0) {
            return i;
        }
    }
    return 0;
}

void bench_curve_apply(BenchCurve c, const float *x, float *y, size_t n)
{
    const float lv = (float)curve_level(c);
    switch (c) {
    case BENCH_CLAMP:
        for (size_t i = 0; i < n; ++i) {
            y[i] = x[i] > lv ? lv : x[i] < -lv ? -lv : x[i];
        }
        break;
    case BENCH_TANH: {
        const float inv = 1.0f / lv;
        for (size_t i = 0; i < n; ++i) {
            y[i] = lv * tanhf(x[i] * inv);
        }
        break;
    }
    case BENCH_DEADZONE:
        for (size_t i = 0; i < n; ++i) {
            y[i] = x[i] > lv ? x[i] - lv : x[i] < -lv ? x[i] + lv : 0.0f;
        }
        break;
    default:
        memset(y, 0, n * sizeof(*y));
        break;
    }
}

int bench_static(const BenchOptions *o)
{
    const double rate = 48000.0;
    const size_t n = (size_t)(o->seconds * rate);
    size_t nt = 0;
    const AlTone *tones = al_tones(&nt);
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    if (!x || !y) {
        free(x);
        free(y);
        return 1;
    }
    bench_program(x, n, rate);
    printf("\n## Plain static curves, no oversampling (the cheap floor)\n\n"
           "Our own few lines (bench/bench_static.c), sample by sample at 48 kHz: clamp and "
           "tanh at the op-amp stage's current-limit level (%.4f FS), the dead zone at the "
           "push-pull follower's turn-on voltage (%.4f FS). Speed on the loud program, "
           "fastest of many passes; alias on the curve's standard tone, measured as in the "
           "alias table.\n\n",
           curve_level(BENCH_CLAMP), curve_level(BENCH_DEADZONE));
    printf("| curve | tone | ns/frame | x real time | worst alias (dBc) | total alias (dBc) |\n"
           "|---|---|---|---|---|---|\n");
    int rc = 0;
    for (int c = 0; c < BENCH_CURVE_COUNT; ++c) {
        /* Passes of the whole program until 0.2 s of CPU time have gone by. */
        double best = 1e300, spent = 0.0;
        volatile float sink = 0.0f;
        for (int pass = 0; pass < 3 || spent < 0.2; ++pass) {
            const double t0 = bench_cpu_now();
            bench_curve_apply((BenchCurve)c, x, y, n);
            const double el = bench_cpu_now() - t0;
            sink += y[(size_t)pass % n];
            best = fmin(best, el);
            spent += el;
        }
        (void)sink;
        const size_t ti = bench_curve_tone((BenchCurve)c);
        const AlTone *t = &tones[ti];
        const size_t m = al_record_length(rate, t->freq, o->alias_seconds);
        float *tx = malloc(m * sizeof(float)), *ty = malloc(m * sizeof(float));
        double *d = malloc(m * sizeof(double));
        AlResult r;
        int ok = tx && ty && d;
        if (ok) {
            for (size_t i = 0; i < m; ++i) {
                tx[i] = (float)(t->amp * al_sine(i, rate, t->freq));
            }
            bench_curve_apply((BenchCurve)c, tx, ty, m);
            for (size_t i = 0; i < m; ++i) {
                d[i] = (double)ty[i];
            }
            ok = al_analyse(d, m, rate, t->freq, &r) == 0;
        }
        if (ok) {
            printf("| %s | %s | %.2f | %.0f | %.1f | %.1f |\n", bench_curve_name((BenchCurve)c),
                   t->name, 1e9 * best / (double)n, (double)n / rate / best, r.worst_dbc,
                   r.total_dbc);
        } else {
            rc = 1;
        }
        free(tx);
        free(ty);
        free(d);
    }
    free(x);
    free(y);
    fflush(stdout);
    return rc;
}
