/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The FFTW-based spectrum, THD and THD+N of analysis/spectrum.c against
 * synthesised signals whose distortion is known in closed form.
 *
 * THD per IEC 60268-3: sqrt(sum_k A_k^2) / A_1 over the harmonics k >= 2 (here
 * up to 20 kHz); THD+N: the rms of everything but the fundamental in AES17's
 * 20 Hz .. 20 kHz band, over the fundamental's rms. With whole cycles in the
 * record each component sits on one bin, so the analytic value is exact and
 * the tolerance is double-precision rounding through an FFT of a few thousand
 * points (1e-9 relative, far above the ~1e-14 such an FFT loses). */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "analysis.h"
#include "spectrum.h"

#define RATE 48000.0
#define N 4800 /* 0.1 s: 10 Hz bins */
#define F0 1000.0
#define CYCLES 100

/* Analytic tolerance, relative: see the file comment. */
#define EXACT 1e-9

typedef struct {
    double freq, amp, phase;
} Tone;

static void synth(double *x, size_t n, const Tone *t, size_t nt, double dc)
{
    for (size_t i = 0; i < n; ++i) {
        double v = dc;
        for (size_t k = 0; k < nt; ++k) {
            v += t[k].amp * sin(2.0 * M_PI * t[k].freq * (double)i / RATE + t[k].phase);
        }
        x[i] = v;
    }
}

static void assert_rel(double got, double want, double tol, const char *what)
{
    printf("%-44s measured %.12g, analytic %.12g\n", what, got, want);
    assert_true(fabs(got - want) <= tol * fabs(want));
}

/* Two harmonics of known amplitude: IEC 60268-3 THD = sqrt(A2^2 + A3^2) / A1. */
static void two_harmonics(void **state)
{
    (void)state;
    double x[N];
    const Tone t[] = {{F0, 1.0, 0.0}, {2 * F0, 0.01, 0.3}, {3 * F0, 0.005, 1.1}};
    synth(x, N, t, 3, 0.0);
    AnDistortion d;
    assert_int_equal(an_distortion(x, N, CYCLES, RATE, AN_BAND_LO, AN_BAND_HI, &d), 0);
    const double want = sqrt(0.01 * 0.01 + 0.005 * 0.005);
    assert_rel(d.thd, want, EXACT, "THD, H2 1 % + H3 0.5 % (IEC 60268-3)");
    assert_rel(d.thdn, want, EXACT, "THD+N, same signal, nothing else");
    assert_rel(d.fundamental_rms, 1.0 / M_SQRT2, EXACT, "fundamental rms, 1 V peak sine");
    assert_int_equal(d.harmonics, 19); /* orders 2..20 lie at or below 20 kHz */
}

/* What lies outside the definitions must not count: DC, a 10 Hz tone (below
 * AES17's 20 Hz), the 22nd harmonic at 22 kHz (above the 20 kHz band); an
 * inharmonic tone inside the band counts in THD+N only. */
static void band_edges(void **state)
{
    (void)state;
    double x[N];
    const Tone t[] = {{F0, 2.0, 0.2},       {2 * F0, 0.02, 0.0}, {5 * F0, 0.01, 2.0},
                      {2340.0, 0.004, 0.5}, {10.0, 0.3, 0.0},    {22000.0, 0.05, 0.7}};
    synth(x, N, t, 6, 0.25);
    AnDistortion d;
    assert_int_equal(an_distortion(x, N, CYCLES, RATE, AN_BAND_LO, AN_BAND_HI, &d), 0);
    assert_rel(d.thd, sqrt(0.02 * 0.02 + 0.01 * 0.01) / 2.0, EXACT,
               "THD ignores DC, 10 Hz, 22 kHz and 2340 Hz");
    assert_rel(d.thdn, sqrt(0.02 * 0.02 + 0.01 * 0.01 + 0.004 * 0.004) / 2.0, EXACT,
               "THD+N counts the 2340 Hz tone (AES17 band)");
    assert_rel(d.dc, 0.25, 1e-9, "mean (the DC added)");
}

