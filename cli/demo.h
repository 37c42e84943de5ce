/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage demo: the tool's main job on an embedded default. It makes its own
 * program material, renders it through both stages at three designs of our
 * own, measures each (level sweep at 1 kHz), draws the transfer curve and THD
 * against power of each, and writes the audio, the plots and a short report
 * into one folder. */

#ifndef CLI_DEMO_H
#define CLI_DEMO_H

#include <stddef.h>

/** What to make. */
typedef struct {
    const char *dir; /**< output folder, created if missing */
    double seconds;  /**< material length, s */
    int jobs;        /**< worker threads; 0: one per processor */
} CliDemoSpec;

/** Defaults: "outstage-demo", 8 s, one thread per processor. */
void cli_demo_spec_init(CliDemoSpec *spec);

/**
 * Run the demo, printing the report to standard output as well. Returns 0, or
 * -1 with a message (folder not writable, interrupted, ...).
 */
int cli_demo_run(const CliDemoSpec *spec, char *err, size_t len);

#endif
