/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "options.h"

#include "cli.h"
#include "settings.h"

#include "outstage.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Which commands take an option. */
#define R (1u << CLI_CMD_RENDER)
#define M (1u << CLI_CMD_MEASURE)
#define P (1u << CLI_CMD_PLOT)
#define D (1u << CLI_CMD_DEMO)

typedef enum {
    O_SET,
    O_PRESET,
    O_REPORT,
    O_COMPENSATE,
    O_STREAM,
    O_FORCE,
    O_QUIET,
    O_FREQ,
    O_RATE,
    O_FROM,
    O_TO,
    O_STEP,
    O_LEVEL,
    O_JSON,
    O_CSV,
    O_WAV,
    O_SECONDS,
    O_JOBS,
    O_HELP,
    O_VERSION
} OptionId;

typedef struct {
    const char *name;
    const char *arg; /* NULL: a flag */
    const char *help;
    /* a number's range (lo < hi), and whether it must be whole; the same rule
     * wherever the option appears */
    double lo, hi;
    unsigned commands;
    int whole;
} Option;

/* Sweep and sine levels, dBFS: above +60 the stage's input clamp is reached
 * (dsp/os_stage.c); below -200 nothing is left of a float's resolution. */
#define LEVEL_LO (-200.0)
#define LEVEL_HI 60.0

static const Option options[] = {
    [O_SET] = {"set", "SYMBOL=VALUE",
               "set a control by its port symbol (repeatable; after any preset); see "
               "'outstage list'",
               0, 0, R | M | P, 0},
    [O_PRESET] = {"preset", "NAME", "start from one of our designs (see 'outstage list')", 0, 0,
                  R | M | P, 0},
    [O_REPORT] = {"report", "FILE.json",
                  "write the meters of every channel and the output's clipping as JSON", 0, 0, R,
                  0},
    [O_COMPENSATE] = {"compensate", NULL,
                      "align the output with the input, as long (the default; kept for scripts)", 0,
                      0, R, 0},
    [O_STREAM] = {"stream", NULL,
                  "write the plugin's own stream instead: the latency kept at the start, the "
                  "length the input's, the tail cut (equals the LV2 plugin's output)",
                  0, 0, R, 0},
    [O_FORCE] = {"force", NULL, "replace outputs that are write-protected (mode 444 and the like)",
                 0, 0, R | M | P | D, 0},
    [O_QUIET] = {"quiet", NULL, "no progress bar", 0, 0, R, 0},
    [O_FREQ] = {"freq", "HZ",
                "sine frequency (default 1000), moved to the nearest one with whole cycles in "
                "the record; below 0.45 x the rate",
                1.0, 0.45 * OS_RATE_MAX, M | P, 0},
    [O_RATE] = {"rate", "HZ", "sample rate of the simulation (default 48000)", OS_RATE_MIN,
                OS_RATE_MAX, M | P, 1},
    [O_FROM] = {"from", "DBFS", "lowest sweep level (default: 48 dB below the top)", LEVEL_LO,
                LEVEL_HI, M | P, 0},
    [O_TO] = {"to", "DBFS",
              "highest sweep level (default: 6 dB above where the stage should reach its limit)",
              LEVEL_LO, LEVEL_HI, M | P, 0},
    [O_STEP] = {"step", "DB", "sweep step (default 1)", 0.01, 60.0, M | P, 0},
    [O_LEVEL] = {"level", "DBFS",
                 "sine level for transfer and spectrum (default: 6 dB above, resp. 3 dB below, "
                 "where the stage should reach its limit)",
                 LEVEL_LO, LEVEL_HI, P, 0},
    [O_JSON] = {"json", NULL, "print one JSON object instead of the table", 0, 0, M, 0},
    [O_CSV] = {"csv", NULL, "print CSV instead of the table", 0, 0, M, 0},
    [O_WAV] = {"wav", "FILE.wav",
               "also write each level's analysed record, one after another, as 32-bit float "
               "(WAV, or the container the name's extension asks for)",
               0, 0, M, 0},
    [O_SECONDS] = {"seconds", "S", "length of the demo material (default 8)", 3.0, 600.0, D, 0},
    [O_JOBS] = {"jobs", "N", "worker threads (default: one per processor)", 1.0, 64.0, D, 1},
    [O_HELP] = {"help", NULL, "this text", 0, 0, R | M | P | D, 0},
    [O_VERSION] = {"version", NULL, "the version", 0, 0, R | M | P | D, 0},
};

