/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "sweep.h"

#include "cli.h"
#include "spectrum.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define BLOCK 512

/* Settling before each record: the stage starts from rest at each level. Its
 * slowest closed-loop time constant is microseconds (gain-bandwidth over the
 * gain), so 20 ms plus the filters' latency is ample. */
#define SETTLE_SECONDS 0.02

void cli_sweep_spec_init(CliSweepSpec *spec, const CliSettings *s)
{
    memset(spec, 0, sizeof(*spec));
    spec->settings = *s;
    spec->rate = 48000.0;
    spec->freq = 1000.0;
    spec->from = (double)NAN;
    spec->to = (double)NAN;
    spec->step = 1.0;
    spec->record = 0.1;
}

void cli_sweep_auto_range(const CliSettings *s, double *from, double *to)
{
    const double vmax = cli_settings_expected_limit(s, NULL);
    const double vin = vmax / cli_settings_gain(s);
    const double top = 20.0 * log10(vin / cli_settings_volts_per_unit(s)) + 6.0;
    /* Whole dB keep the levels readable. */
    *to = ceil(top);
    *from = *to - 48.0;
}

int cli_sine_record(const CliSettings *s, double rate, double amp, size_t cycles, size_t n,
                    size_t settle, double *vload, float *out, CliSweepPoint *pt, char *err,
                    size_t len)
{
    OsStage *stage = cli_stage_new(s, rate, err, len);
    if (stage == NULL) {
        return -1;
    }
    float in[BLOCK], o[BLOCK];
    double v[BLOCK];
    double peak_i = 0.0, lim = 0.0, pw = 0.0, diss = 0.0;
    const size_t total = settle + n;
    for (size_t pos = 0, m = 0; pos < total; pos += m) {
        /* Blocks end where the record starts, so its meters are its own. */
        m = total - pos < BLOCK ? total - pos : BLOCK;
        if (pos < settle && pos + m > settle) {
            m = settle - pos;
        }
        for (size_t i = 0; i < m; ++i) {
            /* The phase from the index modulo the record: exact periodicity. */
            const size_t t = (pos + i) % n;
            in[i] = (float)(amp * sin(2.0 * M_PI * (double)cycles * (double)t / (double)n));
        }
        os_stage_process_probe(stage, in, o, v, (uint32_t)m);
        if (pos >= settle) {
            OsMeters mt;
            os_stage_meters(stage, &mt);
            peak_i = fmax(peak_i, mt.peak_current);
            lim += mt.limiting * (double)m;
            pw += mt.load_power * (double)m;
            diss += mt.dissipation * (double)m;
            for (size_t i = 0; i < m; ++i) {
                vload[pos - settle + i] = v[i];
                if (out) {
                    out[pos - settle + i] = o[i];
                }
            }
        }
        if (cli_interrupted) {
            os_stage_free(stage);
            cli_err(err, len, "interrupted");
            return -1;
        }
    }
    os_stage_free(stage);
    pt->peak_current = peak_i;
    pt->limiting = lim / (double)n;
    pt->load_power = pw / (double)n;
    pt->dissipation = diss / (double)n;
    return 0;
}

static int measure_level(const CliSweepSpec *spec, CliSweep *sw, size_t k, double *vload, char *err,
                         size_t len)
{
    CliSweepPoint *pt = &sw->pt[k];
    const double amp = pow(10.0, pt->level_dbfs / 20.0);
    const size_t settle = (size_t)ceil(SETTLE_SECONDS * spec->rate);
    CliSettings s = spec->settings;
    /* The stage's output at trim 0 dB and listen off is the load voltage over
     * G x fullscale, which is what --wav keeps. */
    s.value[OS_P_TRIM] = 0.0f;
    s.value[OS_P_LISTEN] = 0.0f;
    s.value[OS_P_ENABLE] = 1.0f;
    float *out = sw->audio ? sw->audio + k * sw->record : NULL;
    if (cli_sine_record(&s, spec->rate, amp, sw->cycles, sw->record, settle, vload, out, pt, err,
                        len) != 0) {
        return -1;
    }
    pt->vin_peak = amp * cli_settings_volts_per_unit(&spec->settings);
    pt->vout_peak = 0.0;
    for (size_t i = 0; i < sw->record; ++i) {
        /* NOLINTNEXTLINE(clang-analyzer-core.CallAndMessage): cli_sine_record filled it */
        pt->vout_peak = fmax(pt->vout_peak, fabs(vload[i]));
    }
    AnDistortion d;
    if (an_distortion(vload, sw->record, sw->cycles, spec->rate, AN_BAND_LO, sw->band_hi, &d) !=
        0) {
        cli_err(err, len, "cannot analyse the record (out of memory)");
        return -1;
    }
    pt->thd = d.thd;
    pt->thdn = d.thdn;
    return 0;
}

