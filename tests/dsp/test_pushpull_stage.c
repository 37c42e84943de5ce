/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The push-pull follower stage against textbook relations and trade facts:
 * current gain of the pair, the crossover dead zone, class-B efficiency and
 * transistor dissipation, and crossover distortion against bias, feedback
 * point and frequency. Each check names its source beside it; "common
 * practice" marks a trade rule of thumb, "from memory" a figure not looked up
 * for this test. THD is the IEC 60268-3 ratio (analysis/analysis.h). Meters
 * describe the last os_stage_process() call, so every metered span is
 * processed in one call. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis.h"
#include "os_circuit.h" /* OS_FEEDBACK_TOTAL, the divider R1 + R2 */
#include "os_opamp.h"   /* OS_VSENSE, the current limiter's sense voltage */
#include "outstage.h"

typedef struct {
    OsParam param;
    float value;
} Setting;

#define MAX_SETTINGS 10

/* Stage input voltage for a full-scale sample (contract: sample x fullscale). */
#define FULLSCALE 20.0
/* Defaults of the contract's port table used in the predictions below. */
#define GAIN_DB 6.0
#define RAIL 12.0
#define LOAD 8.0
#define BETA 70.0
#define VBE 0.65
#define EMITTER_R 0.22
#define ILIMIT 0.025

/* Thermal voltage kT/q at 27 degC, the contract's temperature (CODATA 2018
 * constants): 25.865 mV. Computed here rather than taken from dsp/. */
#define VT (1.380649e-23 * 300.15 / 1.602176634e-19)

static double gain_lin(void)
{
    return pow(10.0, GAIN_DB / 20.0);
}

static OsStage *make(OsStageKind kind, double rate, const Setting *set)
{
    OsStage *s = os_stage_new(kind, rate, NULL);
    assert_non_null(s);
    assert_int_equal(os_stage_set(s, OS_P_FULLSCALE, (float)FULLSCALE), OS_OK);
    for (int i = 0; i < MAX_SETTINGS && set[i].param != OS_P_COUNT; ++i) {
        assert_int_equal(os_stage_set(s, set[i].param, set[i].value), OS_OK);
    }
    os_stage_reset(s);
    return s;
}

/* Run a sine at f that asks for a peak of vpk volts across the load (G x the
 * stage input) for settle + n frames. The last n frames are processed in one
 * call, so the meters describe exactly them; their load voltage goes to v (if
 * not NULL). */
static void run_span(OsStage *s, double rate, double f, double vpk, size_t settle, size_t n,
                     double *v, OsMeters *m)
{
    const size_t total = settle + n;
    float *in = malloc(total * sizeof(float));
    float *out = malloc(total * sizeof(float));
    double *vl = malloc(total * sizeof(double));
    assert_non_null(in);
    assert_non_null(out);
    assert_non_null(vl);
    const double amp = vpk / (gain_lin() * FULLSCALE);
    for (size_t i = 0; i < total; ++i) {
        in[i] = (float)(amp * sin(2.0 * M_PI * f * (double)i / rate));
    }
    if (settle > 0) {
        os_stage_process_probe(s, in, out, vl, (uint32_t)settle);
    }
    os_stage_process_probe(s, in + settle, out + settle, vl + settle, (uint32_t)n);
    os_stage_meters(s, m);
    if (v) {
        memcpy(v, vl + settle, n * sizeof(double));
    }
    free(in);
    free(out);
    free(vl);
}

/* Base-emitter voltage of the contract's transistor at collector current ic:
 * Ebers-Moll in the forward-active region, VT ln(1 + Ic/Is), with Is set by
 * `vbe` at 100 mA (os_bjt.h, the interface contract). */
static double vbe_at(double vbe100, double ic)
{
    const double is = 0.1 / expm1(vbe100 / VT);
    return VT * log1p(ic / is);
}

/* --- Current gain of the pair -------------------------------------------- */

typedef struct {
    OsStageKind kind;
    double beta;
    double ilimit; /* A */
    double rail;   /* V */
    double vpk;    /* peak load voltage asked for */
    int clipped;   /* expected: 1 current limited, 0 clean */
    const char *source;
} LimitCase;

