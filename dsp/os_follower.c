/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The follower network at a given op-amp output voltage: Newton-Raphson, a
 * fallback that always converges, and the map (equations in os_follower.h). */

#include "os_follower.h"

#include "os_fastmath.h"
#include "os_opamp.h" /* OS_VT */

#include <math.h>
#include <string.h>

/* Newton on the junctions stops when a full, unlimited step is below this, V. */
#define JUNCTION_TOL 1e-13
#define NEWTON_ITER 12
/* The safeguarded iteration on the output node: tolerance (V), iterations. */
#define NODE_TOL 1e-13
#define NODE_ITER 100

/* The map's tolerances: the interpolation may miss the exact network at the
 * middle of an interval by at most this much on out (V) and on the base
 * current (A, plus this share of it). The stage solves x to 0.1 uV; the base
 * current enters it through the current-sense resistor (26 ohm at 25 mA) and
 * the limiter's knee (1 mA at 25 mA, 0.13 mA at 1 mA), so 1e-8 V and 1e-10 A
 * keep the map well below what the solver resolves. */
#define MAP_TOL_V 1e-8
#define MAP_TOL_I 1e-10
#define MAP_TOL_REL 1e-7

double os_wright_omega(double z)
{
    /* Starting values of Lawrence, Corless and Jeffrey, "Algorithm 917:
     * Complex double-precision evaluation of the Wright omega function", ACM
     * TOMS 38(3), 2012 (their regions, real axis only), then Fritsch's
     * iteration (Fritsch, Shafer and Crowley, "Algorithm 443: Solution of the
     * transcendental equation w e^w = x", CACM 16(2), 1973), whose error falls
     * with the fourth power per step. */
    if (z < -745.0) {
        return 0.0; /* exp(z) underflows; w = exp(z - w) is below the smallest double */
    }
    double w;
    if (z <= -2.0) {
        const double e = exp(z);
        w = e * (1.0 - e);
        if (!(w > 0.0)) {
            return 0.0; /* exp(z) flushed to zero (denormals off in run()) */
        }
    } else if (z <= 1.0) {
        w = 1.0 + z * (0.5 + z * (1.0 / 16.0 -
                                  z * (1.0 / 192.0 + z * (1.0 / 3072.0 - z * 13.0 / 61440.0))));
        w = w > 1e-3 ? w : 1e-3;
    } else {
        const double l = log(z);
        w = z - l + l / z;
    }
    for (int i = 0; i < 4; ++i) {
        const double r = z - w - log(w);
        const double q = 2.0 * (1.0 + w) * (1.0 + w + (2.0 / 3.0) * r);
        const double wn = w * (1.0 + (r / (1.0 + w)) * (q - r) / (q - 2.0 * r));
        if (!(wn > 0.0)) {
            break;
        }
        const double done = fabs(wn - w) <= 1e-16 * wn;
        w = wn;
        if (done) {
            break;
        }
    }
    return w;
}

void os_follower_setup(OsFollower *f, double vbe, double beta, double bias, double re, double rail,
                       double gl)
{
    os_bjt_init(&f->npn, vbe, beta);
    os_bjt_init(&f->pnp, vbe, beta);
    f->half_bias = 0.5 * bias;
    f->re = re;
    f->rail = rail;
    f->gl = gl;
    f->j = 0.0;
}

/* Both transistors at vo with junctions a = vbe_n, b = veb_p. */
static void pair(const OsFollower *f, double vo, double a, double b, OsBjtEval *n, OsBjtEval *p)
{
    os_bjt_eval(&f->npn, a, vo + f->half_bias - f->rail, n);
    os_bjt_eval(&f->pnp, b, -f->rail - (vo - f->half_bias), p);
}

/* The solution's output node, base current, dissipation and slopes by vo,
 * from its junctions. */
/* The network's slopes by vo at the junctions' evaluations @p n, @p q, with
 * the output node loaded by @p gl: by implicit differentiation of the two
 * equations in (a, b)
 *   E1 = a + re Ie_n + b + re Ie_p - bias = 0
 *   E2 = Ie_n - Ie_p - gl (vo + hb - a - re Ie_n) - j = 0
 * where vbc_n rises with vo and vcb_p falls with it (j held). */
