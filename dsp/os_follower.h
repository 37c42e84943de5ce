/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_follower.h
 * The complementary emitter follower of the push-pull stage as a static
 * network of the op-amp's output pin voltage vo, and a map of it.
 *
 * The NPN (collector at +rail) has its base at vo + bias/2, the PNP (collector
 * at -rail) at vo - bias/2; each emitter reaches the output node through R_e;
 * the output node carries the load and, with the follower inside the loop,
 * the feedback divider (conductance gl to ground in all). Kirchhoff's laws
 * with the Ebers-Moll currents of os_bjt.h:
 *
 *   vbe_n + R_e Ie_n + veb_p + R_e Ie_p = bias                  (base loop)
 *   Ie_n - Ie_p = gl out + j,   out = vo + bias/2 - vbe_n - R_e Ie_n  (output node)
 *
 * with vbc_n = vo + bias/2 - rail and vcb_p = -rail - (vo - bias/2) fixed by vo.
 * Given vo the network has exactly one solution, and out, the base current
 * Ib_n - Ib_p the op-amp delivers and the pair's dissipation all rise with vo
 * (each junction with its series resistor is an increasing function; the
 * output node's current balance falls with out). It is solved by
 * Newton-Raphson in (vbe_n, veb_p) with SPICE's junction limiting, and where
 * that fails by nested solutions that always converge: out by a safeguarded
 * Newton iteration on the current balance, each junction with its resistor in
 * closed form through the Wright omega function.
 *
 * Because the network depends only on vo and the component values, the stage
 * keeps a map of it (os_follower_map_build()): piecewise cubic Hermite
 * interpolation of out, the base current and the dissipation between nodes
 * where the network was solved exactly, with exact slopes, on a grid refined
 * wherever the interpolation misses the exact solution at a midpoint by more
 * than a tolerance. Evaluating the map costs a few multiplications; solving
 * the network costs Newton iterations with exponentials.
 */

#ifndef OS_FOLLOWER_H
#define OS_FOLLOWER_H

#include "os_bjt.h"

#ifdef __cplusplus
extern "C" {
#endif

/** The network's component values. */
typedef struct {
    OsBjt npn, pnp;
    double half_bias; /**< bias / 2, V */
    double re;        /**< emitter resistor, ohm */
    double rail;      /**< V */
    double gl;        /**< conductance from the output node to ground, S */
    /** current drawn from the output node besides gl out, A: a reactive
     *  load's Norton current within one sub-step (os_load.h); 0 otherwise,
     *  and always 0 in a map */
    double j;
} OsFollower;

/** The network's solution at one vo, with slopes by vo. */
typedef struct {
    double vo;             /**< where it was solved, V */
    double vbe, veb;       /**< NPN base-emitter, PNP emitter-base junction voltages, V */
    double dvbe, dveb;     /**< their slopes by vo */
    double out;            /**< output node, V */
    double ib;             /**< current into the joined bases, Ib_n - Ib_p, A */
    double pd;             /**< power in the two transistors, Ic Vce + Ib Vbe each, W */
    double dout, dib, dpd; /**< d/dvo of out (V/V), ib (S) and pd (W/V) */
} OsFollowerPoint;

/** Component values: @p vbe (V at 100 mA) and @p beta of both transistors,
 *  @p bias (V), @p re (ohm), @p rail (V), @p gl (S). Real-time safe. */
void os_follower_setup(OsFollower *f, double vbe, double beta, double bias, double re, double rail,
                       double gl);

/** Solve the network at @p vo, starting from @p warm (may be NULL: from rest).
 *  Always returns a consistent solution (the nested fallback converges from
 *  anywhere). Returns the number of junction evaluations spent. Real-time safe. */
int os_follower_solve(const OsFollower *f, double vo, const OsFollowerPoint *warm,
                      OsFollowerPoint *p);

/** The network's slopes by vo at the solution @p p (its junctions), for an
 *  output node loaded by conductance @p gl (S) in place of the network's own:
 *  d(out)/dvo into *dout, d(ib)/dvo into *dib, by implicit differentiation of
 *  the two equations of the header (j held). Used for a reactive load, whose
 *  instantaneous conductance differs from a sub-step's. Real-time safe. */
void os_follower_slopes(const OsFollower *f, const OsFollowerPoint *p, double gl, double *dout,
                        double *dib);

/** Segments of the map's domain; each is split into 2^depth intervals. */
#define OS_FOLLOWER_SEGMENTS 128
/** Deepest split of a segment. */
#define OS_FOLLOWER_MAX_DEPTH 7
/** Most nodes a map holds. */
#define OS_FOLLOWER_MAX_NODES 2048
/** Values per node: out, dout, ib, dib, pd, and the junctions vbe, veb (the
 *  warm start when the map is solved again), one spare. */
#define OS_FOLLOWER_NODE 8

/** A map of the network over -vmax <= vo <= vmax. */
typedef struct {
    OsFollower net; /**< what it was built for */
    double vmax;
    double inv_seg; /**< segments per volt */
    double seg_len; /**< V */
    int base[OS_FOLLOWER_SEGMENTS + 1];
    unsigned char depth[OS_FOLLOWER_SEGMENTS];
    int n_nodes;
    double node[OS_FOLLOWER_MAX_NODES][OS_FOLLOWER_NODE];
} OsFollowerMap;

/** How a map is being built, so that the work can be spread over many calls. */
typedef struct {
    int mode;   /**< 0 done, 1 adaptive (refining the grid), 2 refit (the grid of another map) */
    int next;   /**< next segment (adaptive) or node (refit) */
    int seg;    /**< refit: the segment of node next */
    int used;   /**< nodes stored so far */
    int solves; /**< network solutions so far */
    OsFollowerPoint left;      /**< the last node stored (adaptive) */
    const OsFollowerMap *grid; /**< refit: the map whose grid and junctions are taken */
    /** adaptive: one segment's nodes at the deepest split */
    OsFollowerPoint scratch[(1 << OS_FOLLOWER_MAX_DEPTH) + 1];
} OsFollowerBuild;

/** Start building @p m for @p f over |vo| <= @p vmax. With @p grid NULL the
 *  grid is refined wherever the interpolation misses the network by more
 *  than the tolerances (at most about 2 OS_FOLLOWER_MAX_NODES solutions);
 *  otherwise @p m takes @p grid's nodes, each solved again from its old
 *  junction voltages (one solution per node: quicker, for parameters that
 *  glide; @p grid must stay untouched until the build is done). Real-time
 *  safe. */
void os_follower_build_start(OsFollowerBuild *b, OsFollowerMap *m, const OsFollower *f, double vmax,
                             const OsFollowerMap *grid);

/** Go on building: at most one segment (adaptive) or @p nodes nodes (refit).
 *  Returns 1 when the map is complete. Real-time safe. */
int os_follower_build_run(OsFollowerBuild *b, OsFollowerMap *m, int nodes);

/** Build @p m completely, adaptively. Real-time safe but not quick
 *  (about 100 us). */
void os_follower_map_build(OsFollowerMap *m, OsFollowerBuild *b, const OsFollower *f, double vmax);

/** The map's interval holding position @p u (segments from the low end,
 *  within 0 .. OS_FOLLOWER_SEGMENTS): its first node (the next follows at
 *  + OS_FOLLOWER_NODE), the share *t within it and its length *len, V.
 *  Real-time safe. */
static inline const double *os_follower_map_interval(const OsFollowerMap *m, double u, double *t,
                                                     double *len)
{
    int seg = (int)u;
    seg = seg >= OS_FOLLOWER_SEGMENTS ? OS_FOLLOWER_SEGMENTS - 1 : seg;
    const int k = m->depth[seg];
    const double sub = (u - seg) * (double)(1 << k);
    int j = (int)sub;
    j = j >= (1 << k) ? (1 << k) - 1 : j;
    *t = sub - j;
    *len = m->seg_len / (double)(1 << k);
    return m->node[m->base[seg] + j];
}

/** out, ib and their slopes at @p vo from the map; outside its domain the map
 *  continues along the tangent at its end. Real-time safe. */
static inline void os_follower_map_eval(const OsFollowerMap *m, double vo, double *out,
                                        double *dout, double *ib, double *dib)
{
    double u = (vo + m->vmax) * m->inv_seg;
    double ext = 0.0;
    if (!(u >= 0.0)) {
        ext = vo + m->vmax;
        u = 0.0;
    } else if (u >= (double)OS_FOLLOWER_SEGMENTS) {
        ext = vo - m->vmax;
        u = (double)OS_FOLLOWER_SEGMENTS;
    }
    double t, len;
    const double *a = os_follower_map_interval(m, u, &t, &len), *b = a + OS_FOLLOWER_NODE;
    /* cubic Hermite on [0, 1]: h00 = (1 + 2t)(1 - t)^2, h10 = t (1 - t)^2,
     * h01 = t^2 (3 - 2t), h11 = t^2 (t - 1); slopes scaled by the interval */
    const double t2 = t * t, s = 1.0 - t, s2 = s * s;
    const double h00 = (1.0 + 2.0 * t) * s2, h10 = t * s2 * len, h01 = t2 * (3.0 - 2.0 * t),
                 h11 = t2 * (t - 1.0) * len;
    /* derivatives of the basis by t, over len */
    const double g00 = -6.0 * t * s / len, g10 = s * (1.0 - 3.0 * t), g01 = -g00,
                 g11 = t * (3.0 * t - 2.0);
    *out = h00 * a[0] + h10 * a[1] + h01 * b[0] + h11 * b[1];
    *dout = g00 * a[0] + g10 * a[1] + g01 * b[0] + g11 * b[1];
    *ib = h00 * a[2] + h10 * a[3] + h01 * b[2] + h11 * b[3];
    *dib = g00 * a[2] + g10 * a[3] + g01 * b[2] + g11 * b[3];
    *out += *dout * ext;
    *ib += *dib * ext;
}

/** The transistors' dissipation at @p vo from the map, W. Real-time safe. */
double os_follower_map_pd(const OsFollowerMap *m, double vo);

/** The Wright omega function: the w with w + ln(w) = z, for every real z.
 *  Relative error below 1e-15. Real-time safe. (Exposed for its test.) */
double os_wright_omega(double z);

#ifdef __cplusplus
}
#endif

#endif /* OS_FOLLOWER_H */
