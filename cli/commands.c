/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "commands.h"

#include "cli.h"
#include "demo.h"
#include "figures.h"
#include "measure_out.h"
#include "plot.h"
#include "render.h"
#include "atomic.h"
#include "audio_write.h"
#include "settings.h"
#include "sweep.h"

#include <sndfile.h>

#include <math.h>
#include <stdio.h>
#include <sys/stat.h>
#include <unistd.h>

static int fail(int status, const char *msg)
{
    fprintf(stderr, "outstage: %s\n", msg);
    return status;
}

/* Say on stderr where the controls ask for what the circuit cannot have. */
static void warn_conflicts(const CliSettings *s)
{
    OsConflict c[CLI_MAX_CONFLICTS];
    const int n = os_stage_conflicts(s->kind, s->value, c, CLI_MAX_CONFLICTS);
    for (int i = 0; i < n && i < CLI_MAX_CONFLICTS; ++i) {
        char text[CLI_ERR_LEN];
        cli_conflict_text(s, &c[i], text, sizeof(text));
        fprintf(stderr, "outstage: warning: %s\n", text);
    }
}

/* The stage named by the first positional argument, with the preset and then
 * every --set applied in order. */
static int settings_from(const CliArgs *a, CliSettings *s, char *err, size_t len)
{
    OsStageKind kind;
    if (cli_stage_parse(a->pos[0], &kind) != 0) {
        cli_err(err, len, "'%s': no such stage (stages: opamp, pushpull)", a->pos[0]);
        return -1;
    }
    cli_settings_init(s, kind);
    if (a->preset && cli_settings_preset(s, a->preset, err, len) != 0) {
        return -1;
    }
    for (int i = 0; i < a->n_sets; ++i) {
        if (cli_settings_assign(s, a->sets[i], err, len) != 0) {
            return -1;
        }
    }
    cli_atomic_force(a->force);
    warn_conflicts(s);
    return 0;
}

/* What the output's encoding does to samples beyond full scale. */
static const char *clip_word(int format)
{
    switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_FLOAT:
    case SF_FORMAT_DOUBLE:
        return " (kept in this float format)";
    case SF_FORMAT_VORBIS:
    case SF_FORMAT_OPUS:
    case SF_FORMAT_MPEG_LAYER_III:
        return " (encoded as they are; players of this lossy format may clip them)";
    default:
        return " (clipped in this format)";
    }
}

