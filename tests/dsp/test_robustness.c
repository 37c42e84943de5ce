/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What a host relies on: hostile input, denormals, smoothing, bypass, the
 * residual, latency, in-place buffers, zero-length blocks, every sample rate. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis.h"
#include "os_circuit.h"
#include "os_trajectory.h"
#include "outstage.h"

#define RATE 48000.0

/* Every test runs for each stage; cmocka passes the kind as the prestate. */
static OsStageKind kind_of(void **state)
{
    return *(const OsStageKind *)*state;
}

static const char *name_of(OsStageKind k)
{
    return os_stage_info(k)->cli_name;
}

static OsStage *fresh_kind(OsStageKind kind, double rate)
{
    OsStage *s = os_stage_new(kind, rate, NULL);
    assert_non_null(s);
    return s;
}

static void fill_sine(float *x, size_t n, size_t offset, double amp, double f, double rate)
{
    for (size_t i = 0; i < n; ++i) {
        x[i] = (float)(amp * sin(2.0 * M_PI * f * (double)(i + offset) / rate));
    }
}

/* NaN, infinities, 1e30 and subnormals never make the output NaN or infinite,
 * and 10 ms after the last of them the output equals that of a run without them
 * (the interface contract and the requirement). */
static void hostile_input(void **state)
{
    const OsStageKind kind = kind_of(state);
    const size_t n = 24000, bad_at = 4800;
    const float bad[] = {NAN, INFINITY, -INFINITY, 1e30f, -1e30f, FLT_MIN / 4.0f, 3.0e38f};
    float *clean = malloc(n * sizeof(float)), *dirty = malloc(n * sizeof(float));
    float *out_c = malloc(n * sizeof(float)), *out_d = malloc(n * sizeof(float));
    assert_non_null(clean && dirty && out_c && out_d);
    /* Loaded to provoke every part: 8 ohm, current limited by the sine itself. */
    for (int drive = 0; drive <= 36; drive += 36) {
        OsStage *a = fresh_kind(kind, RATE), *b = fresh_kind(kind, RATE);
        os_stage_set(a, OS_P_DRIVE, (float)drive);
        os_stage_set(b, OS_P_DRIVE, (float)drive);
        os_stage_set(a, OS_P_LOAD, 8.0f);
        os_stage_set(b, OS_P_LOAD, 8.0f);
        os_stage_reset(a);
        os_stage_reset(b);
        fill_sine(clean, n, 0, 0.1, 997.0, RATE);
        memcpy(dirty, clean, n * sizeof(float));
        for (size_t k = 0; k < sizeof(bad) / sizeof(bad[0]); ++k) {
            dirty[bad_at + 7 * k] = bad[k];
            clean[bad_at + 7 * k] = 0.0f; /* non-finite input counts as silence */
        }
        /* 1e30 and 3e38 are finite: the reference sees them clamped as the stage does. */
        clean[bad_at + 7 * 3] = 1000.0f;
        clean[bad_at + 7 * 4] = -1000.0f;
        clean[bad_at + 7 * 6] = 1000.0f;
        os_stage_process(a, clean, out_c, (uint32_t)n);
        os_stage_process(b, dirty, out_d, (uint32_t)n);
        const size_t last_bad = bad_at + 7 * 6;
        const size_t recovered = last_bad + (size_t)(0.010 * RATE);
        double worst = 0.0;
        for (size_t i = 0; i < n; ++i) {
            assert_true(isfinite(out_d[i]));
            if (i >= recovered) {
                worst = fmax(worst, fabs((double)out_d[i] - (double)out_c[i]));
            }
        }
        printf("drive %2d dB: largest difference 10 ms after hostile input %.3g\n", drive, worst);
        assert_true(worst < 1e-6);
        os_stage_free(a);
        os_stage_free(b);
    }
    /* Pure garbage for a while, then a sine: the output must be the sine's. */
    OsStage *s = fresh_kind(kind, RATE), *r = fresh_kind(kind, RATE);
    for (size_t i = 0; i < n; ++i) {
        dirty[i] = bad[i % (sizeof(bad) / sizeof(bad[0]))];
    }
    os_stage_process(s, dirty, out_d, (uint32_t)n);
    for (size_t i = 0; i < n; ++i) {
        assert_true(isfinite(out_d[i]));
    }
    fill_sine(clean, n, 0, 0.3, 440.0, RATE);
    os_stage_process(s, clean, out_d, (uint32_t)n);
    os_stage_process(r, clean, out_c, (uint32_t)n);
    double worst = 0.0;
    for (size_t i = (size_t)(0.010 * RATE); i < n; ++i) {
        worst = fmax(worst, fabs((double)out_d[i] - (double)out_c[i]));
    }
    printf("after 0.5 s of garbage: largest difference 10 ms into a sine %.3g\n", worst);
    assert_true(worst < 1e-6);
    os_stage_free(s);
    os_stage_free(r);
    free(clean);
    free(dirty);
    free(out_c);
    free(out_d);
}

