/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What outstage measure prints or writes: a table for people, JSON (the
 * contract's object), CSV, and the analysed records as a WAV file. */

#ifndef CLI_MEASURE_OUT_H
#define CLI_MEASURE_OUT_H

#include <stdio.h>

#include "sweep.h"

/** The human-readable table with the clip onset and the largest clean power. */
void cli_measure_table(FILE *f, const CliSweepSpec *spec, const CliSweep *sw);

/** One JSON object: stage, freq_hz, settings, sweep[...], clip_onset, largest_clean. */
void cli_measure_json(FILE *f, const CliSweepSpec *spec, const CliSweep *sw);

/** CSV with a header row; clip_onset and largest_clean columns mark those rows. */
void cli_measure_csv(FILE *f, const CliSweepSpec *spec, const CliSweep *sw);

/**
 * Write every level's analysed record, one after another, as a mono 32-bit
 * float WAV at the sweep's rate (atomically). Samples are the stage's output
 * at trim 0 dB: load voltage / (G x fullscale). Returns 0 or -1 with a message.
 */
int cli_measure_wav(const char *path, const CliSweepSpec *spec, const CliSweep *sw, char *err,
                    size_t len);

#endif
