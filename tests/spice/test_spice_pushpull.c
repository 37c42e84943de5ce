/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The push-pull stage against a reference simulator: ngspice-39 runs the same
 * circuit (pushpull_stage.cir.in: the op-amp of dsp/os_opamp.h as behavioural
 * sources, the bias source, a Q pair whose SPICE Gummel-Poon model has only IS
 * and BF set, which reduces it to the Ebers-Moll model of dsp/os_bjt.h, the
 * emitter resistors, the divider and the load).
 *
 * Static transfer, follower outside the loop (loop = 0): ngspice sweeps the
 * input source at DC through the whole circuit, op-amp included, so the
 * reference holds the op-amp's finite DC gain and the base current through its
 * sense resistor exactly as the circuit has them. The static curve evaluated
 * on a low-frequency sine is the reference waveform. What the DC sweep leaves
 * out is the op-amp's dynamics: with the divider on its pin, the op-amp is a
 * follower of closed-loop bandwidth GBW / G driving its pin, vo = G vin delayed
 * by tau = G / (2 pi GBW) (0.32 us at the defaults); for a sine of frequency f
 * that is a relative rms difference of at most 2 pi f tau (0.02 % at 100 Hz),
 * printed beside the result. Both waveforms are band-limited to 20 kHz the same
 * way, as their complex Fourier coefficients over whole periods, and
 *   rms error = sqrt(sum |H_plugin,k - H_spice,k|^2 / 2 + DC difference^2)
 *               / sqrt(sum |H_spice,k|^2 / 2 + DC^2)        (Parseval)
 * must stay within 0.3 %.
 *
 * Spectrum, follower inside the loop (loop = 1), class B, 1 kHz: ngspice runs a
 * transient with an 81 ns maximum step (its harmonics move by under 0.002 dB at
 * a 20 ns step and reltol 1e-7, or with the trapezoidal rule); each odd
 * harmonic below 20 kHz that stands above -90 dBc in either simulator must
 * agree within 2 dB. The crossover is a glitch of a few microseconds, while
 * the op-amp carries its pin across the dead zone, so its harmonics are nearly
 * flat up to 20 kHz and every one of them is compared.
 *
 * Environment: OS_NGSPICE the ngspice executable (empty: not found, the test is
 * skipped), OS_SPICE_DIR the directory of the netlist templates. OS_SPICE_KEEP=1
 * keeps the scratch directory with the netlist, the log and ngspice's table. An
 * argument selects cases by name (cmocka filter, e.g. "pushpull_spectrum*"). */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis.h"
#include "os_bjt.h"
#include "os_opamp.h"
#include "outstage.h"
#include "spice_util.h"

/* Host rate of every case (Hz). */
#define HOST_RATE 48000.0
/* Harmonics strictly below this frequency are compared (Hz): the audio band. */
#define BAND_HZ 20000.0
/* Transient: ngspice output points per host frame, also its largest step
 * (81.4 ns), as in the op-amp comparison. */
#define GRID 256
/* Static transfer: points of the dense reference waveform per host frame, and
 * steps of the DC sweep over +-VSWEEP_SHARE x the input peak. */
#define DENSE 64
#define SWEEP_STEPS 40000
#define VSWEEP_SHARE 1.001
/* Requirements (issue 3): static transfer within 0.3 % rms; every odd harmonic
 * above -90 dBc within 2 dB. */
#define MAX_RMS_ERROR 0.003
#define MAX_DB_DIFF 2.0
#define FLOOR_DBC (-90.0)
/* The waveform must repeat itself from the first compared period to the last
 * within this share, or the whole-period coefficients are not the steady
 * state's. */
#define STEADY_TOL 1e-4
/* Harmonics up to this order are kept (1 kHz and 100 Hz: below 20 kHz). */
#define KMAX 256

typedef enum { PP_TRANSFER, PP_SPECTRUM } PpKind;

