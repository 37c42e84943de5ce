/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The trajectory of a circuit within each oversampled step: the input within
 * the step, the step cut into pieces at the circuit's regime changes (located
 * by root finding on the solver's own trajectory), the refinement of pieces in
 * which the op-amp still changes regime, and the band-limited sampling of the
 * load voltage across the pieces (os_window.h). */

#include "os_trajectory.h"

#include "os_follower.h" /* os_wright_omega() */
#include "os_solver.h"

#include <math.h>
#include <string.h>

/* A step is taken again in two halves when the circuit's loop derivative
 * changes across it by more than this share at 4x, scaled with the step (the
 * change across a step grows with its length). See refine(). Chosen on the
 * standard tones of docs/performance.md: at 4x, 0.02 costs more and gains
 * little, 0.1 loses 2 dB; scaled, 16x reaches -121/-113 dBc on the op-amp and
 * loop-1 tones where a fixed 0.05 gave -117/-104. Refining on the follower's
 * gain as well (a transistor turning on or off) made the class-B tone worse. */
#define REFINE_JAC_4X 0.05

static void lagrange_weights(int points, double u, double *wt);

/* Points of the input's interpolation: for a whole step (the window's
 * compensation rests on it) and for a piece at any share (see
 * lagrange_weights()); at 1x two, a straight line. */
static int whole_points(int factor)
{
    return factor == 1 ? 2 : 4;
}

static int piece_points(int factor)
{
    return factor == 1 ? 2 : OS_INPUT_POINTS;
}

void os_trajectory_init(OsTrajectory *t, const OsCircuitOps *ops, void *circuit,
                        unsigned char *saved)
{
    memset(t, 0, sizeof(*t));
    t->ops = ops;
    t->circuit = circuit;
    t->saved = saved;
    t->factor = 1;
}

int os_trajectory_delay(int factor)
{
    return factor > 1 ? OS_WINDOW_DELAY : 0;
}

void os_trajectory_reset(OsTrajectory *t, int factor, double rate)
{
    t->factor = factor;
    t->h = 1.0 / (rate * factor);
    os_window_reset(&t->win, os_window_coefficient(factor));
    memset(t->hist, 0, sizeof(t->hist));
    t->last_jac = 0.0;
    t->fresh = 1;
    t->credit = 0.0;

    memset(t->rate, 0, sizeof(t->rate));
    for (int k = 0; k < OS_MAX_INDICATORS; ++k) {
        t->weight[k] = 1.0;
    }
    t->ops->reset(t->circuit);
    lagrange_weights(whole_points(factor), OS_TRBDF2_G, t->inner);
    /* the inner points and the middle of halved steps */
    const double g = OS_TRBDF2_G;
    const double at[OS_TRAJECTORY_FIXED] = {
        0.5,  0.5 * g,        0.5 + 0.5 * g, 0.25 * g,       0.25 + 0.25 * g,
        0.25, 0.5 + 0.25 * g, 0.75,          0.75 + 0.25 * g};
    for (int i = 0; i < OS_TRAJECTORY_FIXED; ++i) {
        t->fixed_at[i] = at[i];
        lagrange_weights(piece_points(factor), at[i], t->fixed[i]);
    }
}

/* The input within the present step, at share u of it: the Lagrange
 * polynomial through the last @p points - 1 oversampled inputs (at
 * u = -(points - 2), ..., -1, 0) and the present one (u = 1), into the last
 * @p points weights of wt (the others 0). It needs no sample from the future,
 * so no latency. The oversampled input is band-limited to the kept band
 * (os_oversampler.h): at 4x and 10 kHz the six-point polynomial's error is
 * 3e-5 at the TR-BDF2 inner point, the cubic's (four points) 5e-4.
 *
 * Pieces of split steps, at arbitrary shares, take six points: their inputs
 * must not carry an interpolation error that changes with where in the step
 * the corner fell (with the cubic there too, the hard-slewed tone of
 * docs/performance.md rose from -89 to -72 dBc at 4x). Whole steps, most
 * steps and those the chain's linear response rests on, keep the cubic: the
 * window's three-tap compensation is designed around it (os_window.h), whose
 * small droop happens to cancel the part of the window's own that three taps
 * cannot, so the passband stays within 0.001 dB at 4x without another step of
 * latency. At 1x the input is not band-limited below the step rate (a host's
 * step or click reaches the circuit as it is): a polynomial through it would
 * ring and overshoot within the step, so two points, the straight line from
 * the last input to the present one, which cannot. */