/* A square wave's Fourier series, 4/pi sum over odd k of sin(k w t) / k
 * (any table of Fourier series), up to 19 kHz: THD = sqrt(sum_{k=3,5..19} 1/k^2),
 * which tends to sqrt(pi^2/8 - 1) = 48.34 % as the series goes on. */
static void square_series(void **state)
{
    (void)state;
    double x[N];
    Tone t[10];
    double s = 0.0;
    for (int k = 1, i = 0; k <= 19; k += 2, ++i) {
        t[i] = (Tone){k * F0, 4.0 / M_PI / k, 0.0};
        s += k > 1 ? 1.0 / ((double)k * k) : 0.0;
    }
    synth(x, N, t, 10, 0.0);
    AnDistortion d;
    assert_int_equal(an_distortion(x, N, CYCLES, RATE, AN_BAND_LO, AN_BAND_HI, &d), 0);
    assert_rel(d.thd, sqrt(s), EXACT, "THD of a square wave's series to k = 19");
    assert_true(d.thd < sqrt(M_PI * M_PI / 8.0 - 1.0));
}

/* Parseval's theorem: the squares of the bins' rms values sum to the mean
 * square of the record; checked on deterministic noise, for an even and an
 * odd length. An alternating sequence a(-1)^i is all Nyquist bin, rms a. */
static void parseval(void **state)
{
    (void)state;
    for (size_t n = 1000; n <= 1001; ++n) {
        double *x = malloc(n * sizeof(double)), *r = malloc((n / 2 + 1) * sizeof(double));
        assert_non_null(x && r);
        unsigned s = 12345u;
        double ms = 0.0;
        for (size_t i = 0; i < n; ++i) {
            s = s * 1103515245u + 12345u;
            x[i] = (double)(s >> 8) / 16777216.0 - 0.5;
            ms += x[i] * x[i] / (double)n;
        }
        assert_int_equal(an_spectrum_rms(x, n, r), 0);
        double sum = 0.0;
        for (size_t k = 0; k <= n / 2; ++k) {
            sum += r[k] * r[k];
        }
        assert_rel(sum, ms, EXACT, n % 2 ? "Parseval, odd length" : "Parseval, even length");
        free(x);
        free(r);
    }
    double alt[64], r[33];
    for (int i = 0; i < 64; ++i) {
        alt[i] = i % 2 ? -0.3 : 0.3;
    }
    assert_int_equal(an_spectrum_rms(alt, 64, r), 0);
    assert_rel(r[32], 0.3, EXACT, "Nyquist bin of 0.3 (-1)^i");
}

/* The direct DFT by correlation in analysis.c (an_thd) is a second, FFT-free
 * computation of the same IEC ratio: on a clipped sine they must agree. */
static void agrees_with_correlation(void **state)
{
    (void)state;
    double x[N];
    for (size_t i = 0; i < N; ++i) {
        const double v = 1.3 * sin(2.0 * M_PI * F0 * (double)i / RATE + 0.1);
        x[i] = v > 1.0 ? 1.0 : v < -1.0 ? -1.0 : v;
    }
    AnDistortion d;
    assert_int_equal(an_distortion(x, N, CYCLES, RATE, AN_BAND_LO, AN_BAND_HI, &d), 0);
    assert_rel(d.thd, an_thd(x, N, RATE, F0, 20), 1e-9, "THD of a clipped sine, FFT vs DFT");
}

/* Coherent record: the frequency moves to the nearest one with whole cycles. */
static void coherent(void **state)
{
    (void)state;
    size_t n, c;
    const double f = an_coherent(997.0, RATE, 0.1, &n, &c);
    assert_int_equal(n, 4800);
    assert_int_equal(c, 100);
    assert_true(fabs(f - 1000.0) < 1e-9);
    assert_true(fabs(an_coherent(1234.0, 44100.0, 0.2, &n, &c) - 1234.9) < 0.1);
    assert_true(an_distortion(NULL, 10, 5, RATE, 20.0, 20000.0, &(AnDistortion){0}) == -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(two_harmonics),           cmocka_unit_test(band_edges),
        cmocka_unit_test(square_series),           cmocka_unit_test(parseval),
        cmocka_unit_test(agrees_with_correlation), cmocka_unit_test(coherent),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
