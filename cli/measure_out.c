/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "measure_out.h"

#include "audio_write.h"
#include "json.h"
#include "report.h"

#include <sndfile.h>

#include <math.h>

static const char THD_NOTE[] = "THD: harmonics 2 and up to 20 kHz over the fundamental, rms "
                               "(IEC 60268-3); THD+N: everything but the fundamental in 20 Hz "
                               "to 20 kHz (AES17 bandwidth) over the fundamental";
static const char THD_NOTE_TABLE[] =
    "THD: rms of harmonics 2 and up to 20 kHz over the fundamental (IEC 60268-3)\n"
    "  THD+N: rms of all but the fundamental in 20 Hz to 20 kHz (AES17 bandwidth), over the "
    "fundamental";

void cli_measure_table(FILE *f, const CliSweepSpec *spec, const CliSweep *sw)
{
    const CliSettings *s = &spec->settings;
    const int pp = s->kind == OS_STAGE_PUSHPULL;
    fprintf(f, "outstage measure: %s stage, %.6g Hz sine, %g Hz, %gx oversampling\n",
            cli_stage_name(s->kind), sw->freq, spec->rate, (double)s->value[OS_P_OVERSAMPLE]);
    fprintf(f,
            "  rail +-%g V, load %g ohm, gain %g dB, current limit %g mA, fullscale %g V, "
            "drive %g dB",
            (double)s->value[OS_P_RAIL], (double)s->value[OS_P_LOAD], (double)s->value[OS_P_GAIN],
            (double)s->value[OS_P_ILIMIT], (double)s->value[OS_P_FULLSCALE],
            (double)s->value[OS_P_DRIVE]);
    if (pp) {
        fprintf(f, ", beta %g, bias %g V, pair %s the loop", (double)s->value[OS_P_BETA],
                (double)s->value[OS_P_BIAS], s->value[OS_P_LOOP] > 0.5f ? "inside" : "outside");
    }
    fprintf(f, "\n  %s\n\n", THD_NOTE_TABLE);
    fprintf(f, "%8s %10s %10s %10s %10s %10s %10s %9s%s\n", "level", "Vin pk", "Vload pk", "THD",
            "THD+N", "P load", "I peak", "limiting", pp ? "     P diss" : "");
    fprintf(f, "%8s %10s %10s %10s %10s %10s %10s %9s%s\n", "dBFS", "V", "V", "%", "%", "W", "A",
            "%", pp ? "          W" : "");
    for (size_t k = 0; k < sw->n; ++k) {
        const CliSweepPoint *p = &sw->pt[k];
        fprintf(f, "%8.2f %10.4g %10.4g %10.4g %10.4g %10.4g %10.4g %9.3g", p->level_dbfs,
                p->vin_peak, p->vout_peak, 100.0 * p->thd, 100.0 * p->thdn, p->load_power,
                p->peak_current, p->limiting);
        if (pp) {
            fprintf(f, " %10.4g", p->dissipation);
        }
        fprintf(f, "%s\n", (long)k == sw->onset ? "  <- clip onset" : "");
    }
    fputc('\n', f);
    const double rl = (double)s->value[OS_P_LOAD];
    if (sw->onset >= 0) {
        const CliSweepPoint *p = &sw->pt[sw->onset];
        fprintf(f, "clip onset (THD reaches 1 %%): %.2f dBFS, %.4g V peak, %.4g W into %g ohm\n",
                p->level_dbfs, p->vout_peak, p->load_power, rl);
    } else {
        fprintf(f, "clip onset: THD did not reach 1 %% to stay in this sweep\n");
    }
    if (sw->clean >= 0) {
        const CliSweepPoint *p = &sw->pt[sw->clean];
        fprintf(f,
                "largest clean power (THD below 1 %%): %.4g W into %g ohm at %.2f dBFS, %.4g V "
                "peak\n",
                p->load_power, rl, p->level_dbfs, p->vout_peak);
    } else {
        fprintf(f, "largest clean power: no level below the onset had THD under 1 %%\n");
    }
}

