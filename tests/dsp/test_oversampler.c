/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Half-band filters and the oversampling cascade. Responses are evaluated by
 * the discrete-time Fourier transform of the taps, H(f) = sum h[n] e^(-j 2 pi f n)
 * (Oppenheim and Schafer, Discrete-Time Signal Processing, eq. 2.131). */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>

#include "os_oversampler.h"

static double response_db(const double *h, int n, double f)
{
    double re = 0.0, im = 0.0;
    for (int i = 0; i < n; ++i) {
        re += h[i] * cos(2.0 * M_PI * f * i);
        im -= h[i] * sin(2.0 * M_PI * f * i);
    }
    return 20.0 * log10(hypot(re, im));
}

/* Thresholds: what each stage is designed for (OS_STOPBAND_DB) less 1 dB for the
 * Kaiser length formula's approximation; passband ripple of a half-band equals
 * its stopband ripple (1e-5 at 100 dB: 0.0001 dB), asserted at 0.001 dB. */
static void stage_specs(void **state)
{
    (void)state;
    OsOversamplerDesign d;
    assert_int_equal(os_oversampler_design(&d), 0);
    for (int j = 1; j <= OS_OVERSAMPLE_MAX_LOG2; ++j) {
        const OsHalfband *hb = &d.stage[j - 1];
        const int n = 4 * hb->k - 1;
        double h[4 * OS_HALFBAND_MAX_K];
        os_halfband_taps(hb, h);
        const double pass = OS_PASSBAND / (double)(1 << j);
        const double stop = 0.5 - pass;
        double ripple = 0.0, worst_stop = -400.0;
        for (int i = 0; i <= 2000; ++i) {
            const double fp = pass * i / 2000.0;
            ripple = fmax(ripple, fabs(response_db(h, n, fp)));
            const double fs = stop + (0.5 - stop) * i / 2000.0;
            worst_stop = fmax(worst_stop, response_db(h, n, fs));
        }
        printf("stage %d: %d taps, passband ripple %.2e dB, stopband %.1f dB\n", j, n, ripple,
               worst_stop);
        assert_true(ripple < 0.001);
        assert_true(worst_stop < -(OS_STOPBAND_DB - 1.0));
    }
}

/* The reported latency is the measured delay: the round trip's impulse response
 * is symmetric (linear phase), so its centroid is its delay. */
static void latency_is_measured_delay(void **state)
{
    (void)state;
    static OsOversamplerDesign d;
    assert_int_equal(os_oversampler_design(&d), 0);
    for (int factor = 1; factor <= OS_OVERSAMPLE_MAX; factor *= 2) {
        OsOversampler os;
        os_oversampler_init(&os, &d, factor, 0);
        double y[OS_OVERSAMPLE_MAX];
        double sum = 0.0, moment = 0.0, peak = 0.0;
        int argmax = -1;
        for (int i = 0; i < 400; ++i) {
            os_oversampler_up(&os, i == 0 ? 1.0 : 0.0, y);
            const double v = os_oversampler_down(&os, y);
            sum += v;
            moment += v * i;
            if (fabs(v) > peak) {
                peak = fabs(v);
                argmax = i;
            }
        }
        const double centroid = moment / sum;
        printf("factor %2d: latency %d, centroid %.6f, peak at %d, dc %.9f\n", factor, os.latency,
               centroid, argmax, sum);
        assert_int_equal(os.latency, os_oversampler_latency(&d, factor, 0));
        assert_true(fabs(centroid - os.latency) < 1e-6);
        assert_int_equal(argmax, os.latency);
        assert_true(fabs(sum - 1.0) < 1e-9);
    }
    /* Target of the performance issue: at most 1 ms at 48 kHz at the default 4x. */
    assert_true(os_oversampler_latency(&d, 4, 0) <= 48);
}

/* Something at the top rate above (1 - OS_PASSBAND) fs must not come back as an
 * alias in the audio band: inject a tone in the oversampled domain. */
static void rejects_aliases(void **state)
{
    (void)state;
    static OsOversamplerDesign d;
    assert_int_equal(os_oversampler_design(&d), 0);
    for (int factor = 2; factor <= OS_OVERSAMPLE_MAX; factor *= 2) {
        const double tones[] = {1.0 - OS_PASSBAND + 0.01, 0.75, 1.3, 0.5 * factor - 0.2};
        for (size_t t = 0; t < sizeof(tones) / sizeof(tones[0]); ++t) {
            const double f = tones[t]; /* in units of the host rate */
            if (f >= 0.5 * factor) {
                continue;
            }
            OsOversampler os;
            os_oversampler_init(&os, &d, factor, 0);
            double y[OS_OVERSAMPLE_MAX], peak = 0.0;
            long k = 0;
            for (int i = 0; i < 3000; ++i) {
                for (int s = 0; s < factor; ++s, ++k) {
                    y[s] = sin(2.0 * M_PI * f * (double)k / factor);
                }
                const double v = os_oversampler_down(&os, y);
                if (i > 500) {
                    peak = fmax(peak, fabs(v));
                }
            }
            const double db = 20.0 * log10(peak + 1e-300);
            printf("factor %2d, tone %.3f fs: alias %.1f dB\n", factor, f, db);
            assert_true(db < -(OS_STOPBAND_DB - 1.0));
        }
    }
}

/* A tone inside the passband comes through at unity gain, delayed by the latency. */
static void passband_round_trip(void **state)
{
    (void)state;
    static OsOversamplerDesign d;
    assert_int_equal(os_oversampler_design(&d), 0);
    const double f = 0.3; /* host-rate units: 14.4 kHz at 48 kHz */
    for (int factor = 1; factor <= OS_OVERSAMPLE_MAX; factor *= 2) {
        OsOversampler os;
        os_oversampler_init(&os, &d, factor, 0);
        double y[OS_OVERSAMPLE_MAX], err = 0.0;
        for (int i = 0; i < 2000; ++i) {
            os_oversampler_up(&os, sin(2.0 * M_PI * f * i), y);
            const double v = os_oversampler_down(&os, y);
            if (i > 300) {
                err = fmax(err, fabs(v - sin(2.0 * M_PI * f * (i - os.latency))));
            }
        }
        printf("factor %2d: passband error %.2e\n", factor, err);
        assert_true(err < 1e-4);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(stage_specs),
        cmocka_unit_test(latency_is_measured_delay),
        cmocka_unit_test(rejects_aliases),
        cmocka_unit_test(passband_round_trip),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
