/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_circuit.h
 * Internal interface between the stage machinery (os_stage.c, os_trajectory.c:
 * oversampling, smoothing, band-limited sampling, meters) and each circuit
 * (os_circuit_opamp.c, os_circuit_pushpull.c), which sits behind a table of
 * operations and keeps its struct private. A circuit advances its state by one
 * step of length h and reports the load voltage. Not part of the public API.
 *
 * A new circuit is one file: its struct, the operations below, and a row in
 * the table of os_circuit_ops() (os_circuit.c).
 */

#ifndef OS_CIRCUIT_H
#define OS_CIRCUIT_H

#include <stddef.h>

#include "outstage.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Most regime indicators a circuit reports. */
#define OS_MAX_INDICATORS 4

/** A regime indicator: a dimensionless, continuous function of the circuit's
 *  state and input whose value tells which regime one of its nonlinearities is
 *  in (the op-amp's input pair linear or slewing, a transistor off or
 *  conducting). Its range is cut into three zones at @c lo and @c hi; in the
 *  middle one the nonlinearity bends. A step during which an indicator
 *  changes zone is split at the crossing (os_trajectory.c), found to within
 *  @c tol of the boundary; within the middle zone the pieces are kept short
 *  enough that the indicator moves by at most
 *  span x exp(sharp x max(|value - centre| - 1, 0) / 3) across one: the
 *  solver's local error grows with the cube of a piece and with the
 *  nonlinearity's third derivative, which for tanh(u) or exp(u) falls off as
 *  exp(-2|u|) or exp(-|u|) away from the bend, so pieces may grow as the cube
 *  root of that. */
typedef struct {
    double lo, hi, tol;
    double span;   /**< largest change across a piece at the bend; 0: no limit */
    double centre; /**< where the nonlinearity bends sharpest */
    double sharp;  /**< how fast its third derivative falls away from there (e-folds per unit) */
} OsIndicator;

/** What one step reports, for the band-limited sampling and the meters. */
typedef struct {
    double vload;       /**< load voltage at the step's end, V */
    double dvload;      /**< its time derivative, V/s */
    double vmid;        /**< load voltage at the step's inner point t + g h (TR-BDF2), V */
    double dvmid;       /**< its time derivative there, V/s */
    double iload;       /**< load current, A */
    double dissipation; /**< power in the output transistors, W */
    /** Where the op-amp is on its curves, for the refinement test
     *  (os_trajectory.c): d(dx/dt)/dx of its internal node through the whole
     *  loop, 1/s, a smooth function of the state that jumps when the current
     *  limiter, the slew limit, a clamp or the follower change regime. */
    double jac;
    int limiting;                  /**< 1 while the op-amp current limiter is engaged */
    int iters;                     /**< Newton evaluations used */
    double ind[OS_MAX_INDICATORS]; /**< the regime indicators at the step's end */
    /** how much each indicator's nonlinearity matters at the step's end, 0..1:
     *  the op-amp's input pair matters little while its limiter holds the
     *  output; pieces are only kept short and crossings only located where it
     *  does */
    double ind_weight[OS_MAX_INDICATORS];
    double ind_mid[OS_MAX_INDICATORS]; /**< and at its inner point */
} OsStepResult;

/** Why a circuit's parameters are being set. */
typedef enum {
    OS_UPDATE_RESET = 0, /**< the signal state restarts: everything takes effect now */
    OS_UPDATE_JUMP,      /**< a control jumped: take effect now */
    OS_UPDATE_RAMP       /**< controls glide: called every frame while they do, so
                          *  costly derived data (maps) may follow with a delay */
} OsUpdate;

/** One circuit's operations. A circuit is a plain struct of @c size bytes
 *  without pointers (coefficients, maps and its state); its signal state, what
 *  a step changes, can be saved to and restored from @c state_size bytes. */
typedef struct {
    const char *name;  /**< for messages and the benchmark */
    size_t size;       /**< bytes of the circuit */
    size_t state_size; /**< bytes of its saved signal state */
    /** Levels of halving a step in which the op-amp's loop derivative
     *  changes (os_trajectory.c). */
    int refine_depth;
    int n_indicators;              /**< regime indicators the steps report */
    const OsIndicator *indicators; /**< their zones */
    /** Coefficients from the parameters @p si (SI units, indexed by OsParam)
     *  for steps of @p h s; the state is kept. Real-time safe. */
    void (*update)(void *c, const double *si, double h, OsUpdate how);
    /** Once per host frame, before its steps: bounded upkeep of derived data
     *  (a map being built, a blend between two). May be NULL. Real-time safe. */
    void (*frame)(void *c);
    /** Change the step to @p h (s), keeping the state. Real-time safe. */
    void (*set_step)(void *c, double h);
    /** Clear the state. Real-time safe. */
    void (*reset)(void *c);
    /** One step to input voltage @p vin, passing @p vin_g at the TR-BDF2
     *  inner point t + g h. Real-time safe. */
    void (*step)(void *c, double vin, double vin_g, OsStepResult *r);
    /** Whether the state is finite. Real-time safe. */
    int (*ok)(const void *c);
    /** Copy the signal state to @p state (state_size bytes). Real-time safe. */
    void (*save)(const void *c, void *state);
    /** Take the signal state back from @p state. Real-time safe. */
    void (*restore)(void *c, const void *state);
} OsCircuitOps;

/** The circuit behind stages of @p kind, or NULL. */
const OsCircuitOps *os_circuit_ops(OsStageKind kind);

extern const OsCircuitOps os_circuit_opamp;
extern const OsCircuitOps os_circuit_pushpull;

/** Total resistance of the feedback divider R1 + R2, ohm. A common choice for a
 *  general-purpose op-amp (common practice: 1 k to 100 k). */
#define OS_FEEDBACK_TOTAL 10.0e3

/** Most residual evaluations any circuit spends on one sub-step (a whole
 *  oversampled step or a piece of one): two implicit solves of at most 60
 *  iterations and one closing evaluation each (os_circuit_opamp.c,
 *  os_circuit_pushpull.c). The trajectory bounds the sub-steps
 *  (os_trajectory_max_substeps()), so no setting can stall a host. */
#define OS_CIRCUIT_SUBSTEP_EVALS 122

/** Share of the op-amp's drive diverted by its limiter above which the limiter
 *  counts as engaged for the `limiting` meter. */
#define OS_LIMITING_SHARE 0.1

/**
 * The circuit behind @p stage with its parameters at their present (smoothed)
 * values in SI units (@p si, OS_P_COUNT values indexed by OsParam), and the
 * stage input voltage of a full-scale sample (fullscale x drive), for
 * measurement programs that step the circuit on their own at a rate of their
 * choice (bench/bench_fold.c). Real-time safe.
 */
const OsCircuitOps *os_stage_circuit(const OsStage *stage, double *si, double *volts_per_fs);

#ifdef __cplusplus
}
#endif

#endif /* OS_CIRCUIT_H */