/* Denormals cannot slow the stage: after a signal stops, the state decays to
 * exact zeros instead of lingering in the subnormal range, and subnormal input
 * never yields subnormal output (IEEE 754 subnormals are the slow path on x86). */
static void no_denormal_tail(void **state)
{
    const OsStageKind kind = kind_of(state);
    const size_t n = 48000;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    assert_non_null(x && y);
    OsStage *s = fresh_kind(kind, RATE);
    for (int listen = 0; listen <= 1; ++listen) {
        os_stage_set(s, OS_P_LISTEN, (float)listen);
        fill_sine(x, n, 0, 0.5, 100.0, RATE);
        os_stage_process(s, x, y, (uint32_t)n);
        for (size_t i = 0; i < n; ++i) {
            x[i] = (i % 3 == 0) ? FLT_MIN / 8.0f : 0.0f;
        }
        os_stage_process(s, x, y, (uint32_t)n);
        size_t subnormal = 0, nonzero_tail = 0;
        double tail_peak = 0.0;
        for (size_t i = 0; i < n; ++i) {
            subnormal += fpclassify(y[i]) == FP_SUBNORMAL;
            nonzero_tail += (i >= n / 2 && y[i] != 0.0f);
            if (i >= n / 2) {
                tail_peak = fmax(tail_peak, fabs((double)y[i]));
            }
        }
        printf("%s, listen %d: subnormal outputs %zu, non-zero outputs after 0.5 s of silence %zu "
               "(largest %.3g)\n",
               name_of(kind), listen, subnormal, nonzero_tail, tail_peak);
        assert_int_equal(subnormal, 0);
        if (kind == OS_STAGE_OPAMP) {
            assert_int_equal(nonzero_tail, 0);
        } else {
            /* The pair's junctions sit at a non-zero operating point, so the
             * solver leaves rounding-level values rather than exact zeros: they
             * must stay far below audibility and out of the subnormal range. */
            assert_true(tail_peak < 1e-9);
        }
    }
    os_stage_free(s);
    free(x);
    free(y);
}

/* Largest step between neighbouring output samples. */
static double max_step(const float *y, size_t from, size_t to)
{
    double m = 0.0;
    for (size_t i = from + 1; i < to; ++i) {
        m = fmax(m, fabs((double)y[i] - (double)y[i - 1]));
    }
    return m;
}

/* Sweeping a control makes no zipper noise: during the change no step between
 * samples exceeds the steepest step of the steady sine at the louder of the two
 * settings (a jump would, by the size of the level change). The moves keep the
 * stage below clipping, where a step could only come from the control. */