static void lagrange_weights(int points, double u, double *wt)
{
    enum { N = OS_INPUT_POINTS };
    const int first = N - points;
    for (int j = 0; j < N; ++j) {
        wt[j] = 0.0;
    }
    for (int j = first; j < N; ++j) {
        const double xj = j == N - 1 ? 1.0 : (double)(j - (N - 2));
        double w = 1.0;
        for (int m = first; m < N; ++m) {
            if (m != j) {
                const double xm = m == N - 1 ? 1.0 : (double)(m - (N - 2));
                w *= (u - xm) / (xj - xm);
            }
        }
        wt[j] = w;
    }
}

static double weighted(const double *wt, const double *hist, double vin)
{
    double sum = wt[OS_INPUT_POINTS - 1] * vin;
    for (int j = 0; j < OS_INPUT_POINTS - 1; ++j) {
        sum += wt[j] * hist[j];
    }
    return sum;
}

/* The input at share u of the present step; the weights of the shares that
 * whole and halved steps use are kept (OsTrajectory.fixed). */
static double input_at(const OsTrajectory *t, double vin, double u)
{
    for (int i = 0; i < OS_TRAJECTORY_FIXED; ++i) {
        if (u == t->fixed_at[i]) {
            return weighted(t->fixed[i], t->hist, vin);
        }
    }
    double wt[OS_INPUT_POINTS];
    lagrange_weights(piece_points(t->factor), u, wt);
    return weighted(wt, t->hist, vin);
}

static void push_input(double *hist, double vin)
{
    for (int j = 0; j + 2 < OS_INPUT_POINTS; ++j) {
        hist[j] = hist[j + 1];
    }
    hist[OS_INPUT_POINTS - 2] = vin;
}

/* Whether the op-amp changed its regime between two step ends: its current
 * limiter, slew limit or swing clamp engaging or letting go, or (in the
 * push-pull stage) the loop through the follower changing its gain, across a
 * piece @p share host frames long (the threshold scales with it). */
static int regime_changed(double jac0, const OsStepResult *r, double share)
{
    const double a0 = fabs(jac0), a1 = fabs(r->jac);
    const double lo = a0 < a1 ? a0 : a1;
    return fabs(r->jac - jac0) > REFINE_JAC_4X * 4.0 * share * lo;
}

/* One step of the circuit (from u0 to u0 + du of the oversampled step h) into
 * the window, as two cubic pieces: to the TR-BDF2 inner point, then to the end. */
static void window_add(OsTrajectory *t, double u0, double du, const OsStepResult *r)
{
    os_window_piece(&t->win, t->h, u0, du * OS_TRBDF2_G, r->vmid, r->dvmid);
    os_window_piece(&t->win, t->h, u0 + du * OS_TRBDF2_G, du * (1.0 - OS_TRBDF2_G), r->vload,
                    r->dvload);
}

static unsigned char *saved_at(const OsTrajectory *t, int depth)
{
    return t->saved + (size_t)depth * t->ops->state_size;
}

/* Levels of halving (OsCircuitOps.refine_depth): a halved piece across which
 * the op-amp still changes regime is halved once more (quarters) in the
 * push-pull stage, where the op-amp slews across the dead zone and its corners
 * come and go within a quarter step: one level left the loop-1 tone at
 * -69.8 dBc at 4x, two reach -84.2. The op-amp stage's limiter corners need
 * one level (-96.0 dBc; a second gave -93.9 and cost 40 % more on the loud
 * program, halving again nine halves in ten while the limiter is engaged).
 *
 * The piece of the present step from share u0 to u0 + du, already taken from
 * the state saved at this depth into *r: if the op-amp changed regime across
 * it (its loop derivative jac0 at the start), take it again as two halves;
 * then add it to the window. */
