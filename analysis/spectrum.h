/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Spectrum and distortion of a record with FFTW, for the command-line tool and
 * its tests. The record must hold a whole number of cycles of the fundamental
 * (coherent sampling, as IEEE 1241 recommends for converter tests): then every
 * harmonic falls on one bin and a rectangular window measures it exactly.
 *
 * THD follows IEC 60268-3: the rms of the harmonics 2, 3, ... over the rms of
 * the fundamental (a ratio; times 100 for %), counting harmonics up to the top
 * of the measurement band. THD+N is the rms of everything in the measurement
 * band except the fundamental (the residual a notch analyser reads), over the
 * rms of the fundamental; AES17 sets the band's top at 20 kHz. Using the
 * fundamental as the reference for both keeps THD+N >= THD; AES17's analyser
 * refers the residual to the whole signal instead, which is smaller by the
 * factor sqrt(1 + THD+N^2): 0.005 % of the reading at 1 %. */

#ifndef OS_SPECTRUM_H
#define OS_SPECTRUM_H

#include <stddef.h>

/** AES17's measurement band for THD+N, Hz. */
#define AN_BAND_LO 20.0
#define AN_BAND_HI 20000.0

/** Distortion figures of one record. */
typedef struct {
    double fundamental_rms; /**< rms of the fundamental, in the record's unit */
    double thd;             /**< IEC 60268-3 THD, a ratio */
    double thdn;            /**< THD+N in the band, a ratio */
    double dc;              /**< mean of the record */
    int harmonics;          /**< number of harmonics counted in thd (orders 2..harmonics+1) */
} AnDistortion;

/**
 * rms amplitude of each bin of the real FFT of x[0..n): bin k (frequency
 * k rate / n) gets sqrt(2) |X_k| / n, DC and the Nyquist bin |X_k| / n, so the
 * squares sum to the mean square of x (Parseval). @p rms receives n / 2 + 1
 * values. Rectangular window. Returns 0, or -1 if n < 2 or memory runs out.
 * Thread-safe.
 */
int an_spectrum_rms(const double *x, size_t n, double *rms);

/**
 * Distortion of x[0..n), which holds exactly @p cycles periods of its
 * fundamental (so the fundamental is bin @p cycles), at @p rate Hz, in the band
 * [band_lo, band_hi] Hz (harmonics counted up to band_hi and below rate / 2).
 * Returns 0, or -1 for a bad argument (cycles 0 or at or above n / 2) or no
 * memory. Thread-safe.
 */
int an_distortion(const double *x, size_t n, size_t cycles, double rate, double band_lo,
                  double band_hi, AnDistortion *d);

/**
 * Record length and cycle count for a coherent measurement near @p freq Hz at
 * @p rate Hz lasting about @p seconds: n = round(seconds x rate), cycles =
 * round(freq x n / rate) (at least 1). The frequency actually measured is
 * cycles x rate / n, returned. Thread-safe.
 */
double an_coherent(double freq, double rate, double seconds, size_t *n, size_t *cycles);

#endif
