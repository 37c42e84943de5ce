/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "report.h"

#include "json.h"

#include <math.h>

void cli_report_settings(FILE *f, const CliSettings *s)
{
    int first = 1;
    fputc('{', f);
    for (uint32_t i = 0; i < os_port_count(s->kind); ++i) {
        const OsPortInfo *port = os_port_get(s->kind, i);
        if (port->type == OS_PORT_CONTROL_IN) {
            cli_json_key(f, port->symbol, first);
            /* A float holds 7 significant digits: 0.65, not 0.6499999762. */
            fprintf(f, "%.7g", (double)s->value[port->id]);
            first = 0;
        }
    }
    fputc('}', f);
}

void cli_report_conflicts(FILE *f, const CliSettings *s)
{
    OsConflict c[CLI_MAX_CONFLICTS];
    const int n = os_stage_conflicts(s->kind, s->value, c, CLI_MAX_CONFLICTS);
    fputc('[', f);
    for (int i = 0; i < n && i < CLI_MAX_CONFLICTS; ++i) {
        char text[1024];
        cli_conflict_text(s, &c[i], text, sizeof(text));
        if (i) {
            fputs(", ", f);
        }
        cli_json_string(f, text);
    }
    fputc(']', f);
}

/* 20 log10 of a peak, or null for silence. */
static void dbfs(FILE *f, double peak)
{
    cli_json_number(f, peak > 0.0 ? 20.0 * log10(peak) : (double)NAN);
}

void cli_report_render(FILE *f, const CliRenderJob *job, const CliRenderResult *res)
{
    uint64_t clipped = 0;
    fputs("{\n  ", f);
    cli_json_key(f, "stage", 1);
    cli_json_string(f, cli_stage_name(job->settings.kind));
    fputs(",\n  ", f);
    cli_json_key(f, "input", 1);
    cli_json_string(f, job->in_path);
    fputs(",\n  ", f);
    cli_json_key(f, "output", 1);
    cli_json_string(f, job->out_path);
    fputs(",\n  ", f);
    cli_json_key(f, "format", 1);
    cli_json_string(f, res->format_name);
    cli_json_key(f, "sample_rate", 0);
    fprintf(f, "%d", res->rate);
    cli_json_key(f, "channel_count", 0);
    fprintf(f, "%d", res->channels);
    cli_json_key(f, "frames", 0);
    fprintf(f, "%llu", (unsigned long long)res->frames);
    cli_json_key(f, "latency_frames", 0);
    fprintf(f, "%u", (unsigned)res->latency);
    cli_json_key(f, "latency_compensated", 0);
    fputs(job->compensate ? "true" : "false", f);
    cli_json_key(f, "input_header_frames", 0);
    fprintf(f, "%llu", (unsigned long long)res->header_frames);
    cli_json_key(f, "input_frames", 0);
    fprintf(f, "%llu", (unsigned long long)res->read_frames);
    cli_json_key(f, "input_truncated", 0);
    fputs(res->header_frames > res->read_frames ? "true" : "false", f);
    fputs(",\n  ", f);
    cli_json_key(f, "warnings", 1);
    cli_report_conflicts(f, &job->settings);
    fputs(",\n  ", f);
    cli_json_key(f, "settings", 1);
    cli_report_settings(f, &job->settings);
    fputs(",\n  ", f);
    cli_json_key(f, "channels", 1);
    fputs("[\n", f);
    for (int c = 0; c < res->channels; ++c) {
        const CliChannelStats *s = &res->ch[c];
        clipped += s->clipped;
        fputs("    {", f);
        cli_json_key(f, "channel", 1);
        fprintf(f, "%d", c + 1);
        cli_json_key(f, "peak_current_a", 0);
        cli_json_number(f, s->peak_current);
        cli_json_key(f, "limiting_percent", 0);
        cli_json_number(f, s->limiting);
        cli_json_key(f, "load_power_w", 0);
        cli_json_number(f, s->load_power);
        if (job->settings.kind == OS_STAGE_PUSHPULL) {
            cli_json_key(f, "dissipation_w", 0);
            cli_json_number(f, s->dissipation);
        }
        cli_json_key(f, "output_peak_dbfs", 0);
        dbfs(f, s->out_peak);
        /* the circuit's own peak, and the file's in the same volts: the file's
         * band-limited samples overshoot a clipped waveform's (man page) */
        cli_json_key(f, "peak_load_v", 0);
        cli_json_number(f, s->peak_load_v);
        cli_json_key(f, "output_peak_load_v", 0);
        cli_json_number(f, s->out_peak * res->output_volts);
        cli_json_key(f, "clipped_samples", 0);
        fprintf(f, "%llu", (unsigned long long)s->clipped);
        fputs(c + 1 < res->channels ? "},\n" : "}\n", f);
    }
    fputs("  ],\n  ", f);
    cli_json_key(f, "clipped_samples", 1);
    fprintf(f, "%llu", (unsigned long long)clipped);
    fputs("\n}\n", f);
}