static void refine(OsTrajectory *t, double vin, double u0, double du, double jac0, int depth,
                   OsStepResult *r)
{
    const OsCircuitOps *ops = t->ops;
    if (depth >= ops->refine_depth || t->credit < 2.0 || !regime_changed(jac0, r, du / t->factor)) {
        window_add(t, u0, du, r);
        return;
    }
    t->credit -= 2.0;
    ops->restore(t->circuit, saved_at(t, depth));
    int iters = r->iters;
    const double g = OS_TRBDF2_G, hd = 0.5 * du;
    for (int half = 0; half < 2; ++half) {
        const double a = u0 + half * hd;
        if (depth + 1 < ops->refine_depth) {
            /* the state at the half's start, in case it is halved again */
            ops->save(t->circuit, saved_at(t, depth + 1));
        }
        const double j0 = half == 0 ? jac0 : t->last_jac;
        ops->set_step(t->circuit, hd * t->h);
        ops->step(t->circuit, input_at(t, vin, a + hd), input_at(t, vin, a + hd * g), r);
        iters += r->iters;
        refine(t, vin, a, hd, j0, depth + 1, r);
        t->last_jac = r->jac;
    }
    ops->set_step(t->circuit, t->h);
    r->iters = iters;
}

/* Bounds on the work of one step: pieces it may be cut into, and
 * root-finding iterations to place each regime change. */
#define MAX_PIECES 256
#define MAX_LOCATE 4
/* Below these weights (OsStepResult.ind_weight) an indicator's pieces are not
 * kept short, and its crossings not located. */
#define WEIGHT_MIN 0.05
#define WEIGHT_EVENT 0.5
/* Shortest piece, as a share of the step. */
#define MIN_PIECE 1e-4
/* Refining a step costs sub-steps; a step may spend at most what it has
 * been credited. Every step adds credit_rate() sub-steps to the credit, which
 * holds at most CREDIT_MAX: a signal may use that many extra sub-steps per
 * step on average, and a burst of corners up to CREDIT_MAX at once, so the
 * cost of any signal is at most 1 + credit_rate() times that of whole steps
 * over any stretch longer than CREDIT_MAX / credit_rate() steps. From 4x up
 * CREDIT_RATE per step; below, the same per unit of time (a step twice as long
 * meets twice the corners): 16 at 2x, 32 at 1x. */
#define CREDIT_RATE 8.0
#define CREDIT_MAX 256.0

static double credit_rate(int factor)
{
    return factor >= 4 ? CREDIT_RATE : CREDIT_RATE * 4.0 / factor;
}

double os_trajectory_max_substeps(int factor, double steps)
{
    return steps * (2.0 + credit_rate(factor < 1 ? 1 : factor)) + CREDIT_MAX;
}

static int spend(OsTrajectory *t)
{
    if (t->credit < 1.0) {
        return 0;
    }
    t->credit -= 1.0;
    return 1;
}

static int zone_of(const OsIndicator *d, double v)
{
    return (v > d->lo) + (v > d->hi);
}

/* The largest change of indicator d across one piece at value v (os_circuit.h). */
static double allowed_change(const OsIndicator *d, double v)
{
    const double far = fabs(v - d->centre) - 1.0;
    return d->span * (far > 0.0 ? exp(d->sharp * far / 3.0) : 1.0);
}

/* The largest move of indicator d from v in the direction of @p sign that
 * stays within what allowed_change() permits everywhere along the way: moving
 * away from the bend, the allowance at v; moving towards it from the tail at
 * distance d0 = |v - centre| - 1, the largest y with
 * y <= span exp(k (d0 - y) / 3), y = (3/k) W((k/3) span e^(k d0 / 3)) (Lambert W,
 * through the Wright omega function), and once the move reaches the bend,
 * span beyond it. */
