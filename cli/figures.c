/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "figures.h"

#include "analysis.h"
#include "cli.h"
#include "plot.h"
#include "spectrum.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define TRANSFER_HZ 50.0

static const double BLUE[3] = {0.12, 0.35, 0.70};
static const double ORANGE[3] = {0.85, 0.45, 0.10};
static const double GREY[3] = {0.55, 0.55, 0.55};

int cli_figure_parse(const char *name, CliFigure *fig)
{
    static const char *const names[] = {"transfer", "thd", "spectrum", "impedance", "response"};
    for (int i = 0; i < 5; ++i) {
        if (strcmp(name, names[i]) == 0) {
            *fig = (CliFigure)i;
            return 0;
        }
    }
    return -1;
}

void cli_figure_spec_init(CliFigureSpec *spec, const CliSettings *s)
{
    memset(spec, 0, sizeof(*spec));
    spec->settings = *s;
    spec->rate = 48000.0;
    spec->freq = 1000.0;
    spec->level = (double)NAN;
}

/* dBFS at which the stage should reach its limit. */
static double limit_dbfs(const CliSettings *s)
{
    const double v = cli_settings_expected_limit(s, NULL) / cli_settings_gain(s);
    return 20.0 * log10(v / cli_settings_volts_per_unit(s));
}

/* "opamp, +-12 V, 32 ohm" and the push-pull's bias and loop. */
static void describe(const CliSettings *s, char *buf, size_t len)
{
    const int n =
        snprintf(buf, len, "%s, \u00b1%g V, %g ohm, %g dB, %g mA", cli_stage_name(s->kind),
                 (double)s->value[OS_P_RAIL], (double)s->value[OS_P_LOAD],
                 (double)s->value[OS_P_GAIN], (double)s->value[OS_P_ILIMIT]);
    if (s->kind == OS_STAGE_PUSHPULL && n > 0 && (size_t)n < len) {
        snprintf(buf + n, len - (size_t)n, ", bias %g V, pair %s loop", (double)s->value[OS_P_BIAS],
                 s->value[OS_P_LOOP] > 0.5f ? "in" : "outside");
    }
}

int cli_figure_transfer(const char *path, const CliFigureSpec *spec, char *err, size_t len)
{
    const CliSettings *s = &spec->settings;
    const double level = isnan(spec->level) ? limit_dbfs(s) + 6.0 : spec->level;
    size_t n, cycles;
    an_coherent(TRANSFER_HZ, spec->rate, 1.0 / TRANSFER_HZ, &n, &cycles);
    double *vload = malloc(n * sizeof(double)), *vin = malloc(n * sizeof(double));
    if (!vload || !vin) {
        free(vload);
        free(vin);
        cli_err(err, len, "out of memory");
        return -1;
    }
    CliSweepPoint pt;
    const double amp = pow(10.0, level / 20.0);
    const size_t settle = n + (size_t)ceil(0.02 * spec->rate);
    if (cli_sine_record(s, spec->rate, amp, cycles, n, settle, vload, NULL, &pt, err, len) != 0) {
        free(vload);
        free(vin);
        return -1;
    }
    /* The load voltage of frame i answers the input of frame i - latency. */
    OsStage *probe = cli_stage_new(s, spec->rate, err, len);
    const size_t lat = probe ? os_stage_latency(probe) : 0;
    os_stage_free(probe);
    const double vpu = cli_settings_volts_per_unit(s), g = cli_settings_gain(s);
    for (size_t i = 0; i < n; ++i) {
        const size_t t = (settle + i + n * 4 - lat) % n;
        vin[i] = amp * vpu * sin(2.0 * M_PI * (double)cycles * (double)t / (double)n);
    }
    /* The ideal line as two points: a dashed line traced back and forth would
     * fill its own gaps. */
    const double ends[2] = {-amp * vpu, amp * vpu};
    const double ideal[2] = {-g * amp * vpu, g * amp * vpu};
    char what[160], title[256];
    describe(s, what, sizeof(what));
    snprintf(title, sizeof(title), "Transfer at %g Hz: %s", TRANSFER_HZ, what);
    CliPlotSpec ps;
    cli_plot_spec_init(&ps);
    ps.title = title;
    ps.xlabel = "Stage input voltage (V)";
    ps.ylabel = "Load voltage (V)";
    const double vmax = fmax(an_peak(vload, n), 1e-6);
    ps.ymin = -1.15 * vmax;
    ps.ymax = 1.15 * vmax;
    const CliPlotSeries series[] = {
        {ends, ideal, 2, {GREY[0], GREY[1], GREY[2]}, 1, 0, "ideal: G x input"},
        {vin, vload, n, {BLUE[0], BLUE[1], BLUE[2]}, 0, 0, "load voltage"},
    };
    const int rc = cli_plot_write(path, &ps, series, 2, NULL, 0, err, len);
    free(vload);
    free(vin);
    return rc;
}

