/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* A bench amplifier test in software: a sine at one frequency, stepped in level
 * across the stage's range; at each level, after the stage settles, one record
 * of the load voltage holding a whole number of cycles gives the peak load
 * voltage, THD and THD+N (analysis/spectrum.h), and the stage's meters give
 * the load power, peak current, time in current limit and dissipation. */

#ifndef CLI_SWEEP_H
#define CLI_SWEEP_H

#include <stddef.h>

#include "settings.h"

/** THD at which the output counts as clipped (the contract's clip onset): 1 %. */
#define CLI_CLIP_THD 0.01

/** What to sweep. */
typedef struct {
    CliSettings settings;
    double rate;    /**< host rate, Hz */
    double freq;    /**< asked sine frequency, Hz (moved to the nearest whole-cycle one) */
    double from;    /**< lowest level, dBFS (NAN: automatic) */
    double to;      /**< highest level, dBFS (NAN: automatic) */
    double step;    /**< level step, dB */
    double record;  /**< analysed record per level, s */
    int keep_audio; /**< keep every record's output for --wav */
} CliSweepSpec;

/** One level. */
typedef struct {
    double level_dbfs;   /**< input sine peak, dBFS */
    double vin_peak;     /**< stage input voltage, peak, V */
    double vout_peak;    /**< load voltage, peak, V */
    double thd;          /**< IEC 60268-3 THD, ratio */
    double thdn;         /**< THD+N in 20 Hz .. 20 kHz, ratio */
    double load_power;   /**< mean power into the load, W */
    double peak_current; /**< largest |load current|, A */
    double limiting;     /**< time in current limit, % */
    double dissipation;  /**< transistor dissipation, W (push-pull) */
} CliSweepPoint;

/** A finished sweep. */
typedef struct {
    double freq;       /**< frequency measured, Hz */
    size_t record;     /**< frames per record */
    size_t cycles;     /**< cycles per record */
    double band_hi;    /**< top of the measurement band, Hz */
    CliSweepPoint *pt; /**< levels, rising */
    size_t n;          /**< number of levels */
    long onset;        /**< index of the clip onset, or -1 */
    long clean;        /**< index of the largest clean power, or -1 */
    float *audio;      /**< n x record output samples at trim 0 dB, if kept */
} CliSweep;

/** Defaults: 1 kHz at 48 kHz, automatic range in 1 dB steps, 0.1 s records. */
void cli_sweep_spec_init(CliSweepSpec *spec, const CliSettings *s);

/**
 * The automatic range: from 48 dB below to 6 dB above the level at which the
 * stage should reach its limit (cli_settings_expected_limit()).
 */
void cli_sweep_auto_range(const CliSettings *s, double *from, double *to);

/**
 * Run the sweep. Returns 0, or -1 with a message (bad range, rate, no memory,
 * interrupted). Free @p out with cli_sweep_free() either way.
 *
 * The clip onset is the lowest level whose THD reaches 1 % after a lower level
 * stayed below it (THD rising through 1 %); a class-B stage whose crossover
 * keeps THD above 1 % at the lowest levels is thus not reported as clipping
 * there. The largest clean power is the largest load power among the levels
 * below the onset whose THD is below 1 %.
 */
int cli_sweep_run(const CliSweepSpec *spec, CliSweep *out, char *err, size_t len);

/** Free what cli_sweep_run() allocated. */
void cli_sweep_free(CliSweep *sw);

/**
 * Run the stage of @p s at @p rate over a sine of peak @p amp (full-scale
 * units) with @p cycles cycles per @p n frames, for @p settle frames and then
 * one record of @p n frames. Load voltage into @p vload (n values), output
 * into @p out (n values, may be NULL); meters, time-weighted over the record,
 * into @p pt (peak current, limiting, load power, dissipation). Returns 0 or
 * -1 (message in @p err).
 */
int cli_sine_record(const CliSettings *s, double rate, double amp, size_t cycles, size_t n,
                    size_t settle, double *vload, float *out, CliSweepPoint *pt, char *err,
                    size_t len);

#endif