static double allowed_move(const OsIndicator *d, double v, double sign)
{
    const double off = v - d->centre, d0 = fabs(off) - 1.0;
    if (off * sign >= 0.0 || d0 <= 0.0 || d->sharp <= 0.0) {
        return allowed_change(d, v);
    }
    const double k = d->sharp / 3.0;
    const double y = os_wright_omega(log(k * d->span) + k * d0) / k;
    return y < d0 ? y : d0 + d->span;
}

/* Where, as a share s of a piece, indicator values i0 (start), im (inner
 * point, at share g) and i1 (end) cross level b, given that the crossing lies
 * in (0, g] (first) or (g, 1]: the root of the quadratic through the three
 * points within that part, or the straight line's if the quadratic has none. */
static double crossing(double i0, double im, double i1, double b, int first)
{
    const double g = OS_TRBDF2_G;
    /* q(s) = i0 + p s + q s^2 with q(g) = im, q(1) = i1 */
    const double qq = ((i1 - i0) - (im - i0) / g) / (1.0 - g);
    const double pp = (i1 - i0) - qq;
    const double lo = first ? 0.0 : g, hi = first ? g : 1.0;
    const double vlo = first ? i0 : im, vhi = first ? im : i1;
    double s = lo + (b - vlo) / (vhi - vlo) * (hi - lo); /* the straight line */
    if (fabs(qq) > 1e-12 * (fabs(pp) + fabs(i0 - b))) {
        const double disc = pp * pp - 4.0 * qq * (i0 - b);
        if (disc >= 0.0) {
            const double sq = sqrt(disc);
            const double r1 = (-pp - sq) / (2.0 * qq), r2 = (-pp + sq) / (2.0 * qq);
            const int ok1 = r1 >= lo && r1 <= hi, ok2 = r2 >= lo && r2 <= hi;
            if (ok1 || ok2) {
                s = ok1 && ok2 ? (r1 < r2 ? r1 : r2) : ok1 ? r1 : r2;
            }
        }
    }
    return isfinite(s) ? (s < lo ? lo : s > hi ? hi : s) : 0.5 * (lo + hi);
}

/* One piece of the present step, from share u to u + len, from the present
 * state; the input from the history's polynomial. */
static void take(OsTrajectory *t, double vin, double u, double len, OsStepResult *r)
{
    if (u == 0.0 && len >= 1.0) {
        /* the whole step: the inner point's weights are fixed */
        t->ops->set_step(t->circuit, t->h);
        t->ops->step(t->circuit, vin, weighted(t->inner, t->hist, vin), r);
        return;
    }
    t->ops->set_step(t->circuit, len * t->h);
    t->ops->step(t->circuit, u + len >= 1.0 ? vin : input_at(t, vin, u + len),
                 input_at(t, vin, u + len * OS_TRBDF2_G), r);
}

/* The first regime change within the piece just taken (start values i0,
 * zones z0): the indicator, the boundary it crosses, the zone it enters and
 * the share of the piece where it does. Returns 0 if there is none. */
static int first_change(const OsTrajectory *t, const double *i0, const int *z0,
                        const OsStepResult *r, int *which, double *level, int *dest, double *at)
{
    const OsCircuitOps *ops = t->ops;
    int found = 0;
    *at = 2.0;
    for (int k = 0; k < ops->n_indicators; ++k) {
        const OsIndicator *d = &ops->indicators[k];
        if (!(r->ind_weight[k] > WEIGHT_EVENT)) {
            continue; /* the nonlinearity does not matter here: no crossing to place */
        }
        const int zm = zone_of(d, r->ind_mid[k]), z1 = zone_of(d, r->ind[k]);
        int first, to;
        if (zm != z0[k]) {
            first = 1;
            to = zm;
        } else if (z1 != zm) {
            first = 0;
            to = z1;
        } else {
            continue;
        }
        const int from = first ? z0[k] : zm;
        /* the boundary next to the zone left, towards the zone entered */
        const int next = from + (to > from ? 1 : -1);
        const double b = (to > from ? next : from) == 1 ? d->lo : d->hi;
        const double s = crossing(i0[k], r->ind_mid[k], r->ind[k], b, first);
        if (s < *at) {
            *at = s;
            *which = k;
            *level = b;
            *dest = next;
            found = 1;
        }
    }
    return found;
}