/* Common practice: an emitter follower multiplies the drive current by
 * beta + 1, so a 25 mA op-amp behind a beta-50 pair can deliver about
 * 51 x 25 mA = 1.28 A; a 5 V peak into 8 ohm needs only 625 mA. Without the pair
 * the op-amp alone clips at 25 mA x 8 ohm = 0.2 V. Rails are raised where the
 * current limit would otherwise sit beyond the op-amp's swing (rail - 1.5 V
 * headroom, less one Vbe and the emitter-resistor drop), so that it is the
 * current that clips, not the rail. */
static const LimitCase limit_cases[] = {
    {OS_STAGE_PUSHPULL, 50.0, 0.025, 12.0, 5.0, 0,
     "51 x 25 mA = 1.28 A > 625 mA: clean (common practice)"},
    {OS_STAGE_OPAMP, 50.0, 0.025, 12.0, 5.0, 1,
     "op-amp alone: 25 mA x 8 ohm = 0.2 V, clipped (common practice)"},
    {OS_STAGE_PUSHPULL, 50.0, 0.025, 24.0, 15.0, 1,
     "1.875 A asked > 51 x 25 mA: limited at 1.275 A (common practice)"},
    {OS_STAGE_PUSHPULL, 50.0, 0.010, 12.0, 8.0, 1,
     "1 A asked > 51 x 10 mA: limited at 0.51 A (common practice)"},
    {OS_STAGE_PUSHPULL, 100.0, 0.025, 30.0, 25.0, 1,
     "3.1 A asked > 101 x 25 mA: limited at 2.525 A (common practice)"},
};

static void current_gain(void **state)
{
    (void)state;
    /* 4x at 48 kHz (the default): the limiter acts within a cycle of 1 kHz;
     * peak_current is read from the oversampled circuit, not the filtered output. */
    const double rate = 48000.0, f = 1000.0;
    const size_t settle = 960, n = 960; /* 20 ms each, 20 whole periods measured */
    double *v = malloc(n * sizeof(double));
    assert_non_null(v);
    for (size_t c = 0; c < sizeof(limit_cases) / sizeof(limit_cases[0]); ++c) {
        const LimitCase *lc = &limit_cases[c];
        Setting set[MAX_SETTINGS] = {{OS_P_ILIMIT, (float)(lc->ilimit * 1e3)},
                                     {OS_P_RAIL, (float)lc->rail},
                                     {OS_P_LOAD, (float)LOAD},
                                     {OS_P_COUNT, 0}};
        if (lc->kind == OS_STAGE_PUSHPULL) {
            set[3] = (Setting){OS_P_BETA, (float)lc->beta};
            set[4] = (Setting){OS_P_COUNT, 0};
        }
        OsStage *s = make(lc->kind, rate, set);
        OsMeters m;
        run_span(s, rate, f, lc->vpk, settle, n, v, &m);
        const double thd = an_thd(v, n, rate, f, 20);
        const double limit =
            lc->kind == OS_STAGE_PUSHPULL ? (lc->beta + 1.0) * lc->ilimit : lc->ilimit;
        printf("%-8s beta %3.0f ilimit %2.0f mA rail %2.0f V, %4.1f V asked into 8 ohm: peak "
               "current %.4f A (limit %.4f A, ratio %.4f), peak load voltage %.3f V, THD %.3f %%, "
               "limiting %.1f %% (%s)\n",
               os_stage_info(lc->kind)->cli_name, lc->beta, lc->ilimit * 1e3, lc->rail, lc->vpk,
               m.peak_current, limit, m.peak_current / limit, m.peak_current * LOAD, 100.0 * thd,
               m.limiting, lc->source);
        /* Clean or clipped by the contract's clip-onset criterion, THD 1 %. */
        if (lc->clipped) {
            assert_true(thd > 0.01);
            assert_true(m.limiting > 10.0);
            /* The limiter is a sense transistor with an exponential knee of
             * Ik = VT / Rs = VT / OS_VSENSE x ilimit (os_opamp.h), 4 % of the
             * limit: the limited current is defined to within one knee width. */
            const double knee = VT / OS_VSENSE;
            assert_true(fabs(m.peak_current / limit - 1.0) < knee);
        } else {
            assert_true(thd < 0.01);
            assert_true(m.limiting == 0.0);
            /* Ohm's law: the asked 5 V / 8 ohm, within 1 % (the loop tracks). */
            assert_true(fabs(m.peak_current / (lc->vpk / LOAD) - 1.0) < 0.01);
        }
        os_stage_free(s);
    }
    free(v);
}

