/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp stage circuit: a non-inverting amplifier with closed-loop gain
 * G = 1 + R2/R1, feedback divider R1 + R2 = OS_FEEDBACK_TOTAL taken from the
 * op-amp output pin, load R_L from the output to ground.
 *
 * With the op-amp of os_opamp.h the output pin sits at vo = x - Rs io and
 * carries io = vo / Rp, Rp = R_L || (R1 + R2), hence (Ohm's and Kirchhoff's laws)
 *   io = x / (Rp + Rs),  vo = x Rp / (Rp + Rs),  vd = vin - vo / G,
 * and the circuit reduces to the one state x. BDF2 gives per step the scalar
 * equation  R(x) = x - c - gamma f(x) = 0,  strictly increasing in x because f
 * falls with x (every term of os_opamp.h does), so a safeguarded Newton
 * iteration always converges to its unique root. */

#include "os_circuit.h"

#include <math.h>

void os_opamp_stage_update(OsOpampStage *s, const OsCircuitParams *p, double h)
{
    const OsOpampParams op = {p->gbw, p->slew, p->rail, p->headroom, p->ilimit};
    os_opamp_coeffs(&op, &s->op);
    const double rp = p->load * OS_FEEDBACK_TOTAL / (p->load + OS_FEEDBACK_TOTAL);
    s->inv_g = 1.0 / p->gain;
    s->inv_rl = 1.0 / p->load;
    s->kx = 1.0 / (rp + s->op.rs);
    s->rho = rp * s->kx;
    s->gamma = os_bdf2_gamma(h);
}

void os_opamp_stage_reset(OsOpampStage *s)
{
    s->hist.x0 = 0.0;
    s->hist.x1 = 0.0;
    s->limit = 0.0;
}

int os_opamp_stage_ok(const OsOpampStage *s)
{
    return isfinite(s->hist.x0) && isfinite(s->hist.x1);
}

static double residual(void *ctx, double x, double *d)
{
    OsOpampStage *s = ctx;
    const double fb = s->rho * s->inv_g;
    OsOpampRate r;
    os_opamp_rate(&s->op, x, s->vin - fb * x, s->kx * x, &r);
    s->limit = r.limit;
    *d = 1.0 - s->gamma * (r.df_dx - r.df_dvd * fb + r.df_dio * s->kx);
    return x - s->c - s->gamma * r.f;
}

void os_opamp_stage_step(OsOpampStage *s, double vin, OsStepResult *r)
{
    const OsOpampCoeffs *op = &s->op;
    const double c = os_bdf2_c(&s->hist);
    const double fb = s->rho * s->inv_g;
    s->c = c;
    s->vin = vin;
    /* Bracket. The input stage is bounded by SR and every other term of f opposes
     * x, so |x - c| <= gamma SR. Beyond Xc, where one clamp has reached 3 (in
     * units of SR), f < 0 for x > 0 (and f > 0 for x < 0): there R has the sign of
     * x - c. Both bounds keep Newton out of the far exponential tails, where it
     * could only creep back one knee width per iteration. */
    const double reach = 1.01 * s->gamma * op->sr + 1e-6;
    const double ln3 = 1.0986122886681098;
    const double xc = fmin(op->vsw + ln3 / op->inv_w, (op->ilim + ln3 / op->inv_ik) / s->kx);
    const double lo = fmax(fmin(c, 0.0) - reach, fmin(c, -xc));
    const double hi = fmin(fmax(c, 0.0) + reach, fmax(c, xc));
    /* Guess: the solution of the loop with the input stage and clamps linear, which
     * is exact to first order whenever the op-amp is not slewing or clipping; at
     * long steps (low rates) it is far better than extrapolating the history. */
    const double wt = op->sr * op->kin;
    const double x_lin = (c + s->gamma * wt * vin) / (1.0 + s->gamma * (wt * fb + op->wp));
    const double guess =
        fabs(op->kin * (vin - fb * x_lin)) < 0.5 ? x_lin : os_bdf2_predict(&s->hist);
    int iters = 0;
    double x = os_newton_scalar(residual, s, guess, lo, hi, 1e-7, 60, &iters);
    if (fabs(x) < 1e-30) {
        x = 0.0; /* keep subnormals out of the state */
    }
    os_bdf2_push(&s->hist, x);
    const double vo = s->rho * x;
    r->vload = vo;
    r->iload = vo * s->inv_rl;
    r->dissipation = 0.0;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = iters;
}
