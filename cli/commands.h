/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The commands, from a parsed command line to an exit status. Each prints its
 * own one-line error message on standard error. */

#ifndef CLI_COMMANDS_H
#define CLI_COMMANDS_H

#include "options.h"

/** outstage render. Returns the exit status. */
int cli_cmd_render(const CliArgs *a);

/** outstage measure. Returns the exit status. */
int cli_cmd_measure(const CliArgs *a);

/** outstage plot. Returns the exit status. */
int cli_cmd_plot(const CliArgs *a);

/** outstage demo. Returns the exit status. */
int cli_cmd_demo(const CliArgs *a);

/** outstage list: every stage's controls and the presets. Returns 0. */
int cli_cmd_list(void);

#endif