/* --- Dead zone with the follower outside the loop ------------------------ */

typedef struct {
    double ith; /* load current taken as "left zero", A */
    const char *why;
} DeadZoneCase;

/* With loop = 0 the op-amp pin follows G x vin exactly and the pair's output
 * stays near zero until the pin exceeds one Vbe. Where the load "leaves zero"
 * depends on the current taken as non-zero, by VT ln 10 = 60 mV per decade
 * (Ebers-Moll), so each threshold is checked against Vbe(Ic) + Ie (R_e + R_L).
 * With vbe = 0.65 V at 100 mA, 1 mA is two decades down: the edge there is
 * about 0.54 V, below the trade's 0.6 .. 0.7 V, which describes a junction
 * carrying signal current; that figure is checked below on the conducting part
 * of the transfer instead of at a threshold. */
static const DeadZoneCase dz_cases[] = {
    {1e-3, "8 mV across 8 ohm, -56 dB re the 625 mA of a 5 V peak"},
    {10e-3, "80 mV across 8 ohm, -36 dB re the 625 mA of a 5 V peak"},
};

/* Edge of the dead zone on the rising half of a slow sine: the pin voltage at
 * which i crosses +ith (dir 1) or stops being below -ith (dir -1), interpolated
 * linearly between samples. */
static double edge(const double *iload, const double *vpin, size_t n, double ith, int dir)
{
    for (size_t i = 1; i < n; ++i) {
        const double a = dir * iload[i - 1], b = dir * iload[i];
        if (dir > 0 && a < ith && b >= ith) {
            const double t = (ith - a) / (b - a);
            return vpin[i - 1] + t * (vpin[i] - vpin[i - 1]);
        }
        if (dir < 0 && a >= ith && b < ith) {
            const double t = (a - ith) / (a - b);
            return vpin[i - 1] + t * (vpin[i] - vpin[i - 1]);
        }
    }
    return (double)NAN;
}

/* Least-squares line of load voltage against pin voltage over the samples
 * with lo <= |load current| <= hi and the sign dir; returns where the line
 * crosses zero load voltage. */
static double intercept(const double *iload, const double *vl, const double *vpin, size_t n,
                        double lo, double hi, int dir)
{
    double sx = 0.0, sy = 0.0, sxx = 0.0, sxy = 0.0;
    double k = 0.0;
    for (size_t i = 0; i < n; ++i) {
        const double a = dir * iload[i];
        if (a >= lo && a <= hi) {
            sx += vpin[i];
            sy += vl[i];
            sxx += vpin[i] * vpin[i];
            sxy += vpin[i] * vl[i];
            k += 1.0;
        }
    }
    const double slope = (k * sxy - sx * sy) / (k * sxx - sx * sx);
    const double off = (sy - slope * sx) / k;
    return -off / slope;
}