/* One comparison. Parameters in port units (os_stage_set). */
typedef struct {
    const char *name;
    const char *what;
    PpKind kind;
    double freq; /* Hz */
    double amp;  /* sample peak, full-scale units */
    float fullscale, gain, rail, headroom, ilimit, load, gbw, slew;
    float beta, vbe, bias, emitter_r, loop;
    int settle;  /* periods run before the compared ones */
    int periods; /* periods compared */
} PpCase;

/* Port-table defaults of the settings no case changes. Input 0 dBFS = 1 V
 * peak, so the stage is asked for G x 1 V = 2 V peak into 8 ohm (0.25 A, base
 * current 3.5 mA against the 25 mA limit). */
#define PP_FIXED                                                                                   \
    .amp = 1.0, .fullscale = 1.0f, .gain = 6.0f, .rail = 12.0f, .headroom = 1.5f, .ilimit = 25.0f, \
    .load = 8.0f, .gbw = 1.0f, .beta = 70.0f, .vbe = 0.65f, .emitter_r = 0.22f

static const PpCase cases[] = {
    /* 100 Hz: the op-amp's delay is worth 0.02 %, see the file comment. */
    {.name = "pushpull_transfer_b",
     .what = "class B (bias 0 V), loop 0, 0 dBFS at 100 Hz",
     .kind = PP_TRANSFER,
     .freq = 100.0,
     .slew = 0.5f,
     .bias = 0.0f,
     .loop = 0.0f,
     .settle = 2,
     .periods = 2,
     PP_FIXED},
    /* 1.2 V between the bases: about 13 mA quiescent current per transistor. */
    {.name = "pushpull_transfer_ab",
     .what = "class AB (bias 1.2 V), loop 0, 0 dBFS at 100 Hz",
     .kind = PP_TRANSFER,
     .freq = 100.0,
     .slew = 0.5f,
     .bias = 1.2f,
     .loop = 0.0f,
     .settle = 2,
     .periods = 2,
     PP_FIXED},
    /* Slew rate at the port minimum, so that the crossover is slew-limited:
     * the op-amp must carry its pin across the dead zone (about 1.1 V: the
     * load stays within 10 mV of 0 V while |pin| < 0.55 V) with the feedback
     * stuck near 0 V meanwhile; at 0.1 V/us that takes about 11 us, in which a
     * 1 V, 1 kHz input moves by about 70 mV, far more than the
     * SR / (2 pi GBW) = 16 mV that saturates the input stage. Printed: the time
     * the op-amp spends slewing, and the plugin's harmonics with a 100 V/us
     * op-amp (about 10 dB lower). */
    {.name = "pushpull_spectrum_slew",
     .what = "class B, loop 1, 0.1 V/us, 0 dBFS at 1 kHz",
     .kind = PP_SPECTRUM,
     .freq = 1000.0,
     .slew = 0.1f,
     .bias = 0.0f,
     .loop = 1.0f,
     .settle = 3,
     .periods = 2,
     PP_FIXED},
    /* Every setting at its default: the same crossing at 0.5 V/us reaches only
     * about half the slew rate, so the crossover is limited by the
     * gain-bandwidth product instead: a faster, shorter glitch (printed). */
    {.name = "pushpull_spectrum_default",
     .what = "class B, loop 1, 0.5 V/us, 0 dBFS at 1 kHz",
     .kind = PP_SPECTRUM,
     .freq = 1000.0,
     .slew = 0.5f,
     .bias = 0.0f,
     .loop = 1.0f,
     .settle = 3,
     .periods = 2,
     PP_FIXED},
};
#define N_CASES (sizeof(cases) / sizeof(cases[0]))

typedef struct {
    const PpCase *c;
    char dir[256];
    int passed;
} CaseState;

static CaseState states[N_CASES];
static const char *ngspice_path;
static char template_path[1024];

/* Circuit values in SI units, read back from the stage (spice_util.h), and
 * the closed-loop gain G. */
typedef struct {
    SpCircuit sp;
    double g;
} Circuit;

/* ---- the stage ------------------------------------------------------------ */