static void json_point(FILE *f, const CliSweepPoint *p, int pp)
{
    fputc('{', f);
    cli_json_key(f, "level_dbfs", 1);
    cli_json_number(f, p->level_dbfs);
    cli_json_key(f, "vin_peak", 0);
    cli_json_number(f, p->vin_peak);
    cli_json_key(f, "vout_peak", 0);
    cli_json_number(f, p->vout_peak);
    cli_json_key(f, "thd_percent", 0);
    cli_json_number(f, 100.0 * p->thd);
    cli_json_key(f, "thdn_percent", 0);
    cli_json_number(f, 100.0 * p->thdn);
    cli_json_key(f, "load_power_w", 0);
    cli_json_number(f, p->load_power);
    cli_json_key(f, "peak_current_a", 0);
    cli_json_number(f, p->peak_current);
    cli_json_key(f, "limiting_percent", 0);
    cli_json_number(f, p->limiting);
    if (pp) {
        cli_json_key(f, "dissipation_w", 0);
        cli_json_number(f, p->dissipation);
    }
    fputc('}', f);
}

void cli_measure_json(FILE *f, const CliSweepSpec *spec, const CliSweep *sw)
{
    const CliSettings *s = &spec->settings;
    const int pp = s->kind == OS_STAGE_PUSHPULL;
    fputs("{\n  ", f);
    cli_json_key(f, "stage", 1);
    cli_json_string(f, cli_stage_name(s->kind));
    cli_json_key(f, "freq_hz", 0);
    cli_json_number(f, sw->freq);
    cli_json_key(f, "sample_rate", 0);
    cli_json_number(f, spec->rate);
    cli_json_key(f, "record_frames", 0);
    fprintf(f, "%zu", sw->record);
    cli_json_key(f, "record_cycles", 0);
    fprintf(f, "%zu", sw->cycles);
    cli_json_key(f, "band_hz", 0);
    fprintf(f, "[%g, %g]", 20.0, sw->band_hi);
    fputs(",\n  ", f);
    cli_json_key(f, "definitions", 1);
    cli_json_string(f, THD_NOTE);
    fputs(",\n  ", f);
    cli_json_key(f, "settings", 1);
    cli_report_settings(f, s);
    fputs(",\n  ", f);
    cli_json_key(f, "warnings", 1);
    cli_report_conflicts(f, s);
    fputs(",\n  ", f);
    cli_json_key(f, "sweep", 1);
    fputs("[\n", f);
    for (size_t k = 0; k < sw->n; ++k) {
        fputs("    ", f);
        json_point(f, &sw->pt[k], pp);
        fputs(k + 1 < sw->n ? ",\n" : "\n", f);
    }
    fputs("  ],\n  ", f);
    cli_json_key(f, "clip_onset", 1);
    if (sw->onset >= 0) {
        json_point(f, &sw->pt[sw->onset], pp);
    } else {
        fputs("null", f);
    }
    fputs(",\n  ", f);
    cli_json_key(f, "largest_clean", 1);
    if (sw->clean >= 0) {
        json_point(f, &sw->pt[sw->clean], pp);
    } else {
        fputs("null", f);
    }
    fputs("\n}\n", f);
}

void cli_measure_csv(FILE *f, const CliSweepSpec *spec, const CliSweep *sw)
{
    const int pp = spec->settings.kind == OS_STAGE_PUSHPULL;
    fprintf(f,
            "level_dbfs,vin_peak_v,vout_peak_v,thd_percent,thdn_percent,load_power_w,"
            "peak_current_a,limiting_percent,%sclip_onset,largest_clean\n",
            pp ? "dissipation_w," : "");
    for (size_t k = 0; k < sw->n; ++k) {
        const CliSweepPoint *p = &sw->pt[k];
        fprintf(f, "%.10g,%.10g,%.10g,%.10g,%.10g,%.10g,%.10g,%.10g,", p->level_dbfs, p->vin_peak,
                p->vout_peak, 100.0 * p->thd, 100.0 * p->thdn, p->load_power, p->peak_current,
                p->limiting);
        if (pp) {
            fprintf(f, "%.10g,", p->dissipation);
        }
        fprintf(f, "%d,%d\n", (long)k == sw->onset, (long)k == sw->clean);
    }
}

int cli_measure_wav(const char *path, const CliSweepSpec *spec, const CliSweep *sw, char *err,
                    size_t len)
{
    return cli_write_audio(path, sw->audio, sw->n * sw->record, 1, (int)lround(spec->rate),
                           SF_FORMAT_WAV | SF_FORMAT_FLOAT, err, len);
}