static void dead_zone(void **state)
{
    (void)state;
    /* 1x at 48 kHz: no oversampling filters, so the load voltage of frame i
     * belongs to input frame i (latency 0) and the transfer is read directly. A
     * 2 Hz sine of 5 V peak at the pin moves at most 1.3 mV per frame, fine
     * against the 26 mV (VT) scale of the edge; at 2 Hz the op-amp (loop gain
     * 2.5e5) and the follower are static. */
    const double rate = 48000.0, f = 2.0, vpk = 5.0;
    const Setting set[] = {
        {OS_P_OVERSAMPLE, 1.0f}, {OS_P_LOOP, 0.0f}, {OS_P_BIAS, 0.0f}, {OS_P_COUNT, 0}};
    OsStage *s = make(OS_STAGE_PUSHPULL, rate, set);
    assert_int_equal(os_stage_latency(s), 0);
    const size_t n = (size_t)(rate / f);
    float *in = malloc(n * sizeof(float)), *out = malloc(n * sizeof(float));
    double *vl = malloc(n * sizeof(double)), *vpin = malloc(n * sizeof(double));
    double *iload = malloc(n * sizeof(double));
    assert_non_null(in);
    assert_non_null(out);
    assert_non_null(vl);
    assert_non_null(vpin);
    assert_non_null(iload);
    /* One period from the negative peak: -vpk cos(w t), rising half first. */
    for (size_t i = 0; i < n; ++i) {
        in[i] = (float)(-vpk / (gain_lin() * FULLSCALE) * cos(2.0 * M_PI * f * (double)i / rate));
        vpin[i] = gain_lin() * FULLSCALE * (double)in[i];
    }
    os_stage_process_probe(s, in, out, vl, (uint32_t)n);
    for (size_t i = 0; i < n; ++i) {
        iload[i] = vl[i] / LOAD;
    }
    const size_t half = n / 2;

    for (size_t c = 0; c < sizeof(dz_cases) / sizeof(dz_cases[0]); ++c) {
        const double ith = dz_cases[c].ith;
        const double up = edge(iload, vpin, half, ith, 1);
        const double dn = edge(iload, vpin, half, ith, -1);
        /* Ebers-Moll (os_bjt.h; Ebers and Moll, Proc. IRE 42, 1954): Ie = ith
         * (with loop = 0 the divider hangs on the op-amp pin, not the load),
         * Ic = Ie beta / (beta + 1). */
        const double predict = vbe_at(VBE, ith * BETA / (BETA + 1.0)) + ith * (EMITTER_R + LOAD);
        printf("dead zone at %.0f mA (%s): +%.4f V / %.4f V; Ebers-Moll predicts +-%.4f V\n",
               ith * 1e3, dz_cases[c].why, up, dn, predict);
        /* Within 1 mV: the interpolation error on a 1.3 mV grid. */
        assert_true(fabs(up - predict) < 1e-3);
        assert_true(fabs(-dn - predict) < 1e-3);
    }

    /* The trade's dead zone: an emitter follower's output sits one Vbe, 0.6 to
     * 0.7 V, below its base (common practice; the constant-voltage-drop model
     * of Sedra and Smith, Microelectronic Circuits, diode chapter, takes 0.7 V,
     * from memory), so the conducting transfer, extended to zero output, meets
     * the input axis there. The line is fitted where the pair carries signal currents, 0.1 A to
     * 0.5 A (0.8 V to 4 V across 8 ohm). */
    const double x_up = intercept(iload, vl, vpin, half, 0.1, 0.5, 1);
    const double x_dn = intercept(iload, vl, vpin, half, 0.1, 0.5, -1);
    printf("dead zone by the conducting transfer's intercept (0.1 A .. 0.5 A): +%.4f V / %.4f V "
           "(common practice: +-0.6 .. 0.7 V)\n",
           x_up, x_dn);
    assert_true(x_up > 0.6 && x_up < 0.7);
    assert_true(-x_dn > 0.6 && -x_dn < 0.7);

    free(in);
    free(out);
    free(vl);
    free(vpin);
    free(iload);
    os_stage_free(s);
}

/* --- Class-B efficiency -------------------------------------------------- */

/* Sedra and Smith, Microelectronic Circuits, class B output stage: with
 * supplies +-Vcc and a sine of peak Vp across R_L, P_L = Vp^2 / (2 R_L),
 * P_S = 2 Vcc Vp / (pi R_L), so eta = (pi / 4) Vp / Vcc, never above pi / 4 =
 * 78.5 % (Vp <= Vcc). The textbook's circuit has no emitter resistors, so
 * emitter_r = 0 here: then the meters' load power plus transistor dissipation
 * is all the power the pair draws (with R_e the loss in R_e would be left out).
 * What the textbook neglects bounds the ratio eta / eta_textbook:
 * - base current: the rails supply only Ic = Ie beta / (beta + 1), the base
 *   current comes from the op-amp at the base voltage, at most the rail; so
 *   the ratio lies between 1 and (beta + 1) / beta = 1 + 1/beta (1.43 %);
 * - the feedback divider (loop = 1: R1 + R2 across the load) draws
 *   R_L / (R1 + R2) = 0.08 % more emitter current, not counted as load power.
 * So 1 - R_L / (R1 + R2) <= eta / eta_textbook <= 1 + 1/beta. The textbook
 * curve is evaluated at the Vp measured from the load power meter. */
static const double eff_vpk[] = {1.0, 3.0, 5.0, 7.0, 9.0};

static const Setting textbook_set[] = {
    {OS_P_EMITTER_R, 0.0f}, {OS_P_LOOP, 1.0f}, {OS_P_BIAS, 0.0f}, {OS_P_COUNT, 0}};

