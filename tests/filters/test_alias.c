/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Alias level of the standard tones (bench/alias.c: issue 4's three 7 kHz
 * tones, issue 9's two hard-slewed 9973 Hz tones), so that a regression fails
 * the build. The meter is bench/alias.c, the one the benchmark prints from:
 * coherent sampling (IEEE Std 1241-2010 on record length and coherent sampling
 * of a sine; Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd ed.,
 * ch. 10): a 7 kHz tone at 48 kHz repeats every 48 frames, so over a record of
 * whole repetitions every product of the stage lies on a 1 kHz bin of a
 * rectangular-window DFT (FFTW), exactly; the 9973 Hz tone repeats every
 * second and its products lie on 1 Hz bins. Harmonics are the multiples of the
 * tone; every other bin is an alias (on the grid) or inharmonic (off it).
 * Two figures are checked: the largest single such component relative to the
 * fundamental, over 0 .. fs/2, as in issue 4; and all of them in
 * 20 Hz - 20 kHz together, issue 9's measure (target: -80 dBc at 4x for every
 * tone).
 *
 * Thresholds: what this build measured (worst single component: on
 * 2026-12-02 for the 7 kHz tones, on 2026-12-04 for the slewed tones and for
 * the audio-band totals), plus a 3 dB margin, rounded to whole dB, except
 * where that margin would let a row fall short of a target it meets: the
 * push-pull loop-0 tone's worst component, measured -81.8, is held at issue
 * 4's -80, loop 1 (-84.3) at -81; the audio-band totals at 4x at issue 9's -80
 * where they are below it (the push-pull class-B tones, at -78.7 and
 * -77.6 dBc, are not: they are held where they are). The other rows keep what
 * has been reached from slipping back; tighten a row when the DSP gets better.
 * The meter itself is checked first on a signal whose every component is
 * known. OS_TEST_SHORT=1 (the valgrind setup) keeps the meter check and the
 * rows at 1x: the meter's code is the same at every factor, and the stage's
 * code at the other factors runs under memcheck in the dsp suite. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alias.h"

#define RATE 48000.0
/* Record length: 0.25 s = 250 repetitions of 48 frames (4 Hz bins). Steady
 * output gives the same on-grid levels over any whole number of repetitions;
 * the benchmark uses 1 s. */
#define RECORD_SECONDS 0.25
/* A steady, coherent record has nothing off the grid; allow float rounding. */
#define MAX_OFFGRID_DBC (-150.0)

typedef struct {
    const char *tone; /* al_tones() name */
    int factor;
    double measured_dbc;      /* worst single alias or inharmonic component, when set */
    double limit_dbc;         /* measured + 3 dB margin */
    double measured_band_dbc; /* all of them in 20 Hz - 20 kHz together */
    double limit_band_dbc;    /* measured + 3 dB, at most -80 at 4x where that is met */
} AliasRow;

/* One row per line. */
/* clang-format off */
static const AliasRow rows[] = {
    {"opamp_limit", 1, -28.0, -25.0, -26.7, -23.0},
    {"opamp_limit", 2, -65.3, -62.0, -64.4, -61.0},
    {"opamp_limit", 4, -96.0, -93.0, -90.9, -87.0},
    {"opamp_limit", 8, -112.1, -109.0, -106.6, -103.0},
    {"opamp_limit", 16, -127.8, -124.0, -123.3, -120.0},
    {"pushpull_b_loop0", 1, -25.8, -22.0, -24.5, -21.0},
    {"pushpull_b_loop0", 2, -60.9, -57.0, -55.9, -52.0},
    {"pushpull_b_loop0", 4, -81.8, -80.0, -78.7, -75.0},
    {"pushpull_b_loop0", 8, -113.9, -110.0, -111.0, -108.0},
    {"pushpull_b_loop0", 16, -136.0, -133.0, -131.4, -128.0},
    {"pushpull_b_loop1", 1, -36.3, -33.0, -32.3, -29.0},
    {"pushpull_b_loop1", 2, -64.2, -61.0, -58.4, -55.0},
    {"pushpull_b_loop1", 4, -84.3, -81.0, -77.6, -74.0},
    {"pushpull_b_loop1", 8, -111.3, -108.0, -104.5, -101.0},
    {"pushpull_b_loop1", 16, -121.1, -118.0, -113.2, -110.0},
    {"opamp_slew", 1, -15.8, -12.0, -14.3, -11.0},
    {"opamp_slew", 2, -63.8, -60.0, -62.0, -59.0},
    {"opamp_slew", 4, -85.3, -82.0, -91.1, -88.0},
    {"opamp_slew", 8, -96.9, -93.0, -94.1, -91.0},
    {"opamp_slew", 16, -100.3, -97.0, -95.1, -92.0},
    {"pushpull_slew", 1, -15.8, -12.0, -14.3, -11.0},
    {"pushpull_slew", 2, -63.7, -60.0, -62.0, -59.0},
    {"pushpull_slew", 4, -85.3, -82.0, -92.1, -89.0},
    {"pushpull_slew", 8, -96.9, -93.0, -96.5, -93.0},
    {"pushpull_slew", 16, -106.1, -103.0, -103.1, -100.0},
};
/* clang-format on */
#define N_ROWS (sizeof(rows) / sizeof(rows[0]))

static const AlTone *find_tone(const char *name)
{
    size_t n = 0;
    const AlTone *t = al_tones(&n);
    for (size_t i = 0; i < n; ++i) {
        if (strcmp(t[i].name, name) == 0) {
            return &t[i];
        }
    }
    return NULL;
}

