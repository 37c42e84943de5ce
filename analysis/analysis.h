/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Signal analysis for tests and measurement programs: harmonic amplitudes by correlation over whole
 * periods, THD per the IEC 60268-3 definition (rms of harmonics 2..N over the
 * rms of the fundamental), rms and peak. */

#ifndef OS_TEST_ANALYSIS_H
#define OS_TEST_ANALYSIS_H

#include <stddef.h>
#include <stdint.h>

#include "outstage.h"

/** Complex amplitude (peak) of harmonic @p k of @p f0 in x[0..n), computed by
 *  correlation; exact for a periodic signal when n spans whole periods. */
void an_harmonic(const double *x, size_t n, double rate, double f0, int k, double *re, double *im);

/** Peak amplitude of harmonic k. */
double an_harmonic_amp(const double *x, size_t n, double rate, double f0, int k);

/** THD as a ratio: sqrt(sum_{k=2..kmax} A_k^2) / A_1, harmonics below rate/2 only
 *  (IEC 60268-3 definition of total harmonic distortion). */
double an_thd(const double *x, size_t n, double rate, double f0, int kmax);

/** Relative error of the harmonics of @p f0 below @p band_hz of x (nx samples
 *  at rx Hz) against the reference r (nr samples at rr Hz), both spanning the
 *  same whole periods: sqrt(sum |X_k - R_k|^2 / sum |R_k|^2) over the complex
 *  amplitudes, i.e. the rms error of the two waveforms band-limited to
 *  band_hz (Parseval). */
double an_harmonic_error(const double *x, size_t nx, double rx, const double *r, size_t nr,
                         double rr, double f0, double band_hz);

/** Largest |x|. */
double an_peak(const double *x, size_t n);

/** Root mean square. */
double an_rms(const double *x, size_t n);

/** Number of samples spanning the largest whole number of periods of f0 that
 *  fits in n and whose length is an integer within 1e-9 (f0 must divide well). */
size_t an_whole_periods(size_t n, double rate, double f0);

/** Run @p stage over a sine of peak @p amp (full-scale units) at @p f0 for
 *  @p settle + @p n frames; keeps the last n frames of the load voltage (V)
 *  in vload and of the output in out (either may be NULL). */
void an_run_sine(OsStage *stage, double rate, double f0, double amp, size_t settle, size_t n,
                 double *vload, double *out);

#endif
