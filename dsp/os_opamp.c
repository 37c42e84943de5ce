/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp macro-model: equations in os_opamp.h and docs/models.md. */

#include "os_opamp.h"

#include "os_fastmath.h"

#include <math.h>

/* Below this argument exp(u) < 2.1e-9: a clamp term this small moves the
 * internal node by under 2.1e-9 x SR x h per step (0.2 nV at 0.5 V/us and
 * 192 kHz), far below the solver's 0.1 uV tolerance, so it is skipped. */
#define EXP_NEGLIGIBLE (-20.0)

double os_exp_lim(double u, double *d)
{
    if (u > OS_EXP_MAX) {
        const double e = os_exp(OS_EXP_MAX);
        *d = e;
        return e * (1.0 + (u - OS_EXP_MAX));
    }
    if (u < EXP_NEGLIGIBLE) {
        *d = 0.0;
        return 0.0;
    }
    const double e = os_exp(u);
    *d = e;
    return e;
}

void os_opamp_coeffs(const OsOpampParams *p, OsOpampCoeffs *c)
{
    const double wt = 2.0 * M_PI * p->gbw;
    c->sr = p->slew;
    c->kin = wt / p->slew;
    c->wp = wt / OS_OPAMP_A0;
    c->vsw = fmax(p->rail - p->headroom, OS_SWING_MIN_SHARE * p->rail);
    c->inv_w = 1.0 / OS_SWING_KNEE;
    c->ilim = p->ilimit;
    c->rs = OS_VSENSE / p->ilimit;
    /* Ik = VT / Rs: the sense transistor's collector current grows e-fold for
     * every VT across Rs (Ebers-Moll forward-active approximation). */
    c->inv_ik = c->rs / OS_VT;
}

void os_opamp_rate(const OsOpampCoeffs *c, double x, double vd, double io, OsOpampRate *r)
{
    /* tanh(u) = 1 - 2 / (1 + e^(2u)): one exp instead of the library's tanh;
     * absolute error about 1e-16, saturating cleanly to +-1 for large |u|. */
    const double t = 1.0 - 2.0 / (1.0 + os_exp(2.0 * c->kin * vd));
    double dp, dn;

    /* Current limiter: diverted drive on each polarity. */
    const double lp = os_exp_lim((io - c->ilim) * c->inv_ik, &dp);
    const double ln = os_exp_lim((-io - c->ilim) * c->inv_ik, &dn);
    /* Swing clamp. */
    double sp, sn;
    const double cp = os_exp_lim((x - c->vsw) * c->inv_w, &sp);
    const double cn = os_exp_lim((-x - c->vsw) * c->inv_w, &sn);

    r->f = c->sr * (t - (lp - ln) - (cp - cn)) - c->wp * x;
    r->df_dvd = c->sr * c->kin * (1.0 - t * t);
    r->df_dio = -c->sr * c->inv_ik * (dp + dn);
    r->df_dx = -c->sr * c->inv_w * (sp + sn) - c->wp;
    r->limit = lp > ln ? lp : ln;
}