int cli_figure_thd(const char *path, const CliSweepSpec *spec, const CliSweep *sw, char *err,
                   size_t len)
{
    double *p = malloc(sw->n * sizeof(double)), *thd = malloc(sw->n * sizeof(double));
    double *thdn = malloc(sw->n * sizeof(double));
    if (!p || !thd || !thdn) {
        free(p);
        free(thd);
        free(thdn);
        cli_err(err, len, "out of memory");
        return -1;
    }
    for (size_t k = 0; k < sw->n; ++k) {
        p[k] = sw->pt[k].load_power;
        thd[k] = 100.0 * sw->pt[k].thd;
        thdn[k] = 100.0 * sw->pt[k].thdn;
    }
    char what[160], title[256], label[96];
    describe(&spec->settings, what, sizeof(what));
    snprintf(title, sizeof(title), "THD against power at %.5g Hz: %s", sw->freq, what);
    CliPlotSpec ps;
    cli_plot_spec_init(&ps);
    ps.title = title;
    ps.xlabel = "Load power (W)";
    ps.ylabel = "Distortion (%)";
    ps.xlog = ps.ylog = 1;
    ps.hline = 100.0 * CLI_CLIP_THD;
    ps.hline_label = "1 %";
    /* Distortion below 1e-5 % is the solver's floor, not the circuit. */
    double lo = 1e-4;
    for (size_t k = 0; k < sw->n; ++k) {
        lo = fmin(lo, fmax(thd[k], 1e-5));
    }
    ps.ymin = pow(10.0, floor(log10(lo)));
    const CliPlotSeries series[] = {
        {p, thd, sw->n, {BLUE[0], BLUE[1], BLUE[2]}, 0, 1, "THD (IEC 60268-3)"},
        {p, thdn, sw->n, {ORANGE[0], ORANGE[1], ORANGE[2]}, 1, 0, "THD+N, 20 Hz - 20 kHz"},
    };
    CliPlotMark mark = {(double)NAN, (double)NAN, NULL};
    if (sw->onset >= 0) {
        const CliSweepPoint *o = &sw->pt[sw->onset];
        snprintf(label, sizeof(label), "clip onset: %.3g V peak, %.3g W", o->vout_peak,
                 o->load_power);
        mark = (CliPlotMark){o->load_power, 100.0 * o->thd, label};
    }
    const int rc = cli_plot_write(path, &ps, series, 2, &mark, sw->onset >= 0, err, len);
    free(p);
    free(thd);
    free(thdn);
    return rc;
}

int cli_figure_spectrum(const char *path, const CliFigureSpec *spec, char *err, size_t len)
{
    const CliSettings *s = &spec->settings;
    const double level = isnan(spec->level) ? limit_dbfs(s) - 3.0 : spec->level;
    if (!(spec->freq > 0.0) || spec->freq >= 0.45 * spec->rate) {
        cli_err(err, len, "--freq %g: the sine must lie between 0 and %g Hz (0.45 x the rate)",
                spec->freq, 0.45 * spec->rate);
        return -1;
    }
    size_t n, cycles;
    const double f = an_coherent(spec->freq, spec->rate, 0.2, &n, &cycles);
    const size_t nb = n / 2 + 1;
    double *vload = malloc(n * sizeof(double)), *rms = malloc(nb * sizeof(double));
    double *hz = malloc(nb * sizeof(double));
    if (!vload || !rms || !hz) {
        free(vload);
        free(rms);
        free(hz);
        cli_err(err, len, "out of memory");
        return -1;
    }
    CliSweepPoint pt;
    int rc = cli_sine_record(s, spec->rate, pow(10.0, level / 20.0), cycles, n,
                             (size_t)ceil(0.02 * spec->rate), vload, NULL, &pt, err, len);
    AnDistortion d;
    if (rc == 0 && (an_spectrum_rms(vload, n, rms) != 0 ||
                    an_distortion(vload, n, cycles, spec->rate, AN_BAND_LO,
                                  fmin(AN_BAND_HI, 0.5 * spec->rate), &d) != 0)) {
        cli_err(err, len, "out of memory");
        rc = -1;
    }
    if (rc == 0) {
        const double top = 20.0 * log10(fmax(rms[cycles], 1e-12));
        const double floor_db = top - 160.0;
        for (size_t k = 0; k < nb; ++k) {
            hz[k] = (double)k * spec->rate / (double)n;
            rms[k] = fmax(20.0 * log10(fmax(rms[k], 1e-300)), floor_db);
        }
        char what[160], title[256];
        describe(s, what, sizeof(what));
        snprintf(title, sizeof(title), "%.5g Hz at %.1f dBFS (%.3g V peak), THD %.3g %%: %s", f,
                 level, an_peak(vload, n), 100.0 * d.thd, what);
        CliPlotSpec ps;
        cli_plot_spec_init(&ps);
        ps.title = title;
        ps.xlabel = "Frequency (Hz)";
        ps.ylabel = "Load voltage (dBV, rms per bin)";
        ps.xlog = 1;
        ps.xmin = 10.0;
        ps.xmax = 0.5 * spec->rate;
        ps.ymin = floor_db;
        ps.ymax = top + 10.0;
        const CliPlotSeries series[] = {
            {hz + 1, rms + 1, nb - 1, {BLUE[0], BLUE[1], BLUE[2]}, 0, 0, NULL}};
        rc = cli_plot_write(path, &ps, series, 1, NULL, 0, err, len);
    }
    free(vload);
    free(rms);
    free(hz);
    return rc;
}