static void efficiency(void **state)
{
    (void)state;
    /* 48 kHz x 4 (defaults): power meters are sums over the oversampled steps;
     * 20 ms settle, 20 whole periods of 1 kHz measured in one call. */
    const double rate = 48000.0, f = 1000.0;
    const size_t settle = 960, n = 960;
    double *v = malloc(n * sizeof(double));
    assert_non_null(v);
    const double lo = 1.0 - LOAD / OS_FEEDBACK_TOTAL, hi = 1.0 + 1.0 / BETA;
    for (size_t c = 0; c < sizeof(eff_vpk) / sizeof(eff_vpk[0]); ++c) {
        OsStage *s = make(OS_STAGE_PUSHPULL, rate, textbook_set);
        OsMeters m;
        run_span(s, rate, f, eff_vpk[c], settle, n, v, &m);
        const double eta = m.load_power / (m.load_power + m.dissipation);
        const double vp = sqrt(2.0 * LOAD * m.load_power);
        const double eta_tb = M_PI / 4.0 * vp / RAIL;
        const double thd = an_thd(v, n, rate, f, 20);
        printf("class B, Vp %.1f V asked: Vp %.4f V, THD %.3f %%, P_L %.4f W, P_D %.4f W, "
               "efficiency %.2f %% vs (pi/4) Vp/Vcc %.2f %% (ratio %.4f, bounds %.4f .. %.4f; "
               "Sedra and Smith, class B)\n",
               eff_vpk[c], vp, 100.0 * thd, m.load_power, m.dissipation, 100.0 * eta,
               100.0 * eta_tb, eta / eta_tb, lo, hi);
        /* The follower is inside the loop: Vp is what was asked, within 1 %,
         * and unclipped by the contract's 1 % THD criterion. */
        assert_true(fabs(vp / eff_vpk[c] - 1.0) < 0.01);
        assert_true(thd < 0.01);
        assert_true(eta < M_PI / 4.0);
        assert_true(eta / eta_tb >= lo && eta / eta_tb <= hi);
        os_stage_free(s);
    }
    free(v);
}

/* --- Transistor dissipation ---------------------------------------------- */

/* Sedra and Smith, class B output stage: P_D = 2 Vcc Vp / (pi R_L) - Vp^2 /
 * (2 R_L) peaks at Vp = 2 Vcc / pi (7.639 V at 12 V) at P_Dmax = 2 Vcc^2 /
 * (pi^2 R_L) (3.648 W into 8 ohm). The curve is a parabola in Vp, so the peak
 * is located by a parabola through the largest swept value and its
 * neighbours. The base current the textbook neglects (previous test) changes
 * the supply power by at most P_S / (beta + 1), and P_D = P_S / 2 at the peak:
 * value within 2 / (beta + 1) (2.8 %). It adds to P_D a term in Vbe |Ie| /
 * (beta + 1), nearly linear in Vp, which moves the peak by about
 * Vbe / (beta Vcc) (0.08 %): location within 1 / (beta + 1) (1.4 %). */
static void dissipation_peak(void **state)
{
    (void)state;
    const double rate = 48000.0, f = 1000.0;
    const size_t settle = 960, n = 960;
    enum { STEPS = 9 };
    double vp[STEPS], pd[STEPS];
    size_t best = 0;
    for (size_t i = 0; i < STEPS; ++i) {
        vp[i] = 5.0 + 0.5 * (double)i; /* 5 V .. 9 V, unclipped (see efficiency) */
        OsStage *s = make(OS_STAGE_PUSHPULL, rate, textbook_set);
        OsMeters m;
        run_span(s, rate, f, vp[i], settle, n, NULL, &m);
        pd[i] = m.dissipation;
        best = pd[i] > pd[best] ? i : best;
        os_stage_free(s);
    }
    /* The maximum must be inside the sweep to be located. */
    assert_true(best > 0 && best < STEPS - 1);
    const double y0 = pd[best - 1], y1 = pd[best], y2 = pd[best + 1], h = 0.5;
    const double at = vp[best] + 0.5 * h * (y0 - y2) / (y0 - 2.0 * y1 + y2);
    const double peak = y1 - (y0 - y2) * (y0 - y2) / (8.0 * (y0 - 2.0 * y1 + y2));
    const double at_tb = 2.0 * RAIL / M_PI;
    const double peak_tb = 2.0 * RAIL * RAIL / (M_PI * M_PI * LOAD);
    printf("dissipation swept 5 .. 9 V peak: largest %.4f W at %.1f V; parabola peak %.4f W at "
           "%.4f V; textbook 2 Vcc^2/(pi^2 R_L) = %.4f W at 2 Vcc/pi = %.4f V (errors %+.2f %%, "
           "%+.2f %%; Sedra and Smith, class B)\n",
           y1, vp[best], peak, at, peak_tb, at_tb, 100.0 * (peak / peak_tb - 1.0),
           100.0 * (at / at_tb - 1.0));
    assert_true(fabs(at / at_tb - 1.0) < 1.0 / (BETA + 1.0));
    assert_true(fabs(peak / peak_tb - 1.0) < 2.0 / (BETA + 1.0));
}

