/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "demo_report.h"

#include "atomic.h"
#include "cli.h"
#include "json.h"
#include "material.h"
#include "report.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static double dbfs(double peak)
{
    return peak > 0.0 ? 20.0 * log10(peak) : -(double)INFINITY;
}

/* The level of the sweep with the lowest THD. */
static const CliSweepPoint *cleanest(const CliSweep *sw)
{
    const CliSweepPoint *best = NULL;
    for (size_t k = 0; k < sw->n; ++k) {
        if (best == NULL || sw->pt[k].thd < best->thd) {
            best = &sw->pt[k];
        }
    }
    return best;
}

static void text_job(FILE *f, const CliDemoJob *j)
{
    const CliSweep *sw = &j->sweep;
    const CliChannelStats *c = &j->render.ch[0];
    fprintf(f, "  %s\n    1 kHz sweep: ", cli_stage_name(j->settings.kind));
    if (sw->onset >= 0) {
        const CliSweepPoint *p = &sw->pt[sw->onset];
        fprintf(f, "clip onset %.3g V peak, %.3g W", p->vout_peak, p->load_power);
    } else {
        fprintf(f, "THD does not reach 1 %% to stay");
    }
    if (sw->clean >= 0) {
        fprintf(f, "; largest clean power %.3g W\n", sw->pt[sw->clean].load_power);
    } else if (cleanest(sw)) {
        const CliSweepPoint *b = cleanest(sw);
        fprintf(f, "; never clean: THD at least %.3g %% (at %.3g W)\n", 100.0 * b->thd,
                b->load_power);
    }
    fprintf(f,
            "    material: peak current %.3g A, current limit %.1f %% of the time, mean power "
            "%.3g W",
            c->peak_current, c->limiting, c->load_power);
    if (j->settings.kind == OS_STAGE_PUSHPULL) {
        fprintf(f, ",\n      transistors %.3g W", c->dissipation);
    }
    fprintf(f,
            "\n    departs by %.1f dB in the groove, %.1f dB in the quiet pad; normalised by "
            "%+.1f dB\n",
            j->audio.groove_db, j->audio.quiet_db, j->audio.gain_db);
    fprintf(f, "    files %s.wav, %s-{transfer,thd}.png\n", j->name, j->name);
}

static void write_text(FILE *f, const CliDemoSummary *sum, const CliDemoJob *job, size_t n)
{
    fprintf(f,
            "outstage demo: %.0f s of generated material (material.wav, %d Hz): a plucked bass\n"
            "line and drums, loud enough to put the op-amp stage in current limit at every\n"
            "design, over a quiet pad that plays alone from %.0f s, where crossover has nothing\n"
            "to hide behind; rendered through both stages at %d designs of our own.\n"
            "THD per IEC 60268-3 (harmonics to 20 kHz over the fundamental) of a 1 kHz sine\n"
            "stepped in 2 dB; the clip onset is the lowest level from which THD stays at or above "
            "1 %%.\n"
            "\"Departs by\" is the rms of the render minus the material over the material's rms\n"
            "(trim = -drive matches their levels below the limits): 0 dB means nothing of the\n"
            "material is left, -40 dB a faint colour. Each file is then normalised to the\n"
            "material's peak.\n",
            sum->seconds, sum->rate, cli_material_quiet_start(sum->seconds), CLI_DEMO_DESIGNS);
    const CliDemoDesign *last = NULL;
    for (size_t i = 0; i < n; ++i) {
        const CliDemoJob *j = &job[i];
        if (j->design != last) {
            last = j->design;
            fprintf(f, "\n%s: %s\n  fullscale %g V, drive %+g dB, trim %+g dB\n", j->design->slug,
                    j->design->title, j->design->fullscale, j->design->drive,
                    0.0 - j->design->drive + 0.0);
        }
        text_job(f, j);
    }
    fprintf(f, "\nDone in %.1f s with %zu thread%s; files in %s/\n", sum->elapsed, sum->threads,
            sum->threads == 1 ? "" : "s", sum->dir);
}

