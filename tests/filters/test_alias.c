/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Alias level of the standard tones (issue 4), so that a regression fails the
 * build. The meter is bench/alias.c, the one the benchmark prints from:
 * coherent sampling (IEEE Std 1241-2010 on record length and coherent sampling
 * of a sine; Oppenheim and Schafer, Discrete-Time Signal Processing, 3rd ed.,
 * ch. 10): a 7 kHz tone at 48 kHz repeats every 48 frames, so over a record of
 * whole repetitions every product of the stage lies on a 1 kHz bin of a
 * rectangular-window DFT (FFTW), exactly. Harmonics are the multiples of
 * 7 kHz; every other bin is an alias (on the 1 kHz grid) or inharmonic (off
 * it). The figure checked is the largest single such component relative to
 * the fundamental, over 0 .. 24 kHz, as in issue 4.
 *
 * Thresholds: what this build measured on 2026-12-02 (the band-limited
 * sampling of dsp/os_window.h in place), plus a 3 dB margin, rounded to whole
 * dB, except where that margin would let a row fall short of issue 4's target
 * it now meets (-80 dBc at the default 4x): the push-pull loop-0 tone,
 * measured -81.8, is held at -80, loop 1 (-84.3) at -81. The other rows keep
 * what has been reached from slipping back; tighten a row when the DSP gets
 * better. The meter itself is checked first on a signal whose every component
 * is known. */

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
    double measured_dbc; /* worst single alias or inharmonic component, when set */
    double limit_dbc;    /* measured + 3 dB margin */
} AliasRow;

/* One row per line. */
/* clang-format off */
static const AliasRow rows[] = {
    {"opamp_limit", 1, -28.0, -25.0},
    {"opamp_limit", 2, -65.3, -62.0},
    {"opamp_limit", 4, -96.0, -93.0},
    {"opamp_limit", 8, -112.1, -109.0},
    {"opamp_limit", 16, -127.8, -124.0},
    {"pushpull_b_loop0", 1, -25.8, -22.0},
    {"pushpull_b_loop0", 2, -60.9, -57.0},
    {"pushpull_b_loop0", 4, -81.8, -80.0},
    {"pushpull_b_loop0", 8, -113.9, -110.0},
    {"pushpull_b_loop0", 16, -136.0, -133.0},
    {"pushpull_b_loop1", 1, -36.3, -33.0},
    {"pushpull_b_loop1", 2, -64.2, -61.0},
    {"pushpull_b_loop1", 4, -84.3, -81.0},
    {"pushpull_b_loop1", 8, -111.3, -108.0},
    {"pushpull_b_loop1", 16, -121.1, -118.0},
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
     * 3 kHz, inharmonic 1e-4 at 3.5 kHz (off the 1 kHz grid), DC 0.1 */
    const double a1 = 0.5, a2 = 1e-2, aa = 1e-3, ao = 1e-4;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / RATE;
        x[i] = 0.1 + a1 * sin(2.0 * M_PI * 7000.0 * t) + a2 * cos(2.0 * M_PI * 14000.0 * t) +
               aa * sin(2.0 * M_PI * 3000.0 * t + 1.0) + ao * sin(2.0 * M_PI * 3500.0 * t + 2.0);
    }
    AlResult r;
    assert_int_equal(al_analyse(x, n, RATE, 7000.0, &r), 0);
    printf("meter: fundamental %.12f, worst %.6f dBc at %.0f Hz, alias %.6f, off grid %.6f, "
           "harmonics %.6f, total %.6f dBc\n",
           r.fund_amp, r.worst_dbc, r.worst_hz, r.alias_dbc, r.offgrid_dbc, r.harmonic_dbc,
           r.total_dbc);
    assert_true(fabs(r.fund_amp - a1) < 1e-12);
    assert_true(fabs(r.worst_dbc - 20.0 * log10(aa / a1)) < 1e-6);
    assert_true(fabs(r.worst_hz - 3000.0) < 1e-9);
    assert_true(fabs(r.alias_dbc - 20.0 * log10(aa / a1)) < 1e-6);
    assert_true(fabs(r.offgrid_dbc - 20.0 * log10(ao / a1)) < 1e-6);
    assert_true(fabs(r.harmonic_dbc - 20.0 * log10(a2 / a1)) < 1e-6);
    assert_true(fabs(r.total_dbc - 10.0 * log10((aa * aa + ao * ao) / (a1 * a1))) < 1e-6);
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
    printf("%s at %dx: worst %.1f dBc at %.0f Hz (limit %.0f dBc: measured %.1f + 3 dB), total "
           "%.1f dBc, off grid %.1f dBc\n",
           row->tone, row->factor, r.worst_dbc, r.worst_hz, row->limit_dbc, row->measured_dbc,
           r.total_dbc, r.offgrid_dbc);
    fflush(stdout);
    /* the method's premise: a steady output, everything on the grid */
    assert_true(r.offgrid_dbc <= MAX_OFFGRID_DBC);
    /* issue 4's measure, at the level reached (see the file comment) */
    assert_true(r.worst_dbc <= row->limit_dbc);
}

int main(void)
{
    struct CMUnitTest tests[N_ROWS + 1];
    static char names[N_ROWS][64];
    tests[0] = (struct CMUnitTest){"meter_known_answer", meter_known_answer, NULL, NULL, NULL};
    for (size_t i = 0; i < N_ROWS; ++i) {
        snprintf(names[i], sizeof(names[i]), "%s_x%d", rows[i].tone, rows[i].factor);
        tests[i + 1] = (struct CMUnitTest){names[i], alias_row, NULL, NULL, (void *)&rows[i]};
    }
    return _cmocka_run_group_tests("alias", tests, N_ROWS + 1, NULL, NULL);
}