/* --- Crossover distortion against bias ----------------------------------- */

/* Idle emitter current of the pair at bias voltage vb: each half sees vb / 2 =
 * Vbe(Ic) + R_e Ie (Ebers-Moll, os_bjt.h), solved by bisection. Without R_e,
 * bias = 2 x vbe gives 100 mA by the definition of vbe (its value at 100 mA);
 * R_e = 0.22 ohm takes about 13 mV of each half and brings it to about 60 mA. */
static double idle_current(double vb)
{
    double lo = 0.0, hi = 2.0;
    for (int i = 0; i < 100; ++i) {
        const double ie = 0.5 * (lo + hi);
        const double v = vbe_at(VBE, ie * BETA / (BETA + 1.0)) + EMITTER_R * ie;
        if (v > 0.5 * vb) {
            hi = ie;
        } else {
            lo = ie;
        }
    }
    return 0.5 * (lo + hi);
}

static double thd_at(double rate, double f, double vpk, const Setting *set, int kmax, double *fund)
{
    OsStage *s = make(OS_STAGE_PUSHPULL, rate, set);
    const size_t n = an_whole_periods((size_t)(0.02 * rate), rate, f);
    assert_true(n > 0);
    double *v = malloc(n * sizeof(double));
    assert_non_null(v);
    OsMeters m;
    run_span(s, rate, f, vpk, (size_t)(0.01 * rate), n, v, &m);
    const double thd = an_thd(v, n, rate, f, kmax);
    if (fund) {
        *fund = an_harmonic_amp(v, n, rate, f, 1);
    }
    free(v);
    os_stage_free(s);
    return thd;
}

static void crossover_bias(void **state)
{
    (void)state;
    /* 48 kHz x 4, 1 kHz, harmonics to 20 kHz (the audio band; common
     * practice). With loop = 0 the crossover is a static curve, resolved at
     * 192 kHz steps. Levels are the pin voltage G x vin asked: 1.5 V (just
     * out of the dead zone) and 9 V. */
    const double rate = 48000.0, f = 1000.0, low = 1.5, high = 9.0;
    /* 2 x vbe: the contract's "about 2 x vbe: class AB"; with the default
     * 0.22 ohm emitter resistors it idles at about 60 mA (see idle_current),
     * a sensible idle current for an 8 ohm stage of this size (common
     * practice: tens of mA). */
    const float bias_ab = (float)(2.0 * VBE);
    const Setting class_b[] = {{OS_P_LOOP, 0.0f}, {OS_P_BIAS, 0.0f}, {OS_P_COUNT, 0}};
    const Setting class_ab[] = {{OS_P_LOOP, 0.0f}, {OS_P_BIAS, bias_ab}, {OS_P_COUNT, 0}};

    /* Idle collector current from the dissipation meter at zero signal: P =
     * 2 Ic (Vcc - R_e Ie) + 2 Ib Vbe ~ 2 Vcc Ic; the neglected terms are
     * R_e Ie / Vcc (0.1 %) and Vbe / (beta Vcc) (0.08 %), so Ebers-Moll's
     * Ic = Ie beta / (beta + 1) must hold within 1 %. */
    OsStage *s = make(OS_STAGE_PUSHPULL, rate, class_ab);
    OsMeters m;
    run_span(s, rate, f, 0.0, 960, 960, NULL, &m);
    os_stage_free(s);
    const double iq = m.dissipation / (2.0 * RAIL);
    const double iq_em = idle_current((double)bias_ab) * BETA / (BETA + 1.0);
    printf("bias %.2f V, R_e %.2f ohm: idle dissipation %.4f W -> idle collector current "
           "%.2f mA (Ebers-Moll %.2f mA)\n",
           (double)bias_ab, EMITTER_R, m.dissipation, iq * 1e3, iq_em * 1e3);
    assert_true(fabs(iq / iq_em - 1.0) < 0.01);

    double a_bl, a_bh, a_abl;
    const double b_low = thd_at(rate, f, low, class_b, 20, &a_bl);
    const double b_high = thd_at(rate, f, high, class_b, 20, &a_bh);
    const double ab_low = thd_at(rate, f, low, class_ab, 20, &a_abl);
    printf("loop 0, class B: THD %.3f %% at %.1f V asked (fundamental %.3f V), %.3f %% at %.1f V "
           "(fundamental %.3f V)\n",
           100.0 * b_low, low, a_bl, 100.0 * b_high, high, a_bh);
    printf("loop 0, class AB (bias %.2f V): THD %.4f %% at %.1f V asked (fundamental %.3f V); "
           "class B / class AB = %.0f\n",
           (double)bias_ab, 100.0 * ab_low, low, a_abl, b_low / ab_low);
    /* Sedra and Smith, class B output stage (from memory): crossover
     * distortion is most pronounced at low signal levels; the dead zone is a
     * fixed voltage, a smaller share of a larger swing. */
    assert_true(b_low > b_high);
    /* Class AB removes the dead zone: a large margin, at least an order of
     * magnitude (common practice). */
    assert_true(b_low / ab_low > 10.0);
}