#define N_OPTIONS (sizeof(options) / sizeof(options[0]))

static const char *const command_names[CLI_CMD_COUNT] = {"render", "measure", "plot",   "demo",
                                                         "list",   "help",    "version"};

size_t cli_option_count(void)
{
    return N_OPTIONS;
}

const char *cli_option_name(size_t i)
{
    return i < N_OPTIONS ? options[i].name : NULL;
}

static int apply(CliArgs *a, OptionId id, const char *value, char *err, size_t len)
{
    const Option *o = &options[id];
    switch (id) {
    case O_SET:
        if (a->n_sets >= CLI_MAX_SETS) {
            cli_err(err, len, "--set: at most %d values", CLI_MAX_SETS);
            return -1;
        }
        a->sets[a->n_sets++] = value;
        return 0;
    case O_PRESET:
        a->preset = value;
        return 0;
    case O_REPORT:
        a->report = value;
        return 0;
    case O_WAV:
        a->wav = value;
        return 0;
    case O_COMPENSATE:
        a->stream = 0;
        return 0;
    case O_STREAM:
        a->stream = 1;
        return 0;
    case O_FORCE:
        a->force = 1;
        return 0;
    case O_QUIET:
        a->quiet = 1;
        return 0;
    case O_JSON:
        a->json = 1;
        return 0;
    case O_CSV:
        a->csv = 1;
        return 0;
    case O_HELP:
        a->command = CLI_CMD_HELP;
        return 0;
    case O_VERSION:
        a->command = CLI_CMD_VERSION;
        return 0;
    default:
        break;
    }
    char what[32];
    snprintf(what, sizeof(what), "--%s", o->name);
    double v = 0.0;
    if (cli_number_in(what, value, o->lo, o->hi, o->whole, &v, err, len) != 0) {
        return -1;
    }
    if (id == O_JOBS) {
        a->jobs = (int)v;
        return 0;
    }
    double *slot[] = {
        [O_FREQ] = &a->freq, [O_RATE] = &a->rate,   [O_FROM] = &a->from,      [O_TO] = &a->to,
        [O_STEP] = &a->step, [O_LEVEL] = &a->level, [O_SECONDS] = &a->seconds};
    *slot[id] = v;
    return 0;
}

/* Positional arguments each command takes: at least, at most. */
static void arity(CliCommand c, int *lo, int *hi, const char **usage)
{
    static const struct {
        int lo, hi;
        const char *usage;
    } t[CLI_CMD_COUNT] = {
        {3, 3, "outstage render STAGE IN OUT [options]"},
        {1, 1, "outstage measure STAGE [options]"},
        {3, 3,
         "outstage plot STAGE transfer|thd|spectrum|impedance|response OUT.png|OUT.svg "
         "[options]"},
        {0, 1, "outstage demo [DIR] [options]"},
        {0, 0, "outstage list"},
        {0, 0, "outstage help"},
        {0, 0, "outstage version"},
    };
    *lo = t[c].lo;
    *hi = t[c].hi;
    *usage = t[c].usage;
}

