/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_params.h
 * A stage's control inputs: their targets in port units (clamped to the port
 * table's ranges), their smoothing, and their present values in SI units (V,
 * A, ohm, Hz, V/s, ratios for dB ports), all driven by the rows of the port
 * table (os_ports.h: smoothing kind, SI conversion and scale), so that the
 * conversion is one loop. Internal to the DSP library.
 */

#ifndef OS_PARAMS_H
#define OS_PARAMS_H

#include "outstage.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Parameter ramps last this long (s): long enough that sweeping a control
 *  makes no zipper noise, short enough to feel immediate. */
#define OS_SMOOTH_TIME 0.02

/** One control's smoothing: a linear ramp in its smoothing domain (the port
 *  unit, or its logarithm). */
typedef struct {
    double cur; /**< present value in the smoothing domain */
    double tgt; /**< target in the smoothing domain */
    double step;
    int left; /**< frames left in the ramp */
} OsRamp;

/** Every control input of one stage. */
typedef struct {
    const OsPortInfo *port[OS_P_COUNT]; /**< this stage's port, NULL if it lacks one */
    float target[OS_P_COUNT];           /**< in port units, clamped */
    OsRamp ramp[OS_P_COUNT];
    double si[OS_P_COUNT]; /**< present values in SI units (0 where the stage lacks one) */
    int ramp_len;          /**< frames per ramp */
    int ramping;           /**< some ramp is running */
} OsParams;

/** What os_params_set() did, so the stage knows what else to do. */
typedef enum {
    OS_PARAM_REFUSED = -1, /**< the stage has no such parameter */
    OS_PARAM_SAME = 0,     /**< the value did not change */
    OS_PARAM_RAMP,         /**< a ramp towards the new target started */
    OS_PARAM_JUMPED,       /**< the value changed at once (OS_SMOOTH_JUMP) */
    OS_PARAM_FADE,         /**< a switch to crossfade (OS_SMOOTH_FADE) */
    OS_PARAM_RESTART       /**< the signal state must restart (OS_SMOOTH_RESTART) */
} OsParamChange;

/** Every parameter of @p kind at its port default, no ramp, at host rate
 *  @p rate (Hz). Real-time safe. */
void os_params_init(OsParams *p, OsStageKind kind, double rate);

/** Set @p param to @p value (port units): clamped to the port's range,
 *  rounded for integer and toggle ports, the oversampling factor to the
 *  nearest of 1, 2, 4, 8, 16; NaN is ignored. Real-time safe. */
OsParamChange os_params_set(OsParams *p, OsParam param, float value);

/** End every ramp at its target. Real-time safe. */
void os_params_jump(OsParams *p);

/** Advance every running ramp by one frame and refresh the SI values.
 *  Real-time safe. */
void os_params_advance(OsParams *p);

/** The nearest valid oversampling factor (1, 2, 4, 8, 16) to @p v. */
int os_params_factor(float v);

#ifdef __cplusplus
}
#endif

#endif /* OS_PARAMS_H */