/* --- Crossover distortion against frequency, follower inside the loop ----- */

/* Feedback from the load shrinks the dead zone by the loop gain (Sedra and
 * Smith, class B output stage with an op-amp in the loop: the dead band
 * becomes +-0.7 V / A0, from memory). A single-pole op-amp's loop gain is GBW / (G f)
 * (ibid., sec. 2.8), so the crossover residue rises with frequency. */
static void crossover_frequency(void **state)
{
    (void)state;
    /* 192 kHz host rate so that harmonics 2..7 of 10 kHz (to 70 kHz) lie in the
     * kept band (0.42 x 192 kHz = 80.6 kHz); the same harmonics are counted at
     * every frequency. x4 (768 kHz steps, 1.3 us) resolves the op-amp's jump
     * across the dead zone (1.3 V at 0.5 V/us: 2.6 us). Fixed low level: 1 V
     * peak asked across the load, class B. */
    const double rate = 192000.0, vpk = 1.0;
    const int kmax = 7;
    const double freqs[] = {100.0, 1000.0, 5000.0, 10000.0};
    const Setting looped[] = {{OS_P_LOOP, 1.0f}, {OS_P_BIAS, 0.0f}, {OS_P_COUNT, 0}};
    const Setting open[] = {{OS_P_LOOP, 0.0f}, {OS_P_BIAS, 0.0f}, {OS_P_COUNT, 0}};
    double thd[4];
    for (size_t i = 0; i < 4; ++i) {
        thd[i] = thd_at(rate, freqs[i], vpk, looped, kmax, NULL);
        printf("loop 1, class B, %.0f V asked at %5.0f Hz: THD (H2..H7) %.4f %%", vpk, freqs[i],
               100.0 * thd[i]);
        if (i > 0) {
            printf(" (x%.2f for x%.0f in frequency)", thd[i] / thd[i - 1], freqs[i] / freqs[i - 1]);
            assert_true(thd[i] > thd[i - 1]);
        }
        printf("\n");
    }
    /* The same request with the follower outside the loop, at 1 kHz: the loop
     * gain there is GBW / (G f) = 1 MHz / (2 x 1 kHz) = 500, so the loop must
     * cut the crossover THD by at least an order of magnitude. */
    const double open_1k = thd_at(rate, 1000.0, vpk, open, kmax, NULL);
    printf("loop 0 at 1 kHz: THD (H2..H7) %.3f %%, %.0f x the loop-1 figure\n", 100.0 * open_1k,
           open_1k / thd[1]);
    assert_true(open_1k / thd[1] > 10.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(current_gain),   cmocka_unit_test(dead_zone),
        cmocka_unit_test(efficiency),     cmocka_unit_test(dissipation_peak),
        cmocka_unit_test(crossover_bias), cmocka_unit_test(crossover_frequency),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
