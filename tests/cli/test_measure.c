/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage measure's sweep on a current-limited op-amp stage, against the
 * physics that places its clip onset:
 *
 * - Ohm's and Kirchhoff's laws: the op-amp's limited current Ilim feeds the
 *   load R_L and the 10 kOhm feedback divider in parallel, so the load voltage
 *   cannot pass C = Ilim (R_L || 10 kOhm).
 * - The limiter is a sense resistor and transistor (dsp/os_opamp.h): it
 *   diverts a share E = exp((io - Ilim) / Ik) of the op-amp's drive, with the
 *   knee Ik = Ilim VT / VSENSE (4.0 % of Ilim per e-fold), so the output bends
 *   before C. To first order the loop answers the diverted drive with an input
 *   error SR E / wt (slew rate over 2 pi GBW), which the closed-loop gain G
 *   puts on the output: e(t) = -G (SR / wt) [E(io) - E(-io)], io = vo / Rp.
 *   The level at which e's harmonics 2..20 reach 1 % of the output (IEC
 *   60268-3) is where THD reaches 1 %: the predicted onset V1, found below by
 *   bisection. The sweep's onset is the first level at or above it, so it lies
 *   within one step above V1; 1 % more on each side covers the first-order
 *   neglects (tanh linearised, io taken as a pure sine), each under 0.3 %.
 * - A sine of peak V into R delivers V^2 / (2 R) (Ohm's law, averaged). At a
 *   level with THD x the peak departs from the fundamental's by at most
 *   sqrt(K) x (Cauchy-Schwarz over K = 19 harmonics) and the power exceeds the
 *   fundamental's by (1 + x^2), which bounds P / (Vpk^2 / 2R).
 */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "sweep.h"

/* Thermal voltage at 27 degC and the sense transistor's turn-on voltage
 * (dsp/os_opamp.h: OS_VT, OS_VSENSE). */
#define VT 0.025852
#define VSENSE 0.65
#define FEEDBACK 10.0e3
#define HARMONICS 19.0

/* First-order THD of the limiter's output error at peak load voltage vpk
 * (file comment), harmonics 2..20 by direct DFT over one period. */
static double predicted_thd(double vpk, double rp, double ilim, double g, double sr, double wt)
{
    enum { M = 4096 };
    const double ik = ilim * VT / VSENSE;
    double sum = 0.0;
    for (int k = 2; k <= 20; ++k) {
        double re = 0.0, im = 0.0;
        for (int i = 0; i < M; ++i) {
            const double th = 2.0 * M_PI * i / M;
            const double io = vpk * sin(th) / rp;
            const double e = -g * sr / wt * (exp((io - ilim) / ik) - exp((-io - ilim) / ik));
            re += e * cos(k * th);
            im += e * sin(k * th);
        }
        sum += (re * re + im * im) * 4.0 / ((double)M * M);
    }
    return sqrt(sum) / vpk;
}

/* The peak load voltage at which predicted_thd() reaches 1 %, by bisection
 * (the THD rises monotonically with the level). */
static double predicted_onset(double c, double rp, double ilim, double g, double sr, double wt)
{
    double lo = 0.5 * c, hi = c;
    for (int i = 0; i < 50; ++i) {
        const double mid = 0.5 * (lo + hi);
        if (predicted_thd(mid, rp, ilim, g, sr, wt) < CLI_CLIP_THD) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    return 0.5 * (lo + hi);
}

/* P / (Vpk^2 / 2R) bounds for THD x (file comment). */
static void power_bounds(double x, double *lo, double *hi)
{
    const double d = sqrt(HARMONICS) * x;
    *lo = (1.0 + x * x) / ((1.0 + d) * (1.0 + d));
    *hi = (1.0 + x * x) / ((1.0 - d) * (1.0 - d));
}

static void onset_at(double ilimit_ma, double load)
{
    char err[CLI_ERR_LEN];
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_OPAMP);
    s.value[OS_P_RAIL] = 15.0f; /* swing 13.5 V: far above every limit below */
    s.value[OS_P_ILIMIT] = (float)ilimit_ma;
    s.value[OS_P_LOAD] = (float)load;
    const double c = ilimit_ma * 1e-3 * load * FEEDBACK / (load + FEEDBACK);
    const double g = cli_settings_gain(&s); /* fullscale 1 V, drive 0 dB */
    CliSweepSpec spec;
    cli_sweep_spec_init(&spec, &s);
    spec.from = 20.0 * log10(0.8 * c / g);
    spec.to = 20.0 * log10(1.1 * c / g);
    spec.step = 0.05;
    CliSweep sw;
    assert_int_equal(cli_sweep_run(&spec, &sw, err, sizeof(err)), 0);
    assert_true(sw.onset > 0 && sw.clean >= 0);
    const CliSweepPoint *on = &sw.pt[sw.onset], *cl = &sw.pt[sw.clean];
    /* Defaults of the contract: slew 0.5 V/us, gain-bandwidth 1 MHz. */
    const double rp = load * FEEDBACK / (load + FEEDBACK);
    const double v1 = predicted_onset(c, rp, ilimit_ma * 1e-3, g, 0.5e6, 2.0 * M_PI * 1e6);
    const double lo_v = v1 * 0.99, hi_v = v1 * pow(10.0, spec.step / 20.0) * 1.01;
    printf("%4.0f mA into %5.0f ohm: C = %.4f V, predicted onset %.4f V (%.4f C); measured "
           "%.4f V (%.4f C, %.4f of predicted) at THD %.3f %%\n",
           ilimit_ma, load, c, v1, v1 / c, on->vout_peak, on->vout_peak / c, on->vout_peak / v1,
           100.0 * on->thd);
    assert_true(on->thd >= CLI_CLIP_THD && sw.pt[sw.onset - 1].thd < CLI_CLIP_THD);
    assert_true(on->vout_peak <= c);
    assert_true(on->vout_peak >= lo_v && on->vout_peak <= hi_v);

    /* The largest clean power: its own peak by Ohm's law, under C^2 / 2R, and
     * just below the predicted onset. */
    double lo, hi;
    power_bounds(cl->thd, &lo, &hi);
    const double ratio = cl->load_power / (cl->vout_peak * cl->vout_peak / (2.0 * load));
    printf("     largest clean %.5f W at %.4f V, THD %.3f %%: P / (Vpk^2/2R) = %.5f in [%.4f, "
           "%.4f]; P / (C^2/2R) = %.4f\n",
           cl->load_power, cl->vout_peak, 100.0 * cl->thd, ratio, lo, hi,
           cl->load_power / (c * c / (2.0 * load)));
    assert_true(ratio >= lo && ratio <= hi);
    assert_true(cl->load_power <= c * c / (2.0 * load) * (1.0 + cl->thd * cl->thd));
    /* One step below the onset: its peak lies within a step and 1 % below V1. */
    assert_true(cl->vout_peak >= lo_v * pow(10.0, -spec.step / 20.0) && cl->vout_peak <= v1 * 1.01);
    assert_true(cl->load_power >= pow(cl->vout_peak, 2.0) / (2.0 * load) * lo);
    assert_true(sw.clean == sw.onset - 1);

    /* Well below the limit the bound shrinks to a few parts in 10^4. */
    const CliSweepPoint *low = &sw.pt[0];
    power_bounds(low->thd, &lo, &hi);
    const double r0 = low->load_power / (low->vout_peak * low->vout_peak / (2.0 * load));
    printf("     at %.2f dBFS: %.4f V, THD %.4f %%, P / (Vpk^2/2R) = %.6f in [%.6f, %.6f]\n",
           low->level_dbfs, low->vout_peak, 100.0 * low->thd, r0, lo, hi);
    assert_true(r0 >= lo && r0 <= hi);
    cli_sweep_free(&sw);
}

static void onset_25ma_32ohm(void **state)
{
    (void)state;
    onset_at(25.0, 32.0);
}

static void onset_10ma_32ohm(void **state)
{
    (void)state;
    onset_at(10.0, 32.0);
}

static void onset_25ma_16ohm(void **state)
{
    (void)state;
    onset_at(25.0, 16.0);
}

static void onset_50ma_8ohm(void **state)
{
    (void)state;
    onset_at(50.0, 8.0);
}

static void onset_25ma_100ohm(void **state)
{
    (void)state;
    onset_at(25.0, 100.0);
}

/* A stage that never reaches its limits in the sweep reports no onset, and a
 * bad range is refused with a message. */
static void no_onset_and_bad_range(void **state)
{
    (void)state;
    char err[CLI_ERR_LEN];
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_OPAMP);
    s.value[OS_P_LOAD] = 10000.0f;
    s.value[OS_P_RAIL] = 15.0f;
    CliSweepSpec spec;
    cli_sweep_spec_init(&spec, &s);
    spec.from = -40.0;
    spec.to = -20.0; /* 0.2 V peak into 10 kOhm: 20 uA, far from any limit */
    spec.step = 10.0;
    CliSweep sw;
    assert_int_equal(cli_sweep_run(&spec, &sw, err, sizeof(err)), 0);
    assert_int_equal(sw.n, 3);
    assert_int_equal(sw.onset, -1);
    assert_int_equal(sw.clean, 2);
    cli_sweep_free(&sw);
    spec.step = 0.0;
    assert_int_equal(cli_sweep_run(&spec, &sw, err, sizeof(err)), -1);
    assert_non_null(strstr(err, "step"));
    cli_sweep_free(&sw);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(onset_25ma_32ohm),  cmocka_unit_test(onset_10ma_32ohm),
        cmocka_unit_test(onset_25ma_16ohm),  cmocka_unit_test(onset_50ma_8ohm),
        cmocka_unit_test(onset_25ma_100ohm), cmocka_unit_test(no_onset_and_bad_range),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
