/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The command line: one table of options (name, argument, the commands that
 * take it, help text) from which the parser, --help and the tests all work,
 * so that an option cannot be added without its help. */

#ifndef CLI_OPTIONS_H
#define CLI_OPTIONS_H

#include <stddef.h>
#include <stdio.h>

/** The commands. */
typedef enum {
    CLI_CMD_RENDER = 0,
    CLI_CMD_MEASURE,
    CLI_CMD_PLOT,
    CLI_CMD_DEMO,
    CLI_CMD_LIST,
    CLI_CMD_HELP,
    CLI_CMD_VERSION,
    CLI_CMD_COUNT
} CliCommand;

/** Most --set values one command line takes. */
#define CLI_MAX_SETS 64

/** The simulation's rate unless --rate says otherwise, Hz. */
#define CLI_DEFAULT_RATE 48000.0

/** A parsed command line. Numbers left NAN were not given. */
typedef struct {
    CliCommand command;
    const char *pos[4]; /**< positional arguments after the command */
    int n_pos;
    const char *sets[CLI_MAX_SETS]; /**< --set values, in order */
    int n_sets;
    const char *preset; /**< --preset, or NULL */
    const char *report; /**< --report */
    const char *wav;    /**< --wav */
    int stream;         /**< --stream: the plugin's own stream, not aligned with the input */
    int force;          /**< --force: replace write-protected outputs */
    int quiet, json, csv;
    double freq, rate, from, to, step, level, seconds;
    int jobs;
} CliArgs;

/**
 * Parse argv. Returns 0, or -1 with a one-line message (unknown command or
 * option, an option the command does not take, a missing or malformed value,
 * a wrong number of positional arguments).
 */
int cli_args_parse(int argc, char **argv, CliArgs *a, char *err, size_t len);

/** The full --help text. */
void cli_help(FILE *f);

/** Number of options in the table. */
size_t cli_option_count(void);

/** Long name of option @p i (without the dashes), or NULL. */
const char *cli_option_name(size_t i);

#endif