int cli_cmd_render(const CliArgs *a)
{
    char err[CLI_ERR_LEN];
    CliRenderJob job = {a->pos[1], a->pos[2], a->report, {0}, !a->stream, !a->quiet};
    if (settings_from(a, &job.settings, err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    if (cli_render_check_paths(&job, err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    /* the summary must not land in the audio when OUT is standard output */
    struct stat so, st;
    FILE *say = fstat(STDOUT_FILENO, &so) == 0 && stat(job.out_path, &st) == 0 &&
                        so.st_dev == st.st_dev && so.st_ino == st.st_ino
                    ? stderr
                    : stdout;
    CliRenderResult res;
    if (cli_render(&job, &res, err, sizeof(err)) != 0) {
        cli_render_result_free(&res);
        return fail(CLI_EXIT_FAILURE, err);
    }
    uint64_t clipped = 0;
    double peak_v = 0.0, file_v = 0.0;
    for (int c = 0; c < res.channels; ++c) {
        clipped += res.ch[c].clipped;
        peak_v = fmax(peak_v, res.ch[c].peak_load_v);
        file_v = fmax(file_v, res.ch[c].out_peak * res.output_volts);
    }
    fprintf(say, "outstage: wrote %s (%d channel%s, %d Hz, %llu frames, %s; latency %u frames%s)\n",
            job.out_path, res.channels, res.channels == 1 ? "" : "s", res.rate,
            (unsigned long long)res.frames, res.format_name, (unsigned)res.latency,
            job.compensate ? " removed, the tail rendered" : " kept, as the plugin");
    if (res.header_frames > res.read_frames) {
        fprintf(stderr,
                "outstage: warning: %s: truncated: its header announces %llu frames, the file "
                "holds %llu; rendered what is there\n",
                job.in_path, (unsigned long long)res.header_frames,
                (unsigned long long)res.read_frames);
    }
    if (clipped) {
        fprintf(stderr,
                "outstage: warning: %s: %llu samples beyond 0 dBFS%s; lower trim to avoid it\n",
                job.out_path, (unsigned long long)clipped, clip_word(res.format));
    }
    if (job.settings.value[OS_P_ENABLE] > 0.5f && job.settings.value[OS_P_LISTEN] < 0.5f &&
        file_v > CLI_OVERSHOOT_NOTE * peak_v && peak_v > 0.0) {
        fprintf(stderr,
                "outstage: note: %s peaks at %.3g V of load voltage, %.0f %% above the circuit's "
                "own peak (%.3g V): band-limiting overshoots a clipped waveform (Gibbs; see "
                "the man page, --report)\n",
                job.out_path, file_v, 100.0 * (file_v / peak_v - 1.0), peak_v);
    }
    cli_render_result_free(&res);
    return 0;
}

static void sweep_spec_from(const CliArgs *a, const CliSettings *s, CliSweepSpec *spec)
{
    cli_sweep_spec_init(spec, s);
    spec->rate = isnan(a->rate) ? spec->rate : a->rate;
    spec->freq = isnan(a->freq) ? spec->freq : a->freq;
    spec->from = a->from;
    spec->to = a->to;
    spec->step = isnan(a->step) ? spec->step : a->step;
}

int cli_cmd_measure(const CliArgs *a)
{
    char err[CLI_ERR_LEN];
    CliSettings s;
    if (settings_from(a, &s, err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    if (a->wav && cli_audio_ext_check(a->wav, err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    CliSweepSpec spec;
    sweep_spec_from(a, &s, &spec);
    spec.keep_audio = a->wav != NULL;
    CliSweep sw;
    if (cli_sweep_run(&spec, &sw, err, sizeof(err)) != 0) {
        cli_sweep_free(&sw);
        return fail(cli_interrupted ? CLI_EXIT_FAILURE : CLI_EXIT_USAGE, err);
    }
    if (a->wav && cli_measure_wav(a->wav, &spec, &sw, err, sizeof(err)) != 0) {
        cli_sweep_free(&sw);
        return fail(CLI_EXIT_FAILURE, err);
    }
    if (a->json) {
        cli_measure_json(stdout, &spec, &sw);
    } else if (a->csv) {
        cli_measure_csv(stdout, &spec, &sw);
    } else {
        cli_measure_table(stdout, &spec, &sw);
    }
    cli_sweep_free(&sw);
    return 0;
}

int cli_cmd_plot(const CliArgs *a)
{
    char err[CLI_ERR_LEN];
    CliSettings s;
    CliFigure fig;
    if (settings_from(a, &s, err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    if (cli_figure_parse(a->pos[1], &fig) != 0) {
        cli_err(err, sizeof(err),
                "'%s': no such plot (transfer, thd, spectrum, impedance, response)", a->pos[1]);
        return fail(CLI_EXIT_USAGE, err);
    }
    if (cli_plot_check_path(a->pos[2], err, sizeof(err)) != 0) {
        return fail(CLI_EXIT_USAGE, err);
    }
    int rc;
    if (fig == CLI_FIG_THD) {
        CliSweepSpec spec;
        CliSweep sw;
        sweep_spec_from(a, &s, &spec);
        rc = cli_sweep_run(&spec, &sw, err, sizeof(err));
        if (rc == 0) {
            rc = cli_figure_thd(a->pos[2], &spec, &sw, err, sizeof(err));
        }
        cli_sweep_free(&sw);
    } else {
        CliFigureSpec spec;
        cli_figure_spec_init(&spec, &s);
        spec.rate = isnan(a->rate) ? spec.rate : a->rate;
        spec.freq = isnan(a->freq) ? spec.freq : a->freq;
        spec.level = a->level;
        if (fig == CLI_FIG_IMPEDANCE || fig == CLI_FIG_RESPONSE) {
            rc = cli_figure_load(a->pos[2], fig, &spec, err, sizeof(err));
        } else if (fig == CLI_FIG_TRANSFER) {
            rc = cli_figure_transfer(a->pos[2], &spec, err, sizeof(err));
        } else {
            rc = cli_figure_spectrum(a->pos[2], &spec, err, sizeof(err));
        }
    }
    return rc == 0 ? 0 : fail(CLI_EXIT_FAILURE, err);
}

int cli_cmd_demo(const CliArgs *a)
{
    char err[CLI_ERR_LEN];
    CliDemoSpec spec;
    cli_demo_spec_init(&spec);
    if (a->n_pos > 0) {
        spec.dir = a->pos[0];
    }
    if (!isnan(a->seconds)) {
        spec.seconds = a->seconds;
    }
    spec.jobs = a->jobs;
    return cli_demo_run(&spec, err, sizeof(err)) == 0 ? 0 : fail(CLI_EXIT_FAILURE, err);
}

int cli_cmd_list(void)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (!os_stage_available((OsStageKind)k)) {
            continue;
        }
        const OsStageInfo *info = os_stage_info((OsStageKind)k);
        printf("%s: %s\n", info->cli_name, info->name);
        for (uint32_t i = 0; i < os_port_count((OsStageKind)k); ++i) {
            const OsPortInfo *p = os_port_get((OsStageKind)k, i);
            if (p->type == OS_PORT_CONTROL_IN) {
                printf("  %-10s %-5s %8g .. %-8g default %g\n      %s\n", p->symbol, p->unit,
                       (double)p->min, (double)p->max, (double)p->def, p->comment);
            }
        }
    }
    printf("presets:\n");
    for (size_t i = 0; i < cli_preset_count(); ++i) {
        const CliPreset *p = cli_preset_get(i);
        printf("  %s: %s\n   ", p->name, p->summary);
        for (const CliPresetValue *v = p->set; v->symbol; ++v) {
            printf(" %s=%g", v->symbol, (double)v->value);
        }
        printf("\n");
    }
    return 0;
}