/* Known answer: a record made of sines of known amplitude on chosen bins. */
static void meter_known_answer(void **state)
{
    (void)state;
    assert_int_equal(al_record_length(48000.0, 7000.0, 0.0), 48);
    assert_int_equal(al_record_length(44100.0, 7000.0, 0.0), 63);
    assert_int_equal(al_record_length(96000.0, 7000.0, 0.0), 96);
    assert_int_equal(al_record_length(48000.0, 7000.0, 0.25), 12000);
    assert_int_equal(al_record_length(48000.5, 7000.0, 0.25), 0);

    const size_t n = al_record_length(RATE, 7000.0, RECORD_SECONDS);
    double *x = malloc(n * sizeof(*x));
    assert_non_null(x);
    /* fundamental 0.5 at 7 kHz, harmonic 1e-2 at 14 kHz, alias 1e-3 at
     * 3 kHz, inharmonic 1e-4 at 3.5 kHz (off the 1 kHz grid), DC 0.1; and
     * outside the audio band, 5e-5 at 12 Hz (inharmonic) and at 22 kHz
     * (alias) */
    const double a1 = 0.5, a2 = 1e-2, aa = 1e-3, ao = 1e-4, ae = 5e-5;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / RATE;
        x[i] = 0.1 + a1 * sin(2.0 * M_PI * 7000.0 * t) + a2 * cos(2.0 * M_PI * 14000.0 * t) +
               aa * sin(2.0 * M_PI * 3000.0 * t + 1.0) + ao * sin(2.0 * M_PI * 3500.0 * t + 2.0) +
               ae * sin(2.0 * M_PI * 12.0 * t) + ae * sin(2.0 * M_PI * 22000.0 * t + 0.5);
    }
    AlResult r;
    assert_int_equal(al_analyse(x, n, RATE, 7000.0, &r), 0);
    printf("meter: fundamental %.12f, worst %.6f dBc at %.0f Hz, alias %.6f, off grid %.6f, "
           "harmonics %.6f, total %.6f dBc, 20 Hz - 20 kHz %.6f dBc\n",
           r.fund_amp, r.worst_dbc, r.worst_hz, r.alias_dbc, r.offgrid_dbc, r.harmonic_dbc,
           r.total_dbc, r.audio_total_dbc);
    assert_true(fabs(r.fund_amp - a1) < 1e-12);
    assert_true(fabs(r.worst_dbc - 20.0 * log10(aa / a1)) < 1e-6);
    assert_true(fabs(r.worst_hz - 3000.0) < 1e-9);
    assert_true(fabs(r.alias_dbc - 10.0 * log10((aa * aa + ae * ae) / (a1 * a1))) < 1e-6);
    assert_true(fabs(r.offgrid_dbc - 10.0 * log10((ao * ao + ae * ae) / (a1 * a1))) < 1e-6);
    assert_true(fabs(r.harmonic_dbc - 20.0 * log10(a2 / a1)) < 1e-6);
    assert_true(fabs(r.total_dbc - 10.0 * log10((aa * aa + ao * ao + 2.0 * ae * ae) / (a1 * a1))) <
                1e-6);
    assert_true(fabs(r.audio_total_dbc - 10.0 * log10((aa * aa + ao * ao) / (a1 * a1))) < 1e-6);
    /* a record that is not whole repetitions is refused */
    assert_int_equal(al_analyse(x, n - 1, RATE, 7000.0, &r), -1);
    free(x);
}

static void alias_row(void **state)
{
    const AliasRow *row = *state;
    const AlTone *t = find_tone(row->tone);
    assert_non_null(t);
    AlResult r;
    assert_int_equal(al_measure_tone(t, RATE, row->factor, RECORD_SECONDS, &r), 0);
    printf("%s at %dx: worst %.1f dBc at %.0f Hz (limit %.0f dBc: measured %.1f + 3 dB), "
           "20 Hz - 20 kHz together %.1f dBc (limit %.0f dBc), total %.1f dBc, off grid "
           "%.1f dBc\n",
           row->tone, row->factor, r.worst_dbc, r.worst_hz, row->limit_dbc, row->measured_dbc,
           r.audio_total_dbc, row->limit_band_dbc, r.total_dbc, r.offgrid_dbc);
    fflush(stdout);
    /* the method's premise: a steady output, everything on the grid */
    assert_true(r.offgrid_dbc <= MAX_OFFGRID_DBC);
    /* issue 4's measure, at the level reached (see the file comment) */
    assert_true(r.worst_dbc <= row->limit_dbc);
    /* issue 9's: everything in the audio band together */
    assert_true(r.audio_total_dbc <= row->limit_band_dbc);
}

int main(void)
{
    struct CMUnitTest tests[N_ROWS + 1];
    static char names[N_ROWS][64];
    const int short_mode = getenv("OS_TEST_SHORT") != NULL;
    size_t n = 0;
    tests[n++] = (struct CMUnitTest){"meter_known_answer", meter_known_answer, NULL, NULL, NULL};
    for (size_t i = 0; i < N_ROWS; ++i) {
        if (short_mode && rows[i].factor != 1) {
            continue;
        }
        snprintf(names[i], sizeof(names[i]), "%s_x%d", rows[i].tone, rows[i].factor);
        tests[n++] = (struct CMUnitTest){names[i], alias_row, NULL, NULL, (void *)&rows[i]};
    }
    if (short_mode) {
        printf("OS_TEST_SHORT: the meter check and the rows at 1x\n");
    }
    return _cmocka_run_group_tests("alias", tests, n, NULL, NULL);
}