/* The longest piece from share u, at most len, over which no indicator in
 * its middle zone moves by more than it may (at the rates seen on the last
 * piece). */
static double piece_length(const OsTrajectory *t, const double *i0, const int *z0, const double *w0,
                           const double *rate, double len)
{
    const OsCircuitOps *ops = t->ops;
    for (int k = 0; k < ops->n_indicators; ++k) {
        const OsIndicator *d = &ops->indicators[k];
        const double move = fabs(rate[k]) * len * w0[k];
        if (z0[k] == 1 && d->span > 0.0 && w0[k] > WEIGHT_MIN && move > d->span) {
            /* (the allowance is at least span everywhere) */
            const double a = allowed_move(d, i0[k], rate[k]);
            if (move > a) {
                len *= a / move;
            }
        }
    }
    return len;
}

/* Whether the piece just taken moved an indicator that started in its
 * middle zone by more than twice what it may: then it is taken again,
 * shorter. Returns the factor to shorten it by (1: keep it). */
static double overshoot(const OsTrajectory *t, const double *i0, const int *z0,
                        const OsStepResult *r)
{
    const OsCircuitOps *ops = t->ops;
    double worst = 1.0;
    for (int k = 0; k < ops->n_indicators; ++k) {
        const OsIndicator *d = &ops->indicators[k];
        if (z0[k] == 1 && d->span > 0.0 && r->ind_weight[k] > WEIGHT_MIN) {
            const double moved = fabs(r->ind_mid[k] - i0[k]) + fabs(r->ind[k] - r->ind_mid[k]);
            const double m = moved * r->ind_weight[k];
            if (m > 2.0 * d->span) {
                const double ratio = m / allowed_move(d, i0[k], r->ind[k] - i0[k]);
                worst = ratio > worst ? ratio : worst;
            }
        }
    }
    return worst > 2.0 ? worst : 1.0;
}

/* The step to input vin, cut into pieces: within an indicator's middle zone
 * the pieces are kept short (piece_length()), and wherever an indicator
 * changes zone the piece ends at the crossing, found on the solver's own
 * trajectory (its first estimate from the quadratic through the piece's
 * three indicator values, then regula falsi on sub-steps from the piece's
 * start, until the indicator lands within its tolerance of the boundary).
 * Each piece enters the window. *r ends as the result at the step's end;
 * r->iters counts every evaluation spent. */