int cli_load_point(const CliSettings *s, double rate, double amp, double f, double *z,
                   double *gain_db, char *err, size_t len)
{
    OsStage *st = cli_stage_new(s, rate, err, len);
    if (!st) {
        return -1;
    }
    /* settle: 20 cycles or 0.1 s, and six of the driver's own decay times
     * Qms / (pi fs) (at most 2 s) */
    double settle_s = fmax(0.1, 20.0 / f);
    if (s->value[OS_P_LOAD_MODEL] >= 0.5f) {
        const double tau =
            (double)s->value[OS_P_SPEAKER_QMS] / (M_PI * (double)s->value[OS_P_SPEAKER_FS]);
        settle_s += fmin(6.0 * tau, 2.0);
    }
    const size_t settle = (size_t)ceil(settle_s * rate);
    /* measured over whole cycles, at least 50 ms */
    const size_t cyc = (size_t)ceil(0.05 * f) > 1 ? (size_t)ceil(0.05 * f) : 1;
    const size_t n = (size_t)llround((double)cyc * rate / f);
    const size_t block = 4096;
    float *x = malloc((n > block ? n : block) * sizeof(float));
    float *y = malloc((n > block ? n : block) * sizeof(float));
    if (!x || !y) {
        free(x);
        free(y);
        os_stage_free(st);
        cli_err(err, len, "out of memory");
        return -1;
    }
    size_t t = 0;
    while (t < settle) {
        const size_t m = settle - t < block ? settle - t : block;
        for (size_t i = 0; i < m; ++i) {
            x[i] = (float)(amp * sin(2.0 * M_PI * f * (double)(t + i) / rate));
        }
        os_stage_process(st, x, y, (uint32_t)m);
        t += m;
    }
    for (size_t i = 0; i < n; ++i) {
        x[i] = (float)(amp * sin(2.0 * M_PI * f * (double)(t + i) / rate));
    }
    os_stage_process(st, x, y, (uint32_t)n);
    OsMeters m;
    os_stage_meters(st, &m);
    os_stage_free(st);
    free(x);
    free(y);
    *z = m.peak_current > 0.0 ? m.peak_load_v / m.peak_current : (double)NAN;
    const double ideal = cli_settings_gain(s) * amp * cli_settings_volts_per_unit(s);
    *gain_db = 20.0 * log10(m.peak_load_v / ideal);
    return 0;
}

/* "Re 8 ohm, Le 0.3 mH, fs 80 Hz, Qms 4, Qes 0.5", or "8 ohm resistor". */
static void describe_load(const CliSettings *s, char *buf, size_t len)
{
    if (s->value[OS_P_LOAD_MODEL] >= 0.5f) {
        snprintf(buf, len, "driver Re %g ohm, Le %g mH, fs %g Hz, Qms %g, Qes %g",
                 (double)s->value[OS_P_LOAD], (double)s->value[OS_P_SPEAKER_LE],
                 (double)s->value[OS_P_SPEAKER_FS], (double)s->value[OS_P_SPEAKER_QMS],
                 (double)s->value[OS_P_SPEAKER_QES]);
    } else {
        snprintf(buf, len, "%g ohm resistor", (double)s->value[OS_P_LOAD]);
    }
}

