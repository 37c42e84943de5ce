/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The push-pull stage circuit. The op-amp of os_opamp.h drives, from its
 * output pin vo, the joined bases of an NPN (collector at +rail) and a PNP
 * (collector at -rail) through a bias source: the NPN base sits at vo + bias/2,
 * the PNP base at vo - bias/2. Each emitter reaches the output node through
 * R_e; the load R_L goes from the output to ground. The feedback divider
 * R1 + R2 = OS_FEEDBACK_TOTAL (gain G = 1 + R2/R1) hangs on the op-amp pin
 * (loop = 0) or on the output (loop = 1).
 *
 * Unknowns z = (x, vo, out, vbe_n, veb_p); residuals (Kirchhoff's laws, the
 * op-amp's TR-BDF2 stage equation, Ebers-Moll currents of os_bjt.h):
 *   R1 = x - c - beta f(x, vd, io)        vd = vin - v_fb / G
 *   R2 = vo - x + Rs io                    io = Ib_n - Ib_p (+ vo / Rfb, loop 0)
 *   R3 = Ie_n - Ie_p - out / R_L (- out / Rfb, loop 1)
 *   R4 = vo + bias/2 - vbe_n - R_e Ie_n - out
 *   R5 = vo - bias/2 + veb_p + R_e Ie_p - out
 * with vbc_n = vo + bias/2 - rail and vcb_p = -rail - (vo - bias/2). Solved by
 * Newton-Raphson with SPICE's junction limiting on vbe_n, veb_p and the same
 * logarithmic limiting on the op-amp's swing clamp. */

#include "os_circuit.h"

#include <math.h>
#include <string.h>

#define MAX_ITER 20
#define MAX_ITER_FRESH 200
#define TOL 1e-7 /* V */
#define MAX_DEPTH 5

void os_pushpull_stage_update(OsPushpullStage *s, const OsCircuitParams *p, double h)
{
    const OsOpampParams op = {p->gbw, p->slew, p->rail, p->headroom, p->ilimit};
    os_opamp_coeffs(&op, &s->op);
    os_bjt_init(&s->q, p->vbe, p->beta);
    s->inv_g = 1.0 / p->gain;
    s->g_load = 1.0 / p->load;
    s->g_fb = 1.0 / OS_FEEDBACK_TOTAL;
    s->re = p->emitter_r;
    s->half_bias = 0.5 * p->bias;
    s->rail = p->rail;
    s->loop = p->loop >= 0.5;
    s->h = h;
    s->beta = os_trbdf2_beta(h);
}

void os_pushpull_stage_reset(OsPushpullStage *s)
{
    memset(s->z, 0, sizeof(s->z));
    s->fx = 0.0;
    s->vin = 0.0;
    s->limit = 0.0;
    s->fresh = 1;
}

int os_pushpull_stage_ok(const OsPushpullStage *s)
{
    int ok = isfinite(s->fx) && isfinite(s->vin);
    for (int i = 0; i < PP_DIM; ++i) {
        ok = ok && isfinite(s->z[i]);
    }
    return ok;
}

/* Both transistors at z. */
static void transistors(const OsPushpullStage *s, const double *z, OsBjtEval *n, OsBjtEval *p)
{
    const double vo = z[PP_VO];
    os_bjt_eval(&s->q, z[PP_VBE_N], vo + s->half_bias - s->rail, n);
    os_bjt_eval(&s->q, z[PP_VEB_P], -s->rail - (vo - s->half_bias), p);
}

static void residual(OsPushpullStage *s, const double *z, double *f, double *j)
{
    OsBjtEval n, p;
    transistors(s, z, &n, &p);
    const double x = z[PP_X], vo = z[PP_VO], out = z[PP_OUT];
    const double gfb_o = s->loop ? 0.0 : s->g_fb; /* divider on the op-amp pin */
    const double gfb_l = s->loop ? s->g_fb : 0.0; /* divider on the load */

    /* Op-amp output current and its derivatives (vbc_n and vcb_p move with vo:
     * +1 and -1). */
    const double io = n.ib - p.ib + gfb_o * vo;
    const double dio_dvo = n.dib_dvbc + p.dib_dvbc + gfb_o;
    const double dio_dvbe = n.dib_dvbe;
    const double dio_dveb = -p.dib_dvbe;
    const double vfb = s->loop ? out : vo;
    OsOpampRate r;
    os_opamp_rate(&s->op, x, s->vin_now - vfb * s->inv_g, io, &r);
    s->limit = r.limit;
    const double b = s->beta;
    const double dvd_dvo = s->loop ? 0.0 : -s->inv_g;
    const double dvd_dout = s->loop ? -s->inv_g : 0.0;

    double *j1 = j, *j2 = j + PP_DIM, *j3 = j + 2 * PP_DIM, *j4 = j + 3 * PP_DIM,
           *j5 = j + 4 * PP_DIM;
    f[0] = x - s->c - b * r.f;
    j1[PP_X] = 1.0 - b * r.df_dx;
    j1[PP_VO] = -b * (r.df_dvd * dvd_dvo + r.df_dio * dio_dvo);
    j1[PP_OUT] = -b * r.df_dvd * dvd_dout;
    j1[PP_VBE_N] = -b * r.df_dio * dio_dvbe;
    j1[PP_VEB_P] = -b * r.df_dio * dio_dveb;

    const double rs = s->op.rs;
    f[1] = vo - x + rs * io;
    j2[PP_X] = -1.0;
    j2[PP_VO] = 1.0 + rs * dio_dvo;
    j2[PP_OUT] = 0.0;
    j2[PP_VBE_N] = rs * dio_dvbe;
    j2[PP_VEB_P] = rs * dio_dveb;

    const double gl = s->g_load + gfb_l;
    f[2] = n.ie - p.ie - gl * out;
    j3[PP_X] = 0.0;
    j3[PP_VO] = n.die_dvbc + p.die_dvbc; /* d vcb_p / d vo = -1, and Ie_p enters with - */
    j3[PP_OUT] = -gl;
    j3[PP_VBE_N] = n.die_dvbe;
    j3[PP_VEB_P] = -p.die_dvbe;

    const double re = s->re;
    f[3] = vo + s->half_bias - z[PP_VBE_N] - re * n.ie - out;
    j4[PP_X] = 0.0;
    j4[PP_VO] = 1.0 - re * n.die_dvbc;
    j4[PP_OUT] = -1.0;
    j4[PP_VBE_N] = -1.0 - re * n.die_dvbe;
    j4[PP_VEB_P] = 0.0;

    f[4] = vo - s->half_bias + z[PP_VEB_P] + re * p.ie - out;
    j5[PP_X] = 0.0;
    j5[PP_VO] = 1.0 - re * p.die_dvbc;
    j5[PP_OUT] = -1.0;
    j5[PP_VBE_N] = 0.0;
    j5[PP_VEB_P] = 1.0 + re * p.die_dvbe;
}

/* Logarithmic limiting of a move into an exponential clamp, in units of its
 * knee (pnjlim with VT = 1 and the knee at 0). */
static double clamp_limit(double unew, double uold)
{
    if (unew > 0.0 && unew - uold > 2.0) {
        return uold > 0.0 ? uold + log(1.0 + (unew - uold)) : log(unew > 1.0 ? unew : 1.0);
    }
    return unew;
}

/* Newton-Raphson on x = c + beta f(x) with the algebraic equations. Returns
 * the iterations used; *ok is set when the last full step was below TOL with no
 * limiting in force. */
static int solve(OsPushpullStage *s, double c, double vin, double *z, int max_iter, int *ok)
{
    double f[PP_DIM], j[PP_DIM * PP_DIM];
    s->c = c;
    s->vin_now = vin;
    const double w = 1.0 / s->op.inv_w;
    const double vsw = s->op.vsw;
    int it = 0;
    *ok = 0;
    while (it < max_iter) {
        residual(s, z, f, j);
        ++it;
        if (os_linear_solve(j, f, PP_DIM) != 0) {
            break;
        }
        double worst = 0.0;
        double zn[PP_DIM];
        for (int i = 0; i < PP_DIM; ++i) {
            zn[i] = z[i] - f[i];
            worst = fmax(worst, fabs(f[i]));
        }
        if (!(worst <= 1e6)) {
            break; /* NaN or a step no circuit here could need */
        }
        const double vbe = os_bjt_limit(&s->q, zn[PP_VBE_N], z[PP_VBE_N]);
        const double veb = os_bjt_limit(&s->q, zn[PP_VEB_P], z[PP_VEB_P]);
        double x = zn[PP_X];
        const double up = (x - vsw) / w, up_lim = clamp_limit(up, (z[PP_X] - vsw) / w);
        if (up_lim != up) {
            x = vsw + w * up_lim;
        }
        const double dn = (-x - vsw) / w, dn_lim = clamp_limit(dn, (-z[PP_X] - vsw) / w);
        if (dn_lim != dn) {
            x = -vsw - w * dn_lim;
        }
        const int limited = vbe != zn[PP_VBE_N] || veb != zn[PP_VEB_P] || x != zn[PP_X];
        zn[PP_VBE_N] = vbe;
        zn[PP_VEB_P] = veb;
        zn[PP_X] = x;
        for (int i = 0; i < PP_DIM; ++i) {
            z[i] = zn[i];
        }
        if (worst <= TOL && !limited) {
            *ok = 1;
            break;
        }
    }
    return it;
}

/* One TR-BDF2 step of length h from the stored state; on a Newton failure the
 * step is halved (at most MAX_DEPTH times), as SPICE cuts its time step. */
static int advance(OsPushpullStage *s, double vin, double h, int depth)
{
    const double g = OS_TRBDF2_G;
    const int max_iter = s->fresh ? MAX_ITER_FRESH : MAX_ITER;
    s->beta = os_trbdf2_beta(h);
    double z[PP_DIM];
    int ok1, ok2, iters = 0;

    /* Trapezoidal stage to t + g h. */
    memcpy(z, s->z, sizeof(z));
    const double vin_g = s->vin + g * (vin - s->vin);
    const double c1 = s->z[PP_X] + s->beta * s->fx;
    z[PP_X] = s->z[PP_X] + 2.0 * s->beta * s->fx;
    iters += solve(s, c1, vin_g, z, max_iter, &ok1);
    double zg[PP_DIM];
    memcpy(zg, z, sizeof(z));

    /* BDF2 stage to t + h; guess: extrapolate every unknown. */
    const double c2 = OS_TRBDF2_A * zg[PP_X] - OS_TRBDF2_B * s->z[PP_X];
    for (int i = 0; i < PP_DIM; ++i) {
        z[i] = zg[i] + (zg[i] - s->z[i]) * ((1.0 - g) / g);
    }
    iters += solve(s, c2, vin, z, max_iter, &ok2);

    if (!(ok1 && ok2) && depth < MAX_DEPTH) {
        const double vmid = 0.5 * (s->vin + vin);
        iters += advance(s, vmid, 0.5 * h, depth + 1);
        iters += advance(s, vin, 0.5 * h, depth + 1);
        s->beta = os_trbdf2_beta(h);
        return iters;
    }
    double fx = (z[PP_X] - c2) / s->beta;
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    for (int i = 0; i < PP_DIM; ++i) {
        if (fabs(z[i]) < 1e-30) {
            z[i] = 0.0; /* keep subnormals out of the state */
        }
    }
    memcpy(s->z, z, sizeof(z));
    s->fx = fx;
    s->vin = vin;
    s->fresh = 0;
    return iters;
}

void os_pushpull_stage_step(OsPushpullStage *s, double vin, OsStepResult *r)
{
    const int iters = advance(s, vin, s->h, 0);

    /* Meters: load current, and the transistors' dissipation Ic Vce + Ib Vbe. */
    OsBjtEval n, p;
    const double *z = s->z;
    transistors(s, z, &n, &p);
    const double out = z[PP_OUT], vo = z[PP_VO];
    const double en = out + s->re * n.ie, ep = out - s->re * p.ie;
    const double pn = n.ic * (s->rail - en) + n.ib * (vo + s->half_bias - en);
    const double pp = p.ic * (ep + s->rail) + p.ib * (ep - (vo - s->half_bias));
    r->vload = out;
    r->iload = out * s->g_load;
    r->dissipation = pn + pp;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = iters;
}