static void slopes(const OsFollower *f, const OsBjtEval *n, const OsBjtEval *q, double gl,
                   double *da, double *db, double *dout, double *dib)
{
    const double re = f->re;
    const double j11 = 1.0 + re * n->die_dvbe, j12 = 1.0 + re * q->die_dvbe;
    const double j21 = n->die_dvbe + gl * j11, j22 = -q->die_dvbe;
    const double e1 = re * (n->die_dvbc - q->die_dvbc);
    const double e2 = n->die_dvbc + q->die_dvbc - gl * (1.0 - re * n->die_dvbc);
    const double det = j11 * j22 - j12 * j21;
    *da = 0.0;
    *db = 0.0;
    if (det != 0.0 && isfinite(det)) {
        *da = -(e1 * j22 - j12 * e2) / det;
        *db = -(j11 * e2 - e1 * j21) / det;
    }
    const double dien = n->die_dvbe * *da + n->die_dvbc;
    *dout = 1.0 - *da - re * dien;
    *dib = n->dib_dvbe * *da + n->dib_dvbc - (q->dib_dvbe * *db - q->dib_dvbc);
}

static void finish(const OsFollower *f, double vo, OsFollowerPoint *p)
{
    OsBjtEval n, q;
    pair(f, vo, p->vbe, p->veb, &n, &q);
    const double re = f->re, hb = f->half_bias;
    p->out = vo + hb - p->vbe - re * n.ie;
    p->ib = n.ib - q.ib;
    /* dissipation Ic Vce + Ib Vbe of each (the emitter resistors excluded) */
    const double en = p->out + re * n.ie, ep = p->out - re * q.ie;
    p->pd = n.ic * (f->rail - en) + n.ib * (vo + hb - en) + q.ic * (ep + f->rail) +
            q.ib * (ep - (vo - hb));
    p->vo = vo;
    slopes(f, &n, &q, f->gl, &p->dvbe, &p->dveb, &p->dout, &p->dib);
    p->dpd = 0.0; /* the dissipation is interpolated linearly (a meter) */
}

void os_follower_slopes(const OsFollower *f, const OsFollowerPoint *p, double gl, double *dout,
                        double *dib)
{
    OsBjtEval n, q;
    pair(f, p->vo, p->vbe, p->veb, &n, &q);
    double da, db;
    slopes(f, &n, &q, gl, &da, &db, dout, dib);
}

/* Newton-Raphson in (a, b) from the start in *p with junction limiting.
 * Returns 1 on convergence. *evals counts transistor-pair evaluations. */
static int newton(const OsFollower *f, double vo, OsFollowerPoint *p, int *evals)
{
    const double re = f->re, gl = f->gl, hb = f->half_bias;
    double a = p->vbe, b = p->veb;
    for (int it = 0; it < NEWTON_ITER; ++it) {
        OsBjtEval n, q;
        pair(f, vo, a, b, &n, &q);
        ++*evals;
        const double e1 = a + re * n.ie + b + re * q.ie - 2.0 * hb;
        const double e2 = n.ie - q.ie - gl * (vo + hb - a - re * n.ie) - f->j;
        const double j11 = 1.0 + re * n.die_dvbe, j12 = 1.0 + re * q.die_dvbe;
        const double j21 = n.die_dvbe + gl * j11, j22 = -q.die_dvbe;
        const double det = j11 * j22 - j12 * j21;
        if (!(det != 0.0) || !isfinite(det) || !isfinite(e1) || !isfinite(e2)) {
            return 0;
        }
        const double da = (e1 * j22 - j12 * e2) / det, db = (j11 * e2 - e1 * j21) / det;
        const double an = os_bjt_limit(&f->npn, a - da, a);
        const double bn = os_bjt_limit(&f->pnp, b - db, b);
        const int limited = an != a - da || bn != b - db;
        a = an;
        b = bn;
        if (!limited && fabs(da) <= JUNCTION_TOL && fabs(db) <= JUNCTION_TOL) {
            p->vbe = a;
            p->veb = b;
            return 1;
        }
    }
    return 0;
}

