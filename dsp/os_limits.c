/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The expected limits of a design, from the same constants the circuits use. */

#include "outstage.h"

#include "os_circuit.h"
#include "os_opamp.h"

#include <math.h>

double os_stage_expected_limit(OsStageKind kind, const float *values, int *current_limited)
{
    const double rail = (double)values[OS_P_RAIL];
    /* the op-amp's swing, as os_opamp_coeffs_from() clamps it */
    const double swing_op = fmax(rail - (double)values[OS_P_HEADROOM], OS_SWING_MIN_SHARE * rail);
    const double ilim = 1e-3 * (double)values[OS_P_ILIMIT];
    const double rl = (double)values[OS_P_LOAD];
    double swing, ilimit_v;
    if (kind == OS_STAGE_PUSHPULL) {
        /* The follower loses one vbe; the pair multiplies the current by beta + 1. */
        swing = fmax(swing_op - (double)values[OS_P_VBE], OS_SWING_MIN_SHARE * rail);
        ilimit_v = ((double)values[OS_P_BETA] + 1.0) * ilim * rl;
    } else {
        /* The feedback divider also draws on the limited current. */
        ilimit_v = ilim * rl * OS_FEEDBACK_TOTAL / (rl + OS_FEEDBACK_TOTAL);
        swing = swing_op;
    }
    if (current_limited) {
        *current_limited = ilimit_v < swing;
    }
    return fmin(swing, ilimit_v);
}

int os_stage_conflicts(OsStageKind kind, const float *values, OsConflict *out, int max)
{
    const double rail = (double)values[OS_P_RAIL];
    const double floor_v = OS_SWING_MIN_SHARE * rail;
    const double asked_op = rail - (double)values[OS_P_HEADROOM];
    const double swing_op = fmax(asked_op, floor_v);
    int n = 0;
    if (asked_op < floor_v) {
        if (n < max) {
            out[n] = (OsConflict){"rail headroom",
                                  "the op-amp's output swing (rail - headroom)",
                                  asked_op,
                                  swing_op,
                                  "V",
                                  "the swing's floor, 5 % of the rail (docs/models.md)"};
        }
        ++n;
    }
    if (kind == OS_STAGE_PUSHPULL) {
        const double asked = swing_op - (double)values[OS_P_VBE];
        if (asked < floor_v) {
            if (n < max) {
                out[n] = (OsConflict){
                    "rail headroom vbe",
                    "the load's swing through the follower (op-amp swing - vbe)",
                    asked,
                    0.0,
                    "V",
                    "the output transistors cannot turn fully on: the load gets only what they "
                    "conduct below vbe"};
            }
            ++n;
        }
    }
    return n;
}
