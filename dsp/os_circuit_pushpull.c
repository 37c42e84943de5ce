/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The push-pull stage's circuit. The op-amp of os_opamp.h drives, from its
 * output pin vo, the joined bases of an NPN (collector at +rail) and a PNP
 * (collector at -rail) through a bias source: the NPN base sits at vo + bias/2,
 * the PNP base at vo - bias/2. Each emitter reaches the output node through
 * R_e; the load R_L goes from the output to ground. The feedback divider
 * R1 + R2 = OS_FEEDBACK_TOTAL (gain G = 1 + R2/R1) hangs on the op-amp pin
 * (loop = 0) or on the output (loop = 1).
 *
 * The one state is the op-amp's internal node x. Given x, the rest is a static
 * network (Kirchhoff's laws with the Ebers-Moll currents of os_bjt.h) in
 * y = (vo, out, vbe_n, veb_p):
 *   F0 = vo - x + Rs io                    io = Ib_n - Ib_p (+ vo / Rfb, loop 0)
 *   F1 = Ie_n - Ie_p - out / R_L (- out / Rfb, loop 1)
 *   F2 = vo + bias/2 - vbe_n - R_e Ie_n - out
 *   F3 = vo - bias/2 + veb_p + R_e Ie_p - out
 * with vbc_n = vo + bias/2 - rail and vcb_p = -rail - (vo - bias/2). It is
 * solved by Newton-Raphson with SPICE's junction limiting, continuing from the
 * last solution in smaller moves of x if a direct solve fails (source stepping).
 *
 * Each TR-BDF2 sub-step then needs x with R(x) = x - c - w f(x, vd, io) = 0,
 * vd = vin - v_fb / G, v_fb = vo (loop 0) or out (loop 1). Raising x raises vo,
 * out and the op-amp's output current, and every term of f falls with those, so
 * R increases strictly with x, and the safeguarded scalar Newton iteration of
 * os_solver.h (the same as the op-amp stage's) converges from any guess. Its
 * derivative comes from the inner Jacobian: dy/dx = J^-1 e0. */

#include "os_circuit.h"

#include "os_bjt.h"
#include "os_opamp.h"
#include "os_solver.h"

#include <math.h>
#include <string.h>

/* Network evaluations the circuit may spend on one oversampled step beyond its
 * fast path (2 x 12); a gentle step takes 4 to 10. Settings far outside
 * physical sense (2 V of bias across junctions whose vbe is 0.4 V with no
 * emitter resistors: gigaamperes of idle current) can make Newton work hard;
 * the cap keeps the cost of any step bounded, holding the last good network
 * solution once it is spent. */
#define STEP_BUDGET 300
#define FAST_EVALS 24
/* The budget of a step that follows one which spent all of its own. */
#define STARVED_BUDGET 40

/* Unknowns of the fast path's Newton system, and of the network alone. */
enum { PP_X = 0, PP_VO, PP_OUT, PP_VBE_N, PP_VEB_P, PP_DIM };
enum { Y_VO = 0, Y_OUT, Y_VBE, Y_VEB, Y_DIM };

typedef struct {
    OsOpampCoeffs op;
    OsBjt q; /* both transistors (matched, complementary) */
    double inv_g;
    double g_load; /* 1 / R_load */
    double g_fb;   /* 1 / (R1 + R2) */
    double re;     /* emitter resistor, ohm */
    double half_bias;
    double rail;
    int loop; /* 1: feedback from the load */
    double h; /* step, s */
    double w; /* TR-BDF2 weight of the step being taken, s */
    /* state at the last step: x and the network (vo, out, vbe_n, veb_p) */
    double z[PP_DIM];
    double fx, vin;
    int fresh;   /* no step since reset: find the operating point first */
    int starved; /* the last nested step spent its whole budget */
    int budget;  /* evaluation count at which the present step stops trying */
    /* the last network solution, at x = xy: warm start of the next solve */
    double y[PP_DIM - 1];
    double xy;
    double limit; /* op-amp limiter share at the last evaluation */
} OsPushpullCircuit;

#define INNER_ITER 40
#define INNER_TOL 1e-10 /* V */
#define OUTER_TOL 1e-7  /* V */
#define OUTER_ITER 60
#define MAX_HALVINGS 8 /* source stepping: up to 256 moves of x */
#define FAST_ITER (FAST_EVALS / 2)

static void update(void *c, const double *si, double h)
{
    OsPushpullCircuit *s = c;
    os_opamp_coeffs_from(si, &s->op);
    os_bjt_init(&s->q, si[OS_P_VBE], si[OS_P_BETA]);
    s->inv_g = 1.0 / si[OS_P_GAIN];
    s->g_load = 1.0 / si[OS_P_LOAD];
    s->g_fb = 1.0 / OS_FEEDBACK_TOTAL;
    s->re = si[OS_P_EMITTER_R];
    s->half_bias = 0.5 * si[OS_P_BIAS];
    s->rail = si[OS_P_RAIL];
    s->loop = si[OS_P_LOOP] >= 0.5;
    s->h = h;
    s->w = os_trbdf2_weight(h);
}

static void set_step(void *c, double h)
{
    OsPushpullCircuit *s = c;
    s->h = h;
    s->w = os_trbdf2_weight(h);
}

static void reset(void *c)
{
    OsPushpullCircuit *s = c;
    memset(s->z, 0, sizeof(s->z));
    memset(s->y, 0, sizeof(s->y));
    s->xy = 0.0;
    s->fx = 0.0;
    s->vin = 0.0;
    s->limit = 0.0;
    s->fresh = 1;
    s->starved = 0;
    s->budget = STEP_BUDGET;
}

static int ok(const void *c)
{
    const OsPushpullCircuit *s = c;
    int ok = isfinite(s->fx) && isfinite(s->vin);
    for (int i = 0; i < PP_DIM; ++i) {
        ok = ok && isfinite(s->z[i]);
    }
    return ok;
}

/* Both transistors at y. */
static void transistors(const OsPushpullCircuit *s, const double *y, OsBjtEval *n, OsBjtEval *p)
{
    const double vo = y[Y_VO];
    os_bjt_eval(&s->q, y[Y_VBE], vo + s->half_bias - s->rail, n);
    os_bjt_eval(&s->q, y[Y_VEB], -s->rail - (vo - s->half_bias), p);
}

/* The op-amp's output current and its partial derivatives by vo, vbe_n, veb_p
 * (vbc_n moves with vo, vcb_p against it). */
typedef struct {
    double io, d_vo, d_vbe, d_veb;
} Drive;

static Drive drive_current(const OsPushpullCircuit *s, const double *y, const OsBjtEval *n,
                           const OsBjtEval *p)
{
    const double gfb_o = s->loop ? 0.0 : s->g_fb;
    Drive d;
    d.io = n->ib - p->ib + gfb_o * y[Y_VO];
    d.d_vo = n->dib_dvbc + p->dib_dvbc + gfb_o;
    d.d_vbe = n->dib_dvbe;
    d.d_veb = -p->dib_dvbe;
    return d;
}

/* Inner residual F(y; x) and its Jacobian (row-major); *d receives the
 * op-amp's output current there. */
static void network(const OsPushpullCircuit *s, double x, const double *y, double *f, double *j,
                    Drive *drive)
{
    OsBjtEval n, p;
    transistors(s, y, &n, &p);
    const Drive d = drive_current(s, y, &n, &p);
    *drive = d;
    const double rs = s->op.rs, re = s->re;
    const double gl = s->g_load + (s->loop ? s->g_fb : 0.0);
    double *j0 = j, *j1 = j + Y_DIM, *j2 = j + 2 * Y_DIM, *j3 = j + 3 * Y_DIM;

    f[0] = y[Y_VO] - x + rs * d.io;
    j0[Y_VO] = 1.0 + rs * d.d_vo;
    j0[Y_OUT] = 0.0;
    j0[Y_VBE] = rs * d.d_vbe;
    j0[Y_VEB] = rs * d.d_veb;

    f[1] = n.ie - p.ie - gl * y[Y_OUT];
    j1[Y_VO] = n.die_dvbc + p.die_dvbc;
    j1[Y_OUT] = -gl;
    j1[Y_VBE] = n.die_dvbe;
    j1[Y_VEB] = -p.die_dvbe;

    f[2] = y[Y_VO] + s->half_bias - y[Y_VBE] - re * n.ie - y[Y_OUT];
    j2[Y_VO] = 1.0 - re * n.die_dvbc;
    j2[Y_OUT] = -1.0;
    j2[Y_VBE] = -1.0 - re * n.die_dvbe;
    j2[Y_VEB] = 0.0;

    f[3] = y[Y_VO] - s->half_bias + y[Y_VEB] + re * p.ie - y[Y_OUT];
    j3[Y_VO] = 1.0 - re * p.die_dvbc;
    j3[Y_OUT] = -1.0;
    j3[Y_VBE] = 0.0;
    j3[Y_VEB] = 1.0 + re * p.die_dvbe;
}

/* Newton-Raphson on F(y; x) = 0 from y, with junction limiting. Returns 1 on
 * convergence (a full, unlimited step below INNER_TOL). *evals counts. */
static int solve_network(const OsPushpullCircuit *s, double x, double *y, int *evals)
{
    double f[Y_DIM], j[Y_DIM * Y_DIM];
    for (int it = 0; it < INNER_ITER; ++it) {
        Drive d;
        network(s, x, y, f, j, &d);
        ++*evals;
        if (os_linear_solve(j, f, Y_DIM) != 0) {
            return 0;
        }
        double worst = 0.0;
        for (int i = 0; i < Y_DIM; ++i) {
            worst = fmax(worst, fabs(f[i]));
        }
        if (!(worst < 1e6)) {
            return 0; /* NaN, or a move no circuit here could need */
        }
        const double vbe = os_bjt_limit(&s->q, y[Y_VBE] - f[Y_VBE], y[Y_VBE]);
        const double veb = os_bjt_limit(&s->q, y[Y_VEB] - f[Y_VEB], y[Y_VEB]);
        const int limited = vbe != y[Y_VBE] - f[Y_VBE] || veb != y[Y_VEB] - f[Y_VEB];
        y[Y_VO] -= f[Y_VO];
        y[Y_OUT] -= f[Y_OUT];
        y[Y_VBE] = vbe;
        y[Y_VEB] = veb;
        if (worst <= INNER_TOL && !limited) {
            return 1;
        }
    }
    return 0;
}

/* Network solution at x, starting from the last one (s->y at s->xy); if Newton
 * fails, step x there in 2, 4, ... moves, each from the previous solution. */
static void network_at(OsPushpullCircuit *s, double x, double *y, int *evals)
{
    memcpy(y, s->y, sizeof(s->y));
    if (*evals > s->budget) {
        return; /* out of budget for this step: keep the last good solution */
    }
    if (solve_network(s, x, y, evals)) {
        return;
    }
    for (int k = 1; k <= MAX_HALVINGS && *evals <= s->budget; ++k) {
        const int moves = 1 << k;
        int ok = 1;
        memcpy(y, s->y, sizeof(s->y));
        for (int m = 1; m <= moves && ok && *evals <= s->budget; ++m) {
            const double xm = s->xy + (x - s->xy) * m / moves;
            ok = solve_network(s, xm, y, evals);
        }
        if (ok) {
            return;
        }
    }
    /* Keep the last good solution rather than a diverged one. */
    memcpy(y, s->y, sizeof(s->y));
}

typedef struct {
    OsPushpullCircuit *s;
    double c, vin;
    int evals;
} Outer;

/* The loop linearised at one point: the network's Jacobian, the op-amp's
 * output current's partials and the op-amp rate's partials. */
typedef struct {
    double jn[Y_DIM * Y_DIM];
    Drive d;
    OsOpampRate r;
} LoopLin;

/* From @p l: the rate's derivative through the whole loop in *df, and d(out)/dx
 * in *dout. The network's sensitivities are dy/dx = J^-1 e0 (F depends on x
 * through F0 = ... - x). */
/* dy/dx = J^-1 e0 for the network's Jacobian J (row-major). Rows F2 and F3
 * (network()) carry -1 in the out column and 0 in the other junction's
 * column, so out = J20 vo + J22 vbe and veb = (out - J30 vo) / J33 eliminate
 * two unknowns and Cramer's rule solves the remaining 2 x 2 for (vo, vbe):
 * a fifth of the work of a pivoted 4 x 4 solve, which this is called twice
 * per step for. A singular case falls back to that solve. */
static void network_sensitivity(const double *jn, double *dy)
{
    const double *j0 = jn, *j1 = jn + Y_DIM, *j2 = jn + 2 * Y_DIM, *j3 = jn + 3 * Y_DIM;
    if (j2[Y_OUT] == -1.0 && j2[Y_VEB] == 0.0 && j3[Y_OUT] == -1.0 && j3[Y_VBE] == 0.0 &&
        j3[Y_VEB] != 0.0) {
        const double pa = j2[Y_VO], pb = j2[Y_VBE];
        const double qa = (pa - j3[Y_VO]) / j3[Y_VEB], qb = pb / j3[Y_VEB];
        const double m00 = j0[Y_VO] + j0[Y_OUT] * pa + j0[Y_VEB] * qa;
        const double m01 = j0[Y_VBE] + j0[Y_OUT] * pb + j0[Y_VEB] * qb;
        const double m10 = j1[Y_VO] + j1[Y_OUT] * pa + j1[Y_VEB] * qa;
        const double m11 = j1[Y_VBE] + j1[Y_OUT] * pb + j1[Y_VEB] * qb;
        const double det = m00 * m11 - m01 * m10;
        if (det != 0.0 && isfinite(det)) {
            const double a = m11 / det, b = -m10 / det;
            dy[Y_VO] = a;
            dy[Y_VBE] = b;
            dy[Y_OUT] = pa * a + pb * b;
            dy[Y_VEB] = qa * a + qb * b;
            return;
        }
    }
    double j[Y_DIM * Y_DIM];
    memcpy(j, jn, sizeof(j));
    dy[Y_VO] = 1.0;
    dy[Y_OUT] = dy[Y_VBE] = dy[Y_VEB] = 0.0;
    if (os_linear_solve(j, dy, Y_DIM) != 0) {
        dy[Y_VO] = 1.0;
        dy[Y_OUT] = dy[Y_VBE] = dy[Y_VEB] = 0.0;
    }
}

static void loop_slopes(const OsPushpullCircuit *s, const LoopLin *l, double *df, double *dout)
{
    double dy[Y_DIM];
    network_sensitivity(l->jn, dy);
    const double dvfb = s->loop ? dy[Y_OUT] : dy[Y_VO];
    const double dio = l->d.d_vo * dy[Y_VO] + l->d.d_vbe * dy[Y_VBE] + l->d.d_veb * dy[Y_VEB];
    *df = l->r.df_dx - l->r.df_dvd * s->inv_g * dvfb + l->r.df_dio * dio;
    *dout = dy[Y_OUT];
}

/* Linearise the loop at x, y (the network's residual there in fnet); returns
 * the op-amp's rate f = dx/dt. */
static double loop_at(OsPushpullCircuit *s, double x, double vin, const double *y, LoopLin *l,
                      double *fnet)
{
    network(s, x, y, fnet, l->jn, &l->d);
    const double vfb = s->loop ? y[Y_OUT] : y[Y_VO];
    os_opamp_rate(&s->op, x, vin - vfb * s->inv_g, l->d.io, &l->r);
    s->limit = l->r.limit;
    return l->r.f;
}

static double outer_residual(void *ctx, double x, double *dr)
{
    Outer *o = ctx;
    OsPushpullCircuit *s = o->s;
    double y[Y_DIM];
    network_at(s, x, y, &o->evals);
    memcpy(s->y, y, sizeof(y)); /* warm start for the next evaluation */
    s->xy = x;
    LoopLin l;
    double fnet[Y_DIM];
    const double f = loop_at(s, x, o->vin, y, &l, fnet);
    double df, dout;
    loop_slopes(s, &l, &df, &dout);
    *dr = 1.0 - s->w * df;
    if (!(*dr >= 1.0)) {
        *dr = 1.0; /* R' >= 1 by the argument above; guard rounding */
    }
    return x - o->c - s->w * f;
}

/* Solve one TR-BDF2 sub-step for x; leaves the network solution in s->y. */
static double solve_substep(OsPushpullCircuit *s, double c, double vin, double guess, int *evals)
{
    const OsOpampCoeffs *op = &s->op;
    /* Bracket as for the op-amp stage: |x - c| <= w SR (the input stage is
     * bounded by SR and the other terms oppose x), and beyond the swing clamp's
     * factor-3 point R has the sign of x - c. */
    const double reach = 1.01 * s->w * op->sr + 1e-6;
    const double xc = op->vsw + 1.0986122886681098 / op->inv_w;
    const double lo = fmax(fmin(c, 0.0) - reach, fmin(c, -xc));
    const double hi = fmin(fmax(c, 0.0) + reach, fmax(c, xc));
    Outer o = {s, c, vin, *evals};
    int it = 0;
    const double x =
        os_newton_scalar(outer_residual, &o, guess, lo, hi, OUTER_TOL, OUTER_ITER, &it);
    /* The network where the iteration stopped. */
    double y[Y_DIM];
    network_at(s, x, y, &o.evals);
    memcpy(s->y, y, sizeof(y));
    s->xy = x;
    *evals = o.evals;
    return x;
}

/* The fast path: all five unknowns z = (x, y) in one Newton-Raphson system,
 * the op-amp's sub-step equation R = x - c - w f beside the network F. It
 * converges in a few iterations whenever the step is gentle; when it does not
 * (the op-amp slewing across the dead zone within one step, huge overdrive),
 * the step is redone by the nested solution above, which always converges. */
static void full_system(OsPushpullCircuit *s, double c, double vin, const double *z, double *f,
                        double *j, LoopLin *l)
{
    const double *y = z + 1;
    double fn[Y_DIM];
    (void)loop_at(s, z[PP_X], vin, y, l, fn);
    const double *jn = l->jn;
    const Drive d = l->d;
    const OsOpampRate r = l->r;
    const double b = s->w;
    f[0] = z[PP_X] - c - b * r.f;
    j[0] = 1.0 - b * r.df_dx;
    j[1 + Y_VO] = -b * (r.df_dio * d.d_vo - (s->loop ? 0.0 : r.df_dvd * s->inv_g));
    j[1 + Y_OUT] = s->loop ? b * r.df_dvd * s->inv_g : 0.0;
    j[1 + Y_VBE] = -b * r.df_dio * d.d_vbe;
    j[1 + Y_VEB] = -b * r.df_dio * d.d_veb;
    for (int i = 0; i < Y_DIM; ++i) {
        f[1 + i] = fn[i];
        j[(1 + i) * PP_DIM] = i == 0 ? -1.0 : 0.0; /* dF/dx */
        for (int k = 0; k < Y_DIM; ++k) {
            j[(1 + i) * PP_DIM + 1 + k] = jn[i * Y_DIM + k];
        }
    }
}

/* Solve the fast path's 5 x 5 system J d = f in place, using its structure:
 * row 1 (F0) is -1 in the x column and row 3 (F2) -1 in the out column, with
 * zeros below, so x and out are eliminated with those constant pivots and
 * only a 3 x 3 system in (vo, vbe_n, veb_p) needs pivoting. Gaussian
 * elimination all the same, at a quarter of the general routine's work. */
static int solve_structured(const double *j, double *f)
{
#define J(r, c) j[(r)*PP_DIM + (c)]
    /* x from row 1: x = (a11 vo + a13 vbe + a14 veb - f1) (pivot -1):
     * substitute into row 0. */
    double r0[PP_DIM], f0 = f[0] + J(0, 0) * f[1];
    for (int c = 1; c < PP_DIM; ++c) {
        r0[c] = J(0, c) + J(0, 0) * J(1, c);
    }
    /* out from row 3 (pivot -1): out = a31 vo + a33 vbe - f3; substitute into
     * rows 0, 2 and 4. */
    const double o_vo = J(3, 1), o_vbe = J(3, 3), o_f = f[3];
    double a[9], b[3];
    const double c0 = r0[2], c2 = J(2, 2), c4 = J(4, 2);
    a[0] = r0[1] + c0 * o_vo;
    a[1] = r0[3] + c0 * o_vbe;
    a[2] = r0[4];
    b[0] = f0 + c0 * o_f;
    a[3] = J(2, 1) + c2 * o_vo;
    a[4] = J(2, 3) + c2 * o_vbe;
    a[5] = J(2, 4);
    b[1] = f[2] + c2 * o_f;
    a[6] = J(4, 1) + c4 * o_vo;
    a[7] = J(4, 3) + c4 * o_vbe;
    a[8] = J(4, 4);
    b[2] = f[4] + c4 * o_f;
    if (os_linear_solve(a, b, 3) != 0) {
        return -1;
    }
    const double vo = b[0], vbe = b[1], veb = b[2];
    const double out = o_vo * vo + o_vbe * vbe - o_f;
    f[PP_X] = J(1, 1) * vo + J(1, 2) * out + J(1, 3) * vbe + J(1, 4) * veb - f[1];
    f[1 + Y_VO] = vo;
    f[1 + Y_OUT] = out;
    f[1 + Y_VBE] = vbe;
    f[1 + Y_VEB] = veb;
    return 0;
#undef J
}

static int fast_solve(OsPushpullCircuit *s, double c, double vin, double *z, int *evals, LoopLin *l)
{
    double f[PP_DIM], j[PP_DIM * PP_DIM];
    double last = 0.0; /* the previous unlimited Newton step's largest component */
    for (int it = 0; it < FAST_ITER; ++it) {
        full_system(s, c, vin, z, f, j, l);
        ++*evals;
        if (solve_structured(j, f) != 0) {
            return 0;
        }
        double worst = 0.0;
        for (int i = 0; i < PP_DIM; ++i) {
            const double a = fabs(f[i]);
            worst = a > worst ? a : worst;
        }
        if (!(worst < 1e3)) {
            return 0;
        }
        const double vbe = os_bjt_limit(&s->q, z[1 + Y_VBE] - f[1 + Y_VBE], z[1 + Y_VBE]);
        const double veb = os_bjt_limit(&s->q, z[1 + Y_VEB] - f[1 + Y_VEB], z[1 + Y_VEB]);
        const int limited =
            vbe != z[1 + Y_VBE] - f[1 + Y_VBE] || veb != z[1 + Y_VEB] - f[1 + Y_VEB];
        for (int i = 0; i < PP_DIM; ++i) {
            z[i] -= f[i];
        }
        z[1 + Y_VBE] = vbe;
        z[1 + Y_VEB] = veb;
        /* Converged: the step was below tolerance, or (as in os_newton_scalar)
         * it is already under 100 tolerances and the iteration, in its
         * quadratic phase, predicts a next step below a tenth of the
         * tolerance. (Without the 100-tolerance bound the prediction was
         * trusted once where the op-amp's clamp is continued linearly, a kink
         * that breaks the quadratic phase, and a quarter step was accepted
         * 30 % beyond the current limit.) */
        if (!limited &&
            (worst <= OUTER_TOL || (worst < 100.0 * OUTER_TOL && worst < 0.1 * last &&
                                    worst * worst * worst < 0.1 * OUTER_TOL * last * last))) {
            return 1;
        }
        last = limited ? 0.0 : worst;
    }
    return 0;
}

static void step(void *c, double vin, double vin_g, OsStepResult *r)
{
    OsPushpullCircuit *s = c;
    const double g = OS_TRBDF2_G;
    int evals = 0;
    if (s->fresh) {
        /* Operating point for the present x before the first step. */
        double y[Y_DIM];
        memcpy(s->y, s->z + 1, sizeof(s->y));
        s->xy = s->z[PP_X];
        s->budget = STEP_BUDGET;
        network_at(s, s->z[PP_X], y, &evals);
        memcpy(s->y, y, sizeof(y));
        s->fresh = 0;
        evals = 0;
    }
    const double x0 = s->z[PP_X];
    const double c1 = x0 + s->w * s->fx;
    double c2, x;
    /* Fast path: trapezoidal sub-step to t + g h, BDF2 sub-step to t + h. */
    double z[PP_DIM], zg[PP_DIM];
    memcpy(z, s->z, sizeof(z));
    z[PP_X] = x0 + 2.0 * s->w * s->fx;
    LoopLin lin_g, lin;
    int ok = fast_solve(s, c1, vin_g, z, &evals, &lin_g);
    double xg = 0.0, yg[Y_DIM] = {0.0, 0.0, 0.0, 0.0};
    if (ok) {
        memcpy(zg, z, sizeof(z));
        xg = zg[PP_X];
        memcpy(yg, zg + 1, sizeof(yg));
        c2 = OS_TRBDF2_A * zg[PP_X] - OS_TRBDF2_B * x0;
        for (int i = 0; i < PP_DIM; ++i) {
            z[i] = zg[i] + (zg[i] - s->z[i]) * ((1.0 - g) / g);
        }
        ok = fast_solve(s, c2, vin, z, &evals, &lin);
    }
    if (ok) {
        x = z[PP_X];
        memcpy(s->y, z + 1, sizeof(s->y));
        s->xy = x;
    } else {
        /* Nested path from the stored state. After a step that spent its whole
         * budget the next one gets a small one, so that settings where Newton
         * keeps failing cost a bounded few evaluations per step, not hundreds. */
        s->budget = evals + (s->starved ? STARVED_BUDGET : STEP_BUDGET);
        const int start = evals;
        memcpy(s->y, s->z + 1, sizeof(s->y));
        s->xy = x0;
        xg = solve_substep(s, c1, vin_g, x0 + 2.0 * s->w * s->fx, &evals);
        memcpy(yg, s->y, sizeof(yg));
        c2 = OS_TRBDF2_A * xg - OS_TRBDF2_B * x0;
        x = solve_substep(s, c2, vin, xg + (xg - x0) * ((1.0 - g) / g), &evals);
        s->starved = evals - start >= (s->starved ? STARVED_BUDGET : STEP_BUDGET);
    }
    if (ok) {
        s->starved = 0;
    }
    double fx = (x - c2) / s->w;
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    if (fabs(x) < 1e-30) {
        x = 0.0; /* keep subnormals out of the state */
    }
    for (int i = 0; i < Y_DIM; ++i) {
        if (fabs(s->y[i]) < 1e-30) {
            s->y[i] = 0.0;
        }
    }
    s->z[PP_X] = x;
    memcpy(s->z + 1, s->y, sizeof(s->y));
    s->fx = fx;
    s->vin = vin;

    /* Meters: load current, and the transistors' dissipation Ic Vce + Ib Vbe. */
    OsBjtEval n, p;
    const double *y = s->y;
    transistors(s, y, &n, &p);
    const double out = y[Y_OUT], vo = y[Y_VO];
    const double en = out + s->re * n.ie, ep = out - s->re * p.ie;
    const double pn = n.ic * (s->rail - en) + n.ib * (vo + s->half_bias - en);
    const double pp = p.ic * (ep + s->rail) + p.ib * (ep - (vo - s->half_bias));
    /* The load voltage's slope d(out)/dx dx/dt at the inner point and at the
     * end (os_window.h), and the loop derivative (os_trajectory.c: the refinement test). */
    double jac, gain;
    if (!ok) {
        /* the nested path: linearise at its solutions (the fast path kept its
         * last iterations' linearisations, a Newton step of 0.1 uV away) */
        double fnet[Y_DIM];
        (void)loop_at(s, xg, vin_g, yg, &lin_g, fnet);
        (void)loop_at(s, x, vin, y, &lin, fnet);
    }
    loop_slopes(s, &lin_g, &jac, &gain);
    r->vmid = yg[Y_OUT];
    r->dvmid = gain * (xg - c1) / s->w;
    loop_slopes(s, &lin, &jac, &gain);
    r->vload = out;
    r->dvload = gain * fx;
    r->jac = jac;
    r->iload = out * s->g_load;
    r->dissipation = pn + pp;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = evals;
}

const OsCircuitOps os_circuit_pushpull = {
    "pushpull", sizeof(OsPushpullCircuit), 2, update, set_step, reset, step, ok,
};
