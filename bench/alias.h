/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Alias level of a stage for the standard tones, shared by the benchmark
 * (bench/) and the alias test (tests/filters/test_alias.c).
 *
 * Method: coherent sampling (IEEE Std 1241-2010, "Standard for terminology and
 * test methods for analog-to-digital converters", on record length and
 * coherent sampling of a sine; Oppenheim and Schafer, Discrete-Time Signal
 * Processing, 3rd ed., ch. 10, DFT analysis of sinusoidal signals). A
 * sine of f0 Hz at fs Hz whose record holds a whole number of periods repeats
 * with a period of fs / gcd(f0, fs) samples once the stage has settled, so
 * everything it produces (harmonics below fs / 2 and the images of those above,
 * folded back) lies exactly on the grid of multiples of g = gcd(f0, fs) Hz: 1 kHz
 * for 7 kHz at 48 kHz. Over a record of a whole number of those periods the DFT
 * with a rectangular window puts each such component into one bin without
 * leakage, so its level is exact. FFTW computes the DFT.
 *
 * Classification of the bins 1 .. n/2 (DC is left out):
 *  - harmonic: multiples of f0 up to fs / 2, the fundamental among them;
 *  - alias: the other multiples of g, where the folded images of harmonics
 *    above fs / 2 land;
 *  - inharmonic: every other bin; a steady, periodic output has nothing there,
 *    so its power shows noise or a stage that has not settled.
 * The image of harmonic k falls on the bin of harmonic m (or DC) when
 * k = j fs / g +- m; at 7 kHz / 48 kHz that is the 45th harmonic and above,
 * which cannot be told apart from the 1st to 3rd and are far below them.
 *
 * Levels are relative to the fundamental's power (dBc): the largest single
 * component among the alias and inharmonic bins, and the power of all of them
 * together. */

#ifndef OS_BENCH_ALIAS_H
#define OS_BENCH_ALIAS_H

#include <stddef.h>

#include "outstage.h"

/** Upper end of the audio band for the audio_dbc figure, Hz. At 96 kHz the
 *  band above it holds images that the oversampler lets through by design
 *  (it keeps 0 .. OS_PASSBAND fs clean), which nobody hears. */
#define AL_AUDIO_HZ 20000.0

/** Lower end of the audio band for the audio_total_dbc figure, Hz. */
#define AL_AUDIO_LO_HZ 20.0

/** Most settings a tone changes from the defaults. */
#define AL_MAX_SETS 6

/** One setting: a port symbol (os_port_find()) and its value in port units. */
typedef struct {
    const char *symbol;
    float value;
} AlSet;

/** One standard tone: the stage, its settings beyond the defaults, the tone. */
typedef struct {
    const char *name; /**< short name used in tables and test names */
    const char *what; /**< one line for people */
    OsStageKind kind;
    double freq;            /**< Hz */
    double amp;             /**< input peak, full-scale units */
    AlSet set[AL_MAX_SETS]; /**< settings, up to the first NULL symbol */
} AlTone;

/** The standard tones: from issue 4, all 7 kHz, the op-amp stage 6 dB into
 *  its current limit, the push-pull stage in class B with the follower outside
 *  the loop, and inside the (slew-limited) loop; from issue 9, a 9973 Hz tone
 *  asked 4 V peak of a 0.1 V/us op-amp into 10 kohm, through each stage (the
 *  push-pull stage in class AB, follower inside the loop), so that the op-amp
 *  slews for most of every half cycle. */
const AlTone *al_tones(size_t *count);

/** What al_analyse() finds, levels in dB relative to the fundamental. */
typedef struct {
    double fund_amp;        /**< fundamental, peak amplitude in the signal's unit */
    double worst_dbc;       /**< largest single alias or inharmonic component */
    double worst_hz;        /**< its frequency */
    double audio_dbc;       /**< largest single one at or below AL_AUDIO_HZ */
    double audio_hz;        /**< its frequency */
    double total_dbc;       /**< all alias and inharmonic power together */
    double audio_total_dbc; /**< all of it from AL_AUDIO_LO_HZ to AL_AUDIO_HZ */
    double alias_dbc;       /**< power on the alias grid bins only */
    double offgrid_dbc;     /**< power in the inharmonic (off-grid) bins only */
    double harmonic_dbc;    /**< power of harmonics 2 and up below fs/2 (THD, IEC 60268-3) */
} AlResult;

/** Smallest record length (frames) of at least @p seconds that holds a whole
 *  number of the tone's repetition periods fs / gcd(f0, fs). Rate and
 *  frequency must be whole numbers of Hz; returns 0 otherwise. */
size_t al_record_length(double rate, double f0, double seconds);

/** Classify and measure the DFT bins of x[0..n) (a coherent record of a tone
 *  of @p f0 Hz at @p rate Hz, n from al_record_length()). Returns 0, or -1 if n
 *  is not coherent or memory runs out. */
int al_analyse(const double *x, size_t n, double rate, double f0, AlResult *r);

/** sin(2 pi f0 i / rate), with the phase reduced exactly in integers when
 *  both are whole numbers of Hz, so the samples repeat exactly. */
double al_sine(size_t i, double rate, double f0);

/** Frames run before the record: 50 ms (every stage settles within it from
 *  rest; the inharmonic power would show one that had not) plus the latency. */
size_t al_settle_frames(double rate, unsigned latency);

/** A fresh stage set up for tone @p t at @p rate and oversampling @p factor
 *  (parameters at their targets, no ramps), or NULL. */
OsStage *al_make_stage(const AlTone *t, double rate, int factor);

/** Run tone @p t through a fresh stage at @p rate and @p factor, settle, then
 *  measure a coherent record of at least @p seconds of the plugin's output
 *  samples (float, as a host receives them). Returns 0 or -1. */
int al_measure_tone(const AlTone *t, double rate, int factor, double seconds, AlResult *r);

#endif