static void located_step(OsTrajectory *t, double vin, int windowed, OsStepResult *r)
{
    const OsCircuitOps *ops = t->ops;
    const int n = ops->n_indicators;
    unsigned char *start = saved_at(t, 0);
    double i0[OS_MAX_INDICATORS], rate[OS_MAX_INDICATORS], w0[OS_MAX_INDICATORS];
    int z0[OS_MAX_INDICATORS];
    memcpy(i0, t->ind, sizeof(i0));
    memcpy(z0, t->zone, sizeof(z0));
    memcpy(rate, t->rate, sizeof(rate));
    memcpy(w0, t->weight, sizeof(w0));
    double u = 0.0, jac0 = t->last_jac;
    t->credit = fmin(t->credit + credit_rate(t->factor), CREDIT_MAX);
    int iters = 0;
    for (int piece = 0; u < 1.0; ++piece) {
        double len = 1.0 - u;
        /* a piece short of the step's end, a retake and every locating
         * sub-step spend credit (see credit_rate()); without it the rest of the
         * step is taken whole */
        const int last = piece + 1 >= MAX_PIECES || t->fresh || t->credit < 1.0;
        if (!last) {
            len = piece_length(t, i0, z0, w0, rate, len);
            len = len > MIN_PIECE ? len : MIN_PIECE;
            if (u + len > 1.0 - MIN_PIECE) {
                len = 1.0 - u;
            }
        }
        ops->save(t->circuit, start);
        take(t, vin, u, len, r);
        iters += r->iters;
        if (piece > 0) {
            t->credit -= 1.0;
        }
        if (!last) {
            const double shorter = overshoot(t, i0, z0, r);
            if (shorter > 1.0 && len / shorter >= MIN_PIECE && spend(t)) {
                len /= shorter;
                ops->restore(t->circuit, start);
                take(t, vin, u, len, r);
                iters += r->iters;
            }
        }
        int k = 0, dest = -1;
        double level = 0.0, s = 1.0;
        const int change = !last && first_change(t, i0, z0, r, &k, &level, &dest, &s);
        if (change && s * len < MIN_PIECE && spend(t)) {
            /* the piece starts on the boundary: enter the zone beyond it, and
             * take the piece again under that zone's rules */
            ops->restore(t->circuit, start);
            z0[k] = dest;
            continue;
        }
        if (change && (1.0 - s) * len >= MIN_PIECE && t->credit >= 1.0) {
            /* regula falsi (Illinois) on the share s, bracketed by the
             * piece's start and the end of the part where the change was seen */
            const int above0 = i0[k] > level;
            double slo = 0.0, shi = s <= OS_TRBDF2_G ? OS_TRBDF2_G : 1.0;
            double vlo = i0[k], vhi = s <= OS_TRBDF2_G ? r->ind_mid[k] : r->ind[k];
            int side = 0;
            for (int it = 0; it < MAX_LOCATE && spend(t); ++it) {
                ops->restore(t->circuit, start);
                take(t, vin, u, s * len, r);
                iters += r->iters;
                const double v = r->ind[k];
                if (fabs(v - level) <= ops->indicators[k].tol) {
                    break;
                }
                if ((v > level) == above0) {
                    slo = s;
                    vlo = v;
                    if (side == -1) {
                        vhi = level + 0.5 * (vhi - level);
                    }
                    side = -1;
                } else {
                    shi = s;
                    vhi = v;
                    if (side == 1) {
                        vlo = level + 0.5 * (vlo - level);
                    }
                    side = 1;
                }
                const double sn = slo + (level - vlo) / (vhi - vlo) * (shi - slo);
                s = isfinite(sn) && sn > slo && sn < shi ? sn : 0.5 * (slo + shi);
                s = s > MIN_PIECE / len ? s : MIN_PIECE / len;
            }
            len *= s;
        } else if (!change) {
            dest = -1;
        }
        if (windowed) {
            if (ops->refine_depth > 0 && t->credit >= 2.0) {
                /* no regime change located: where the op-amp's loop derivative
                 * still changed across the piece (a limiter, clamp or
                 * transistor bending), it is taken again in halves */
                const int pieces_iters = r->iters;
                refine(t, vin, u, len, jac0, 0, r);
                iters += r->iters - pieces_iters;
            } else {
                window_add(t, u, len, r);
            }
        }
        jac0 = r->jac;
        for (int j = 0; j < n; ++j) {
            rate[j] = (r->ind[j] - i0[j]) / len;
            w0[j] = r->ind_weight[j];
            z0[j] = zone_of(&ops->indicators[j], r->ind[j]);
            i0[j] = r->ind[j];
        }
        if (dest >= 0) {
            z0[k] = dest; /* landed on the boundary: the zone entered */
        }
        u = len >= 1.0 - u ? 1.0 : u + len;
    }
    ops->set_step(t->circuit, t->h);
    memcpy(t->ind, i0, sizeof(i0));
    memcpy(t->zone, z0, sizeof(z0));
    memcpy(t->rate, rate, sizeof(rate));
    memcpy(t->weight, w0, sizeof(w0));
    t->last_jac = jac0;
    t->fresh = 0;
    r->iters = iters;
}

double os_trajectory_step(OsTrajectory *t, double vin, OsStepResult *r)
{
    /* at 1x there is no window: the plain sample at the step's end */
    const int windowed = t->win.a != 0.0;
    located_step(t, vin, windowed, r);
    push_input(t->hist, vin);
    return windowed ? os_window_close(&t->win) : r->vload;
}
