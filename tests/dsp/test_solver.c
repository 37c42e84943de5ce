/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The shared solver against closed-form answers. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>

#include "os_solver.h"

/* R(x) = x + exp(x) - 2: strictly increasing. Its root is x = 2 - W(e^2) with
 * the Lambert W function (W e^W = e^2 gives W(e^2) = 1.557145598997611; check:
 * 1.5571456 x e^1.5571456 = 7.389 = e^2). */
static double r_exp(void *ctx, double x, double *d)
{
    (void)ctx;
    *d = 1.0 + exp(x);
    return x + exp(x) - 2.0;
}

static void scalar_converges_from_far(void **state)
{
    (void)state;
    const double root = 2.0 - 1.557145598997611;
    const double guesses[] = {-50.0, -1.0, 0.0, 3.0, 40.0};
    for (size_t i = 0; i < sizeof(guesses) / sizeof(guesses[0]); ++i) {
        int it = 0;
        const double x = os_newton_scalar(r_exp, NULL, guesses[i], -100.0, 100.0, 1e-12, 200, &it);
        assert_true(fabs(x - root) < 1e-10);
        assert_true(it < 200);
    }
}

/* A linear system with a known solution (checked by hand: A y = b). */
static void linear_solve_known(void **state)
{
    (void)state;
    double a[9] = {0.0, 2.0, 1.0, 1.0, 1.0, 1.0, 4.0, -1.0, 2.0};
    const double y[3] = {1.0, -2.0, 3.0};
    double b[3];
    const double a0[9] = {0.0, 2.0, 1.0, 1.0, 1.0, 1.0, 4.0, -1.0, 2.0};
    for (int i = 0; i < 3; ++i) {
        b[i] = a0[i * 3] * y[0] + a0[i * 3 + 1] * y[1] + a0[i * 3 + 2] * y[2];
    }
    assert_int_equal(os_linear_solve(a, b, 3), 0);
    for (int i = 0; i < 3; ++i) {
        assert_true(fabs(b[i] - y[i]) < 1e-12);
    }
    double s[4] = {1.0, 2.0, 2.0, 4.0};
    double bs[2] = {1.0, 1.0};
    assert_int_equal(os_linear_solve(s, bs, 2), -1);
}

/* Two diodes in series with a resistor, Shockley equation: i = Is (e^(v/Vt) - 1).
 * Unknowns v1 (diode 1 voltage), v2 (diode 2); residuals: currents equal and
 * the loop V = v1 + v2 + R i. */
typedef struct {
    double vs, r, is, vt;
} Loop;

static void r_loop(void *ctx, const double *x, double *f, double *j)
{
    const Loop *l = ctx;
    const double e1 = exp(x[0] / l->vt), e2 = exp(x[1] / l->vt);
    const double i1 = l->is * (e1 - 1.0), i2 = l->is * (e2 - 1.0);
    f[0] = i1 - i2;
    f[1] = x[0] + x[1] + l->r * i1 - l->vs;
    j[0] = l->is * e1 / l->vt;
    j[1] = -l->is * e2 / l->vt;
    j[2] = 1.0 + l->r * l->is * e1 / l->vt;
    j[3] = 1.0;
}

static void vector_newton_diode_loop(void **state)
{
    (void)state;
    Loop l = {5.0, 1000.0, 1e-14, 0.025852};
    double x[2] = {0.0, 0.0};
    const double max_step[2] = {0.1, 0.1};
    const int it = os_newton_solve(r_loop, &l, x, 2, max_step, 1e-12, 200);
    assert_true(it < 200);
    /* Check Kirchhoff's laws at the answer rather than a stored number. */
    const double i = l.is * (exp(x[0] / l.vt) - 1.0);
    assert_true(fabs(x[0] - x[1]) < 1e-9);
    assert_true(fabs(x[0] + x[1] + l.r * i - l.vs) < 1e-9);
    assert_true(i > 3.5e-3 && i < 4.0e-3); /* (5 - 2 x ~0.65) / 1k */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(scalar_converges_from_far),
        cmocka_unit_test(linear_solve_known),
        cmocka_unit_test(vector_newton_diode_loop),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
