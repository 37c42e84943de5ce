/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The inline exponential and tanh against the C library's exp() and tanh()
 * (glibc, within 1 ulp per its manual), over the whole range the solvers use. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>

#include "os_fastmath.h"

static void matches_libm(void **state)
{
    (void)state;
    double worst = 0.0, at = 0.0;
    for (double x = -700.0; x <= 700.0; x += 0.000731) {
        const double e = fabs(os_exp(x) - exp(x)) / exp(x);
        if (e > worst) {
            worst = e;
            at = x;
        }
    }
    printf("largest relative error %.3g at %.4f\n", worst, at);
    assert_true(worst < 4e-16);
    /* Exact points and the edges of the range. */
    assert_true(os_exp(0.0) == 1.0);
    assert_true(fabs(os_exp(1.0) - M_E) <= 2.0 * M_E * 2.2e-16);
    assert_true(os_exp(-1000.0) == os_exp(-700.0) && os_exp(-700.0) > 0.0);
    assert_true(os_exp(1000.0) == os_exp(700.0) && isfinite(os_exp(700.0)));
    assert_true(isnan(os_exp((double)NAN)));
}

/* tanh from os_exp() against the C library's tanh(), relative to |tanh u|
 * (so that the region near 0, where 1 - 2 / (1 + e^2u) cancels, counts), and
 * its derivative against 1 - tanh^2 (sech^2, Abramowitz and Stegun 4.5.17). */
static void tanh_matches_libm(void **state)
{
    (void)state;
    double worst = 0.0, at = 0.0, worst_d = 0.0, at_d = 0.0;
    for (double m = -30.0; m <= 30.0; m += 0.000913) {
        for (int sign = -1; sign <= 1; sign += 2) {
            /* |u| from 1e-300 to 30: small values on a log scale, the rest linear */
            const double u = sign * (m < 0.0 ? pow(10.0, 10.0 * m) : m);
            double d;
            const double t = os_tanh_d(u, &d), ref = tanh(u), dref = 1.0 / (cosh(u) * cosh(u));
            const double e = fabs(t - ref) / fabs(ref), ed = fabs(d - dref) / fmax(dref, 1e-300);
            if (e > worst) {
                worst = e;
                at = u;
            }
            if (fabs(u) < 19.0 && ed > worst_d) {
                worst_d = ed;
                at_d = u;
            }
        }
    }
    printf("tanh: largest relative error %.3g at %.4g; derivative %.3g at %.4g\n", worst, at,
           worst_d, at_d);
    assert_true(worst < 2e-15);
    assert_true(worst_d < 2e-15);
    double d;
    assert_true(os_tanh_d(0.0, &d) == 0.0 && d == 1.0);
    assert_true(os_tanh_d(1e-20, &d) == 1e-20); /* no cancellation to 0 */
    assert_true(os_tanh_d(100.0, &d) == 1.0 && d == 0.0);
    assert_true(os_tanh_d(-100.0, &d) == -1.0 && d == 0.0);
    assert_true(isnan(os_tanh_d((double)NAN, &d)));
}

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(matches_libm),
                                       cmocka_unit_test(tanh_matches_libm)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
