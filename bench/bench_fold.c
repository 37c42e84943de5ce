/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Where the aliases come from. For each standard tone and the factors 4, 8
 * and 16 at 48 kHz, the worst alias bin of the alias table is traced back to
 * the harmonic of the tone that folds onto it at the circuit's own rate
 * (k f0 = m fs factor +- bin), and that harmonic's level in the continuous-time
 * waveform is measured: the same circuit, the same parameters, stepped on its
 * own at about 12.3 and 24.6 MHz (whole multiples of the tone near 256 and
 * 512 x 48 kHz, so that a record of a few periods is coherent) so that the
 * harmonic lies far below that rate's Nyquist frequency; agreement of the two
 * rates shows the reference has converged. If the alias equals that
 * harmonic's level, the simulation at that factor samples the true waveform
 * and the alias is what ideal sampling at that rate gives. The band-limited
 * sampling (os_window.h) attenuates that harmonic by its response at k f0, the
 * triangle's sinc^2 (f h) times the three-tap compensation: the last columns
 * give what is left of the harmonic after it, and the alias above that, which
 * is the simulation's own error (timing of corners, interpolation) rather than
 * the waveform's. */

#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "alias.h"
#include "bench.h"
#include "os_circuit.h"
#include "os_solver.h"
#include "os_window.h"

enum { FOLD_RATE = 48000, REF_MULT_LO = 256, REF_MULT_HI = 512 };

/* The load voltage of tone @p t's circuit stepped at @p ref Hz, after 20 ms,
 * over @p n frames (whole periods of the tone: multiples of ref / gcd). */
static int reference_record(const AlTone *t, uint64_t ref, double *rec, size_t n)
{
    OsStage *st = al_make_stage(t, FOLD_RATE, 4);
    if (!st) {
        return -1;
    }
    double si[OS_P_COUNT];
    double vpf = 0.0;
    const OsCircuitOps *ops = os_stage_circuit(st, si, &vpf);
    os_stage_free(st);
    void *c = calloc(1, ops->size);
    if (!c) {
        return -1;
    }
    const double h = 1.0 / (double)ref;
    ops->update(c, si, h, OS_UPDATE_RESET);
    ops->reset(c);
    const size_t settle = (size_t)(ref / 50u);
    const double amp = t->amp * vpf;
    for (size_t i = 0; i < settle + n; ++i) {
        const double v = amp * al_sine(i, (double)ref, t->freq);
        const double vg = amp * sin(2.0 * M_PI * t->freq * ((double)i - 1.0 + OS_TRBDF2_G) * h);
        OsStepResult r;
        ops->step(c, v, vg, &r);
        if (i >= settle) {
            rec[i - settle] = r.vload;
        }
    }
    free(c);
    return 0;
}

/* Peak amplitude of the component at @p f Hz (a whole number) in rec[0..n),
 * sampled at @p ref Hz, n a whole number of its periods; phases in integers. */
static double component(const double *rec, size_t n, uint64_t ref, uint64_t f)
{
    double re = 0.0, im = 0.0;
    for (size_t i = 0; i < n; ++i) {
        const double ph = 2.0 * M_PI * (double)(((uint64_t)i * f) % ref) / (double)ref;
        re += rec[i] * cos(ph);
        im += rec[i] * sin(ph);
    }
    return 2.0 * hypot(re, im) / (double)n;
}

/* Distance of @p f from the nearest multiple of @p rate: where it lands when
 * sampled at that rate. */
static uint64_t fold(uint64_t f, uint64_t rate)
{
    const uint64_t r = f % rate;
    return r <= rate / 2 ? r : rate - r;
}

/* The band-limited sampling's response at @p f Hz for steps of 1 / @p inner s
 * (os_window.h): sinc^2 (f h) times 1 + 2a (1 - cos 2 pi f h), dB. */
static double window_db(double f, uint64_t inner, int factor)
{
    const double x = M_PI * f / (double)inner;
    const double sinc = x == 0.0 ? 1.0 : sin(x) / x;
    const double a = os_window_coefficient(factor);
    const double c = 1.0 + 2.0 * a * (1.0 - cos(2.0 * x));
    return 20.0 * log10(fabs(sinc * sinc * c) + 1e-300);
}