static OsStage *make_stage(const PpCase *c, int factor, float slew)
{
    OsStage *s = os_stage_new(OS_STAGE_PUSHPULL, HOST_RATE, NULL);
    assert_non_null(s);
    const struct {
        OsParam p;
        float v;
    } set[] = {
        {OS_P_FULLSCALE, c->fullscale},
        {OS_P_DRIVE, 0.0f},
        {OS_P_GAIN, c->gain},
        {OS_P_RAIL, c->rail},
        {OS_P_HEADROOM, c->headroom},
        {OS_P_ILIMIT, c->ilimit},
        {OS_P_LOAD, c->load},
        {OS_P_GBW, c->gbw},
        {OS_P_SLEW, slew},
        {OS_P_BETA, c->beta},
        {OS_P_VBE, c->vbe},
        {OS_P_BIAS, c->bias},
        {OS_P_EMITTER_R, c->emitter_r},
        {OS_P_LOOP, c->loop},
        {OS_P_TRIM, 0.0f},
        {OS_P_LISTEN, 0.0f},
        {OS_P_ENABLE, 1.0f},
        {OS_P_OVERSAMPLE, (float)factor},
    };
    for (size_t i = 0; i < sizeof(set) / sizeof(set[0]); ++i) {
        assert_int_equal(os_stage_set(s, set[i].p, set[i].v), OS_OK);
        /* The netlist takes its values from the stage, so they must be the ones
         * asked for. */
        assert_true(os_stage_get(s, set[i].p) == set[i].v);
    }
    os_stage_reset(s); /* parameters at their targets, no smoothing ramp */
    return s;
}

/* Load voltage over the compared periods; frame i is the voltage at time
 * settle / f + i / fs of the input sine (the reported latency skipped). */
static double *run_stage(const PpCase *c, int factor, float slew)
{
    OsStage *s = make_stage(c, factor, slew);
    const size_t per = (size_t)llround(HOST_RATE / c->freq);
    const size_t settle = per * (size_t)c->settle + os_stage_latency(s);
    const size_t n = per * (size_t)c->periods;
    double *v = malloc(n * sizeof(*v));
    assert_non_null(v);
    an_run_sine(s, HOST_RATE, c->freq, c->amp, settle, n, v, NULL);
    os_stage_free(s);
    return v;
}

static void circuit_of(const PpCase *c, Circuit *k)
{
    OsStage *s = make_stage(c, 4, c->slew);
    sp_circuit_of(s, c->amp, c->freq, &k->sp);
    k->g = pow(10.0, k->sp.gain_db / 20.0);
    os_stage_free(s);
}

/* ---- ngspice -------------------------------------------------------------- */

/* Fill the template, run ngspice with @p analysis and read its table: columns
 * scale, v(out), v(in), v(pin), v(x). */
static double *simulate(CaseState *st, const Circuit *k, const char *analysis, size_t *rows)
{
    char netlist[512], log[512], table[512];
    snprintf(netlist, sizeof(netlist), "%s/pushpull_stage.cir", st->dir);
    snprintf(log, sizeof(log), "%s/ngspice.log", st->dir);
    snprintf(table, sizeof(table), "%s/table.txt", st->dir);

    SpSubst sub = {.n = 0};
    sp_put_circuit(&sub, &k->sp, 1);
    sp_put(&sub, "ANALYSIS", "%s", analysis);
    sp_put(&sub, "OUTFILE", "%s", table);
    assert_int_equal(sp_write_netlist(template_path, &sub, netlist), 0);

    /* Reference: ngspice-39, batch mode, on the same circuit. */
    const int rc = sp_run(ngspice_path, st->dir, "pushpull_stage.cir", log);
    if (rc != 0) {
        sp_print_log_tail(log);
        fail_msg("ngspice exited with status %d", rc);
    }
    double *t = sp_read_table(table, 5, rows);
    if (!t) {
        sp_print_log_tail(log);
        fail_msg("no usable table from ngspice in %s", table);
    }
    return t;
}

/* ---- analysis ------------------------------------------------------------- */

