/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* plot impedance's points, measured through each stage (peak load voltage
 * over peak load current of a small sine, cli_load_point()), against the
 * driver's impedance written out here from its Thiele-Small parameters
 * (Small, "Closed-box loudspeaker systems, part I", JAES 20, 1972:
 * Res = Re Qms/Qes, Cmes = Qes/(2 pi fs Re), Lces = 1/((2 pi fs)^2 Cmes),
 * Z = Re + j w Le + 1/(1/Res + 1/(j w Lces) + j w Cmes)), and the public
 * closed form os_load_impedance_of() against the same. Into a resistor the
 * points are the resistor. The push-pull stage in class AB: the ratio of
 * peaks is |Z| only for a sine. The figures themselves are drawn once each. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"
#include "figures.h"
#include "plot.h"
#include "settings.h"

#define J_UNIT ((double complex)I)

static double z_small(double f, double re, double le, double fs, double qms, double qes)
{
    const double ws = 2.0 * M_PI * fs, w = 2.0 * M_PI * f;
    const double cmes = qes / (ws * re), res = re * qms / qes, lces = 1.0 / (ws * ws * cmes);
    const double complex y = 1.0 / res + 1.0 / (J_UNIT * w * lces) + J_UNIT * w * cmes;
    return cabs(re + J_UNIT * w * le + 1.0 / y);
}

static void check_stage(OsStageKind kind, int speaker)
{
    CliSettings s;
    cli_settings_init(&s, kind);
    s.value[OS_P_LOAD] = 8.0f;
    s.value[OS_P_LOAD_MODEL] = speaker ? 1.0f : 0.0f;
    if (kind == OS_STAGE_PUSHPULL) {
        /* class AB: peak over peak is |Z| only for a sine, and a class-B
         * stage's crossover bends a small one (6 % off at 5 kHz) */
        s.value[OS_P_BIAS] = 1.2f;
    }
    const double f[] = {80.0, 1000.0, 20.0, 250.0, 5000.0};
    double worst = 0.0;
    /* OS_TEST_SHORT (the sanitizer and valgrind setups): two of them */
    const size_t nf = getenv("OS_TEST_SHORT") ? 2 : sizeof(f) / sizeof(f[0]);
    for (size_t k = 0; k < nf; ++k) {
        char err[256];
        double z, g;
        /* -30 dBFS: 63 mV at the load, far below every limit */
        assert_int_equal(cli_load_point(&s, 48000.0, 0.0316, f[k], &z, &g, err, sizeof(err)), 0);
        /* the port table's default driver values, or the resistor */
        const double want = speaker ? z_small(f[k], 8.0, 0.3e-3, 80.0, 4.0, 0.5) : 8.0;
        double re, im;
        os_load_impedance_of(s.value, f[k], &re, &im);
        /* the controls are floats: Le 0.3 mH is 0.3 (1 + 4e-8) */
        assert_true(fabs(hypot(re, im) / want - 1.0) < 1e-6);
        const double e = fabs(z / want - 1.0);
        printf("%s into %s, %6.0f Hz: |Z| through the stage %.4f ohm, closed form %.4f ohm "
               "(%.2f %%); gain %+.3f dB\n",
               cli_stage_name(kind), speaker ? "the default driver" : "8 ohm", f[k], z, want,
               100.0 * e, g);
        worst = fmax(worst, e);
    }
    /* the meters' peaks are taken at the circuit's steps (48 kHz x4): at
     * 5 kHz a sampled peak misses the true one by at most 1 - cos(pi 5/192),
     * 0.33 %, on each of voltage and current */
    assert_true(worst < 0.01);
}

static void opamp_points(void **state)
{
    (void)state;
    check_stage(OS_STAGE_OPAMP, 1);
    check_stage(OS_STAGE_OPAMP, 0);
}

static void pushpull_points(void **state)
{
    (void)state;
    check_stage(OS_STAGE_PUSHPULL, 1);
}

static void figures_drawn(void **state)
{
    (void)state;
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_OPAMP);
    s.value[OS_P_LOAD] = 8.0f;
    s.value[OS_P_LOAD_MODEL] = 1.0f;
    CliFigureSpec spec;
    cli_figure_spec_init(&spec, &s);
    char path[64], err[256];
    snprintf(path, sizeof(path), "/tmp/outstage-loadfig-%ld.svg", (long)getpid());
    assert_int_equal(cli_figure_load(path, CLI_FIG_IMPEDANCE, &spec, err, sizeof(err)), 0);
    assert_int_equal(access(path, R_OK), 0);
    assert_int_equal(cli_figure_load(path, CLI_FIG_RESPONSE, &spec, err, sizeof(err)), 0);
    assert_int_equal(access(path, R_OK), 0);
    unlink(path);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(opamp_points),
        cmocka_unit_test(pushpull_points),
        cmocka_unit_test(figures_drawn),
    };
    const int rc = cmocka_run_group_tests(tests, NULL, NULL);
    cli_plot_cleanup(); /* fontconfig's caches, so that a leak checker sees only ours */
    return rc;
}
