/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_halfband.h
 * Linear-phase half-band FIR filters for 2x interpolation and decimation,
 * designed by the Kaiser window method and run in polyphase form.
 *
 * A half-band lowpass of N = 4K - 1 taps has h[c] = 1/2 at its centre
 * c = 2K - 1 and zeros at every other even offset from it, so one polyphase
 * branch is a pure delay and the other a symmetric 2K-tap FIR (Vaidyanathan,
 * Multirate Systems and Filter Banks, Prentice Hall 1993, section 4.6).
 * Length and window shape follow Kaiser's formulas (J. F. Kaiser, "Nonrecursive
 * digital filter design using the I0-sinh window function", Proc. IEEE ISCAS
 * 1974; also Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd ed.,
 * eq. 7.62-7.63): beta = 0.1102 (A - 8.7), N - 1 = (A - 8) / (2.285 dw).
 */

#ifndef OS_HALFBAND_H
#define OS_HALFBAND_H

#ifdef __cplusplus
extern "C" {
#endif

/** Largest K supported (N = 4K - 1 taps). */
#define OS_HALFBAND_MAX_K 64

/** Half-band design: K and the taps of the non-trivial polyphase branch. */
typedef struct {
    int k;                              /**< N = 4K - 1 taps */
    double even[2 * OS_HALFBAND_MAX_K]; /**< h[0], h[2], ..., h[4K - 2] */
} OsHalfband;

/**
 * Design the shortest half-band with stopband attenuation @p atten_db (> 21) and
 * transition width @p transition (cycles per sample at the filter's rate, the
 * band between 0.5 - 2 fp and 0.5 is the transition when the passband ends at
 * fp = 0.25 - transition / 2). Returns 0, or -1 if it would need more than
 * OS_HALFBAND_MAX_K. Not real-time safe (uses Bessel functions), allocation free.
 */
int os_halfband_design(OsHalfband *hb, double transition, double atten_db);

/** Full impulse response h[0..4K-2] of @p hb into @p h. */
void os_halfband_taps(const OsHalfband *hb, double *h);

/** Delay of the filter at its own rate: 2K - 1 samples. */
static inline int os_halfband_delay(const OsHalfband *hb)
{
    return 2 * hb->k - 1;
}

/** State of one 2x interpolator or decimator built on a design. */
typedef struct {
    const OsHalfband *hb;
    double hist[4 * OS_HALFBAND_MAX_K];      /**< even-branch history, stored twice */
    double odd[2 * (OS_HALFBAND_MAX_K + 1)]; /**< decimator: odd-branch delay, stored twice */
    int pos;
    int opos;
} OsHalfbandState;

/** Attach @p st to design @p hb and clear it. Real-time safe. */
void os_halfband_reset(OsHalfbandState *st, const OsHalfband *hb);

/** Interpolate: one input sample to two output samples at twice the rate. */
void os_halfband_up(OsHalfbandState *st, double x, double *y0, double *y1);

/** Decimate: two input samples (in time order) to one output sample. */
double os_halfband_down(OsHalfbandState *st, double u0, double u1);

#ifdef __cplusplus
}
#endif

#endif /* OS_HALFBAND_H */
