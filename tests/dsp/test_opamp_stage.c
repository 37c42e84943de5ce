/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp stage against published relations and trade facts. Each table row
 * names its source. THD is the IEC 60268-3 ratio (analysis/analysis.h). */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "analysis.h"
#include "outstage.h"

typedef struct {
    OsParam param;
    float value;
} Setting;

#define MAX_SETTINGS 8

static OsStage *make(double rate, const Setting *set)
{
    OsStage *s = os_stage_new(OS_STAGE_OPAMP, rate, NULL);
    assert_non_null(s);
    for (int i = 0; i < MAX_SETTINGS && set[i].param != OS_P_COUNT; ++i) {
        assert_int_equal(os_stage_set(s, set[i].param, set[i].value), OS_OK);
    }
    os_stage_reset(s);
    return s;
}

/* Run a sine asking for a peak stage input of vin_peak volts (fullscale 1 V, so
 * the sample amplitude is the voltage). Returns the load voltage over whole
 * periods in steady state. */
static double *run_volts(OsStage *s, double rate, double f, double vin_peak, size_t *n)
{
    *n = an_whole_periods((size_t)(rate / 4.0), rate, f);
    double *v = malloc(*n * sizeof(double));
    assert_non_null(v);
    an_run_sine(s, rate, f, vin_peak, (size_t)(rate / 20.0), *n, v, NULL);
    return v;
}

/* --- Linear region: gain = 1 + R2/R1 ------------------------------------- */

typedef struct {
    double gain_db;
    double gbw_mhz;
    double expect_db; /* 0: the gain setting itself; else the value to expect */
    const char *source;
} GainCase;

/* Single-pole op-amp in a non-inverting loop: |A_cl(f)| = G / sqrt(1 + (f G / GBW)^2)
 * (Sedra and Smith, Microelectronic Circuits, 7th ed., sec. 2.8: closed-loop
 * 3-dB frequency f_t / (1 + R2/R1)). Finite A0 = 2e5 adds a gain error of G/A0,
 * under 0.005 dB for G <= 100. */
static const GainCase gain_cases[] = {
    {0.0, 1.0, 0.0, "non-inverting gain 1 + R2/R1 (Sedra and Smith sec. 2.3)"},
    {6.0, 1.0, 0.0, "non-inverting gain 1 + R2/R1 (Sedra and Smith sec. 2.3)"},
    {20.0, 1.0, 0.0, "non-inverting gain 1 + R2/R1 (Sedra and Smith sec. 2.3)"},
    {40.0, 100.0, 0.0, "non-inverting gain 1 + R2/R1, closed-loop bandwidth 1 MHz"},
    {40.0, 1.0, 1.0, "single-pole roll-off at f_t / G = 10 kHz (Sedra and Smith sec. 2.8)"},
};

static void linear_gain(void **state)
{
    (void)state;
    const double rate = 48000.0, f = 1000.0;
    for (size_t c = 0; c < sizeof(gain_cases) / sizeof(gain_cases[0]); ++c) {
        const GainCase *gc = &gain_cases[c];
        /* 10 kOhm load, 10 mV peak in: far below every limit. */
        const Setting set[] = {{OS_P_GAIN, (float)gc->gain_db},
                               {OS_P_GBW, (float)gc->gbw_mhz},
                               {OS_P_LOAD, 10000.0f},
                               {OS_P_COUNT, 0}};
        OsStage *s = make(rate, set);
        size_t n;
        const double vin = 0.01;
        double *v = run_volts(s, rate, f, vin, &n);
        const double measured = 20.0 * log10(an_harmonic_amp(v, n, rate, f, 1) / vin);
        const double g = pow(10.0, gc->gain_db / 20.0);
        double expect = gc->gain_db;
        if (gc->expect_db != 0.0) {
            const double fc = gc->gbw_mhz * 1e6 / g;
            expect = 20.0 * log10(g / sqrt(1.0 + (f / fc) * (f / fc)));
        }
        printf("gain %5.1f dB, GBW %5.1f MHz: measured %.5f dB, expected %.5f dB (%s)\n",
               gc->gain_db, gc->gbw_mhz, measured, expect, gc->source);
        assert_true(fabs(measured - expect) < 0.01);
        free(v);
        os_stage_free(s);
    }
}

