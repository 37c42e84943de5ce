/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Cost on a fixed set of signals, judged by the worst blocks as well as the
 * mean (issue 9): sines at 1, 7 and 15 kHz and a 3 kHz square at 0 dBFS,
 * full-scale white noise and the loud program, each stage at its defaults;
 * the same at 96 kHz x16; and a control swept across its range every second
 * while the loud program plays, with a click measure on a sine. */

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <fftw3.h>

#include "bench.h"

#define BLOCK 512

typedef enum {
    SIG_SINE_1K = 0,
    SIG_SINE_7K,
    SIG_SINE_15K,
    SIG_SQUARE_3K,
    SIG_NOISE,
    SIG_PROGRAM,
    SIG_COUNT
} Signal;

static const char *const signal_names[SIG_COUNT] = {
    "sine 1 kHz, 0 dBFS",   "sine 7 kHz, 0 dBFS",      "sine 15 kHz, 0 dBFS",
    "square 3 kHz, 0 dBFS", "white noise, full scale", "loud program",
};

static void make_signal(Signal sig, float *x, size_t n, double rate)
{
    unsigned seed = 12345u;
    switch (sig) {
    case SIG_SINE_1K:
    case SIG_SINE_7K:
    case SIG_SINE_15K: {
        const double f = sig == SIG_SINE_1K ? 1000.0 : sig == SIG_SINE_7K ? 7000.0 : 15000.0;
        for (size_t i = 0; i < n; ++i) {
            x[i] = (float)al_sine(i, rate, f);
        }
        break;
    }
    case SIG_SQUARE_3K:
        /* a plain square, as a synthesiser without band-limiting would give
         * it: its edges are single-sample steps from -1 to +1 */
        for (size_t i = 0; i < n; ++i) {
            x[i] = fmod((double)i * 3000.0 / rate, 1.0) < 0.5 ? 1.0f : -1.0f;
        }
        break;
    case SIG_NOISE:
        for (size_t i = 0; i < n; ++i) {
            seed = seed * 1664525u + 1013904223u; /* Numerical Recipes' LCG */
            x[i] = (float)((double)(seed >> 8) / 8388608.0 - 1.0);
        }
        break;
    default:
        bench_program(x, n, rate);
        break;
    }
}

/* What one timed run gives. */
typedef struct {
    double mean_ns;  /**< CPU ns per frame over the whole run */
    double p999_ns;  /**< the block cost that only 0.1 % of blocks exceed, ns per frame */
    double worst_ns; /**< the most expensive block, ns per frame */
    double iters;    /**< mean Newton evaluations per oversampled step */
} Timing;