/* Complex amplitudes of harmonics 0..kmax of x[0..n), n spanning @p periods
 * whole periods: H_k = (2/n) sum x_i exp(-j 2 pi k i / p), p = n / periods, so
 * |H_k| is the peak amplitude of harmonic k; H_0 is the mean (not doubled). */
static void harmonics(const double *x, size_t n, size_t periods, int kmax, double *re, double *im)
{
    const size_t p = n / periods;
    assert_true(p * periods == n);
    double *c = malloc(p * sizeof(*c));
    double *s = malloc(p * sizeof(*s));
    assert_true(c && s);
    for (size_t m = 0; m < p; ++m) {
        c[m] = cos(2.0 * M_PI * (double)m / (double)p);
        s[m] = sin(2.0 * M_PI * (double)m / (double)p);
    }
    for (int k = 0; k <= kmax; ++k) {
        double sr = 0.0, si = 0.0;
        size_t m = 0;
        for (size_t i = 0; i < n; ++i) {
            sr += x[i] * c[m];
            si -= x[i] * s[m];
            m += (size_t)k;
            m %= p;
        }
        const double w = (k == 0 ? 1.0 : 2.0) / (double)n;
        re[k] = sr * w;
        im[k] = si * w;
    }
    free(c);
    free(s);
}

/* Highest harmonic below BAND_HZ. */
static int band_kmax(double f)
{
    int k = (int)ceil(BAND_HZ / f) - 1;
    assert_true(k <= KMAX);
    return k;
}

/* rms of the difference over rms of the reference, both band-limited: from
 * their harmonics 0..kmax (Parseval). */
static double rms_error(const double *pr, const double *pi, const double *sr, const double *si,
                        int kmax)
{
    double num = (pr[0] - sr[0]) * (pr[0] - sr[0]);
    double den = sr[0] * sr[0];
    for (int k = 1; k <= kmax; ++k) {
        num += 0.5 * ((pr[k] - sr[k]) * (pr[k] - sr[k]) + (pi[k] - si[k]) * (pi[k] - si[k]));
        den += 0.5 * (sr[k] * sr[k] + si[k] * si[k]);
    }
    return sqrt(num / den);
}

/* Relative difference between the first and the last of @p periods periods of
 * x (n samples), over harmonics 0..kmax: how steady the waveform is. */
static double steadiness(const double *x, size_t n, size_t periods, int kmax)
{
    const size_t p = n / periods;
    double ar[KMAX + 1], ai[KMAX + 1], br[KMAX + 1], bi[KMAX + 1];
    harmonics(x, p, 1, kmax, ar, ai);
    harmonics(x + (periods - 1) * p, p, 1, kmax, br, bi);
    return rms_error(br, bi, ar, ai, kmax);
}

/* THD over harmonics 2..kmax (IEC 60268-3 definition). */
static double thd(const double *re, const double *im, int kmax)
{
    double s = 0.0;
    for (int k = 2; k <= kmax; ++k) {
        s += re[k] * re[k] + im[k] * im[k];
    }
    return sqrt(s) / hypot(re[1], im[1]);
}

/* Phase lag of the plugin's fundamental behind the reference's, as a delay (s). */
static double fundamental_delay(const double *pr, const double *pi, const double *sr,
                                const double *si, double f)
{
    const double dphi = remainder(atan2(pi[1], pr[1]) - atan2(si[1], sr[1]), 2.0 * M_PI);
    return -dphi / (2.0 * M_PI * f);
}

/* Static curve: v(out) against v(in) from the DC sweep table, linear
 * interpolation between every stride-th row (stride 2: a sweep of twice the
 * step, to estimate the interpolation error). */
typedef struct {
    const double *t;
    size_t rows, stride;
} Curve;

