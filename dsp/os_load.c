/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The load network: equations in os_load.h. */

#include "os_load.h"

#include "outstage.h"

#include "os_ports.h"
#include "os_solver.h"

#include <math.h>
#include <string.h>

void os_load_setup(OsLoad *l, const double *si, double w)
{
    l->re = si[OS_P_LOAD];
    l->speaker = si[OS_P_LOAD_MODEL] >= 0.5;
    l->le = si[OS_P_SPEAKER_LE];
    const double ws = 2.0 * M_PI * si[OS_P_SPEAKER_FS];
    const double qms = si[OS_P_SPEAKER_QMS], qes = si[OS_P_SPEAKER_QES];
    l->res = l->re * qms / qes;
    l->cmes = qes / (ws * l->re);
    l->lces = 1.0 / (ws * ws * l->cmes);
    l->w = -1.0;
    os_load_set_weight(l, w);
}

void os_load_set_weight(OsLoad *l, double w)
{
    if (w == l->w) {
        return;
    }
    l->w = w;
    if (!l->speaker) {
        l->g = 1.0 / l->re;
        return;
    }
    /* K = M - w A, A = [[-Re, -1, 0], [1, -1/Res, -1], [0, 1, 0]]; its
     * inverse by cofactors (K is tridiagonal with a positive diagonal and
     * det > 0 for every w > 0) */
    const double a = l->le + w * l->re, b = w, d = -w, e = l->cmes + w / l->res, f = w, h = -w,
                 i = l->lces;
    /* K = [[a, b, 0], [d, e, f], [0, h, i]] */
    const double c00 = e * i - f * h, c01 = -(d * i), c02 = d * h;
    const double det = a * c00 + b * c01;
    const double inv = 1.0 / det;
    double *k = l->ki;
    k[0] = c00 * inv;
    k[1] = -(b * i) * inv;
    k[2] = (b * f) * inv;
    k[3] = c01 * inv;
    k[4] = (a * i) * inv;
    k[5] = -(a * f) * inv;
    k[6] = c02 * inv;
    k[7] = -(a * h) * inv;
    k[8] = (a * e - b * d) * inv;
    l->g = w * k[0];
}

void os_load_c_trap(const OsLoad *l, const OsLoadState *n, double mc[3])
{
    mc[0] = l->le * n->y[0] + l->w * n->my[0];
    mc[1] = l->cmes * n->y[1] + l->w * n->my[1];
    mc[2] = l->lces * n->y[2] + l->w * n->my[2];
}

void os_load_c_bdf2(const OsLoad *l, const OsLoadState *n, const OsLoadState *g, double mc[3])
{
    mc[0] = l->le * (OS_TRBDF2_A * g->y[0] - OS_TRBDF2_B * n->y[0]);
    mc[1] = l->cmes * (OS_TRBDF2_A * g->y[1] - OS_TRBDF2_B * n->y[1]);
    mc[2] = l->lces * (OS_TRBDF2_A * g->y[2] - OS_TRBDF2_B * n->y[2]);
}

void os_load_finish(const OsLoad *l, const double mc[3], double v, OsLoadState *out)
{
    const double r0 = mc[0] + l->w * v, r1 = mc[1], r2 = mc[2];
    const double *k = l->ki;
    double y0 = k[0] * r0 + k[1] * r1 + k[2] * r2;
    double y1 = k[3] * r0 + k[4] * r1 + k[5] * r2;
    double y2 = k[6] * r0 + k[7] * r1 + k[8] * r2;
    /* keep subnormals out of the state */
    y0 = fabs(y0) < 1e-30 ? 0.0 : y0;
    y1 = fabs(y1) < 1e-30 ? 0.0 : y1;
    y2 = fabs(y2) < 1e-30 ? 0.0 : y2;
    out->y[0] = y0;
    out->y[1] = y1;
    out->y[2] = y2;
    out->my[0] = v - l->re * y0 - y1;
    out->my[1] = y0 - y1 / l->res - y2;
    out->my[2] = y1;
    if (l->le <= 0.0) {
        out->my[0] = 0.0; /* the algebraic row holds exactly */
    }
}

double os_load_current_rate(const OsLoad *l, const OsLoadState *s, double dv)
{
    if (l->le > 0.0) {
        return s->my[0] / l->le;
    }
    return (dv - s->my[1] / l->cmes) / l->re;
}

void os_load_impedance(const OsLoad *l, double f, double *re, double *im)
{
    *re = l->re;
    *im = 0.0;
    if (!l->speaker) {
        return;
    }
    const double w = 2.0 * M_PI * f;
    *im = w * l->le;
    if (w <= 0.0) {
        return; /* Lces shorts the motional branch */
    }
    /* Y = 1/Res + j (w Cmes - 1 / (w Lces)), Zm = 1 / Y */
    const double g = 1.0 / l->res, b = w * l->cmes - 1.0 / (w * l->lces);
    const double den = g * g + b * b;
    *re += g / den;
    *im += -b / den;
}

void os_load_reset(OsLoadState *s)
{
    memset(s, 0, sizeof(*s));
}

void os_load_impedance_of(const float *values, double f, double *re, double *im)
{
    double si[OS_P_COUNT] = {0.0};
    si[OS_P_LOAD] = (double)values[OS_P_LOAD];
    si[OS_P_LOAD_MODEL] = (double)values[OS_P_LOAD_MODEL];
    si[OS_P_SPEAKER_LE] = 1e-3 * (double)values[OS_P_SPEAKER_LE];
    si[OS_P_SPEAKER_FS] = (double)values[OS_P_SPEAKER_FS];
    si[OS_P_SPEAKER_QMS] = (double)values[OS_P_SPEAKER_QMS];
    si[OS_P_SPEAKER_QES] = (double)values[OS_P_SPEAKER_QES];
    OsLoad l;
    os_load_setup(&l, si, 1e-6);
    os_load_impedance(&l, f, re, im);
}