static int cmp_double(const void *a, const void *b)
{
    const double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* A control swept during the run (NULL: none): port @p param of the stage
 * runs from its minimum to its maximum and back, one way per second, on the
 * port's own scale (logarithmic ports in log), set once per block as a host
 * would. */
typedef struct {
    const OsPortInfo *port;
} Sweep;

static float sweep_value(const Sweep *sw, double t)
{
    const double ph = fmod(t, 2.0), u = ph < 1.0 ? ph : 2.0 - ph;
    const double lo = (double)sw->port->min, hi = (double)sw->port->max;
    if (sw->port->flags & OS_PF_LOGARITHMIC) {
        return (float)(lo * pow(hi / lo, u));
    }
    return (float)(lo + u * (hi - lo));
}

/* Time stage @p kind (defaults, @p factor) at @p rate on x[0..n), @p repeat
 * times from a fresh stage; the fastest repetition's figures count. */
static int time_run(OsStageKind kind, double rate, int factor, const float *x, float *y, size_t n,
                    int repeat, const Sweep *sw, int speaker, Timing *out)
{
    const size_t nb = (n + BLOCK - 1) / BLOCK;
    double *blocks = malloc(nb * sizeof(double)), *best_blocks = malloc(nb * sizeof(double));
    if (!blocks || !best_blocks) {
        free(blocks);
        free(best_blocks);
        return -1;
    }
    double best = 1e300, best_iters = 0.0;
    for (int r = 0; r < repeat; ++r) {
        OsStage *s = os_stage_new(kind, rate, NULL);
        if (!s) {
            free(blocks);
            free(best_blocks);
            return -1;
        }
        os_stage_set(s, OS_P_OVERSAMPLE, (float)factor);
        if (speaker) {
            /* the default driver: Re 8 ohm and the port table's Thiele-Small values */
            os_stage_set(s, OS_P_LOAD_MODEL, 1.0f);
            os_stage_set(s, OS_P_LOAD, 8.0f);
        }
        if (sw && sw->port) {
            os_stage_set(s, (OsParam)sw->port->id, sweep_value(sw, 0.0));
        }
        os_stage_reset(s);
        double total = 0.0, it = 0.0;
        for (size_t b = 0; b < nb; ++b) {
            const size_t pos = b * BLOCK;
            const uint32_t len = (uint32_t)(n - pos < BLOCK ? n - pos : BLOCK);
            if (sw && sw->port) {
                os_stage_set(s, (OsParam)sw->port->id, sweep_value(sw, (double)pos / rate));
            }
            const double t0 = bench_cpu_now();
            os_stage_process(s, x + pos, y + pos, len);
            const double el = bench_cpu_now() - t0;
            blocks[b] = 1e9 * el / len;
            total += el;
            OsMeters m;
            os_stage_meters(s, &m);
            it += m.newton_iters * len;
        }
        os_stage_free(s);
        if (total < best) {
            best = total;
            best_iters = it / (double)n;
            memcpy(best_blocks, blocks, nb * sizeof(double));
        }
    }
    qsort(best_blocks, nb, sizeof(double), cmp_double);
    out->mean_ns = 1e9 * best / (double)n;
    out->worst_ns = best_blocks[nb - 1];
    /* the 99.9th percentile of block costs; with fewer than 1000 blocks, the
     * worst */
    const size_t k = nb - 1 - nb / 1000;
    out->p999_ns = best_blocks[k];
    out->iters = best_iters;
    free(blocks);
    free(best_blocks);
    return 0;
}

static double xrt(double ns_per_frame, double rate)
{
    return 1e9 / ns_per_frame / rate;
}

static int signal_table(const BenchOptions *o, double rate, int factor, int speaker)
{
    const size_t n = (size_t)(o->seconds * rate);
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    if (!x || !y) {
        free(x);
        free(y);
        return 1;
    }
    printf("\n## The signal set at %.0f kHz, %dx%s\n\n"
           "Each stage at its defaults but the factor, %.2f s of each signal, blocks of %d "
           "frames, fastest of %d runs from a fresh stage (the DSP library called directly; "
           "the plugins add a few ns per block). *worst 0.1 %%*: the block cost only one block "
           "in a thousand exceeds; *worst block*: the most expensive one (with fewer than "
           "1000 blocks the two coincide). x real time: seconds of audio per second of one "
           "core.\n\n",
           rate / 1e3, factor,
           speaker ? ", into a loudspeaker (load_model 1, Re 8 ohm, the driver's defaults)" : "",
           o->seconds, BLOCK, o->repeat);
    printf("| stage | signal | ns/frame | x real time | worst 0.1 %% (ns/frame) | x real time "
           "| worst block (ns/frame) | x real time | Newton evaluations/step |\n"
           "|---|---|---|---|---|---|---|---|---|\n");
    int rc = 0;
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (!os_stage_available((OsStageKind)k)) {
            continue;
        }
        double worst_mean = 0.0;
        for (int sig = 0; sig < SIG_COUNT; ++sig) {
            make_signal((Signal)sig, x, n, rate);
            Timing tm;
            if (time_run((OsStageKind)k, rate, factor, x, y, n, o->repeat, NULL, speaker, &tm) !=
                0) {
                rc = 1;
                continue;
            }
            worst_mean = fmax(worst_mean, tm.mean_ns);
            printf("| %s | %s | %.0f | %.1f | %.0f | %.1f | %.0f | %.1f | %.2f |\n",
                   os_stage_info((OsStageKind)k)->cli_name, signal_names[sig], tm.mean_ns,
                   xrt(tm.mean_ns, rate), tm.p999_ns, xrt(tm.p999_ns, rate), tm.worst_ns,
                   xrt(tm.worst_ns, rate), tm.iters);
            fflush(stdout);
        }
        printf("| %s | worst signal | %.0f | %.1f | | | | | |\n",
               os_stage_info((OsStageKind)k)->cli_name, worst_mean, xrt(worst_mean, rate));
    }
    free(x);
    free(y);
    return rc;
}

/* Power of the block-rate sidebands of a 1 kHz tone x[0..n) through stage
 * @p kind under sweep @p sw, set once per block (fine = 0) or before every
 * frame (fine = 1), dBc; y is scratch. */
static double zipper_dbc(OsStageKind kind, double rate, int factor, const float *x, float *y,
                         size_t n, const Sweep *sw, int fine)
{
    OsStage *s = os_stage_new(kind, rate, NULL);
    double *d = fftw_malloc(n * sizeof(double));
    fftw_complex *spec = fftw_malloc((n / 2 + 1) * sizeof(fftw_complex));
    if (!s || !d || !spec) {
        os_stage_free(s);
        fftw_free(d);
        fftw_free(spec);
        return (double)NAN;
    }
    os_stage_set(s, OS_P_OVERSAMPLE, (float)factor);
    os_stage_set(s, (OsParam)sw->port->id, sweep_value(sw, 0.0));
    os_stage_reset(s);
    const size_t step = fine ? 1 : BLOCK;
    for (size_t pos = 0; pos < n; pos += step) {
        const uint32_t len = (uint32_t)(n - pos < step ? n - pos : step);
        os_stage_set(s, (OsParam)sw->port->id, sweep_value(sw, (double)pos / rate));
        os_stage_process(s, x + pos, y + pos, len);
    }
    os_stage_free(s);
    for (size_t i = 0; i < n; ++i) {
        d[i] = (double)y[i];
    }
    fftw_plan plan = fftw_plan_dft_r2c_1d((int)n, d, spec, FFTW_ESTIMATE);
    fftw_execute(plan);
    fftw_destroy_plan(plan);
    const double df = rate / (double)n, block_rate = rate / BLOCK;
    double fund = 0.0, side = 0.0;
    for (size_t b = 1; b <= n / 2; ++b) {
        const double f = (double)b * df;
        const double p = spec[b][0] * spec[b][0] + spec[b][1] * spec[b][1];
        if (fabs(f - 1000.0) <= 1.0) {
            fund += p;
            continue;
        }
        for (int k = 1; k <= 20; ++k) {
            for (int m = 1; m <= 8; ++m) {
                if (fabs(fabs(f - 1000.0 * k) - m * block_rate) <= 1.0) {
                    side += p;
                }
            }
        }
    }
    fftw_free(d);
    fftw_free(spec);
    return 10.0 * log10((side + 1e-300) / (fund + 1e-300));
}