#define LOAD_POINTS 25
#define CURVE_POINTS 300
#define F_LO 10.0

int cli_figure_load(const char *path, CliFigure fig, const CliFigureSpec *spec, char *err,
                    size_t len)
{
    const CliSettings *s = &spec->settings;
    /* small signal: 20 dB below where the stage should reach its limit */
    const double level = isnan(spec->level) ? limit_dbfs(s) - 20.0 : spec->level;
    const double amp = pow(10.0, level / 20.0);
    const double f_hi = fmin(20000.0, 0.45 * spec->rate);
    /* measured points up to 10 kHz for the impedance: the meters' peaks are
     * sampled at the circuit's steps, which at 48 kHz x4 misses a 10 kHz
     * sine's peak by at most 1.3 % */
    const double f_meas = fig == CLI_FIG_IMPEDANCE ? fmin(10000.0, f_hi) : f_hi;
    double fm[LOAD_POINTS], zm[LOAD_POINTS], gm[LOAD_POINTS];
    for (int k = 0; k < LOAD_POINTS; ++k) {
        fm[k] = F_LO * pow(f_meas / F_LO, (double)k / (LOAD_POINTS - 1));
        if (cli_load_point(s, spec->rate, amp, fm[k], &zm[k], &gm[k], err, len) != 0) {
            return -1;
        }
    }
    char load[160], title[400];
    describe_load(s, load, sizeof(load));
    CliPlotSpec ps;
    cli_plot_spec_init(&ps);
    ps.title = title;
    ps.xlabel = "Frequency (Hz)";
    ps.xlog = 1;
    ps.xmin = F_LO;
    ps.xmax = f_hi;
    if (fig == CLI_FIG_IMPEDANCE) {
        double fc[CURVE_POINTS], zc[CURVE_POINTS];
        double zmax = 0.0, zmin = 1e300;
        for (int k = 0; k < CURVE_POINTS; ++k) {
            fc[k] = F_LO * pow(f_hi / F_LO, (double)k / (CURVE_POINTS - 1));
            double re, im;
            os_load_impedance_of(s->value, fc[k], &re, &im);
            zc[k] = hypot(re, im);
            zmax = fmax(zmax, zc[k]);
            zmin = fmin(zmin, zc[k]);
        }
        snprintf(title, sizeof(title), "Load impedance: %s", load);
        ps.ylabel = "|Z| (ohm)";
        ps.ylog = 1;
        ps.ymin = 0.7 * zmin;
        ps.ymax = 1.5 * zmax;
        if (floor(log10(ps.ymin)) == floor(log10(ps.ymax))) {
            /* no decade inside, so no labelled tick: down to the decade below */
            ps.ymin = pow(10.0, floor(log10(ps.ymin)));
        }
        ps.hline = (double)s->value[OS_P_LOAD];
        ps.hline_label = s->value[OS_P_LOAD_MODEL] >= 0.5f ? "Re" : "load";
        const CliPlotSeries series[] = {
            {fc, zc, CURVE_POINTS, {GREY[0], GREY[1], GREY[2]}, 0, 0, "closed form"},
            {fm,
             zm,
             LOAD_POINTS,
             {BLUE[0], BLUE[1], BLUE[2]},
             0,
             1,
             "through the stage (peak voltage / peak current)"},
        };
        return cli_plot_write(path, &ps, series, 2, NULL, 0, err, len);
    }
    double lo = 0.0, hi = 0.0;
    for (int k = 0; k < LOAD_POINTS; ++k) {
        lo = fmin(lo, gm[k]);
        hi = fmax(hi, gm[k]);
    }
    if (s->value[OS_P_LOAD_MODEL] >= 0.5f) {
        snprintf(load, sizeof(load), "a driver (Re %g ohm, fs %g Hz)", (double)s->value[OS_P_LOAD],
                 (double)s->value[OS_P_SPEAKER_FS]);
    }
    snprintf(title, sizeof(title), "%s stage into %s, %.1f dBFS", cli_stage_name(s->kind), load,
             level);
    ps.ylabel = "Load voltage over G x input (dB)";
    ps.ymin = fmin(lo - 1.0, -1.0);
    ps.ymax = fmax(hi + 1.0, 1.0);
    ps.hline = 0.0;
    ps.hline_label = "ideal";
    const CliPlotSeries series[] = {
        {fm, gm, LOAD_POINTS, {BLUE[0], BLUE[1], BLUE[2]}, 0, 1, "small-signal gain"},
    };
    return cli_plot_write(path, &ps, series, 1, NULL, 0, err, len);
}
