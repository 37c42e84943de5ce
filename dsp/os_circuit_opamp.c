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
 * iteration (Chebyshev's, inside a shrinking bracket: solve()) always converges
 * to its unique root.
 *
 * Into a loudspeaker (os_load.h) the load current is the voice coil's, a
 * state of the load's own network. Within a TR-BDF2 sub-step the load is a
 * Norton equivalent iL = G vo + J (os_load.h), so the pin still follows x
 * affinely, vo = rho x + vo0 and io = kx x + io0 with
 *   rho = 1 / (1 + Rs (1/(R1 + R2) + G)),  kx = (1 - rho) / Rs,
 *   vo0 = -Rs rho J,  io0 = rho J,
 * the same scalar equation holds with these offsets, and R still rises with
 * slope at least 1, so the root lies within |R(x)| of any x: that bounds the
 * bracket from the first evaluation on (the offsets void the closed-form
 * bounds of the resistive case). The load's states then follow from vo. */

#include "os_circuit.h"

#include "os_load.h"
#include "os_opamp.h"
#include "os_solver.h"

#include <math.h>
#include <string.h>

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
    /* the last evaluation: where (x, v), the rate, its slopes by x and by v,
     * the limiter's share and whether it is valid; the next solve starts from
     * this linearisation */
    double ex, ev, ef, efx, efv, limit;
    int cached;
    double jac;        /* loop derivative at the last evaluation, 1/s */
    double fb;         /* share of x fed back: rho / G */
    double lim_near;   /* |io| above which the limiter's term is not negligible, A */
    double clamp_near; /* |x| above which the swing clamp's term is not negligible, V */
    double accept;     /* a third-order step this short leaves an error below the tolerance, V */
    /* the loudspeaker (load.speaker): its network, state, and the offsets of
     * the sub-step being solved (vd0 = vo0 / G); all zero into a resistor */
    OsLoad load;
    OsLoadState ls;
    double io0, vd0, vo0;
    /* the last evaluation's slopes: of the input pair's tanh, of the
     * limiter's term by io, and the clamp's share of d(dx/dt)/dx, for the
     * loop derivative at the load's instantaneous coupling */
    double last_dt, last_dlim, last_dclamp;
} OsOpampCircuit;

static inline double min2(double a, double b)
{
    return a < b ? a : b;
}

static inline double max2(double a, double b)
{
    return a > b ? a : b;
}

/* The third-order acceptance length of update()'s comment, from kx and fb. */
static void set_accept(OsOpampCircuit *s)
{
    /* A third-order step leaves an error of about K e^3 after a step e, K the
     * largest ratio of the residual's third to first derivative: the input
     * pair's (kin fb)^2, the clamps' (1/w)^2 and (kx / Ik)^2. A step below
     * cbrt(tol / K) lands within the tolerance (tol = 1e-8 V, a tenth of
     * the Newton tolerance the circuit was validated with). */
    const double a = s->op.kin * s->fb, b = s->op.inv_w, l = s->kx * s->op.inv_ik;
    const double k = fmax(a * a, fmax(b * b, l * l));
    s->accept = fmin(1e-4, cbrt(1e-8 / k));
}

/* Into a loudspeaker: the pin's coupling to x for the present sub-step
 * weight (the header's rho and kx). */
static void couple_speaker(OsOpampCircuit *s)
{
    os_load_set_weight(&s->load, s->w);
    const double rs = s->op.rs;
    s->rho = 1.0 / (1.0 + rs * (1.0 / OS_FEEDBACK_TOTAL + s->load.g));
    s->kx = (1.0 - s->rho) / rs;
    s->fb = s->rho * s->inv_g;
    set_accept(s);
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
    s->fb = s->rho * s->inv_g;
    os_load_setup(&s->load, si, s->w);
    s->io0 = s->vd0 = s->vo0 = 0.0;
    /* The clamp terms are exp(u) with u below OS_EXP_NEGLIGIBLE (os_opamp.h)
     * short of these: there they are exactly zero and not evaluated. */
    s->lim_near = s->op.ilim + OS_EXP_NEGLIGIBLE / s->op.inv_ik;
    s->clamp_near = s->op.vsw + OS_EXP_NEGLIGIBLE / s->op.inv_w;
    set_accept(s);
    if (s->load.speaker) {
        couple_speaker(s);
    }
    s->cached = 0;
}