/* A junction with its series resistor: the vbe with vbe + re Ie(vbe) = d,
 * where Ie = A (exp(vbe/VT) - 1) - B, A = Is (1 + 1/BF), B = Is (exp(vbc/VT) - 1)
 * (Ebers-Moll, os_bjt.h). With y = vbe / VT the equation reads
 * y + (re A / VT) e^y = (d + re (A + B)) / VT, so y = D - omega(ln(re A / VT) + D)
 * with D = (d + re (A + B)) / VT (Wright omega). Then one Newton step on the
 * model itself, whose exponential is continued linearly far above any real
 * current (OS_BJT_EXP_MAX). */
static double junction_with_resistor(const OsBjt *t, double d, double vbc, double re)
{
    if (re <= 0.0) {
        return d;
    }
    const double a = t->is * (1.0 + t->inv_bf);
    const double b = t->is * expm1(fmin(vbc / OS_VT, OS_BJT_EXP_MAX));
    const double dd = (d + re * (a + b)) / OS_VT;
    double v = OS_VT * (dd - os_wright_omega(log(re * a / OS_VT) + dd));
    for (int i = 0; i < 2; ++i) {
        OsBjtEval e;
        os_bjt_eval(t, v, vbc, &e);
        const double r = v + re * e.ie - d, g = 1.0 + re * e.die_dvbe;
        const double step = r / g;
        v -= step;
        if (fabs(step) <= JUNCTION_TOL) {
            break;
        }
    }
    return v;
}

/* The current balance at the output node, K(out) = Ie_n - Ie_p - gl out - j,
 * with each junction given out solved in closed form; *a and *b receive the
 * junctions. */
static double balance(const OsFollower *f, double vo, double out, double vbc, double vcb, double *a,
                      double *b, OsBjtEval *n, OsBjtEval *q, int *evals)
{
    const double hb = f->half_bias, re = f->re;
    *a = junction_with_resistor(&f->npn, vo + hb - out, vbc, re);
    *b = junction_with_resistor(&f->pnp, out - vo + hb, vcb, re);
    pair(f, vo, *a, *b, n, q);
    ++*evals;
    return n->ie - q->ie - f->gl * out - f->j;
}

/* The fallback: the current balance K(out) falls strictly with out. With
 * j = 0 it changes sign between out = min(vo - hb, 0) and max(vo + hb, 0) (at
 * the upper end the NPN's drive is not positive, at the lower end the
 * PNP's); a current j drawn by a reactive load moves the root beyond them by
 * about a junction voltage and re |j|, so the bracket is widened until K
 * changes sign across it. Then a safeguarded Newton iteration in that bracket
 * converges from anywhere. */
