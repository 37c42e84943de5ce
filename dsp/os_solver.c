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
        if (fabs(step) <= tol) {
            x -= step; /* converged: the last Newton step is below tolerance */
            break;
        }
        double xn = x - step;
        if (!(xn > lo && xn < hi)) {
            xn = 0.5 * (lo + hi); /* Newton left the bracket (or d was bad): bisect */
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

int os_linear_solve(double *a, double *b, int n)
{
    for (int k = 0; k < n; ++k) {
        int p = k;
        double best = fabs(a[k * n + k]);
        for (int i = k + 1; i < n; ++i) {
            const double v = fabs(a[i * n + k]);
            if (v > best) {
                best = v;
                p = i;
            }
        }
        if (!(best > 0.0)) {
            return -1;
        }
        if (p != k) {
            for (int j = 0; j < n; ++j) {
                const double t = a[k * n + j];
                a[k * n + j] = a[p * n + j];
                a[p * n + j] = t;
            }
            const double t = b[k];
            b[k] = b[p];
            b[p] = t;
        }
        const double inv = 1.0 / a[k * n + k];
        for (int i = k + 1; i < n; ++i) {
            const double m = a[i * n + k] * inv;
            if (m != 0.0) {
                for (int j = k + 1; j < n; ++j) {
                    a[i * n + j] -= m * a[k * n + j];
                }
                b[i] -= m * b[k];
            }
        }
    }
    for (int k = n - 1; k >= 0; --k) {
        double s = b[k];
        for (int j = k + 1; j < n; ++j) {
            s -= a[k * n + j] * b[j];
        }
        b[k] = s / a[k * n + k];
    }
    return 0;
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