/* --- Frequency response across the band, every factor -------------------- */

/* The same single-pole closed loop (Sedra and Smith sec. 2.8) at 1 to 19 kHz,
 * small signal, through the whole chain: interpolator, circuit, the
 * band-limited sampling of its trajectory (dsp/os_window.h, whose
 * compensation is designed for +-0.016 dB at 2x, +-0.00074 dB at 4x over the
 * kept band) and decimator. Limits: that ripple plus 0.002 dB for the rest
 * (solver, filters). */
static void frequency_response(void **state)
{
    (void)state;
    const double rate = 48000.0, g = pow(10.0, 6.0 / 20.0), fc = 1e6 / g;
    static const double freqs[] = {1000.0, 5000.0, 10000.0, 15000.0, 19000.0};
    static const int factors[] = {2, 4, 8, 16};
    static const double limit_db[] = {0.018, 0.003, 0.002, 0.002};
    for (size_t k = 0; k < sizeof(factors) / sizeof(factors[0]); ++k) {
        double worst = 0.0;
        for (size_t i = 0; i < sizeof(freqs) / sizeof(freqs[0]); ++i) {
            const Setting set[] = {{OS_P_GAIN, 6.0f},
                                   {OS_P_GBW, 1.0f},
                                   {OS_P_LOAD, 10000.0f},
                                   {OS_P_OVERSAMPLE, (float)factors[k]},
                                   {OS_P_COUNT, 0}};
            OsStage *s = make(rate, set);
            size_t n;
            const double vin = 0.01, f = freqs[i];
            double *v = run_volts(s, rate, f, vin, &n);
            const double measured = 20.0 * log10(an_harmonic_amp(v, n, rate, f, 1) / vin);
            const double expect = 20.0 * log10(g / sqrt(1.0 + (f / fc) * (f / fc)));
            worst = fmax(worst, fabs(measured - expect));
            free(v);
            os_stage_free(s);
        }
        printf("%2dx: largest deviation from the single-pole closed loop over 1-19 kHz %.5f dB "
               "(limit %.3f dB)\n",
               factors[k], worst, limit_db[k]);
        assert_true(worst < limit_db[k]);
    }
}

/* --- Output current limit ------------------------------------------------ */

typedef struct {
    double load;
    double vout_asked; /* peak load voltage asked for */
    double max_peak;   /* the peak must stay below (0: no bound) */
    double min_peak;
    double max_thd; /* ratio; 0: no bound */
    double min_thd;
    const char *source;
} LimitCase;

/* Common practice: a general-purpose op-amp's output is limited to about
 * +-25 mA, so into R_load it clips at 25 mA x R_load (8 ohm: 0.2 V); the load
 * below which a 5 V peak is current limited is 5 V / 25 mA = 200 ohm. The 10 kOhm
 * feedback divider (R1 + R2) is in parallel with the load here. */
static const LimitCase limit_cases[] = {
    {8.0, 2.0, 0.2 * 1.01, 0.2 * 0.95, 0.0, 0.10, "25 mA x 8 ohm = 0.2 V (common practice)"},
    {8.0, 10.0, 0.2 * 1.01, 0.2 * 0.95, 0.0, 0.10, "25 mA x 8 ohm = 0.2 V (common practice)"},
    {1000.0, 5.0, 5.0 * 1.001, 5.0 * 0.999, 0.001, 0.0,
     "5 V / 1 kOhm = 5 mA, under 25 mA: clean (common practice)"},
    {100.0, 5.0, 2.5 * 1.01, 2.5 * 0.95, 0.0, 0.05,
     "5 V / 100 ohm = 50 mA, over 25 mA: clipped at 2.5 V (common practice)"},
};

