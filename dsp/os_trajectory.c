/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The trajectory of a circuit within each oversampled step: the input at the
 * TR-BDF2 inner point, the refinement of steps in which the op-amp changes
 * regime, and the band-limited sampling of the load voltage (os_window.h). */

#include "os_trajectory.h"

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
    t->ops->reset(t->circuit);
}

/* The input within the present step, at share u of it: the Lagrange cubic
 * through the last three oversampled inputs (t0 - 2h, t0 - h, t0) and the
 * present one (t0 + h). The oversampled input is band-limited to the kept
 * band, so the cubic's error at 4x is 0.6 % at 19 kHz (a straight line's:
 * 4.7 %), and it needs no sample from the future, so no latency. */
static double input_at(const double *hist, double vin, double u)
{
    const double um = u - 1.0, up = u + 1.0, upp = u + 2.0;
    return hist[0] * (-up * u * um / 6.0) + hist[1] * (upp * u * um * 0.5) +
           hist[2] * (-upp * up * um * 0.5) + vin * (upp * up * u / 6.0);
}

static void push_input(double *hist, double vin)
{
    hist[0] = hist[1];
    hist[1] = hist[2];
    hist[2] = vin;
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
 * -69.8 dBc at 4x, two reach -84.5. The op-amp stage's limiter corners need
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
    if (depth >= ops->refine_depth || !regime_changed(jac0, r, du / t->factor)) {
        window_add(t, u0, du, r);
        return;
    }
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
        ops->step(t->circuit, input_at(t->hist, vin, a + hd), input_at(t->hist, vin, a + hd * g),
                  r);
        iters += r->iters;
        refine(t, vin, a, hd, j0, depth + 1, r);
        t->last_jac = r->jac;
    }
    ops->set_step(t->circuit, t->h);
    r->iters = iters;
}

double os_trajectory_step(OsTrajectory *t, double vin, OsStepResult *r)
{
    const OsCircuitOps *ops = t->ops;
    const int windowed = t->win.a != 0.0;
    double y;
    if (windowed) {
        /* kept in case the step has to be taken again in halves */
        ops->save(t->circuit, saved_at(t, 0));
        ops->step(t->circuit, vin, input_at(t->hist, vin, OS_TRBDF2_G), r);
        const double jac0 = t->last_jac;
        refine(t, vin, 0.0, 1.0, jac0, 0, r);
        t->last_jac = r->jac;
        y = os_window_close(&t->win);
    } else {
        /* at 1x the input is not band-limited below the step rate: a straight
         * line, which cannot overshoot */
        ops->step(t->circuit, vin, t->hist[2] + OS_TRBDF2_G * (vin - t->hist[2]), r);
        y = r->vload;
    }
    push_input(t->hist, vin);
    return y;
}
