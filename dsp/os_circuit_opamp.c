/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp stage's circuit: a non-inverting amplifier with closed-loop gain
 * G = 1 + R2/R1, feedback divider R1 + R2 = OS_FEEDBACK_TOTAL taken from the
 * op-amp output pin, load R_L from the output to ground.
 *
 * With the op-amp of os_opamp.h the output pin sits at vo = x - Rs io and
 * carries io = vo / Rp, Rp = R_L || (R1 + R2), hence (Ohm's and Kirchhoff's laws)
 *   io = x / (Rp + Rs),  vo = x Rp / (Rp + Rs),  vd = vin - vo / G,
 * and the circuit reduces to the one state x. Each TR-BDF2 sub-step (os_solver.h)
 * gives the scalar equation  R(x) = x - c - w f(x) = 0,  strictly increasing
 * in x because f falls with x (every term of os_opamp.h does), so a safeguarded
 * Newton iteration always converges to its unique root. */

#include "os_circuit.h"

#include "os_opamp.h"
#include "os_solver.h"

#include <math.h>

typedef struct {
    OsOpampCoeffs op;
    double inv_g; /* 1/G: share of the output fed back */
    double inv_rl;
    double kx;  /* output current per volt of x: 1 / (R_load||R_fb + Rs) */
    double rho; /* output voltage per volt of x: (R_load||R_fb) / (R_load||R_fb + Rs) */
    double w;   /* TR-BDF2 sub-step weight g h / 2, s */
    /* signal state at the last step: internal node (V), dx/dt there (V/s),
     * input voltage there (V) */
    double x, fx, vin;
    /* context of the residual during a solve */
    double c, vin_now, limit;
    double jac; /* loop derivative at the last evaluation, 1/s */
} OsOpampCircuit;

static inline double min2(double a, double b)
{
    return a < b ? a : b;
}

static inline double max2(double a, double b)
{
    return a > b ? a : b;
}

static void update(void *c, const double *si, double h, OsUpdate how)
{
    OsOpampCircuit *s = c;
    (void)how;
    os_opamp_coeffs_from(si, &s->op);
    const double load = si[OS_P_LOAD];
    const double rp = load * OS_FEEDBACK_TOTAL / (load + OS_FEEDBACK_TOTAL);
    s->inv_g = 1.0 / si[OS_P_GAIN];
    s->inv_rl = 1.0 / load;
    s->kx = 1.0 / (rp + s->op.rs);
    s->rho = rp * s->kx;
    s->w = os_trbdf2_weight(h);
}

static void set_step(void *c, double h)
{
    OsOpampCircuit *s = c;
    s->w = os_trbdf2_weight(h);
}

static void reset(void *c)
{
    OsOpampCircuit *s = c;
    s->x = 0.0;
    s->fx = 0.0;
    s->vin = 0.0;
    s->limit = 0.0;
    s->jac = 0.0;
}

static int ok(const void *c)
{
    const OsOpampCircuit *s = c;
    return isfinite(s->x) && isfinite(s->fx) && isfinite(s->vin);
}

static double residual(void *ctx, double x, double *d)
{
    OsOpampCircuit *s = ctx;
    const double fb = s->rho * s->inv_g;
    OsOpampRate r;
    os_opamp_rate(&s->op, x, s->vin_now - fb * x, s->kx * x, &r);
    s->limit = r.limit;
    s->jac = r.df_dx - r.df_dvd * fb + r.df_dio * s->kx;
    *d = 1.0 - s->w * s->jac;
    return x - s->c - s->w * r.f;
}

/* Solve x = c + w f(x) at input voltage vin; returns x, adds iterations. */
static double solve(OsOpampCircuit *s, double c, double vin, double guess, int *iters)
{
    const OsOpampCoeffs *op = &s->op;
    const double fb = s->rho * s->inv_g;
    s->c = c;
    s->vin_now = vin;
    /* Bracket. The input stage is bounded by SR and every other term of f opposes
     * x, so |x - c| <= w SR. Beyond xc, where one clamp has reached 3 (in
     * units of SR), f < 0 for x > 0 (and f > 0 for x < 0): there R has the sign of
     * x - c. Both bounds keep Newton out of the far exponential tails, where it
     * could only creep back one knee width per iteration. */
    const double reach = 1.01 * s->w * op->sr + 1e-6;
    const double ln3 = 1.0986122886681098;
    const double xc = min2(op->vsw + ln3 / op->inv_w, (op->ilim + ln3 / op->inv_ik) / s->kx);
    const double lo = max2(min2(c, 0.0) - reach, min2(c, -xc));
    const double hi = min2(max2(c, 0.0) + reach, max2(c, xc));
    /* Guess: the solution with the input stage and clamps linear, exact to first
     * order whenever the op-amp is neither slewing nor limiting; at long steps
     * (low rates) far better than extrapolating. */
    const double wt = op->sr * op->kin;
    const double x_lin = (c + s->w * wt * vin) / (1.0 + s->w * (wt * fb + op->wp));
    if (fabs(op->kin * (vin - fb * x_lin)) < 0.5) {
        guess = x_lin;
    }
    int it = 0;
    const double x = os_newton_scalar(residual, s, guess, lo, hi, 1e-7, 60, &it);
    *iters += it;
    return x;
}

static void step(void *c, double vin, double vin_g, OsStepResult *r)
{
    OsOpampCircuit *s = c;
    int iters = 0;
    /* Trapezoidal sub-step to t + g h (input vin_g there), BDF2 sub-step to t + h. */
    const double c1 = s->x + s->w * s->fx;
    const double xg = solve(s, c1, vin_g, s->x + 2.0 * s->w * s->fx, &iters);
    /* BDF2 sub-step to t + h. */
    const double c2 = OS_TRBDF2_A * xg - OS_TRBDF2_B * s->x;
    double x = solve(s, c2, vin, xg + (xg - s->x) * ((1.0 - OS_TRBDF2_G) / OS_TRBDF2_G), &iters);
    double fx = (x - c2) / s->w;
    r->vmid = s->rho * xg;
    r->dvmid = s->rho * (xg - c1) / s->w;
    if (fabs(x) < 1e-30) {
        x = 0.0; /* keep subnormals out of the state */
    }
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    s->x = x;
    s->fx = fx;
    s->vin = vin;
    const double vo = s->rho * x;
    r->vload = vo;
    r->dvload = s->rho * fx;
    r->jac = s->jac;
    r->iload = vo * s->inv_rl;
    r->dissipation = 0.0;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = iters;
}

static void save(const void *c, void *state)
{
    const OsOpampCircuit *s = c;
    double *d = state;
    d[0] = s->x;
    d[1] = s->fx;
    d[2] = s->vin;
}

static void restore(void *c, const void *state)
{
    OsOpampCircuit *s = c;
    const double *d = state;
    s->x = d[0];
    s->fx = d[1];
    s->vin = d[2];
}

const OsCircuitOps os_circuit_opamp = {
    "opamp",
    sizeof(OsOpampCircuit),
    3 * sizeof(double),
    1,
    update,
    NULL,
    set_step,
    reset,
    step,
    ok,
    save,
    restore,
};