static int automation_table(const BenchOptions *o)
{
    const double rate = 48000.0;
    const int factor = 4;
    /* at least one sweep up and down */
    const double secs = fmax(o->seconds, 2.0);
    const size_t n = (size_t)(secs * rate);
    /* the zipper record: 4 s, so that bins are 0.25 Hz and the block rate
     * (93.75 Hz at 48 kHz) falls on one */
    const size_t nz = (size_t)(4.0 * rate);
    float *x = malloc(n * sizeof(float)), *y = malloc((n > nz ? n : nz) * sizeof(float));
    float *sine = malloc(nz * sizeof(float));
    if (!x || !y || !sine) {
        free(x);
        free(y);
        free(sine);
        return 1;
    }
    bench_program(x, n, rate);
    for (size_t i = 0; i < nz; ++i) {
        sine[i] = (float)(0.25 * al_sine(i, rate, 1000.0));
    }
    printf("\n## A control automated\n\n"
           "48 kHz, 4x, defaults; one control swept from its minimum to its maximum and back, "
           "one way per second (on its own scale: logarithmic controls in log), set once per "
           "block of %d frames as a host does; %.2f s of the loud program, fastest of %d. "
           "Zipper: a 1 kHz sine at -12 dBFS under the same sweep (%.0f s): the power of the "
           "sidebands at the block rate (%.2f Hz: k x 1 kHz +- m x the block rate, k up to 20, "
           "m up to 8, each within +-1 Hz), dBc, with the control set once per block and set "
           "before every single frame (the finest a host can send: no block-rate steps at "
           "all). A control applied in steps at block boundaries would raise the first above "
           "the second.\n\n",
           BLOCK, secs, o->repeat, (double)nz / rate, rate / BLOCK);
    printf("| stage | control swept | ns/frame | x real time | worst 0.1 %% (ns/frame) | x real "
           "time | worst block (ns/frame) | x real time | zipper, set per block (dBc) | set per "
           "frame (dBc) "
           "|\n|---|---|---|---|---|---|---|---|---|---|\n");
    static const char *const swept[] = {"load", "drive", "bias"};
    int rc = 0;
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (!os_stage_available((OsStageKind)k)) {
            continue;
        }
        for (size_t c = 0; c < sizeof(swept) / sizeof(swept[0]); ++c) {
            const int idx = os_port_find((OsStageKind)k, swept[c]);
            if (idx < 0) {
                continue;
            }
            Sweep sw = {os_port_get((OsStageKind)k, (uint32_t)idx)};
            Timing tm;
            if (time_run((OsStageKind)k, rate, factor, x, y, n, o->repeat, &sw, 0, &tm) != 0) {
                rc = 1;
                continue;
            }
            /* zipper: the sidebands at the block rate, for the sweep set once
             * per block and for the same sweep set before every frame */
            double zip[2];
            for (int fine = 0; fine < 2; ++fine) {
                zip[fine] = zipper_dbc((OsStageKind)k, rate, factor, sine, y, nz, &sw, fine);
            }
            printf(
                "| %s | %s (%g .. %g %s) | %.0f | %.1f | %.0f | %.1f | %.0f | %.1f | %.1f | %.1f "
                "|\n",
                os_stage_info((OsStageKind)k)->cli_name, swept[c], (double)sw.port->min,
                (double)sw.port->max, sw.port->unit, tm.mean_ns, xrt(tm.mean_ns, rate), tm.p999_ns,
                xrt(tm.p999_ns, rate), tm.worst_ns, xrt(tm.worst_ns, rate), zip[0], zip[1]);
            fflush(stdout);
        }
    }
    free(x);
    free(y);
    free(sine);
    return rc;
}

int bench_signals(const BenchOptions *o)
{
    int rc = signal_table(o, 48000.0, 4, 0);
    rc |= signal_table(o, 96000.0, 16, 0);
    rc |= signal_table(o, 48000.0, 4, 1);
    rc |= automation_table(o);
    return rc;
}