static double curve_at(const Curve *cv, double vin)
{
    size_t lo = 0, hi = (cv->rows - 1) / cv->stride;
    const double *t = cv->t;
    const size_t s = cv->stride;
    assert_true(vin >= t[2] && vin <= t[5 * hi * s + 2]);
    while (hi - lo > 1) {
        const size_t mid = (lo + hi) / 2;
        if (t[5 * mid * s + 2] <= vin) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    const double x0 = t[5 * lo * s + 2], x1 = t[5 * hi * s + 2];
    const double y0 = t[5 * lo * s + 1], y1 = t[5 * hi * s + 1];
    return y0 + (y1 - y0) * (vin - x0) / (x1 - x0);
}

/* ---- static transfer ------------------------------------------------------ */

static void test_transfer(CaseState *st, const PpCase *c, const Circuit *k)
{
    /* Reference: ngspice-39 DC sweep of the input source through the circuit. */
    char analysis[128];
    const double vmax = VSWEEP_SHARE * k->sp.vin_amp;
    snprintf(analysis, sizeof(analysis), "dc Vin %.17g %.17g %.17g", -vmax, vmax,
             2.0 * vmax / SWEEP_STEPS);
    size_t rows = 0;
    double *t = simulate(st, k, analysis, &rows);
    assert_true(rows >= SWEEP_STEPS);
    double pin_err = 0.0;
    for (size_t r = 0; r < rows; ++r) {
        if (r > 0) {
            assert_true(t[5 * r + 2] > t[5 * (r - 1) + 2]); /* v(in) rises */
        }
        pin_err = fmax(pin_err, fabs(t[5 * r + 3] - k->g * t[5 * r + 2]));
    }

    const size_t per = (size_t)llround(HOST_RATE / c->freq);
    const size_t m = per * DENSE;
    const int kmax = band_kmax(c->freq);
    const Curve fine = {t, rows, 1}, coarse = {t, rows, 2};
    double *ref = calloc(m, sizeof(*ref));
    double *rough = calloc(m, sizeof(*rough));
    assert_true(ref && rough);
    for (size_t j = 0; j < m; ++j) {
        const double vin = k->sp.vin_amp * sin(2.0 * M_PI * (double)j / (double)m);
        ref[j] = curve_at(&fine, vin);
        rough[j] = curve_at(&coarse, vin);
    }
    double sr[KMAX + 1], si[KMAX + 1], qr[KMAX + 1], qi[KMAX + 1];
    harmonics(ref, m, 1, kmax, sr, si);
    harmonics(rough, m, 1, kmax, qr, qi);
    /* Interpolation error of the reference: the sweep at twice the step
     * against the full one (linear interpolation: 4 x the error of the
     * full step, so this overstates it). */
    const double interp = rms_error(qr, qi, sr, si, kmax);
    /* Share of the reference's rms that lies above the band: what the
     * stage's decimation filter takes away near the crossover. */
    double above2 = 0.0;
    for (size_t j = 0; j < m; ++j) {
        double b = sr[0];
        for (int i = 1; i <= kmax; ++i) {
            const double ph = 2.0 * M_PI * (double)(((size_t)i * j) % m) / (double)m;
            b += sr[i] * cos(ph) - si[i] * sin(ph);
        }
        above2 += (ref[j] - b) * (ref[j] - b);
    }
    const double above = sqrt(above2 / (double)m) / an_rms(ref, m);

    const size_t n = per * (size_t)c->periods;
    double pr[KMAX + 1], pi[KMAX + 1];
    double *v = run_stage(c, 4, c->slew);
    harmonics(v, n, (size_t)c->periods, kmax, pr, pi);
    const double err = rms_error(pr, pi, sr, si, kmax);
    const double steady = steadiness(v, n, (size_t)c->periods, kmax);

    /* The stage's band-limited output against the unfiltered static curve at
     * the frame times: where they part, and by how much. */
    const double tau = k->g / (2.0 * M_PI * k->sp.gbw);
    double d2 = 0.0, r2 = 0.0, dmax = 0.0, at = 0.0, dmax_tau = 0.0;
    for (size_t i = 0; i < n; ++i) {
        const double ti = (double)i / HOST_RATE;
        const double want = curve_at(&fine, k->sp.vin_amp * sin(2.0 * M_PI * c->freq * ti));
        const double late = curve_at(&fine, k->sp.vin_amp * sin(2.0 * M_PI * c->freq * (ti - tau)));
        const double d = v[i] - want;
        d2 += d * d;
        r2 += want * want;
        if (fabs(d) > dmax) {
            dmax = fabs(d);
            at = want;
        }
        dmax_tau = fmax(dmax_tau, fabs(v[i] - late));
    }
    const double delay = fundamental_delay(pr, pi, sr, si, c->freq);
    /* Diagnostic only: the reference delayed by tau, to tell the op-amp's
     * delay from the rest of the difference. */
    double dr[KMAX + 1] = {0}, di[KMAX + 1] = {0};
    for (int i = 0; i <= kmax; ++i) {
        const double ph = -2.0 * M_PI * i * c->freq * tau;
        dr[i] = sr[i] * cos(ph) - si[i] * sin(ph);
        di[i] = sr[i] * sin(ph) + si[i] * cos(ph);
    }
    const double err_delayed = rms_error(pr, pi, dr, di, kmax);

    printf("%s (%s), 48 kHz x 4:\n", c->name, c->what);
    printf("  rms error %.4f %% (limit %.1f %%; ngspice-39 DC sweep of the same circuit, "
           "harmonics below %.0f kHz)\n",
           100.0 * err, 100.0 * MAX_RMS_ERROR, BAND_HZ / 1000.0);
    printf("  fundamental %.6f V (ngspice %.6f V), THD %.4f %% (ngspice %.4f %%)\n",
           hypot(pr[1], pi[1]), hypot(sr[1], si[1]), 100.0 * thd(pr, pi, kmax),
           100.0 * thd(sr, si, kmax));
    printf("  op-amp dynamics left out of the DC sweep: delay tau = G / (2 pi GBW) = %.3f us "
           "(2 pi f tau = %.4f %%); the plugin's fundamental lags by %.3f us; against the "
           "reference delayed by tau the rms error is %.4f %%\n",
           1e6 * tau, 100.0 * 2.0 * M_PI * c->freq * tau, 1e6 * delay, 100.0 * err_delayed);
    printf("  reference: pin within %.2g V of G x vin, interpolation error below %.1e, "
           "%.1e %% of its rms above %.0f kHz\n",
           pin_err, interp, 100.0 * above, BAND_HZ / 1000.0);
    printf("  band-limited stage output against the unfiltered curve at the frames: rms %.4f "
           "%%, largest %.3f mV at a load voltage of %+.3f V (%.3f mV against the curve delayed by "
           "tau); plugin steadiness %.1e\n",
           100.0 * sqrt(d2 / r2), 1e3 * dmax, at, 1e3 * dmax_tau, steady);
    free(v);
    printf("  by oversampling factor (in brackets: against the reference delayed by tau):");
    for (int f = 1; f <= 16; f *= 2) {
        double xr[KMAX + 1], xi[KMAX + 1];
        double *w = run_stage(c, f, c->slew);
        harmonics(w, n, (size_t)c->periods, kmax, xr, xi);
        printf(" x%d %.4f %% (%.4f %%)", f, 100.0 * rms_error(xr, xi, sr, si, kmax),
               100.0 * rms_error(xr, xi, dr, di, kmax));
        free(w);
    }
    printf("\n");
    fflush(stdout);
    free(ref);
    free(rough);
    free(t);

    assert_true(steady < STEADY_TOL);
    /* Reference: ngspice-39 on pushpull_stage.cir.in, the same circuit; Q pair
     * with IS and BF only (SPICE Gummel-Poon reduced to Ebers-Moll). */
    assert_true(err <= MAX_RMS_ERROR);
}

/* ---- spectrum ------------------------------------------------------------- */

static double dbc(const double *re, const double *im, int k)
{
    return 20.0 * log10(hypot(re[k], im[k]) / hypot(re[1], im[1]));
}

static void test_spectrum(CaseState *st, const PpCase *c, const Circuit *k)
{
    const double per = HOST_RATE / c->freq;
    const double dt = 1.0 / (HOST_RATE * GRID);
    const size_t grid_per = (size_t)llround(per) * GRID;
    const size_t rows = grid_per * (size_t)(c->settle + c->periods) + 1;
    char analysis[256];
    snprintf(analysis, sizeof(analysis),
             "tran %.17g %.17g 0 %.17g\nlinearize v(out) v(in) v(pin) v(x)", dt,
             (double)(rows - 1) * dt, dt);
    size_t got = 0;
    double *t = simulate(st, k, analysis, &got);
    if (got < rows) {
        fail_msg("ngspice gave %zu of %zu rows", got, rows);
    }
    /* Rows on the expected grid, and the netlist's source is the stage's sine
     * (1e-6: room for linearize's interpolation). */
    double in_err = 0.0;
    for (size_t j = 0; j < rows; ++j) {
        if (fabs(t[5 * j] - (double)j * dt) > 1e-3 * dt) {
            fail_msg("row %zu at t = %.15g s, expected %.15g s", j, t[5 * j], (double)j * dt);
        }
        const double want = k->sp.vin_amp * sin(2.0 * M_PI * c->freq * (double)j * dt);
        in_err = fmax(in_err, fabs(t[5 * j + 2] - want) / k->sp.vin_amp);
    }
    assert_true(in_err < 1e-6);

    const size_t nref = grid_per * (size_t)c->periods;
    const size_t j0 = grid_per * (size_t)c->settle;
    double *ref = malloc(nref * sizeof(*ref));
    assert_non_null(ref);
    /* How long the op-amp slews: |dx/dt| above 90 % of SR (central differences). */
    size_t slewing = 0;
    double rate_max = 0.0;
    for (size_t j = 0; j < nref; ++j) {
        ref[j] = t[5 * (j0 + j) + 1];
        const double dx = (t[5 * (j0 + j + 1) + 4] - t[5 * (j0 + j - 1) + 4]) / (2.0 * dt);
        rate_max = fmax(rate_max, fabs(dx));
        slewing += fabs(dx) > 0.9 * k->sp.slew;
    }
    free(t);

    const int kmax = band_kmax(c->freq);
    double sr[KMAX + 1], si[KMAX + 1], pr[KMAX + 1], pi[KMAX + 1], fr[KMAX + 1], fi[KMAX + 1];
    harmonics(ref, nref, (size_t)c->periods, kmax, sr, si);
    const double steady_ref = steadiness(ref, nref, (size_t)c->periods, kmax);
    const size_t n = (size_t)llround(per) * (size_t)c->periods;
    double *v = run_stage(c, 4, c->slew);
    harmonics(v, n, (size_t)c->periods, kmax, pr, pi);
    const double steady = steadiness(v, n, (size_t)c->periods, kmax);
    free(v);
    /* The same stage with a 100 V/us op-amp: how much the slew limit matters. */
    v = run_stage(c, 4, 100.0f);
    harmonics(v, n, (size_t)c->periods, kmax, fr, fi);
    free(v);

    printf("%s (%s), 48 kHz x 4:\n", c->name, c->what);
    printf("  fundamental %.6f V (ngspice %.6f V); op-amp slewing %.1f us per half period, "
           "|dx/dt| up to %.3f x SR; steadiness %.1e (ngspice %.1e)\n",
           hypot(pr[1], pi[1]), hypot(sr[1], si[1]),
           1e6 * (double)slewing * dt / (2.0 * (double)c->periods), rate_max / k->sp.slew, steady,
           steady_ref);
    printf("  odd harmonics, dBc (limit %.0f dB where either is above %.0f dBc; ngspice-39 "
           "transient of the same circuit):\n",
           MAX_DB_DIFF, FLOOR_DBC);
    printf("     k   plugin  ngspice     diff   plugin at 100 V/us\n");
    int compared = 0, bad = 0;
    for (int h = 3; h <= kmax; h += 2) {
        const double lp = dbc(pr, pi, h), ls = dbc(sr, si, h);
        const int used = fmax(lp, ls) > FLOOR_DBC;
        compared += used;
        bad += used && !(fabs(lp - ls) <= MAX_DB_DIFF);
        printf("  %4d %8.2f %8.2f %8.2f %s %8.2f\n", h, lp, ls, lp - ls, used ? "  " : "--",
               dbc(fr, fi, h));
    }
    double even = -400.0, even_ref = -400.0;
    for (int h = 2; h <= kmax; h += 2) {
        even = fmax(even, dbc(pr, pi, h));
        even_ref = fmax(even_ref, dbc(sr, si, h));
    }
    printf("  largest even harmonic %.1f dBc (ngspice %.1f dBc)\n", even, even_ref);
    printf("  largest difference by oversampling factor:");
    for (int f = 1; f <= 16; f *= 2) {
        double xr[KMAX + 1], xi[KMAX + 1];
        double *w = run_stage(c, f, c->slew);
        harmonics(w, n, (size_t)c->periods, kmax, xr, xi);
        free(w);
        double worst = 0.0;
        for (int h = 3; h <= kmax; h += 2) {
            if (fmax(dbc(xr, xi, h), dbc(sr, si, h)) > FLOOR_DBC) {
                worst = fmax(worst, fabs(dbc(xr, xi, h) - dbc(sr, si, h)));
            }
        }
        printf(" x%d %.2f dB", f, worst);
    }
    printf("\n");
    fflush(stdout);
    free(ref);

    assert_true(steady_ref < STEADY_TOL);
    assert_true(steady < STEADY_TOL);
    assert_true(compared > 0);
    /* Reference: ngspice-39 on pushpull_stage.cir.in, the same circuit; Q pair
     * with IS and BF only (SPICE Gummel-Poon reduced to Ebers-Moll). */
    assert_int_equal(bad, 0);
}

/* ---- cases ---------------------------------------------------------------- */

static int setup(void **state)
{
    CaseState *st = *state;
    st->passed = 0;
    return sp_mkdtemp(st->dir, sizeof(st->dir), "spice-pp");
}

static int teardown(void **state)
{
    CaseState *st = *state;
    static const char *const files[] = {"pushpull_stage.cir", "ngspice.log", "table.txt"};
    sp_cleanup(st->dir, files, sizeof(files) / sizeof(files[0]), !st->passed, st->c->name);
    return 0;
}

static void test_case(void **state)
{
    CaseState *st = *state;
    const PpCase *c = st->c;
    const double per = HOST_RATE / c->freq;
    assert_true(fabs(per - round(per)) < 1e-9); /* whole frames per period */
    Circuit k;
    circuit_of(c, &k);
    if (c->kind == PP_TRANSFER) {
        test_transfer(st, c, &k);
    } else {
        test_spectrum(st, c, &k);
    }
    st->passed = 1;
}

int main(int argc, char **argv)
{
    ngspice_path = sp_find_ngspice();
    if (!ngspice_path) {
        printf("SKIP: ngspice not found (install the Debian package ngspice); the push-pull "
               "stage is not compared with the reference simulator\n");
        return SP_EXIT_SKIP;
    }
    const char *dir = getenv("OS_SPICE_DIR");
    if (!dir || !*dir) {
        fprintf(stderr, "test_spice_pushpull: OS_SPICE_DIR (where the netlist templates are) is "
                        "not set\n");
        return 1;
    }
    snprintf(template_path, sizeof(template_path), "%s/pushpull_stage.cir.in", dir);
    struct CMUnitTest tests[N_CASES];
    for (size_t i = 0; i < N_CASES; ++i) {
        states[i].c = &cases[i];
        tests[i] = (struct CMUnitTest){cases[i].name, test_case, setup, teardown, &states[i]};
    }
    if (argc > 1) {
        cmocka_set_test_filter(argv[1]);
    }
    return _cmocka_run_group_tests("spice_pushpull", tests, N_CASES, NULL, NULL);
}
