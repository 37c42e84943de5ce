/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_solver.h"

#include <math.h>

double os_newton_scalar(OsScalarResidual fn, void *ctx, double guess, double lo, double hi,
                        double tol, int max_iter, int *iters)
{
    /* A guess outside the bracket moves to its nearer end; NaN to the middle. */
    double x = guess < lo ? lo : guess > hi ? hi : guess;
    if (isnan(x)) {
        x = 0.5 * (lo + hi);
    }
    int it = 0;
    double last = 0.0; /* the previous Newton step, 0 if there was none */
    while (it < max_iter) {
        double d;
        const double r = fn(ctx, x, &d);
        ++it;
        if (r == 0.0) {
            break;
        }
        if (r > 0.0) {
            hi = x;
        } else {
            lo = x;
        }
        const double step = r / d;
        const double a = fabs(step);
        /* Converged when this step is below tolerance, or when the iteration is
         * plainly in its quadratic phase and the step after this one, predicted
         * from the last two (e_{k+1} ~ K e_k^2 with K = |step| / last^2), would
         * be below a tenth of it: then this step lands within tolerance and the
         * evaluation that would confirm it is saved. */
        if (a <= tol || (a < 0.1 * fabs(last) && a * a * a < 0.1 * tol * last * last)) {
            x -= step;
            break;
        }
        double xn = x - step;
        if (!(xn > lo && xn < hi)) {
            xn = 0.5 * (lo + hi); /* Newton left the bracket (or d was bad): bisect */
            last = 0.0;
        } else {
            last = step;
        }
        const double dx = xn - x;
        x = xn;
        if (fabs(dx) <= tol) {
            break;
        }
    }
    if (iters) {
        *iters = it;
    }
    return x;
}

int os_newton_solve(OsVectorResidual fn, void *ctx, double *x, int n, const double *max_step,
                    double tol, int max_iter)
{
    double f[OS_NEWTON_MAX_DIM];
    double jac[OS_NEWTON_MAX_DIM * OS_NEWTON_MAX_DIM];
    int it = 0;
    while (it < max_iter) {
        fn(ctx, x, f, jac);
        ++it;
        if (os_linear_solve(jac, f, n) != 0) {
            break;
        }
        double worst = 0.0;
        for (int i = 0; i < n; ++i) {
            double dx = -f[i];
            if (dx > max_step[i]) {
                dx = max_step[i];
            } else if (dx < -max_step[i]) {
                dx = -max_step[i];
            }
            x[i] += dx;
            worst = fmax(worst, fabs(dx));
        }
        if (!(worst > tol)) { /* also stops on NaN */
            break;
        }
    }
    return it;
}