static void set_step(void *c, double h)
{
    OsOpampCircuit *s = c;
    s->w = os_trbdf2_weight(h);
    if (s->load.speaker) {
        couple_speaker(s);
    }
}

static void reset(void *c)
{
    OsOpampCircuit *s = c;
    s->x = 0.0;
    s->fx = 0.0;
    s->vin = 0.0;
    s->limit = 0.0;
    s->jac = 0.0;
    s->cached = 0;
    os_load_reset(&s->ls);
}

static int ok(const void *c)
{
    const OsOpampCircuit *s = c;
    int fine = isfinite(s->x) && isfinite(s->fx) && isfinite(s->vin);
    for (int i = 0; i < 3; ++i) {
        fine = fine && isfinite(s->ls.y[i]) && isfinite(s->ls.my[i]);
    }
    return fine;
}

/* E(u) = exp(u) continued linearly above OS_EXP_MAX (os_opamp.h), with its
 * first and second derivatives. */
static inline double exp_cont(double u, double *d1, double *d2)
{
    if (u > OS_EXP_MAX) {
        const double e = os_exp(OS_EXP_MAX);
        *d1 = e;
        *d2 = 0.0;
        return e * (1.0 + (u - OS_EXP_MAX));
    }
    const double e = os_exp(u);
    *d1 = e;
    *d2 = e;
    return e;
}

/* The op-amp's rate f = dx/dt at internal node x and input v (os_opamp.h,
 * with vd = v - fb x and io = kx x), its first and second derivatives by x
 * (*d1, *d2) and by v (*dv). The limiter's and the clamp's terms are
 * evaluated only where they are not exactly zero. */
static inline double rate_at(OsOpampCircuit *s, double x, double v, double *d1, double *d2,
                             double *dv)
{
    const OsOpampCoeffs *op = &s->op;
    const double a = op->kin * s->fb;
    const double u = op->kin * (v - s->fb * x - s->vd0);
    double dt;
    const double t = os_tanh_d(u, &dt);
    double f = op->sr * t - op->wp * x;
    double g1 = -op->sr * a * dt - op->wp;
    double g2 = -2.0 * op->sr * a * a * t * dt; /* d2 tanh/du2 = -2 t (1 - t^2) */
    *dv = op->sr * op->kin * dt;
    double limit = 0.0, g1_lim = 0.0, g1_clamp = 0.0;
    const double io = s->kx * x + s->io0;
    if (fabs(io) > s->lim_near) {
        /* only the polarity that |io| is near: the other's term is exactly 0
         * (|io| > lim_near > 0 puts it below OS_EXP_NEGLIGIBLE) */
        const double sg = io > 0.0 ? 1.0 : -1.0, k = s->kx * op->inv_ik;
        double d1e, d2e;
        const double e = exp_cont((sg * io - op->ilim) * op->inv_ik, &d1e, &d2e);
        f -= op->sr * sg * e;
        g1 -= op->sr * k * d1e;
        g2 -= op->sr * k * k * sg * d2e;
        g1_lim = op->sr * op->inv_ik * d1e; /* by io: times kx is its share of g1 */
        limit = e;
    }
    if (fabs(x) > s->clamp_near) {
        const double sg = x > 0.0 ? 1.0 : -1.0;
        double d1e, d2e;
        const double e = exp_cont((sg * x - op->vsw) * op->inv_w, &d1e, &d2e);
        f -= op->sr * sg * e;
        g1 -= op->sr * op->inv_w * d1e;
        g2 -= op->sr * op->inv_w * op->inv_w * sg * d2e;
        g1_clamp += op->sr * op->inv_w * d1e;
        const double other = (-sg * x - op->vsw) * op->inv_w;
        if (other > OS_EXP_NEGLIGIBLE) {
            /* a swing so small (under 20 knee widths) that both clamps act */
            const double e2 = exp_cont(other, &d1e, &d2e);
            f += op->sr * sg * e2;
            g1 -= op->sr * op->inv_w * d1e;
            g1_clamp += op->sr * op->inv_w * d1e;
            g2 += op->sr * op->inv_w * op->inv_w * sg * d2e;
        }
    }
    s->limit = limit;
    s->last_dt = dt;
    s->last_dlim = g1_lim;
    s->last_dclamp = g1_clamp;
    *d1 = g1;
    *d2 = g2;
    return f;
}