static void smoothing(void **state)
{
    const OsStageKind kind = kind_of(state);
    struct {
        OsParam p;
        float from, to;
    } moves[] = {{OS_P_DRIVE, -12.0f, 12.0f},  {OS_P_TRIM, 12.0f, -12.0f},
                 {OS_P_GAIN, 0.0f, 40.0f},     {OS_P_FULLSCALE, 0.1f, 2.0f},
                 {OS_P_LOAD, 10000.0f, 8.0f},  {OS_P_RAIL, 60.0f, 5.0f},
                 {OS_P_ILIMIT, 200.0f, 10.0f}, {OS_P_SLEW, 100.0f, 0.1f}};
    const size_t n = 9600;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    assert_non_null(x && y);
    const double f = 100.0, amp = 0.05;
    for (size_t m = 0; m < sizeof(moves) / sizeof(moves[0]); ++m) {
        OsStage *s = fresh_kind(kind, RATE);
        os_stage_set(s, moves[m].p, moves[m].from);
        if (kind == OS_STAGE_PUSHPULL) {
            /* Class AB (2 mA idle), so the signal itself has no crossover corners
             * whose size would change with the control. */
            os_stage_set(s, OS_P_BIAS, 1.1f);
        }
        os_stage_reset(s);
        fill_sine(x, n, 0, amp, f, RATE);
        os_stage_process(s, x, y, (uint32_t)n);
        const double before = max_step(y, n / 2, n);
        os_stage_set(s, moves[m].p, moves[m].to);
        fill_sine(x, n, n, amp, f, RATE);
        os_stage_process(s, x, y, (uint32_t)n);
        const double during = max_step(y, 0, n / 2);
        const double after = max_step(y, n / 2, n);
        printf("%-10s %8g -> %-8g: largest sample step before %.4g, during %.4g, after %.4g\n",
               os_port_for_param(kind, moves[m].p)->symbol, (double)moves[m].from,
               (double)moves[m].to, before, during, after);
        assert_true(during <= 1.05 * fmax(before, after) + 1e-6);
        os_stage_free(s);
    }
    free(x);
    free(y);
}

/* Bypass is the input delayed by the latency, exactly; switching is click-free;
 * the latency is the delay the output actually has. */
static void bypass_and_latency(void **state)
{
    const OsStageKind kind = kind_of(state);
    const size_t n = 9600;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    assert_non_null(x && y);
    for (int factor = 1; factor <= 16; factor *= 2) {
        OsStage *s = fresh_kind(kind, RATE);
        os_stage_set(s, OS_P_OVERSAMPLE, (float)factor);
        os_stage_set(s, OS_P_ENABLE, 0.0f);
        os_stage_reset(s);
        const uint32_t lat = os_stage_latency(s);
        fill_sine(x, n, 0, 0.5, 1234.5, RATE);
        os_stage_process(s, x, y, (uint32_t)n);
        for (size_t i = 0; i < n; ++i) {
            const float want = i >= lat ? x[i - lat] : 0.0f;
            assert_true(y[i] == want);
        }
        /* Processed, low level: the click of a small impulse comes out at the latency. */
        os_stage_set(s, OS_P_ENABLE, 1.0f);
        os_stage_reset(s);
        memset(x, 0, n * sizeof(float));
        x[100] = 0.01f;
        os_stage_process(s, x, y, (uint32_t)n);
        size_t arg = 0;
        for (size_t i = 0; i < n; ++i) {
            if (fabsf(y[i]) > fabsf(y[arg])) {
                arg = i;
            }
        }
        printf("oversample %2d: latency %u, impulse peak at +%zu\n", factor, lat, arg - 100);
        assert_int_equal(arg - 100, lat);
        os_stage_free(s);
    }
    /* Toggle bypass on a clipped signal: no step larger than the signals' own. */
    OsStage *s = fresh_kind(kind, RATE);
    os_stage_set(s, OS_P_LOAD, 8.0f);
    os_stage_reset(s);
    fill_sine(x, n, 0, 0.5, 200.0, RATE);
    os_stage_process(s, x, y, (uint32_t)n);
    const double wet = max_step(y, n / 2, n);
    os_stage_set(s, OS_P_ENABLE, 0.0f);
    fill_sine(x, n, n, 0.5, 200.0, RATE);
    os_stage_process(s, x, y, (uint32_t)n);
    const double during = max_step(y, 0, n / 2);
    const double dry = max_step(y, n / 2, n);
    printf("bypass toggle on a clipped sine: step wet %.4g, dry %.4g, during %.4g\n", wet, dry,
           during);
    assert_true(during <= 1.05 * fmax(wet, dry));
    os_stage_free(s);
    free(x);
    free(y);
}

/* listen = 1: below clipping the residual is tiny, in clipping it carries the
 * distortion: the clipped output minus the ideal linear response. */
