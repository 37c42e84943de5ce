/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage: the command-line tool. See docs/outstage.1 and `outstage --help`. */

#include "cli.h"
#include "commands.h"
#include "options.h"
#include "plot.h"

#include <stdio.h>

#ifndef OUTSTAGE_VERSION
#define OUTSTAGE_VERSION "unknown"
#endif

int main(int argc, char **argv)
{
    char err[CLI_ERR_LEN];
    CliArgs a;
    if (cli_args_parse(argc, argv, &a, err, sizeof(err)) != 0) {
        fprintf(stderr, "outstage: %s\n", err);
        return CLI_EXIT_USAGE;
    }
    cli_catch_signals();
    int status;
    switch (a.command) {
    case CLI_CMD_RENDER:
        return cli_cmd_render(&a);
    case CLI_CMD_MEASURE:
        return cli_cmd_measure(&a);
    case CLI_CMD_PLOT:
        status = cli_cmd_plot(&a);
        cli_plot_cleanup();
        return status;
    case CLI_CMD_DEMO:
        status = cli_cmd_demo(&a);
        cli_plot_cleanup();
        return status;
    case CLI_CMD_LIST:
        return cli_cmd_list();
    case CLI_CMD_VERSION:
        printf("outstage %s\n", OUTSTAGE_VERSION);
        return 0;
    case CLI_CMD_HELP:
    case CLI_CMD_COUNT:
        break;
    }
    cli_help(stdout);
    return 0;
}