/* Solve one sub-step x = c + w f(x) at input voltage vin; returns x, adds
 * evaluations. R(x) = x - c - w f(x) rises strictly (R' >= 1), so Chebyshev's
 * iteration (Newton's with the second derivative, cubic convergence), kept
 * inside a bracket that shrinks with every evaluation and falling back to
 * bisection when a step leaves it, converges from any start. It starts from
 * the linearisation of the last evaluation (one Newton step for the new c and
 * vin from there, with no new evaluation), or, with none, from the loop's
 * linear solution. */
static double solve(OsOpampCircuit *s, double c, double vin, double guess, int *iters)
{
    const OsOpampCoeffs *op = &s->op;
    const double w = s->w;
    /* Bracket. The input stage is bounded by SR and every other term of f opposes
     * x, so |x - c| <= w SR. Beyond xc, where one clamp has reached 3 (in
     * units of SR), f < 0 for x > 0 (and f > 0 for x < 0): there R has the sign of
     * x - c. Both bounds keep the iteration out of the far exponential tails,
     * where it could only creep back one knee width per step. */
    const double reach = 1.01 * w * op->sr + 1e-6;
    const double ln3 = 1.0986122886681098;
    const double xc = min2(op->vsw + ln3 / op->inv_w, (op->ilim + ln3 / op->inv_ik) / s->kx);
    double lo = max2(min2(c, 0.0) - reach, min2(c, -xc));
    double hi = min2(max2(c, 0.0) + reach, max2(c, xc));
    const int speaker = s->load.speaker;
    if (speaker) {
        /* The offsets void the bounds above but the swing clamp's: x within
         * its reach or w SR of c, with room for the limiter's knee; the
         * slope rule below tightens it from the first evaluation. A root
         * beyond (a state far outside the circuit's reach) leaves x at the
         * end: bounded. */
        const double span =
            max2(fabs(c) + reach, op->vsw + ln3 / op->inv_w) + 1.2 * OS_VSENSE + 0.1;
        lo = -span;
        hi = span;
    }
    double x;
    if (s->cached) {
        /* ev holds the input less the offset of its sub-step (0 into a resistor) */
        x = (c + w * (s->ef - s->efx * s->ex + s->efv * (vin - s->vd0 - s->ev))) /
            (1.0 - w * s->efx);
    } else {
        const double wt = op->sr * op->kin;
        x = (c + w * wt * (vin - s->vd0)) / (1.0 + w * (wt * s->fb + op->wp));
        if (!(fabs(op->kin * (vin - s->fb * x - s->vd0)) < 0.5)) {
            x = guess;
        }
    }
    if (!(x > lo && x < hi)) {
        x = isfinite(x) ? (x <= lo ? lo : hi) : 0.5 * (lo + hi);
    }
    int it = 0;
    /* the last two steps, for the rule of os_newton_scalar() (rtsafe): a step
     * that does not shrink to half the one before the last is replaced by
     * bisection, so the iteration cannot cycle across a bend of the residual */
    double older = hi - lo, newer = hi - lo;
    while (it < 60) {
        double d1, d2, dv;
        const double f = rate_at(s, x, vin, &d1, &d2, &dv);
        ++it;
        s->ex = x;
        s->ev = vin - s->vd0;
        s->ef = f;
        s->efx = d1;
        s->efv = dv;
        s->jac = d1;
        const double r = x - c - w * f;
        if (r == 0.0) {
            break;
        }
        if (r > 0.0) {
            hi = x;
        } else {
            lo = x;
        }
        if (speaker) {
            /* R' >= 1: the root lies within |r| of x; twice that, so that a
             * Newton step of slope near 1, which lands on x - r itself, stays
             * strictly inside */
            if (r > 0.0) {
                lo = max2(lo, x - 2.0 * r);
            } else {
                hi = min2(hi, x - 2.0 * r);
            }
        }
        const double inv_r1 = 1.0 / (1.0 - w * d1), r2 = -w * d2;
        const double newton = r * inv_r1, bend = 0.5 * newton * r2 * inv_r1;
        /* Chebyshev's third-order step, Newton's corrected by the curvature
         * (cubic convergence, like Halley's, without a second division);
         * Newton's alone where the correction would be large */
        const double step = fabs(bend) < 0.5 ? newton * (1.0 + bend) : newton;
        double xn = x - step;
        if (xn == x) {
            break; /* the step is below x's last digit: x is the root to rounding */
        }
        if (!(xn > lo && xn < hi) || !(fabs(step) <= 0.5 * fabs(older))) {
            xn = 0.5 * (lo + hi); /* left the bracket or stopped shrinking: bisect */
        } else if (fabs(step) <= s->accept) {
            x = xn;
            break;
        }
        older = newer;
        newer = xn - x;
        x = xn;
        if (hi - lo <= 1e-12 * (1.0 + fabs(x))) {
            break;
        }
    }
    s->cached = 1;
    *iters += it;
    return x;
}