static void nested(const OsFollower *f, double vo, OsFollowerPoint *p, int *evals)
{
    const double hb = f->half_bias, re = f->re, gl = f->gl;
    const double vbc = vo + hb - f->rail, vcb = -f->rail - (vo - hb);
    double lo = fmin(vo - hb, 0.0) - 1e-9, hi = fmax(vo + hb, 0.0) + 1e-9;
    if (f->j != 0.0) {
        double a, b;
        OsBjtEval n, q;
        double reach = 1.0 + re * fabs(f->j);
        for (int i = 0; i < 60 && balance(f, vo, hi, vbc, vcb, &a, &b, &n, &q, evals) > 0.0; ++i) {
            hi += reach;
            reach *= 2.0;
        }
        reach = 1.0 + re * fabs(f->j);
        for (int i = 0; i < 60 && balance(f, vo, lo, vbc, vcb, &a, &b, &n, &q, evals) < 0.0; ++i) {
            lo -= reach;
            reach *= 2.0;
        }
    }
    double out = p->out > lo && p->out < hi ? p->out : 0.5 * (lo + hi);
    double a = 0.0, b = 0.0;
    for (int it = 0; it < NODE_ITER; ++it) {
        a = junction_with_resistor(&f->npn, vo + hb - out, vbc, re);
        b = junction_with_resistor(&f->pnp, out - vo + hb, vcb, re);
        OsBjtEval n, q;
        pair(f, vo, a, b, &n, &q);
        ++*evals;
        const double k = n.ie - q.ie - gl * out - f->j;
        if (k > 0.0) {
            lo = out;
        } else {
            hi = out;
        }
        /* dIe/dd = g / (1 + re g) for each junction with its resistor */
        const double gn = n.die_dvbe / (1.0 + re * n.die_dvbe);
        const double gp = q.die_dvbe / (1.0 + re * q.die_dvbe);
        double next = out + k / (gn + gp + gl);
        if (!(next > lo && next < hi)) {
            next = 0.5 * (lo + hi);
        }
        const double moved = fabs(next - out);
        out = next;
        if (moved <= NODE_TOL || hi - lo <= NODE_TOL) {
            break;
        }
    }
    p->vbe = junction_with_resistor(&f->npn, vo + hb - out, vbc, re);
    p->veb = junction_with_resistor(&f->pnp, out - vo + hb, vcb, re);
}

int os_follower_solve(const OsFollower *f, double vo, const OsFollowerPoint *warm,
                      OsFollowerPoint *p)
{
    int evals = 0;
    OsFollowerPoint start = {0};
    if (warm) {
        start = *warm;
    } else {
        /* from rest: half the drive on each junction's side of the bias */
        start.vbe = f->half_bias;
        start.veb = f->half_bias;
        start.out = 0.0;
    }
    *p = start;
    if (warm) {
        /* along the tangent of the warm start */
        p->vbe += warm->dvbe * (vo - warm->vo);
        p->veb += warm->dveb * (vo - warm->vo);
    }
    if (!newton(f, vo, p, &evals)) {
        *p = start;
        nested(f, vo, p, &evals);
    }
    finish(f, vo, p);
    return evals;
}

static void store(OsFollowerMap *m, int i, const OsFollowerPoint *p)
{
    double *n = m->node[i];
    n[0] = p->out;
    n[1] = p->dout;
    n[2] = p->ib;
    n[3] = p->dib;
    n[4] = p->pd;
    n[5] = p->vbe;
    n[6] = p->veb;
    n[7] = 0.0;
}

/* Whether the interpolant between nodes a and b (len apart) misses the exact
 * solution e at the middle by more than the tolerances. */
static int misses(const OsFollowerPoint *a, const OsFollowerPoint *b, double len,
                  const OsFollowerPoint *e)
{
    /* cubic Hermite at t = 1/2: (v0 + v1) / 2 + len (d0 - d1) / 8 */
    const double out = 0.5 * (a->out + b->out) + 0.125 * len * (a->dout - b->dout);
    const double ib = 0.5 * (a->ib + b->ib) + 0.125 * len * (a->dib - b->dib);
    return !(fabs(out - e->out) <= MAP_TOL_V &&
             fabs(ib - e->ib) <= MAP_TOL_I + MAP_TOL_REL * fabs(e->ib));
}

void os_follower_build_start(OsFollowerBuild *b, OsFollowerMap *m, const OsFollower *f, double vmax,
                             const OsFollowerMap *grid)
{
    m->net = *f;
    m->vmax = vmax;
    m->seg_len = 2.0 * vmax / OS_FOLLOWER_SEGMENTS;
    m->inv_seg = 1.0 / m->seg_len;
    b->next = 0;
    b->seg = 0;
    b->used = 0;
    b->solves = 0;
    b->grid = grid;
    if (grid && grid->vmax == vmax) {
        b->mode = 2;
        memcpy(m->base, grid->base, sizeof(m->base));
        memcpy(m->depth, grid->depth, sizeof(m->depth));
        m->n_nodes = grid->n_nodes;
        return;
    }
    b->mode = 1;
    os_follower_solve(f, -vmax, NULL, &b->left);
    ++b->solves;
    store(m, b->used++, &b->left);
}