static void residual(void **state)
{
    const OsStageKind kind = kind_of(state);
    const size_t n = 24000;
    double *o = malloc(n * sizeof(double)), *r = malloc(n * sizeof(double));
    assert_non_null(o && r);
    const double amps[] = {0.01, 1.0};
    for (int a = 0; a < 2; ++a) {
        OsStage *s = fresh_kind(kind, RATE);
        os_stage_set(s, OS_P_LOAD, 8.0f);
        os_stage_reset(s);
        an_run_sine(s, RATE, 1000.0, amps[a], 4800, n, NULL, o);
        os_stage_set(s, OS_P_LISTEN, 1.0f);
        os_stage_reset(s);
        an_run_sine(s, RATE, 1000.0, amps[a], 4800, n, NULL, r);
        const double ratio = an_rms(r, n) / (amps[a] / sqrt(2.0));
        printf("%s, input %.2f: residual rms / input rms = %.3g (%.1f dB)\n", name_of(kind),
               amps[a], ratio, 20.0 * log10(ratio));
        /* The residual is exactly output minus ideal. */
        const uint32_t lat = os_stage_latency(s);
        for (size_t i = 100; i < n; ++i) {
            const double ideal =
                amps[a] * sin(2.0 * M_PI * 1000.0 * (double)(i + 4800 - lat) / RATE);
            assert_true(fabs(r[i] - (o[i] - ideal)) < 1e-5);
        }
        if (kind == OS_STAGE_OPAMP && a == 0) {
            /* Clean, the residual is the op-amp's linear error alone: a single-pole
             * loop at fc = GBW rho / G (rho = Rp / (Rp + Rs), the output divider of
             * the sense resistor) leaves |1 - 1/(1 + j f/fc)| (Sedra and Smith,
             * sec. 2.8). */
            const double rp = 8.0 * 10e3 / (8.0 + 10e3), rs = 0.65 / 0.025;
            const double fc = 1e6 * rp / (rp + rs) / pow(10.0, 6.0 / 20.0);
            const double q = 1000.0 / fc;
            const double predicted = q / sqrt(1.0 + q * q);
            printf("  single-pole prediction %.3g\n", predicted);
            assert_true(fabs(ratio / predicted - 1.0) < 0.05);
        } else if (kind == OS_STAGE_OPAMP) {
            assert_true(ratio > 0.5); /* 0.2 V out of 2 V asked: mostly residual */
        }
        os_stage_free(s);
    }
    free(o);
    free(r);
}

/* In-place buffers, zero-length blocks, odd block sizes: same output as one
 * block with separate buffers. */
static void buffers(void **state)
{
    const OsStageKind kind = kind_of(state);
    const size_t n = 5000;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    float *z = malloc(n * sizeof(float));
    assert_non_null(x && y && z);
    fill_sine(x, n, 0, 0.9, 3000.0, RATE);
    OsStage *a = fresh_kind(kind, RATE), *b = fresh_kind(kind, RATE);
    os_stage_set(a, OS_P_LOAD, 8.0f);
    os_stage_set(b, OS_P_LOAD, 8.0f);
    os_stage_process(a, x, y, (uint32_t)n);
    memcpy(z, x, n * sizeof(float));
    size_t pos = 0, len = 0;
    while (pos < n) {
        os_stage_process(b, z + pos, z + pos, 0);
        len = (len * 7 + 3) % 300;
        const size_t m = pos + len > n ? n - pos : len;
        os_stage_process(b, z + pos, z + pos, (uint32_t)m);
        pos += m;
    }
    for (size_t i = 0; i < n; ++i) {
        assert_true(y[i] == z[i]);
    }
    OsMeters m;
    os_stage_process(b, z, z, 0);
    os_stage_meters(b, &m);
    assert_true(m.peak_current == 0.0 && m.load_power == 0.0);
    os_stage_free(a);
    os_stage_free(b);
    free(x);
    free(y);
    free(z);
}

/* Every setting at the range ends, at every host rate, stays finite and bounded
 * by the physics, and Newton converges in few iterations. */