static void step_speaker(OsOpampCircuit *s, double vin, double vin_g, OsStepResult *r);

static void step(void *c, double vin, double vin_g, OsStepResult *r)
{
    OsOpampCircuit *s = c;
    if (s->load.speaker) {
        step_speaker(s, vin, vin_g, r);
        return;
    }
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
    const double fb = s->fb;
    r->ind_mid[0] = os_opamp_indicator(&s->op, vin_g - fb * xg);
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
    r->ind[0] = os_opamp_indicator(&s->op, vin - fb * x);
    r->ind_weight[0] = s->limit < 1.0 ? 1.0 - s->limit : 0.0;
}

/* The offsets of a sub-step into the loudspeaker whose Norton current is J. */
static void offsets(OsOpampCircuit *s, double j)
{
    s->io0 = s->rho * j;
    s->vo0 = -s->op.rs * s->io0;
    s->vd0 = s->vo0 * s->inv_g;
}

/* The pin's rate where x moves at fx and the load is in state l:
 * vo = x - Rs io, io = vo / (R1 + R2) + iL, so
 * dvo/dt (1 + Rs / (R1 + R2)) = fx - Rs diL/dt, with diL/dt from the load
 * (with Le = 0 it holds dvo/dt itself: solved for it). */
static double pin_rate(const OsOpampCircuit *s, const OsLoadState *l, double fx)
{
    const double rs = s->op.rs, a = 1.0 + rs / OS_FEEDBACK_TOTAL;
    if (s->load.le > 0.0) {
        return (fx - rs * os_load_current_rate(&s->load, l, 0.0)) / a;
    }
    /* diL/dt = (dvo/dt - vm') / Re */
    const double dvm = l->my[1] / s->load.cmes;
    return (fx + rs * dvm / s->load.re) / (a + rs / s->load.re);
}

