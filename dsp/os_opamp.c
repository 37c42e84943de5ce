/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The op-amp macro-model: equations in os_opamp.h and docs/models.md. */

#include "os_opamp.h"

#include <math.h>

void os_opamp_coeffs_from(const double *si, OsOpampCoeffs *c)
{
    const double wt = 2.0 * M_PI * si[OS_P_GBW], slew = si[OS_P_SLEW], rail = si[OS_P_RAIL];
    c->sr = slew;
    c->kin = wt / slew;
    c->wp = wt / OS_OPAMP_A0;
    c->vsw = fmax(rail - si[OS_P_HEADROOM], OS_SWING_MIN_SHARE * rail);
    c->inv_w = 1.0 / OS_SWING_KNEE;
    c->ilim = si[OS_P_ILIMIT];
    c->rs = OS_VSENSE / si[OS_P_ILIMIT];
    /* Ik = VT / Rs: the sense transistor's collector current grows e-fold for
     * every VT across Rs (Ebers-Moll forward-active approximation). */
    c->inv_ik = c->rs / OS_VT;
}

/* Where the op-amp's input pair bends (os_opamp_indicator(), os_circuit.h):
 * tanh(u) differs from +-1 by 2 exp(-2|u|), under 2e-7 beyond |u| = 8, so
 * outside that zone the pair is saturated to within the solver's tolerance;
 * its third derivative falls as exp(-2|u|) away from the origin. */
const OsIndicator os_opamp_zones[OS_OPAMP_INDICATORS] = {
    {-8.0, 8.0, 0.1, 1.0, 0.0, 2.0},
};
