/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The inline exponential against the C library's exp() (glibc, correctly
 * rounded to within 1 ulp per its manual), over the whole range the solvers use. */

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

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(matches_libm)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
