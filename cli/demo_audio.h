/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What the demo does with a rendered file: how far it departs from the
 * material (the residual, in the loud groove and in the quiet pad passage,
 * where crossover shows), and normalising its peak so that every file plays
 * at the material's peak and none clips. */

#ifndef CLI_DEMO_AUDIO_H
#define CLI_DEMO_AUDIO_H

#include <stddef.h>
#include <stdint.h>

/** Residuals of one render, dB relative to the material's rms in each span. */
typedef struct {
    double groove_db; /**< while bass and drums play */
    double quiet_db;  /**< the pad alone */
    double gain_db;   /**< normalisation applied to the file */
    double peak_dbfs; /**< the file's peak afterwards */
} CliDemoAudio;

/**
 * Read the mono render @p path, compare it with @p material (@p n frames at
 * @p rate Hz; the render lags it by @p latency frames and is level-matched to
 * it), then rewrite it (same format, atomically) scaled so that its peak is
 * @p peak_dbfs. @p quiet_start is where the pad plays alone, s. Returns 0 or
 * -1 with a message.
 */
int cli_demo_audio(const char *path, const float *material, size_t n, double rate, uint32_t latency,
                   double quiet_start, double peak_dbfs, CliDemoAudio *out, char *err, size_t len);

#endif