/* One segment of an adaptive build: halve its intervals until the
 * interpolant meets the exact network at every midpoint. */
static void adapt_segment(OsFollowerBuild *b, OsFollowerMap *m, int s)
{
    enum { SPAN = 1 << OS_FOLLOWER_MAX_DEPTH };
    const OsFollower *f = &m->net;
    OsFollowerPoint *pts = b->scratch;
    const double v0 = -m->vmax + s * m->seg_len;
    /* the segment's nodes at depth k sit at pts[0], pts[SPAN >> k], ... */
    pts[0] = b->left;
    os_follower_solve(f, v0 + m->seg_len, &b->left, &pts[SPAN]);
    ++b->solves;
    /* room left for nodes: every later segment needs at least one */
    const int room = OS_FOLLOWER_MAX_NODES - b->used - (OS_FOLLOWER_SEGMENTS - 1 - s);
    int k = 0;
    while (k < OS_FOLLOWER_MAX_DEPTH && (2 << k) <= room) {
        /* solve the midpoints (the nodes of depth k + 1) and check them */
        const int step = SPAN >> k, n = 1 << k;
        const double len = m->seg_len / n;
        int fine = 1;
        for (int i = 0; i < n; ++i) {
            OsFollowerPoint *e = &pts[i * step + step / 2];
            os_follower_solve(f, v0 + (i + 0.5) * len, &pts[i * step], e);
            ++b->solves;
            fine = fine && !misses(&pts[i * step], &pts[(i + 1) * step], len, e);
        }
        if (fine) {
            break;
        }
        ++k;
    }
    m->depth[s] = (unsigned char)k;
    m->base[s] = b->used - 1;
    const int step = SPAN >> k;
    for (int i = 1; i <= 1 << k; ++i) {
        store(m, b->used++, &pts[i * step]);
    }
    b->left = pts[SPAN];
}

int os_follower_build_run(OsFollowerBuild *b, OsFollowerMap *m, int nodes)
{
    if (b->mode == 1) {
        adapt_segment(b, m, b->next++);
        if (b->next == OS_FOLLOWER_SEGMENTS) {
            m->base[OS_FOLLOWER_SEGMENTS] = b->used - 1;
            m->n_nodes = b->used;
            b->mode = 0;
        }
    } else if (b->mode == 2) {
        for (int i = 0; i < nodes && b->next < m->n_nodes; ++i, ++b->next) {
            /* the segment of node next, and where in it the node lies */
            while (b->seg + 1 < OS_FOLLOWER_SEGMENTS && m->base[b->seg + 1] <= b->next) {
                ++b->seg;
            }
            const double vo =
                -m->vmax + m->seg_len * (b->seg + (double)(b->next - m->base[b->seg]) /
                                                      (double)(1 << m->depth[b->seg]));
            const double *g = b->grid->node[b->next];
            OsFollowerPoint warm = {0}, p;
            warm.vo = vo;
            warm.vbe = g[5];
            warm.veb = g[6];
            warm.out = g[0];
            os_follower_solve(&m->net, vo, &warm, &p);
            ++b->solves;
            store(m, b->next, &p);
        }
        if (b->next == m->n_nodes) {
            b->mode = 0;
        }
    }
    return b->mode == 0;
}

void os_follower_map_build(OsFollowerMap *m, OsFollowerBuild *b, const OsFollower *f, double vmax)
{
    os_follower_build_start(b, m, f, vmax, NULL);
    while (!os_follower_build_run(b, m, OS_FOLLOWER_MAX_NODES)) {
    }
}

double os_follower_map_pd(const OsFollowerMap *m, double vo)
{
    double u = (vo + m->vmax) * m->inv_seg;
    u = u < 0.0 ? 0.0 : u > (double)OS_FOLLOWER_SEGMENTS ? (double)OS_FOLLOWER_SEGMENTS : u;
    double t, len;
    const double *a = os_follower_map_interval(m, u, &t, &len), *b = a + OS_FOLLOWER_NODE;
    return a[4] + t * (b[4] - a[4]);
}
