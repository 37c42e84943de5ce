/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_circuit.h
 * Internal interface between the stage machinery (os_stage.c: oversampling,
 * smoothing, bypass, meters) and each circuit (os_stage_opamp.c, ...). A circuit
 * advances its state by one oversampled step of length h and returns the load
 * voltage. Not part of the public API.
 */

#ifndef OS_CIRCUIT_H
#define OS_CIRCUIT_H

#include "os_bjt.h"
#include "os_opamp.h"
#include "os_solver.h"
#include "outstage.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Circuit parameters in SI units (smoothed values). */
typedef struct {
    double gain;      /**< closed-loop gain G = 1 + R2/R1, V/V */
    double rail;      /**< V */
    double headroom;  /**< V */
    double ilimit;    /**< A */
    double load;      /**< ohm */
    double gbw;       /**< Hz */
    double slew;      /**< V/s */
    double beta;      /**< push-pull: forward current gain */
    double vbe;       /**< push-pull: Vbe at 100 mA, V */
    double bias;      /**< push-pull: base-to-base bias, V */
    double emitter_r; /**< push-pull: ohm */
    double loop;      /**< push-pull: 0 op-amp output, 1 load */
} OsCircuitParams;

/** What one step reports for the meters. */
typedef struct {
    double vload;       /**< load voltage, V */
    double dvload;      /**< its time derivative, V/s */
    double vmid;        /**< load voltage at the step's inner point t + g h (TR-BDF2), V */
    double dvmid;       /**< its time derivative there, V/s */
    double iload;       /**< load current, A */
    double dissipation; /**< power in the output transistors, W */
    /** Where the op-amp is on its curves, for the stage's refinement test
     *  (os_stage.c): d(dx/dt)/dx of its internal node through the whole loop,
     *  1/s, a smooth function of the state that jumps when the current
     *  limiter, the slew limit, a clamp or the follower change regime. */
    double jac;
    int limiting; /**< 1 while the op-amp current limiter is engaged */
    int iters;    /**< Newton iterations used */
} OsStepResult;

/** Total resistance of the feedback divider R1 + R2, ohm. A common choice for a
 *  general-purpose op-amp (common practice: 1 k to 100 k). */
#define OS_FEEDBACK_TOTAL 10.0e3

/** Share of the op-amp's drive diverted by its limiter above which the limiter
 *  counts as engaged for the `limiting` meter. */
#define OS_LIMITING_SHARE 0.1

/** The op-amp stage: a non-inverting amplifier into a load. */
typedef struct {
    OsOpampCoeffs op;
    double inv_g; /**< 1/G: share of the output fed back */
    double inv_rl;
    double kx;   /**< output current per volt of x: 1 / (R_load||R_fb + Rs) */
    double rho;  /**< output voltage per volt of x: (R_load||R_fb) / (R_load||R_fb + Rs) */
    double beta; /**< TR-BDF2 stage weight g h / 2 */
    /* state at the last step */
    double x;   /**< internal node, V */
    double fx;  /**< dx/dt there, V/s */
    double vin; /**< input voltage there, V */
    /* context of the residual during a solve */
    double c, vin_now, limit;
    double jac; /**< loop derivative at the last evaluation, 1/s */
} OsOpampStage;

/** Derive coefficients for step @p h (s). Real-time safe. */
void os_opamp_stage_update(OsOpampStage *s, const OsCircuitParams *p, double h);
/** Clear the state. Real-time safe. */
void os_opamp_stage_reset(OsOpampStage *s);
/** One step to input voltage @p vin, passing @p vin_g at the TR-BDF2 inner
 *  point t + g h. Real-time safe. */
void os_opamp_stage_step(OsOpampStage *s, double vin, double vin_g, OsStepResult *r);
/** Change the step to @p h (s) without touching the state. Real-time safe. */
void os_opamp_stage_set_step(OsOpampStage *s, double h);
/** Whether the state is finite. */
int os_opamp_stage_ok(const OsOpampStage *s);

/** Network evaluations the push-pull stage may spend on one oversampled step
 *  beyond its fast path (2 x 12); a gentle step takes 4 to 10. Settings far
 *  outside physical sense (2 V of bias across junctions whose vbe is 0.4 V with
 *  no emitter resistors: gigaamperes of idle current) can make Newton work hard;
 *  the cap keeps the cost of any step bounded, holding the last good network
 *  solution once it is spent. */
#define OS_PUSHPULL_STEP_BUDGET 300
#define OS_PUSHPULL_FAST_EVALS 24
/** The budget of a step that follows one which spent all of its own. */
#define OS_PUSHPULL_STARVED_BUDGET 40

/** Unknowns of the push-pull stage, in the order of its Newton system. */
enum { PP_X = 0, PP_VO, PP_OUT, PP_VBE_N, PP_VEB_P, PP_DIM };

/** The push-pull stage: the op-amp drives the joined bases of a complementary
 *  emitter-follower pair into the load. */
typedef struct {
    OsOpampCoeffs op;
    OsBjt q; /**< both transistors (matched, complementary) */
    double inv_g;
    double g_load; /**< 1 / R_load */
    double g_fb;   /**< 1 / (R1 + R2) */
    double re;     /**< emitter resistor, ohm */
    double half_bias;
    double rail;
    int loop;    /**< 1: feedback from the load */
    double h;    /**< oversampled step, s */
    double beta; /**< TR-BDF2 weight of the step being taken */
    /* state at the last step: x and the network (vo, out, vbe_n, veb_p) */
    double z[PP_DIM];
    double fx, vin;
    int fresh;   /**< no step since reset: find the operating point first */
    int starved; /**< the last nested step spent its whole budget */
    int budget;  /**< evaluation count at which the present step stops trying */
    /* the last network solution, at x = xy: warm start of the next solve */
    double y[PP_DIM - 1];
    double xy;
    double limit; /**< op-amp limiter share at the last evaluation */
} OsPushpullStage;

/** Derive coefficients for step @p h (s). Real-time safe. */
void os_pushpull_stage_update(OsPushpullStage *s, const OsCircuitParams *p, double h);
/** Clear the state. Real-time safe. */
void os_pushpull_stage_reset(OsPushpullStage *s);
/** One step to input voltage @p vin, passing @p vin_g at the TR-BDF2 inner
 *  point t + g h. Real-time safe. */
void os_pushpull_stage_step(OsPushpullStage *s, double vin, double vin_g, OsStepResult *r);
/** Change the step to @p h (s) without touching the state. Real-time safe. */
void os_pushpull_stage_set_step(OsPushpullStage *s, double h);
/** Whether the state is finite. */
int os_pushpull_stage_ok(const OsPushpullStage *s);

/**
 * The circuit behind @p stage: its parameters at their present (smoothed)
 * values, and the stage input voltage of a full-scale sample (fullscale x
 * drive), for measurement programs that step the circuit on their own at a
 * rate of their choice (bench/bench_fold.c). Real-time safe.
 */
void os_stage_circuit(const OsStage *stage, OsCircuitParams *p, double *volts_per_fs);

#ifdef __cplusplus
}
#endif

#endif /* OS_CIRCUIT_H */
