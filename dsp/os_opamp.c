/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp macro-model: equations in os_opamp.h and docs/models.md. */

#include "os_opamp.h"

#include <math.h>

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
