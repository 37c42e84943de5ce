/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The figures of outstage plot: the transfer curve (load voltage against stage
 * input voltage), THD against output power (log-log, as amplifier data is
 * shown), and the spectrum of a sine through the stage. */

#ifndef CLI_FIGURES_H
#define CLI_FIGURES_H

#include <stddef.h>

#include "settings.h"
#include "sweep.h"

/** Which figure. */
typedef enum {
    CLI_FIG_TRANSFER,
    CLI_FIG_THD,
    CLI_FIG_SPECTRUM,
    CLI_FIG_IMPEDANCE,
    CLI_FIG_RESPONSE
} CliFigure;

/** "transfer", "thd", "spectrum", "impedance" or "response": 0 and *fig, or -1. */
int cli_figure_parse(const char *name, CliFigure *fig);

/** The sine a figure drives the stage with. */
typedef struct {
    CliSettings settings;
    double rate;  /**< Hz */
    double freq;  /**< spectrum (and thd sweep) frequency, Hz */
    double level; /**< transfer and spectrum level, dBFS; NAN: automatic */
} CliFigureSpec;

/** Defaults: 48 kHz, 1 kHz, automatic level. */
void cli_figure_spec_init(CliFigureSpec *spec, const CliSettings *s);

/**
 * The transfer curve: one cycle of a 50 Hz sine (slow enough that the
 * gain-bandwidth and slew rate play no part) at @p spec->level (automatic: 6 dB
 * above the level where the stage should reach its limit), load voltage
 * against the stage input voltage that produced it (aligned by the latency),
 * with the ideal G x vin dashed. Returns 0 or -1 with a message.
 */
int cli_figure_transfer(const char *path, const CliFigureSpec *spec, char *err, size_t len);

/** THD and THD+N (%) against load power (W) of a finished sweep, log-log, with
 *  the 1 % line and the clip onset marked. Returns 0 or -1 with a message. */
int cli_figure_thd(const char *path, const CliSweepSpec *spec, const CliSweep *sw, char *err,
                   size_t len);

/**
 * The spectrum of the load voltage, in dBV (dB re 1 V rms) per bin against
 * frequency (log axis), for a sine at @p spec->freq and @p spec->level
 * (automatic: 3 dB below where the stage should reach its limit), 0.2 s
 * record of whole cycles, rectangular window. Returns 0 or -1 with a message.
 */
int cli_figure_spectrum(const char *path, const CliFigureSpec *spec, char *err, size_t len);

/**
 * The load through the stage at one frequency: a sine of @p amp full-scale
 * units at @p f Hz, after the stage settles (20 cycles or 0.1 s, plus six of a
 * driver's decay times Qms / (pi fs), at most 2 s), over whole cycles of at
 * least 50 ms: *z = peak load voltage / peak load current (the load's |Z| for
 * a sine), *gain_db = the peak load voltage over G x the input's, dB.
 * Returns 0 or -1 with a message.
 */
int cli_load_point(const CliSettings *s, double rate, double amp, double f, double *z,
                   double *gain_db, char *err, size_t len);

/**
 * CLI_FIG_IMPEDANCE: the load's |Z| against frequency (log-log), its closed
 * form (os_load_impedance_of()) and 25 points measured through the stage
 * (cli_load_point(), 10 Hz - 10 kHz), Re dotted. CLI_FIG_RESPONSE: the
 * stage's small-signal gain into the load, load voltage over G x input in dB,
 * at 25 frequencies from 10 Hz to 20 kHz. Level @p spec->level (automatic:
 * 20 dB below where the stage should reach its limit). Returns 0 or -1 with a
 * message.
 */
int cli_figure_load(const char *path, CliFigure fig, const CliFigureSpec *spec, char *err,
                    size_t len);

#endif
