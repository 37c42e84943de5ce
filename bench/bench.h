/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The benchmark program's parts: the plugin's speed and alias tables
 * (bench_speed.c), the signal set, worst blocks and automation
 * (bench_signals.c), the cheap static curves (bench_static.c), ngspice
 * (bench_spice.c) and the sources of the aliases (bench_fold.c), all timed in one run so that every
 * ratio is measured on the same machine at the same time. A measurement program, not a test:
 * nothing here asserts on time. */

#ifndef OS_BENCH_H
#define OS_BENCH_H

#include <stddef.h>

#include "alias.h"
#include "outstage.h"

/** Settings of one run (command-line options). */
typedef struct {
    double seconds;        /**< loud program per speed measurement, s of audio */
    int repeat;            /**< repetitions per speed measurement; the fastest counts */
    double alias_seconds;  /**< coherent record per alias measurement, s */
    double spice_seconds;  /**< simulated duration of each ngspice comparison, s */
    const char *ngspice;   /**< ngspice executable, NULL: look in PATH */
    const char *spice_dir; /**< directory of the netlist templates (spice/) */
} BenchOptions;

/** CPU time of the calling thread, s. */
double bench_cpu_now(void);

/** The loud program: two tones and a decaying noise burst every 250 ms, peaks
 *  near 0 dBFS, so the default op-amp stage spends much of its time in current
 *  limit. */
void bench_program(float *x, size_t n, double rate);

/** Time @p stage on x[0..n) in blocks of 512 frames, @p repeat times, each
 *  from a reset. Returns the fastest repetition's CPU seconds; *iters receives
 *  the mean Newton evaluations per oversampled step. */
double bench_time_stage(OsStage *stage, const float *x, float *y, size_t n, int repeat,
                        double *iters);

/** Alias figures of standard tone @p tone (index into al_tones()) at @p rate
 *  and @p factor over a record of @p seconds, measured once per run and then
 *  remembered. Returns 0 or -1. */
int bench_alias(size_t tone, double rate, int factor, double seconds, AlResult *r);

/** The plain static curves: our own few lines, no oversampling, no state. */
typedef enum {
    BENCH_CLAMP = 0, /**< hard clip at the op-amp stage's current-limit level */
    BENCH_TANH,      /**< tanh with the same small-signal gain and the same limit */
    BENCH_DEADZONE,  /**< class-B dead zone of the push-pull stage's follower */
    BENCH_CURVE_COUNT
} BenchCurve;

/** Short name of @p c. */
const char *bench_curve_name(BenchCurve c);

/** Index into al_tones() of the standard tone @p c stands beside. */
size_t bench_curve_tone(BenchCurve c);

/** Apply @p c to x[0..n) into y (full-scale units in and out). */
void bench_curve_apply(BenchCurve c, const float *x, float *y, size_t n);

/** Speed table (stage x rate x factor) with latency and alias level, then the
 *  alias table for the standard tones, then silence and denormal input. */
int bench_speed(const BenchOptions *o);

/** The signal set (sines, square, noise, the loud program) at 48 kHz 4x and
 *  96 kHz 16x with the worst blocks, and a control automated. */
int bench_signals(const BenchOptions *o);

/** The plain static curves without oversampling: timed, alias measured. */
int bench_static(const BenchOptions *o);

/** ngspice on the same circuits and tones: timed, error against the plugin. */
int bench_spice(const BenchOptions *o);

/** Where the worst aliases come from: the harmonic that folds onto each, and its
 *  level in the continuous-time waveform (the circuit stepped at 12 and 25 MHz). */
int bench_fold(const BenchOptions *o);

#endif
