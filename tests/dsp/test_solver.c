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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(scalar_converges_from_far),
        cmocka_unit_test(linear_solve_known),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
