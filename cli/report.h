/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The JSON report of a render (--report FILE.json): the file, the settings and
 * the meters of every channel, and any clipping of the output file itself. */

#ifndef CLI_REPORT_H
#define CLI_REPORT_H

#include <stdio.h>

#include "render.h"

/** Write the report of @p res, rendered from @p job, to @p f. */
void cli_report_render(FILE *f, const CliRenderJob *job, const CliRenderResult *res);

/** Write the settings of @p s as one JSON object {"symbol": value, ...} in port order. */
void cli_report_settings(FILE *f, const CliSettings *s);

/** The impossible combinations of @p s (os_stage_conflicts()) as a JSON array
 *  of strings, [] if none. */
void cli_report_conflicts(FILE *f, const CliSettings *s);

#endif