/* step() into a loudspeaker: the same two sub-steps, each with the load's
 * Norton equivalent, then the load's states from the pin voltage. */
static void step_speaker(OsOpampCircuit *s, double vin, double vin_g, OsStepResult *r)
{
    int iters = 0;
    double mc[3];
    OsLoadState lg, l1;
    os_load_c_trap(&s->load, &s->ls, mc);
    offsets(s, os_load_norton(&s->load, mc));
    const double c1 = s->x + s->w * s->fx;
    const double xg = solve(s, c1, vin_g, s->x + 2.0 * s->w * s->fx, &iters);
    const double vog = s->rho * xg + s->vo0;
    r->ind_mid[0] = os_opamp_indicator(&s->op, vin_g - s->fb * xg - s->vd0);
    os_load_finish(&s->load, mc, vog, &lg);
    const double fg = (xg - c1) / s->w;

    os_load_c_bdf2(&s->load, &s->ls, &lg, mc);
    offsets(s, os_load_norton(&s->load, mc));
    const double c2 = OS_TRBDF2_A * xg - OS_TRBDF2_B * s->x;
    double x = solve(s, c2, vin, xg + (xg - s->x) * ((1.0 - OS_TRBDF2_G) / OS_TRBDF2_G), &iters);
    double fx = (x - c2) / s->w;
    const double vo = s->rho * x + s->vo0;
    os_load_finish(&s->load, mc, vo, &l1);
    r->ind[0] = os_opamp_indicator(&s->op, vin - s->fb * x - s->vd0);
    if (fabs(x) < 1e-30) {
        x = 0.0;
    }
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    s->x = x;
    s->fx = fx;
    s->vin = vin;
    s->ls = l1;
    r->vmid = vog;
    r->dvmid = pin_rate(s, &lg, fg);
    r->vload = vo;
    r->dvload = pin_rate(s, &l1, fx);
    /* The loop derivative d(dx/dt)/dx at an instant, where the coil's current
     * is a state (with Le = 0 the coil is Re to the motional voltage): not
     * the sub-step's coupling, which depends on the step's length, so that a
     * step taken in halves does not look like a change of regime to the
     * trajectory (os_trajectory.c) and call for halving again. */
    const double rs = s->op.rs;
    const double gi = 1.0 / OS_FEEDBACK_TOTAL + (s->load.le > 0.0 ? 0.0 : 1.0 / s->load.re);
    const double rho_i = 1.0 / (1.0 + rs * gi), kx_i = (1.0 - rho_i) / rs;
    r->jac = -s->op.sr * s->op.kin * rho_i * s->inv_g * s->last_dt - s->op.wp -
             kx_i * s->last_dlim - s->last_dclamp;
    r->iload = l1.y[0];
    r->dissipation = 0.0;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = iters;
    r->ind_weight[0] = s->limit < 1.0 ? 1.0 - s->limit : 0.0;
}

static void save(const void *c, void *state)
{
    const OsOpampCircuit *s = c;
    double *d = state;
    d[0] = s->x;
    d[1] = s->fx;
    d[2] = s->vin;
    memcpy(d + 3, &s->ls, sizeof(s->ls));
}

static void restore(void *c, const void *state)
{
    OsOpampCircuit *s = c;
    const double *d = state;
    s->x = d[0];
    s->fx = d[1];
    s->vin = d[2];
    memcpy(&s->ls, d + 3, sizeof(s->ls));
}

const OsCircuitOps os_circuit_opamp = {
    .name = "opamp",
    .size = sizeof(OsOpampCircuit),
    .state_size = 3 * sizeof(double) + sizeof(OsLoadState),
    .refine_depth = 1,
    .n_indicators = OS_OPAMP_INDICATORS,
    .indicators = os_opamp_zones,
    .update = update,
    .frame = NULL,
    .set_step = set_step,
    .reset = reset,
    .step = step,
    .ok = ok,
    .save = save,
    .restore = restore,
};