static void json_job(FILE *f, const CliDemoJob *j)
{
    const CliSweep *sw = &j->sweep;
    const CliChannelStats *c = &j->render.ch[0];
    fputs("    {", f);
    cli_json_key(f, "design", 1);
    cli_json_string(f, j->design->slug);
    cli_json_key(f, "stage", 0);
    cli_json_string(f, cli_stage_name(j->settings.kind));
    cli_json_key(f, "audio", 0);
    fprintf(f, "\"%s.wav\"", j->name);
    cli_json_key(f, "settings", 0);
    cli_report_settings(f, &j->settings);
    fputs(",\n     ", f);
    cli_json_key(f, "clip_onset_vout_peak", 1);
    cli_json_number(f, sw->onset >= 0 ? sw->pt[sw->onset].vout_peak : (double)NAN);
    cli_json_key(f, "clip_onset_load_power_w", 0);
    cli_json_number(f, sw->onset >= 0 ? sw->pt[sw->onset].load_power : (double)NAN);
    cli_json_key(f, "largest_clean_power_w", 0);
    cli_json_number(f, sw->clean >= 0 ? sw->pt[sw->clean].load_power : (double)NAN);
    fputs(",\n     ", f);
    cli_json_key(f, "peak_current_a", 1);
    cli_json_number(f, c->peak_current);
    cli_json_key(f, "limiting_percent", 0);
    cli_json_number(f, c->limiting);
    cli_json_key(f, "load_power_w", 0);
    cli_json_number(f, c->load_power);
    cli_json_key(f, "dissipation_w", 0);
    cli_json_number(f, c->dissipation);
    cli_json_key(f, "output_peak_dbfs", 0);
    cli_json_number(f, dbfs(c->out_peak));
    fputs(",\n     ", f);
    cli_json_key(f, "residual_groove_db", 1);
    cli_json_number(f, j->audio.groove_db);
    cli_json_key(f, "residual_quiet_db", 0);
    cli_json_number(f, j->audio.quiet_db);
    cli_json_key(f, "normalisation_db", 0);
    cli_json_number(f, j->audio.gain_db);
    cli_json_key(f, "file_peak_dbfs", 0);
    cli_json_number(f, j->audio.peak_dbfs);
    cli_json_key(f, "clipped_samples", 0);
    fprintf(f, "%llu", (unsigned long long)c->clipped);
    fputc('}', f);
}

static void write_json(FILE *f, const CliDemoSummary *sum, const CliDemoJob *job, size_t n)
{
    fputs("{\n  ", f);
    cli_json_key(f, "material", 1);
    cli_json_string(f, "material.wav");
    cli_json_key(f, "seconds", 0);
    cli_json_number(f, sum->seconds);
    cli_json_key(f, "sample_rate", 0);
    fprintf(f, "%d", sum->rate);
    cli_json_key(f, "threads", 0);
    fprintf(f, "%zu", sum->threads);
    cli_json_key(f, "elapsed_s", 0);
    cli_json_number(f, sum->elapsed);
    fputs(",\n  ", f);
    cli_json_key(f, "renders", 1);
    fputs("[\n", f);
    for (size_t i = 0; i < n; ++i) {
        json_job(f, &job[i]);
        fputs(i + 1 < n ? ",\n" : "\n", f);
    }
    fputs("  ]\n}\n", f);
}

/* Write @p text to @p dir/@p name atomically. */
static int save(const char *dir, const char *name, const char *text, size_t n, char *err,
                size_t len)
{
    char path[4096];
    snprintf(path, sizeof(path), "%s/%s", dir, name);
    CliAtomic a;
    if (cli_atomic_open(&a, path, err, len) != 0) {
        return -1;
    }
    for (size_t done = 0; done < n;) {
        const ssize_t w = write(a.fd, text + done, n - done);
        if (w < 0 && errno == EINTR) {
            continue;
        }
        if (w <= 0) {
            cli_err(err, len, "%s: cannot write: %s", path, strerror(errno));
            cli_atomic_abort(&a);
            return -1;
        }
        done += (size_t)w;
    }
    return cli_atomic_commit(&a, err, len);
}

int cli_demo_report(const CliDemoSummary *sum, const CliDemoJob *job, size_t n_jobs, char *err,
                    size_t len)
{
    char *text = NULL, *json = NULL;
    size_t text_len = 0, json_len = 0;
    FILE *t = open_memstream(&text, &text_len);
    FILE *j = open_memstream(&json, &json_len);
    if (t == NULL || j == NULL) {
        if (t) {
            fclose(t);
        }
        if (j) {
            fclose(j);
        }
        free(text);
        free(json);
        cli_err(err, len, "out of memory");
        return -1;
    }
    write_text(t, sum, job, n_jobs);
    write_json(j, sum, job, n_jobs);
    fclose(t);
    fclose(j);
    int rc = save(sum->dir, "report.txt", text, text_len, err, len);
    if (rc == 0) {
        rc = save(sum->dir, "report.json", json, json_len, err, len);
    }
    if (rc == 0) {
        fputs(text, stdout);
    }
    free(text);
    free(json);
    return rc;
}
