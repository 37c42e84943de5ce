/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Program material the demo makes for itself, deterministic to the sample: a
 * plucked bass line and a drum pattern whose peaks reach the stage's limits,
 * over a quiet sustained pad that is left alone at the end, where crossover
 * distortion has nothing louder to hide behind. */

#ifndef CLI_MATERIAL_H
#define CLI_MATERIAL_H

#include <stddef.h>

/** Peak of the material, dBFS. */
#define CLI_MATERIAL_PEAK_DBFS (-3.0)
/** Peak of the pad, dBFS: 18 dB under the mix, so that alone it still reaches
 *  past a class-B pair's dead zone at the demo's designs, partly. */
#define CLI_MATERIAL_PAD_DBFS (-21.0)

/**
 * Fill @p x with @p n mono frames at @p rate Hz: 120 beats per minute, the
 * groove for all but the last 2 s, the pad throughout and alone at the end.
 * Peak exactly CLI_MATERIAL_PEAK_DBFS.
 */
void cli_material(float *x, size_t n, double rate);

/** Start of the pad-alone passage, s, for @p seconds of material. */
double cli_material_quiet_start(double seconds);

#endif
