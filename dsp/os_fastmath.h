/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_fastmath.h
 * An inline exponential (and tanh from it) for the inner loops of the solvers. The C library's
 * exp() is a call through the PLT with error handling; the circuits evaluate
 * several exponentials per Newton iteration. Accuracy: relative error below
 * 4e-16 (checked against the C library in tests/dsp/test_fastmath.c).
 */

#ifndef OS_FASTMATH_H
#define OS_FASTMATH_H

#include <stdint.h>
#include <string.h>

#ifdef __cplusplus
extern "C" {
#endif

/* e^r - 1 for |r| <= 0.35: the Taylor series of e^r to r^13 without its
 * leading 1 (os_exp()). Estrin's scheme (Knuth, TAOCP vol. 2, 4.6.4): the same
 * polynomial as Horner's rule, in independent pairs joined by r^2, r^4 and
 * r^8, so the multiplications overlap instead of waiting on each other (about
 * a third of Horner's latency on a pipelined core; same accuracy). */
static inline double os_expm1_reduced(double r)
{
    const double r2 = r * r;
    const double r4 = r2 * r2;
    const double r8 = r4 * r4;
    const double p23 = 0.5 + r * (1.0 / 6.0);
    const double p45 = 1.0 / 24.0 + r * (1.0 / 120.0);
    const double p67 = 1.0 / 720.0 + r * (1.0 / 5040.0);
    const double p89 = 1.0 / 40320.0 + r * (1.0 / 362880.0);
    const double pab = 1.0 / 3628800.0 + r * (1.0 / 39916800.0);
    const double pcd = 1.0 / 479001600.0 + r * (1.0 / 6227020800.0);
    return r + (r2 * p23 + (r4 * (p45 + r2 * p67) + r8 * ((p89 + r2 * pab) + r4 * pcd)));
}

/**
 * exp(x) for -700 <= x <= 700 (arguments outside are clamped to that range;
 * NaN gives NaN). exp(x) = 2^n e^r with n = round(x / ln 2), |r| <= ln(2)/2,
 * ln 2 split in two parts so that r is exact (Cody and Waite, Software Manual
 * for the Elementary Functions, 1980), e^r by its Taylor series to r^13
 * (truncation below 1e-17 relative) evaluated by Estrin's scheme, 2^n built in
 * the exponent bits.
 * Real-time safe.
 */
static inline double os_exp(double x)
{
    if (x != x) {
        return x; /* NaN */
    }
    x = x < -700.0 ? -700.0 : x > 700.0 ? 700.0 : x;
    /* round to nearest through the 2^52 + 2^51 shifter (default rounding mode) */
    const double shifter = 6755399441055744.0;
    const double n = (x * 1.4426950408889634 + shifter) - shifter;
    const double r = (x - n * 6.93147180369123816490e-01) - n * 1.90821492927058770002e-10;
    /* 1 is added last, so the small terms are summed before the one rounding
     * that matters. */
    const double p = 1.0 + os_expm1_reduced(r);
    const int64_t e = (int64_t)n + 1023;
    const uint64_t bits = (uint64_t)e << 52;
    double scale;
    memcpy(&scale, &bits, sizeof(scale));
    return p * scale;
}

/**
 * tanh(u) and its derivative 1 - tanh(u)^2 (into *d), from one exponential.
 * Beyond |u| = 0.17, tanh(u) = 1 - 2 / (1 + e^2u) and 1 - tanh^2 =
 * 4 e^2u / (1 + e^2u)^2. Nearer 0 that difference cancels (below |u| = 1e-16
 * it gives exactly 0, which would leave a circuit at rest with no restoring
 * drive from its input stage and let it creep to zero on its slowest pole);
 * there tanh(u) = m / (m + 2) with m = e^2u - 1 from the series itself,
 * without the cancellation. Beyond |u| = 19, +-1 and 0 (within 1e-16 of the
 * truth). Relative error below 2e-15 (tests/dsp/test_fastmath.c).
 * Real-time safe.
 */
static inline double os_tanh_d(double u, double *d)
{
    const double a = u < 0.0 ? -u : u;
    if (a < 0.17) {
        const double m = os_expm1_reduced(2.0 * u);
        const double t = m / (m + 2.0);
        *d = 1.0 - t * t;
        return t;
    }
    if (!(a < 19.0)) {
        *d = 0.0;
        return u != u ? u : u > 0.0 ? 1.0 : -1.0;
    }
    const double e = os_exp(2.0 * u), q = 1.0 / (1.0 + e);
    *d = 4.0 * e * q * q;
    return 1.0 - 2.0 * q;
}

#ifdef __cplusplus
}
#endif

#endif /* OS_FASTMATH_H */