int bench_fold(const BenchOptions *o)
{
    size_t nt = 0;
    const AlTone *tones = al_tones(&nt);
    static const int factors[] = {4, 8, 16};
    printf("\n## Where the aliases come from\n\n"
           "For the worst alias of each standard tone at 48 kHz (alias table), the largest "
           "harmonic of "
           "the tone that folds onto it at the circuit's own rate (48 kHz x factor), and that "
           "harmonic's level in the continuous-time waveform: the same circuit stepped on its "
           "own at about %.1f and %.1f MHz (whole multiples of the tone; two rates, to show "
           "the reference has converged). An alias as large as the harmonic it comes from "
           "means the simulation samples the true waveform: ideal sampling at that rate gives "
           "the same alias. The band-limited sampling (docs/models.md) attenuates that "
           "harmonic by its response there (sinc^2 of the step times the compensation); "
           "*after the window* is what would be left of it, and an alias above that is the "
           "simulation's own error (the timing of a corner, the interpolation of the input), "
           "not the waveform's.\n\n",
           REF_MULT_LO * (double)FOLD_RATE * 1e-6, REF_MULT_HI * (double)FOLD_RATE * 1e-6);
    printf("| tone | oversample | worst alias (dBc) | at (Hz) | folded from harmonic | at (kHz) | "
           "its level in the waveform (dBc), %.1f MHz | the same, %.1f MHz | alias - harmonic "
           "(dB) | harmonic after the window (dBc) | alias - that (dB) "
           "|\n|---|---|---|---|---|---|---|---|---|---|---|\n",
           REF_MULT_LO * (double)FOLD_RATE * 1e-6, REF_MULT_HI * (double)FOLD_RATE * 1e-6);
    int rc = 0;
    for (size_t ti = 0; ti < nt; ++ti) {
        const AlTone *t = &tones[ti];
        const uint64_t f0 = (uint64_t)llround(t->freq);
        const uint64_t refs[2] = {
            f0 * (uint64_t)llround((double)REF_MULT_LO * FOLD_RATE / (double)f0),
            f0 * (uint64_t)llround((double)REF_MULT_HI * FOLD_RATE / (double)f0)};
        double *rec[2] = {NULL, NULL};
        size_t n[2] = {0, 0};
        for (int j = 0; j < 2; ++j) {
            n[j] = al_record_length((double)refs[j], t->freq, 0.002);
            rec[j] = n[j] ? calloc(n[j], sizeof(double)) : NULL;
            if (!rec[j] || reference_record(t, refs[j], rec[j], n[j]) != 0) {
                rc = -1;
            }
        }
        for (size_t fi = 0; rc == 0 && fi < sizeof(factors) / sizeof(factors[0]); ++fi) {
            AlResult ar;
            if (bench_alias(ti, FOLD_RATE, factors[fi], o->alias_seconds, &ar) != 0) {
                rc = -1;
                break;
            }
            const uint64_t inner = (uint64_t)FOLD_RATE * (uint64_t)factors[fi];
            const uint64_t bin = (uint64_t)llround(ar.worst_hz);
            double fund[2];
            for (int j = 0; j < 2; ++j) {
                fund[j] = component(rec[j], n[j], refs[j], f0);
            }
            /* the harmonics above the circuit's Nyquist frequency that land on the
             * bin, up to an eighth of the lower reference rate; the largest counts */
            uint64_t best_k = 0;
            double best[2] = {-HUGE_VAL, -HUGE_VAL};
            for (uint64_t k = 2; k * f0 < refs[0] / 8; ++k) {
                if (fold(k * f0, inner) != bin || k * f0 < inner / 2) {
                    continue;
                }
                double lv[2];
                for (int j = 0; j < 2; ++j) {
                    lv[j] = 20.0 * log10(component(rec[j], n[j], refs[j], k * f0) / fund[j]);
                }
                if (lv[1] > best[1]) {
                    best_k = k;
                    best[0] = lv[0];
                    best[1] = lv[1];
                }
            }
            if (best_k) {
                const double left = best[1] + window_db((double)(best_k * f0), inner, factors[fi]);
                printf("| %s | %d | %.1f | %.0f | %" PRIu64
                       " | %.0f | %.1f | %.1f | %+.1f | %.1f | %+.1f |\n",
                       t->name, factors[fi], ar.worst_dbc, ar.worst_hz, best_k,
                       (double)(best_k * f0) * 1e-3, best[0], best[1], ar.worst_dbc - best[1], left,
                       ar.worst_dbc - left);
            } else {
                printf("| %s | %d | %.1f | %.0f | none below %.1f MHz | | | | | | |\n", t->name,
                       factors[fi], ar.worst_dbc, ar.worst_hz, (double)refs[0] / 8.0 * 1e-6);
            }
        }
        free(rec[0]);
        free(rec[1]);
        if (rc != 0) {
            fprintf(stderr, "outstage-bench: reference run of %s failed\n", t->name);
            break;
        }
    }
    return rc;
}
