/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_halfband.h"

#include <math.h>
#include <string.h>

/* Modified Bessel function of the first kind, order 0, by its power series
 * (Abramowitz and Stegun 9.6.12); converges for every argument used here. */
static double bessel_i0(double x)
{
    const double q = 0.25 * x * x;
    double term = 1.0, sum = 1.0;
    for (int k = 1; k < 200; ++k) {
        term *= q / ((double)k * (double)k);
        sum += term;
        if (term < sum * 1e-17) {
            break;
        }
    }
    return sum;
}

/* Taps of the even branch for a given K and Kaiser beta, unity gain at DC. */
static void make_taps(OsHalfband *hb, int k, double beta)
{
    hb->k = k;
    const int c = 2 * k - 1;
    const double i0b = bessel_i0(beta);
    double odd_sum = 0.0;
    for (int i = 0; i < 2 * k; ++i) {
        const int m = 2 * i - c; /* odd offset from the centre */
        const double r = (double)m / (double)c;
        const double w = bessel_i0(beta * sqrt(fmax(0.0, 1.0 - r * r))) / i0b;
        const double arg = 0.5 * M_PI * (double)m;
        hb->even[i] = 0.5 * sin(arg) / arg * w;
        odd_sum += hb->even[i];
    }
    /* Exact unity gain at DC: the pure-delay branch gives 1/2, the other 1/2. */
    for (int i = 0; i < 2 * k; ++i) {
        hb->even[i] *= 0.5 / odd_sum;
    }
}

/* Largest magnitude (linear) over the stopband [0.25 + transition/2, 0.5]. */
static double stopband_peak(const OsHalfband *hb, double transition)
{
    const int c = 2 * hb->k - 1;
    const double f0 = 0.25 + 0.5 * transition;
    double worst = 0.0;
    for (int g = 0; g <= 256; ++g) {
        const double f = f0 + (0.5 - f0) * g / 256.0;
        /* zero-phase response: 1/2 + 2 sum_i h[2i] cos(2 pi f (2i - c)) over one side */
        double a = 0.5;
        for (int i = 0; i < hb->k; ++i) {
            a += 2.0 * hb->even[i] * cos(2.0 * M_PI * f * (double)(2 * i - c));
        }
        worst = fmax(worst, fabs(a));
    }
    return worst;
}

int os_halfband_design(OsHalfband *hb, double transition, double atten_db)
{
    const double beta = atten_db > 50.0 ? 0.1102 * (atten_db - 8.7)
                        : atten_db > 21.0
                            ? 0.5842 * pow(atten_db - 21.0, 0.4) + 0.07886 * (atten_db - 21.0)
                            : 0.0;
    const double order = (atten_db - 8.0) / (2.285 * 2.0 * M_PI * transition);
    /* N = 4K - 1 taps, so N - 1 = 4K - 2 >= order. Kaiser's estimate is short
     * for wide transitions, so lengthen until the response meets the spec. */
    int k = (int)ceil((order + 2.0) / 4.0);
    if (k < 1) {
        k = 1;
    }
    const double limit = pow(10.0, -atten_db / 20.0);
    for (; k <= OS_HALFBAND_MAX_K; ++k) {
        make_taps(hb, k, beta);
        if (stopband_peak(hb, transition) <= limit) {
            return 0;
        }
    }
    return -1;
}

void os_halfband_taps(const OsHalfband *hb, double *h)
{
    const int n = 4 * hb->k - 1;
    for (int i = 0; i < n; ++i) {
        h[i] = 0.0;
    }
    for (int i = 0; i < 2 * hb->k; ++i) {
        h[2 * i] = hb->even[i];
    }
    h[2 * hb->k - 1] = 0.5;
}

void os_halfband_reset(OsHalfbandState *st, const OsHalfband *hb)
{
    memset(st, 0, sizeof(*st));
    st->hb = hb;
}

/* The non-trivial branch over the newest 2K samples of the doubled history
 * (newest at w[0]): the full dot product with the symmetric taps, in two-lane
 * vectors with two accumulators (GCC/Clang vector extensions, lowered to
 * scalar code where the target has no SIMD), 2K being even. The summation
 * order is fixed, so the result is deterministic. */
typedef double OsV2 __attribute__((vector_size(16)));

static inline double branch(const OsHalfband *hb, const double *w)
{
    const int len = 2 * hb->k;
    OsV2 a0 = {0.0, 0.0}, a1 = {0.0, 0.0};
    int i = 0;
    for (; i + 4 <= len; i += 4) {
        OsV2 t0, t1, x0, x1;
        memcpy(&t0, hb->even + i, sizeof(t0));
        memcpy(&t1, hb->even + i + 2, sizeof(t1));
        memcpy(&x0, w + i, sizeof(x0));
        memcpy(&x1, w + i + 2, sizeof(x1));
        a0 += t0 * x0;
        a1 += t1 * x1;
    }
    for (; i < len; i += 2) {
        OsV2 t0, x0;
        memcpy(&t0, hb->even + i, sizeof(t0));
        memcpy(&x0, w + i, sizeof(x0));
        a0 += t0 * x0;
    }
    a0 += a1;
    return a0[0] + a0[1];
}

/* Push x into a history of length len stored twice, so that the newest len
 * samples are contiguous at hist + pos (newest first). */
static inline const double *push(double *hist, int *pos, int len, double x)
{
    int p = *pos - 1;
    if (p < 0) {
        p = len - 1;
    }
    hist[p] = x;
    hist[p + len] = x;
    *pos = p;
    return hist + p;
}

void os_halfband_up(OsHalfbandState *st, double x, double *y0, double *y1)
{
    const OsHalfband *hb = st->hb;
    const int len = 2 * hb->k;
    const double *w = push(st->hist, &st->pos, len, x);
    /* y[2m] = 2 sum_i h[2i] x[m-i];  y[2m+1] = 2 h[c] x[m-K+1] = x[m-K+1]. */
    *y0 = 2.0 * branch(hb, w);
    *y1 = w[hb->k - 1];
}

double os_halfband_down(OsHalfbandState *st, double u0, double u1)
{
    const OsHalfband *hb = st->hb;
    const int len = 2 * hb->k;
    const double *w = push(st->hist, &st->pos, len, u0);
    /* z[m] = sum_i h[2i] u[2(m-i)] + h[c] u[2(m-K)+1]: the odd branch is a
     * K-sample delay of the odd-phase input. */
    const double *o = push(st->odd, &st->opos, hb->k + 1, u1);
    return branch(hb, w) + 0.5 * o[hb->k];
}
