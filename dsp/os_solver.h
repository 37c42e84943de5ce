/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_solver.h
 * Time stepping and Newton-Raphson solution shared by every circuit.
 *
 * Circuits are integrated with the second-order backward differentiation
 * formula (BDF2, Gear's method of order 2):
 *
 *   x[n+1] - 4/3 x[n] + 1/3 x[n-1] = 2h/3 f(x[n+1], t[n+1])
 *
 * It is A-stable and L-stable (Hairer and Wanner, Solving Ordinary Differential
 * Equations II, Springer, 2nd ed. 1996, section V.1): stiff modes such as the
 * closed loop of a 100 MHz op-amp or an exponential clamp decay within a step at
 * any step size, where the trapezoidal rule would leave them ringing at the
 * Nyquist frequency. SPICE simulators offer the same method as "gear".
 * The implicit equation is solved by Newton-Raphson per step.
 */

#ifndef OS_SOLVER_H
#define OS_SOLVER_H

#ifdef __cplusplus
extern "C" {
#endif

/** BDF2 history of one state variable. */
typedef struct {
    double x1; /**< x[n] */
    double x0; /**< x[n-1] */
} OsBdf2;

/** Constant term c of the BDF2 update x[n+1] = c + gamma f(x[n+1]). */
static inline double os_bdf2_c(const OsBdf2 *s)
{
    return (4.0 * s->x1 - s->x0) * (1.0 / 3.0);
}

/** Predictor for x[n+1]: linear extrapolation of the history. */
static inline double os_bdf2_predict(const OsBdf2 *s)
{
    return 2.0 * s->x1 - s->x0;
}

/** Shift the history after accepting @p x as x[n+1]. */
static inline void os_bdf2_push(OsBdf2 *s, double x)
{
    s->x0 = s->x1;
    s->x1 = x;
}

/** gamma = 2h/3 for step @p h (s). */
static inline double os_bdf2_gamma(double h)
{
    return 2.0 * h / 3.0;
}

/**
 * Residual of a scalar equation R(x) = 0 with R strictly increasing; returns
 * R(x) and stores dR/dx (> 0) in *d.
 */
typedef double (*OsScalarResidual)(void *ctx, double x, double *d);

/**
 * Safeguarded Newton-Raphson on a strictly increasing residual: Newton steps
 * while they stay inside the bracket [lo, hi] (shrunk at every evaluation by the
 * sign of R), bisection otherwise, so it converges from any guess inside a valid
 * bracket. Stops when a step is below @p tol or after @p max_iter evaluations.
 * *iters (may be NULL) receives the number of evaluations. Real-time safe.
 */
double os_newton_scalar(OsScalarResidual fn, void *ctx, double guess, double lo, double hi,
                        double tol, int max_iter, int *iters);

/** Largest system os_newton_solve() handles. */
#define OS_NEWTON_MAX_DIM 6

/**
 * Residual F(x) of an n-dimensional system; writes F to @p f and the Jacobian
 * (row-major, n x n) to @p jac.
 */
typedef void (*OsVectorResidual)(void *ctx, const double *x, double *f, double *jac);

/**
 * Damped Newton-Raphson for n <= OS_NEWTON_MAX_DIM unknowns, Gaussian
 * elimination with partial pivoting, step length limited per unknown to
 * @p max_step. Converges when every update is below @p tol. Returns the number
 * of iterations used. Real-time safe.
 */
int os_newton_solve(OsVectorResidual fn, void *ctx, double *x, int n, const double *max_step,
                    double tol, int max_iter);

/** Solve A y = b in place (b becomes y) for n <= OS_NEWTON_MAX_DIM, partial
 *  pivoting. Returns 0 on success, -1 if A is singular. Real-time safe. */
int os_linear_solve(double *a, double *b, int n);

#ifdef __cplusplus
}
#endif

#endif /* OS_SOLVER_H */