static void extremes(void **state)
{
    const OsStageKind kind = kind_of(state);
    const double rates[] = {8000.0, 44100.0, 48000.0, 96000.0, 192000.0, 768000.0};
    const size_t n = 2048;
    double *v = malloc(n * sizeof(double));
    assert_non_null(v);
    unsigned seed = 12345u;
    double worst_iters = 0.0, worst_bound = 1e300;
    for (size_t r = 0; r < sizeof(rates) / sizeof(rates[0]); ++r) {
        for (int trial = 0; trial < 24; ++trial) {
            OsStage *s = fresh_kind(kind, rates[r]);
            for (int p = 0; p < OS_P_COUNT; ++p) {
                const OsPortInfo *info = os_port_for_param(kind, (OsParam)p);
                seed = seed * 1103515245u + 12345u;
                const int pick = (int)((seed >> 16) % 3u); /* min, max or default */
                if (info && p != OS_P_ENABLE && p != OS_P_LISTEN && p != OS_P_TRIM) {
                    os_stage_set(s, (OsParam)p,
                                 pick == 0   ? info->min
                                 : pick == 1 ? info->max
                                             : info->def);
                }
            }
            os_stage_reset(s);
            an_run_sine(s, rates[r], 1000.0, 1.0, 0, n, v, NULL);
            const double rail = (double)os_stage_get(s, OS_P_RAIL);
            const double swing = fmax(rail - (double)os_stage_get(s, OS_P_HEADROOM), 0.05 * rail);
            /* In the circuit: the load voltage stays within the op-amp's swing (plus a
             * few widths of the clamp's 50 mV knee); behind the pair, within the
             * swing plus half the bias and within the rails (the collectors). */
            double bound = swing;
            if (kind == OS_STAGE_PUSHPULL) {
                bound = fmin(rail, swing + 0.5 * (double)os_stage_get(s, OS_P_BIAS));
            }
            OsMeters m;
            os_stage_meters(s, &m);
            const double vmax = m.peak_current * (double)os_stage_get(s, OS_P_LOAD);
            if (!(vmax < bound + 0.25)) {
                printf("%s, rate %g: circuit peak %g V beyond %g V; settings:", name_of(kind),
                       rates[r], vmax, bound);
                for (int p = 0; p < OS_P_COUNT; ++p) {
                    const OsPortInfo *info = os_port_for_param(kind, (OsParam)p);
                    if (info) {
                        printf(" %s=%g", info->symbol, (double)os_stage_get(s, (OsParam)p));
                    }
                }
                printf("\n");
            }
            assert_true(vmax < bound + 0.25);
            /* At the output: finite; band-limiting a clipped wave to few harmonics
             * may overshoot (4/pi for the fundamental alone), so only a loose bound. */
            for (size_t i = 0; i < n; ++i) {
                assert_true(isfinite(v[i]));
                assert_true(fabs(v[i]) < 2.0 * bound + 0.5);
            }
            if (m.newton_iters > 100.0) {
                printf("%s, rate %g: %.1f evaluations per step; settings:", name_of(kind), rates[r],
                       m.newton_iters);
                for (int p = 0; p < OS_P_COUNT; ++p) {
                    const OsPortInfo *info = os_port_for_param(kind, (OsParam)p);
                    if (info) {
                        printf(" %s=%g", info->symbol, (double)os_stage_get(s, (OsParam)p));
                    }
                }
                printf("\n");
            }
            worst_iters = fmax(worst_iters, m.newton_iters);
            /* the design bound for the last block of 256 frames (os_trajectory.h) */
            const int factor = (int)os_stage_get(s, OS_P_OVERSAMPLE);
            const double steps = 256.0 * factor;
            worst_bound = fmin(worst_bound, OS_CIRCUIT_SUBSTEP_EVALS *
                                                os_trajectory_max_substeps(factor, steps) / steps);
            os_stage_free(s);
        }
    }
    printf("%s: 144 corner settings, worst mean Newton evaluations per step %.1f (design bound "
           "at least %.0f)\n",
           name_of(kind), worst_iters, worst_bound);
    /* The work per step is bounded by design (os_circuit.h, os_trajectory.h);
     * the op-amp stage's solve needs few evaluations anywhere. */
    assert_true(worst_iters <= worst_bound);
    if (kind == OS_STAGE_OPAMP) {
        assert_true(worst_iters < 40.0);
    }
    free(v);
}

static OsStageKind opamp = OS_STAGE_OPAMP, pushpull = OS_STAGE_PUSHPULL;

#define BOTH(f)                                                                                    \
    {"opamp: " #f, f, NULL, NULL, &opamp},                                                         \
    {                                                                                              \
        "pushpull: " #f, f, NULL, NULL, &pushpull                                                  \
    }

int main(void)
{
    const struct CMUnitTest tests[] = {
        BOTH(hostile_input), BOTH(no_denormal_tail), BOTH(smoothing), BOTH(bypass_and_latency),
        BOTH(residual),      BOTH(buffers),          BOTH(extremes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