int cli_args_parse(int argc, char **argv, CliArgs *a, char *err, size_t len)
{
    memset(a, 0, sizeof(*a));
    a->freq = a->rate = a->from = a->to = a->step = a->level = a->seconds = (double)NAN;
    if (argc < 2) {
        cli_err(err, len, "no command; try 'outstage --help'");
        return -1;
    }
    const char *cmd = argv[1];
    int first = 2;
    a->command = CLI_CMD_COUNT;
    for (int c = 0; c < CLI_CMD_COUNT; ++c) {
        if (strcmp(cmd, command_names[c]) == 0) {
            a->command = (CliCommand)c;
        }
    }
    if (strcmp(cmd, "--help") == 0 || strcmp(cmd, "-h") == 0) {
        a->command = CLI_CMD_HELP;
    } else if (strcmp(cmd, "--version") == 0 || strcmp(cmd, "-V") == 0) {
        a->command = CLI_CMD_VERSION;
    } else if (a->command == CLI_CMD_COUNT) {
        cli_err(err, len, "'%s': no such command (render, measure, plot, demo, list, help)", cmd);
        return -1;
    }
    const CliCommand command = a->command;
    int only_positional = 0;
    for (int i = first; i < argc; ++i) {
        const char *arg = argv[i];
        if (only_positional || arg[0] != '-' || arg[1] == '\0') {
            if (a->n_pos >= 4) {
                cli_err(err, len, "'%s': too many arguments", arg);
                return -1;
            }
            a->pos[a->n_pos++] = arg;
            continue;
        }
        if (strcmp(arg, "--") == 0) {
            only_positional = 1;
            continue;
        }
        const char *name = arg[1] == '-' ? arg + 2 : NULL;
        if (strcmp(arg, "-h") == 0) {
            name = "help";
        } else if (strcmp(arg, "-V") == 0) {
            name = "version";
        }
        const char *eq = name ? strchr(name, '=') : NULL;
        const size_t nlen = name ? (eq ? (size_t)(eq - name) : strlen(name)) : 0;
        size_t k = N_OPTIONS;
        for (size_t o = 0; name && o < N_OPTIONS; ++o) {
            if (strlen(options[o].name) == nlen && strncmp(options[o].name, name, nlen) == 0) {
                k = o;
            }
        }
        if (k == N_OPTIONS) {
            cli_err(err, len, "'%s': no such option; try 'outstage --help'", arg);
            return -1;
        }
        const Option *o = &options[k];
        if (command < CLI_CMD_LIST && !(o->commands & (1u << command)) && k != O_HELP &&
            k != O_VERSION) {
            cli_err(err, len, "--%s: not an option of %s; try 'outstage --help'", o->name,
                    command_names[command]);
            return -1;
        }
        const char *value = NULL;
        if (o->arg) {
            if (eq) {
                value = eq + 1;
            } else if (i + 1 < argc) {
                value = argv[++i];
            } else {
                cli_err(err, len, "--%s needs a value (%s)", o->name, o->arg);
                return -1;
            }
        } else if (eq) {
            cli_err(err, len, "--%s takes no value", o->name);
            return -1;
        }
        if (apply(a, (OptionId)k, value, err, len) != 0) {
            return -1;
        }
    }
    if (a->command == CLI_CMD_HELP || a->command == CLI_CMD_VERSION) {
        return 0;
    }
    int lo, hi;
    const char *usage;
    arity(a->command, &lo, &hi, &usage);
    if (a->n_pos < lo || a->n_pos > hi) {
        cli_err(err, len, "%s arguments; usage: %s", a->n_pos < lo ? "missing" : "too many", usage);
        return -1;
    }
    if (a->json && a->csv) {
        cli_err(err, len, "--json and --csv: choose one");
        return -1;
    }
    if (!isnan(a->freq) && a->freq >= 0.45 * (isnan(a->rate) ? CLI_DEFAULT_RATE : a->rate)) {
        cli_err(err, len, "--freq %g: the sine must lie below %g Hz (0.45 x the rate)", a->freq,
                0.45 * (isnan(a->rate) ? CLI_DEFAULT_RATE : a->rate));
        return -1;
    }
    if (!isnan(a->from) && !isnan(a->to) && a->from > a->to) {
        cli_err(err, len, "--from %g --to %g: the lowest level must not lie above the highest",
                a->from, a->to);
        return -1;
    }
    return 0;
}

