/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_bjt.h"

#include "os_opamp.h"

#include "os_fastmath.h"

#include <math.h>

void os_bjt_init(OsBjt *t, double vbe, double beta)
{
    t->is = OS_BJT_IC_REF / expm1(vbe / OS_VT);
    t->inv_bf = 1.0 / beta;
    t->inv_br = 1.0;
    /* SPICE's critical voltage: where the diode's current curvature makes plain
     * Newton steps overshoot, VT ln(VT / (sqrt(2) Is)). */
    t->vcrit = OS_VT * log(OS_VT / (M_SQRT2 * t->is));
}

/* exp(v/VT) - 1 continued linearly above OS_BJT_EXP_MAX, and its derivative. */
static double junction(double v, double *g)
{
    const double u = v * (1.0 / OS_VT);
    if (u < -40.0) {
        /* exp(u) < 5e-18: the junction is off; skip the exponential (a reverse
         * biased collector junction is the common case). */
        *g = 0.0;
        return -1.0;
    }
    if (u > OS_BJT_EXP_MAX) {
        const double e = os_exp(OS_BJT_EXP_MAX);
        *g = e / OS_VT;
        return e * (1.0 + (u - OS_BJT_EXP_MAX)) - 1.0;
    }
    const double e = os_exp(u);
    *g = e / OS_VT;
    return e - 1.0;
}

void os_bjt_eval(const OsBjt *t, double vbe, double vbc, OsBjtEval *e)
{
    double gf, gr;
    const double f = t->is * junction(vbe, &gf);
    const double r = t->is * junction(vbc, &gr);
    gf *= t->is;
    gr *= t->is;
    e->ic = f - r * (1.0 + t->inv_br);
    e->ib = f * t->inv_bf + r * t->inv_br;
    e->ie = f * (1.0 + t->inv_bf) - r;
    e->die_dvbe = gf * (1.0 + t->inv_bf);
    e->die_dvbc = -gr;
    e->dib_dvbe = gf * t->inv_bf;
    e->dib_dvbc = gr * t->inv_br;
}

double os_bjt_limit(const OsBjt *t, double vnew, double vold)
{
    if (vnew > t->vcrit && fabs(vnew - vold) > 2.0 * OS_VT) {
        if (vold > 0.0) {
            const double arg = 1.0 + (vnew - vold) / OS_VT;
            vnew = arg > 0.0 ? vold + OS_VT * log(arg) : t->vcrit;
        } else {
            vnew = OS_VT * log(vnew / OS_VT);
        }
    }
    return vnew;
}
