/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The demo's results and its report: report.txt (also printed) and report.json
 * in the demo folder. */

#ifndef CLI_DEMO_REPORT_H
#define CLI_DEMO_REPORT_H

#include <stddef.h>

#include "demo_audio.h"
#include "render.h"
#include "settings.h"
#include "sweep.h"

/** Number of designs the demo renders (each through every stage). */
#define CLI_DEMO_DESIGNS 3

/** A design of the demo: a preset and the material's level at the stage. */
typedef struct {
    const char *slug;  /**< preset name and file prefix */
    const char *title; /**< one line for the report */
    double fullscale;  /**< V peak per 0 dBFS */
    double drive;      /**< dB; trim is its negative */
} CliDemoDesign;

/** The demo's designs. */
extern const CliDemoDesign cli_demo_designs[CLI_DEMO_DESIGNS];

/** One design through one stage, and what came of it. */
typedef struct {
    const CliDemoDesign *design;
    CliSettings settings;
    CliRenderResult render;
    CliSweep sweep;
    CliDemoAudio audio;
    char name[96]; /**< file prefix: design-stage */
    int failed;
    char err[1024];
} CliDemoJob;

/** The run as a whole. */
typedef struct {
    const char *dir;
    double seconds; /**< material length, s */
    int rate;       /**< Hz */
    size_t threads;
    double elapsed; /**< wall-clock time so far, s */
} CliDemoSummary;

/** Write report.txt and report.json into the demo folder and print the text
 *  report on standard output. Returns 0 or -1 with a message. */
int cli_demo_report(const CliDemoSummary *sum, const CliDemoJob *job, size_t n_jobs, char *err,
                    size_t len);

#endif