/* Print @p text from column @p indent, wrapped at word boundaries before column
 * @p width, continuation lines indented as well. */
static void wrap(FILE *f, const char *text, int indent, int width)
{
    int col = indent;
    const char *w = text;
    while (*w) {
        while (*w == ' ') {
            ++w;
        }
        const char *e = w;
        while (*e && *e != ' ') {
            ++e;
        }
        const int n = (int)(e - w);
        if (n == 0) {
            break;
        }
        if (col > indent && col + 1 + n > width) {
            fprintf(f, "\n%*s", indent - 1, "");
            col = indent;
        }
        fprintf(f, " %.*s", n, w);
        col += n + 1;
        w = e;
    }
    fputc('\n', f);
}

void cli_help(FILE *f)
{
    fputs("outstage: amplifier output stages simulated as circuits, for files and the bench\n"
          "\n"
          "usage:\n",
          f);
    for (int c = 0; c < CLI_CMD_LIST; ++c) {
        int lo, hi;
        const char *usage;
        arity((CliCommand)c, &lo, &hi, &usage);
        fprintf(f, "  %s\n", usage);
    }
    fputs("  outstage list      every control (unit, range, default) and preset\n"
          "  outstage --help | --version\n"
          "\n"
          "  render   process IN (any format libsndfile reads) through STAGE, one instance\n"
          "           per channel; OUT keeps IN's rate, channels and format, written\n"
          "           atomically\n"
          "  measure  step a sine's level through STAGE: peak load voltage, THD, THD+N,\n"
          "           load power per level, the clip onset (THD from there on >= 1 %) and\n"
          "           the largest clean power\n"
          "  plot     transfer (load voltage against input voltage), thd (THD against load\n"
          "           power, log-log), spectrum (of a sine), impedance (of the load, closed\n"
          "           form and through the stage) or response (small-signal gain into the\n"
          "           load against frequency), as PNG or SVG\n"
          "  demo     make program material, render it through both stages at three\n"
          "           designs, write audio, plots and a report into DIR (default\n"
          "           outstage-demo)\n"
          "\n"
          "STAGE is one of:",
          f);
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (os_stage_available((OsStageKind)k)) {
            fprintf(f, " %s", cli_stage_name((OsStageKind)k));
        }
    }
    fputs("\n\noptions (the commands that take each in brackets):\n", f);
    for (size_t i = 0; i < N_OPTIONS; ++i) {
        char head[64], cmds[64];
        size_t used = 0;
        snprintf(head, sizeof(head), "--%s%s%s", options[i].name, options[i].arg ? " " : "",
                 options[i].arg ? options[i].arg : "");
        cmds[0] = '\0';
        for (int c = 0; c < CLI_CMD_LIST; ++c) {
            if (options[i].commands & (1u << c)) {
                used += (size_t)snprintf(cmds + used, sizeof(cmds) - used, "%s%s", used ? "," : "",
                                         command_names[c]);
            }
        }
        char text[512], range[96] = "";
        if (options[i].lo < options[i].hi) {
            snprintf(range, sizeof(range), "; %s%g to %g",
                     options[i].whole ? "a whole number " : "", options[i].lo, options[i].hi);
        }
        snprintf(text, sizeof(text), "%s%s [%s]", options[i].help, range, cmds);
        fprintf(f, "  %-22s", head);
        wrap(f, text, 25, 79);
    }
    fputs("\npresets:\n", f);
    for (size_t i = 0; i < cli_preset_count(); ++i) {
        const CliPreset *p = cli_preset_get(i);
        fprintf(f, "  %-18s", p->name);
        wrap(f, p->summary, 21, 79);
    }
    fputs("\nExit status: 0 success, 1 a file could not be read or written, 2 a wrong\n"
          "command line. Caution: high drive and the listen residual can be loud; lower\n"
          "the monitoring level first. See man outstage.\n",
          f);
}
