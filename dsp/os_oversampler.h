/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_oversampler.h
 * Oversampling by 1, 2, 4, 8 or 16 with cascaded half-band stages
 * (os_halfband.h), and the matching decimation, with an integer latency.
 *
 * Stage j (1 = next to the host rate) runs at 2^j times the host rate fs. The
 * audio band is kept to OS_PASSBAND x fs; stage 1 must reject everything above
 * (1 - OS_PASSBAND) fs so that nothing folds into the kept band, later stages
 * have ever wider transition bands (a 2^M-fold cascade in the manner of
 * Crochiere and Rabiner, Multirate Digital Signal Processing, 1983, ch. 5).
 * A short delay at the top rate rounds the round-trip delay (with that of the
 * processing between the two) up to a whole number of host frames, so the
 * reported latency is exact.
 */

#ifndef OS_OVERSAMPLER_H
#define OS_OVERSAMPLER_H

#include "os_halfband.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Highest oversampling factor and its log2. */
#define OS_OVERSAMPLE_MAX 16
#define OS_OVERSAMPLE_MAX_LOG2 4
/** End of the protected audio band as a share of the host rate (20.2 kHz at 48 kHz). */
#define OS_PASSBAND 0.42
/** Stopband attenuation of every stage, dB. */
#define OS_STOPBAND_DB 100.0

/** The filter designs for every stage (shared, read-only once made). */
typedef struct {
    OsHalfband stage[OS_OVERSAMPLE_MAX_LOG2];
} OsOversamplerDesign;

/** Design every stage. Returns 0 on success. Not real-time safe. */
int os_oversampler_design(OsOversamplerDesign *d);

/** Running interpolator and decimator for one factor. */
typedef struct {
    const OsOversamplerDesign *design;
    int log2f;   /**< log2 of the factor */
    int factor;  /**< 1, 2, 4, 8 or 16 */
    int pad;     /**< extra delay at the top rate, samples */
    int latency; /**< round-trip delay, host frames */
    OsHalfbandState up[OS_OVERSAMPLE_MAX_LOG2];
    OsHalfbandState down[OS_OVERSAMPLE_MAX_LOG2];
    double pad_line[OS_OVERSAMPLE_MAX];
    int pad_pos;
} OsOversampler;

/** Round trip delay in host frames for @p factor, with the rounding pad, when
 *  the processing between the interpolator and the decimator delays by @p inner
 *  top-rate samples (0 for the filters alone). */
int os_oversampler_latency(const OsOversamplerDesign *d, int factor, int inner);

/** Select @p factor (1, 2, 4, 8 or 16; others round down to one of these) and
 *  clear all state. @p inner: the delay, in top-rate samples, of what runs
 *  between os_oversampler_up() and os_oversampler_down(); the pad and the
 *  latency account for it. Real-time safe. */
void os_oversampler_init(OsOversampler *os, const OsOversamplerDesign *d, int factor, int inner);

/** One host sample @p x in, factor samples out in @p y, in time order. */
void os_oversampler_up(OsOversampler *os, double x, double *y);

/** factor samples in (time order, overwritten), one host sample out. */
double os_oversampler_down(OsOversampler *os, double *y);

#ifdef __cplusplus
}
#endif

#endif /* OS_OVERSAMPLER_H */