int cli_sweep_run(const CliSweepSpec *spec, CliSweep *sw, char *err, size_t len)
{
    memset(sw, 0, sizeof(*sw));
    sw->onset = sw->clean = -1;
    double from = spec->from, to = spec->to;
    if (isnan(from) || isnan(to)) {
        double af, at;
        cli_sweep_auto_range(&spec->settings, &af, &at);
        from = isnan(from) ? (isnan(to) ? af : to - 48.0) : from;
        to = isnan(to) ? (isnan(spec->from) ? at : from + 48.0) : to;
    }
    if (!(spec->step > 0.0) || !(to >= from) || (to - from) / spec->step > 10000.0) {
        cli_err(err, len,
                "levels %g to %g dBFS in %g dB steps: need from <= to and a step above 0 "
                "(at most 10000 levels)",
                from, to, spec->step);
        return -1;
    }
    if (!(spec->freq > 0.0) || spec->freq >= 0.45 * spec->rate) {
        cli_err(err, len, "--freq %g: the sine must lie between 0 and %g Hz (0.45 x the rate)",
                spec->freq, 0.45 * spec->rate);
        return -1;
    }
    if (to > 60.0) {
        cli_err(err, len, "--to %g: levels above +60 dBFS reach the stage's input clamp", to);
        return -1;
    }
    sw->freq = an_coherent(spec->freq, spec->rate, spec->record, &sw->record, &sw->cycles);
    sw->band_hi = fmin(AN_BAND_HI, 0.5 * spec->rate);
    sw->n = (size_t)floor((to - from) / spec->step + 1e-9) + 1;
    sw->pt = calloc(sw->n, sizeof(CliSweepPoint));
    double *vload = malloc(sw->record * sizeof(double));
    if (spec->keep_audio) {
        sw->audio = calloc(sw->n * sw->record, sizeof(float));
    }
    if (sw->pt == NULL || vload == NULL || (spec->keep_audio && sw->audio == NULL)) {
        free(vload);
        cli_err(err, len, "out of memory for %zu levels", sw->n);
        return -1;
    }
    for (size_t k = 0; k < sw->n; ++k) {
        sw->pt[k].level_dbfs = from + (double)k * spec->step;
        if (measure_level(spec, sw, k, vload, err, len) != 0) {
            free(vload);
            return -1;
        }
    }
    free(vload);
    /* Clip onset (the contract: the lowest swept level whose THD reaches 1 %),
     * read as the lowest level from which THD stays at or above 1 % to the top
     * of the sweep: where THD falls with level (crossover) the literal lowest
     * level, where it dips below 1 % first, the level where it rises through. */
    long last_clean = -1;
    for (size_t k = 0; k < sw->n; ++k) {
        if (sw->pt[k].thd < CLI_CLIP_THD) {
            last_clean = (long)k;
        }
    }
    if ((size_t)(last_clean + 1) < sw->n) {
        sw->onset = last_clean + 1;
    }
    const size_t top = sw->onset >= 0 ? (size_t)sw->onset : sw->n;
    for (size_t k = 0; k < top; ++k) {
        if (sw->pt[k].thd < CLI_CLIP_THD &&
            (sw->clean < 0 || sw->pt[k].load_power > sw->pt[sw->clean].load_power)) {
            sw->clean = (long)k;
        }
    }
    return 0;
}

void cli_sweep_free(CliSweep *sw)
{
    free(sw->pt);
    free(sw->audio);
    sw->pt = NULL;
    sw->audio = NULL;
}