static void current_limit(void **state)
{
    (void)state;
    const double rate = 48000.0, f = 1000.0;
    for (size_t c = 0; c < sizeof(limit_cases) / sizeof(limit_cases[0]); ++c) {
        const LimitCase *lc = &limit_cases[c];
        const Setting set[] = {
            {OS_P_LOAD, (float)lc->load}, {OS_P_FULLSCALE, 20.0f}, {OS_P_COUNT, 0}};
        OsStage *s = make(rate, set);
        /* gain 6 dB default: G = 1.995 */
        const double g = pow(10.0, 6.0 / 20.0);
        size_t n;
        /* Fullscale 20 V: sample amplitude = volts / 20. */
        double *v = run_volts(s, rate, f, lc->vout_asked / g / 20.0, &n);
        const double peak = an_peak(v, n);
        const double thd = an_thd(v, n, rate, f, 23);
        OsMeters m;
        os_stage_meters(s, &m);
        printf("load %6.0f ohm, asked %5.2f V: peak %.4f V, THD %.4f %%, peak current %.4f A, "
               "limiting %.1f %% (%s)\n",
               lc->load, lc->vout_asked, peak, 100.0 * thd, m.peak_current, m.limiting, lc->source);
        /* In the circuit (the meter, from the oversampled simulation): the peak load
         * current and voltage obey the limit. */
        const double circuit_peak = m.peak_current * lc->load;
        assert_true(circuit_peak <= lc->max_peak);
        assert_true(circuit_peak >= lc->min_peak);
        /* In the band-limited output: a clipped wave may overshoot by the Gibbs
         * phenomenon, at most 8.95 % of the jump 2 x peak (Hewitt and Hewitt,
         * "The Gibbs-Wilbraham phenomenon", Arch. Hist. Exact Sci. 21, 1979). */
        assert_true(peak <= lc->max_peak * (1.0 + 2.0 * 0.0895));
        if (lc->max_thd > 0.0) {
            assert_true(thd < lc->max_thd);
            assert_true(m.limiting == 0.0);
        }
        if (lc->min_thd > 0.0) {
            assert_true(thd > lc->min_thd);
            assert_true(m.limiting > 10.0);
            /* The load current meter agrees with the limit: 25 mA less the share
             * taken by the divider. */
            assert_true(m.peak_current < 0.025 * 1.01 && m.peak_current > 0.025 * 0.9);
        }
        free(v);
        os_stage_free(s);
    }
}

/* --- Slew rate ------------------------------------------------------------ */

/* Full-power bandwidth f_p = SR / (2 pi Vpk) (Sedra and Smith sec. 2.9). Well
 * above it a slew-limited follower outputs a triangle of peak SR / (4 f), whose
 * Fourier series has odd harmonics 8 A / (pi^2 k^2) (any table of Fourier
 * series, e.g. Kreyszig, Advanced Engineering Mathematics, sec. 11.1). */
static void slew_rate(void **state)
{
    (void)state;
    const double rate = 192000.0, vpk = 8.0, sr = 0.1e6;
    const double fp = sr / (2.0 * M_PI * vpk); /* 1.99 kHz */
    const Setting set[] = {{OS_P_LOAD, 10000.0f},
                           {OS_P_SLEW, 0.1f},
                           {OS_P_FULLSCALE, 10.0f},
                           {OS_P_GAIN, 0.0f},
                           {OS_P_COUNT, 0}};
    /* Well below: f_p / 10. */
    OsStage *s = make(rate, set);
    size_t n;
    double *v = run_volts(s, rate, 200.0, vpk / 10.0, &n);
    const double thd_low = an_thd(v, n, rate, 200.0, 40);
    printf("slew: f_p %.0f Hz; at 200 Hz THD %.5f %%\n", fp, 100.0 * thd_low);
    assert_true(thd_low < 0.001);
    free(v);
    os_stage_free(s);

    /* Well above: 3 f_p (6 kHz). */
    const double f = 6000.0;
    s = make(rate, set);
    v = run_volts(s, rate, f, vpk / 10.0, &n);
    const double tri = sr / (4.0 * f);
    const double a1 = an_harmonic_amp(v, n, rate, f, 1);
    const double a3 = an_harmonic_amp(v, n, rate, f, 3);
    const double a5 = an_harmonic_amp(v, n, rate, f, 5);
    printf("slew: at 6 kHz fundamental %.4f V (triangle predicts %.4f), H3/H1 %.4f (1/9), "
           "H5/H1 %.4f (1/25)\n",
           a1, 8.0 * tri / (M_PI * M_PI), a3 / a1, a5 / a1);
    assert_true(fabs(a1 / (8.0 * tri / (M_PI * M_PI)) - 1.0) < 0.02);
    assert_true(fabs(a3 / a1 * 9.0 - 1.0) < 0.03);
    assert_true(fabs(a5 / a1 * 25.0 - 1.0) < 0.05);
    free(v);
    os_stage_free(s);
}

