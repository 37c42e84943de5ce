/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_trajectory.h
 * The circuit's trajectory between two oversampled samples: the input within
 * the step (interpolated from the oversampled input), the step cut into pieces
 * where a regime indicator of the circuit changes zone (os_circuit.h) and
 * pieces taken again in halves where the op-amp still changes regime, and the
 * band-limited sampling of the load voltage along it (os_window.h). Internal
 * to the DSP library.
 */

#ifndef OS_TRAJECTORY_H
#define OS_TRAJECTORY_H

#include "os_circuit.h"
#include "os_window.h"

#ifdef __cplusplus
extern "C" {
#endif

#ifndef OS_INPUT_POINTS
/** Points of the interpolation of the input within a step (os_trajectory.c). */
#define OS_INPUT_POINTS 6
#endif

/** Shares of a step whose input weights are kept. */
#define OS_TRAJECTORY_FIXED 9

/** Deepest level of halving any circuit asks for (OsCircuitOps.refine_depth). */
#define OS_TRAJECTORY_MAX_DEPTH 2

/** The trajectory of one circuit. */
typedef struct {
    const OsCircuitOps *ops;
    void *circuit; /**< the live state (owned by the stage) */
    /** saved states, one per level of halving (owned by the stage,
     *  (OS_TRAJECTORY_MAX_DEPTH + 1) x ops->state_size bytes) */
    unsigned char *saved;
    double hist[OS_INPUT_POINTS - 1]; /**< the last oversampled inputs, oldest first */
    double inner[OS_INPUT_POINTS];    /**< the input's weights at the TR-BDF2 inner point */
    /** the input's weights at the points halved steps use, and where they are */
    double fixed[OS_TRAJECTORY_FIXED][OS_INPUT_POINTS];
    double fixed_at[OS_TRAJECTORY_FIXED];
    OsWindow win;
    double last_jac; /**< the circuit's regime at the last step's end */
    int factor;      /**< oversampling factor */
    double h;        /**< oversampled step, s */
    /** the regime indicators at the last step's end, and their zones */
    double ind[OS_MAX_INDICATORS];
    int zone[OS_MAX_INDICATORS];
    double rate[OS_MAX_INDICATORS];   /**< their change per step on the last piece */
    double weight[OS_MAX_INDICATORS]; /**< and how much they mattered there */
    int fresh;                        /**< no step since reset: the zones are not known yet */
    double credit; /**< sub-steps the refinement may still spend (os_trajectory.c) */
} OsTrajectory;

/** Bind @p t to a circuit's operations, its live state and the scratch space
 *  for saved states. Real-time safe. */
void os_trajectory_init(OsTrajectory *t, const OsCircuitOps *ops, void *circuit,
                        unsigned char *saved);

/** Clear the signal state (input history, window, the circuit) for
 *  oversampling @p factor at host rate @p rate (Hz). Real-time safe. */
void os_trajectory_reset(OsTrajectory *t, int factor, double rate);

/** Most sub-steps @p steps consecutive oversampled steps at @p factor can
 *  take, whatever the signal: each step's own, the credit it earns
 *  (os_trajectory.c), one of overdraft, and what was banked before (at most
 *  the credit's cap). Times OS_CIRCUIT_SUBSTEP_EVALS, the most any stretch
 *  of audio can cost. */
double os_trajectory_max_substeps(int factor, double steps);

/** Delay of the band-limited sampling, oversampled steps. */
int os_trajectory_delay(int factor);

/** One oversampled step to input @p vin (V): the circuit's result at the
 *  step's end in *r (meters), and the load voltage sample the decimator takes
 *  (band-limited, OS_WINDOW_DELAY steps late, from 2x up; the plain sample at
 *  1x). Real-time safe. */
double os_trajectory_step(OsTrajectory *t, double vin, OsStepResult *r);

#ifdef __cplusplus
}
#endif

#endif /* OS_TRAJECTORY_H */