/* --- Rail clipping ------------------------------------------------------- */

/* The output swing stops `headroom` short of each rail (common practice: a volt
 * or two for a general-purpose bipolar op-amp). Into 10 kOhm (0.7 mA at 10 V, far
 * below the limit) the sense resistor drops 0.65 V x 0.7/25 = 18 mV. */
static void rail_clipping(void **state)
{
    (void)state;
    const double rate = 48000.0;
    const double rails[] = {5.0, 12.0, 30.0};
    for (size_t i = 0; i < 3; ++i) {
        const Setting set[] = {{OS_P_LOAD, 10000.0f},   {OS_P_RAIL, (float)rails[i]},
                               {OS_P_HEADROOM, 1.5f},   {OS_P_GAIN, 20.0f},
                               {OS_P_FULLSCALE, 20.0f}, {OS_P_COUNT, 0}};
        OsStage *s = make(rate, set);
        size_t n;
        const double swing = rails[i] - 1.5;
        double *v = run_volts(s, rate, 100.0, 2.0 * swing / 10.0 / 20.0, &n);
        const double peak = an_peak(v, n);
        printf("rail %4.1f V, headroom 1.5 V: peak %.3f V (swing %.3f V)\n", rails[i], peak, swing);
        assert_true(peak < swing * 1.01 && peak > swing * 0.97);
        free(v);
        os_stage_free(s);
    }
}

/* --- Overload recovery ---------------------------------------------------- */

/* After the output has been held in current limit, a real op-amp's limiter holds
 * its internal node near the output, so it recovers within a few microseconds; an
 * integrator that wound up to the rail would need Vswing / SR = 21 us (10.5 V at
 * 0.5 V/us) just to slew back. Measured without oversampling filters at 768 kHz. */
static void overload_recovery(void **state)
{
    (void)state;
    const double rate = 768000.0;
    const Setting set[] = {{OS_P_LOAD, 8.0f}, {OS_P_OVERSAMPLE, 1.0f}, {OS_P_COUNT, 0}};
    OsStage *s = make(rate, set);
    const size_t hold = 3840, after = 200; /* 5 ms in limit, then 260 us */
    float in[4040], out[4040];
    double v[4040];
    for (size_t i = 0; i < hold + after; ++i) {
        in[i] = i < hold ? 1.0f : -0.05f; /* asks +2 V (limited at 0.2 V), then -0.1 V */
    }
    os_stage_process_probe(s, in, out, v, (uint32_t)(hold + after));
    assert_true(v[hold - 1] > 0.19 && v[hold - 1] < 0.21);
    const double target = v[hold + after - 1];
    assert_true(fabs(target + 0.1 * 8.0 / 8.0) < 0.005);
    size_t settle = hold;
    for (size_t i = hold; i < hold + after; ++i) {
        if (fabs(v[i] - target) > 0.02 * fabs(target)) {
            settle = i + 1;
        }
    }
    const double us = (double)(settle - hold) / rate * 1e6;
    printf("recovery from current limit to 2 %%: %.2f us (wound-up integrator: >= 21 us)\n", us);
    assert_true(us < 10.0);
    os_stage_free(s);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(linear_gain),   cmocka_unit_test(frequency_response),
        cmocka_unit_test(current_limit), cmocka_unit_test(slew_rate),
        cmocka_unit_test(rail_clipping), cmocka_unit_test(overload_recovery),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
