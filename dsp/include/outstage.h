/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file outstage.h
 * Public API of the outstage DSP library: amplifier output stages simulated as
 * circuits, oversampled, with meters. Needs only libm. Knows nothing of plugin
 * APIs, files or printing.
 */

#ifndef OUTSTAGE_H
#define OUTSTAGE_H

#include <stdint.h>

#include "os_ports.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Status codes returned by the library. */
typedef enum {
    OS_OK = 0,          /**< success */
    OS_ERR_ARGUMENT,    /**< an argument is out of its domain (NULL, unknown id) */
    OS_ERR_NO_MEMORY,   /**< allocation failed */
    OS_ERR_SAMPLE_RATE, /**< sample rate outside 8 kHz .. 768 kHz */
    OS_ERR_UNAVAILABLE  /**< the stage kind is not built into this library */
} OsStatus;

/** A static English description of @p status. Real-time safe. */
const char *os_strerror(OsStatus status);

/** Lowest and highest host sample rates accepted by os_stage_new(), in Hz. */
#define OS_RATE_MIN 8000.0
#define OS_RATE_MAX 768000.0

/** Meters of the last os_stage_process() call, from the simulated circuit. */
typedef struct {
    double peak_current; /**< largest |load current|, A */
    /** largest |load voltage| at the circuit's own steps, V: the stage's real
     *  peak, before band-limiting (the output's samples overshoot a clipped
     *  waveform's, by the Gibbs phenomenon). Not a port. */
    double peak_load_v;
    double limiting;     /**< share of oversampled steps with the current limiter engaged, % */
    double load_power;   /**< mean power into the load, W */
    double dissipation;  /**< mean power in the output transistors (push-pull only), W */
    double newton_iters; /**< mean Newton iterations per oversampled step */
} OsMeters;

/** One simulated output stage: circuit, oversampler, smoothing, bypass, meters. */
typedef struct OsStage OsStage;

/**
 * Create a stage of @p kind for host rate @p sample_rate (Hz). All allocation
 * happens here. Parameters start at the port table's defaults, unsmoothed.
 * Returns NULL on failure; if @p status is not NULL it receives the reason.
 * Not real-time safe.
 */
OsStage *os_stage_new(OsStageKind kind, double sample_rate, OsStatus *status);

/** Free a stage; accepts NULL. Not real-time safe. */
void os_stage_free(OsStage *stage);

/**
 * Clear all signal state (circuit, filters, delay lines, meters) and jump every
 * parameter to its target without smoothing. No allocation; real-time safe.
 */
void os_stage_reset(OsStage *stage);

/**
 * Set parameter @p param (an OsParam) to @p value in the unit of its port
 * (V, dB, mA, ohm, MHz, V/us, ...). Values outside the port's range are clamped,
 * NaN is ignored. The change is smoothed during processing (oversampling factor
 * and toggles switch at once). Real-time safe.
 * Returns OS_ERR_ARGUMENT for a parameter the stage does not have.
 */
OsStatus os_stage_set(OsStage *stage, OsParam param, float value);

/** The target value of @p param in its port unit (after clamping). Real-time safe. */
float os_stage_get(const OsStage *stage, OsParam param);

/**
 * Process @p n frames from @p in to @p out (they may be the same buffer).
 * Real-time safe: no allocation, lock, I/O or system call; denormals flushed;
 * non-finite input is treated as silence. @p n may be 0.
 */
void os_stage_process(OsStage *stage, const float *in, float *out, uint32_t n);

/** Meters of the last os_stage_process() call. Real-time safe. */
void os_stage_meters(const OsStage *stage, OsMeters *meters);

/** Processing delay in host frames at the current oversampling factor. Real-time safe. */
uint32_t os_stage_latency(const OsStage *stage);

/** Load volts that an output sample of 1.0 stands for at the present
 *  (smoothed) settings: G x fullscale / 10^(trim/20), by the contract's
 *  output = vload / (G x fullscale) x 10^(trim/20), while the stage is enabled
 *  and not listening to the residual. Real-time safe. */
double os_stage_output_volts(const OsStage *stage);

/**
 * Process @p n frames and also return the load voltage (V) of each frame,
 * decimated through the same filters as the output, in @p vload (may be NULL).
 * Meant for measurement and tests; real-time safe.
 */
void os_stage_process_probe(OsStage *stage, const float *in, float *out, double *vload, uint32_t n);

/**
 * Where the load voltage of a stage of @p kind should stop growing, from its
 * component values @p values (port units, OS_P_COUNT of them indexed by
 * OsParam; those the stage lacks are not read): the op-amp's swing
 * (rail - headroom, less one vbe through the follower) or its current limit
 * times the load (ilimit x (R_L || R1 + R2) for the op-amp stage,
 * (beta + 1) x ilimit x R_L through the pair), whichever is lower. Returns that
 * load voltage in V; *current_limited (may be NULL) says which one it is. An
 * estimate from the circuit's constants for choosing sweep ranges and
 * describing a design, not a simulation. Real-time safe.
 */
double os_stage_expected_limit(OsStageKind kind, const float *values, int *current_limited);

/**
 * The small-signal impedance of the load that component values @p values
 * (port units, OS_P_COUNT of them indexed by OsParam: load, load_model and
 * the speaker_* controls) describe, at @p f Hz: *re + j *im, ohm. A resistor
 * of `load` ohms, or a loudspeaker's Re + j w Le + 1 / (1/Res + 1/(j w Lces)
 * + j w Cmes) from its Thiele-Small parameters (docs/models.md). The closed
 * form, for plots and reports. Real-time safe.
 */
void os_load_impedance_of(const float *values, double f, double *re, double *im);

/** A combination of controls the circuit cannot have, and what the stage does
 *  instead (os_stage_conflicts()). */
typedef struct {
    const char *controls; /**< the symbols involved, e.g. "rail headroom" */
    const char *quantity; /**< what they set, e.g. "the op-amp's output swing" */
    double asked;         /**< what the values ask for */
    double used;          /**< what the stage uses instead */
    const char *unit;     /**< of both, e.g. "V" */
    const char *why;      /**< the rule that decided @c used */
} OsConflict;

/**
 * The impossible combinations among @p values (port units, as
 * os_stage_expected_limit() takes them) for a stage of @p kind: a swing left
 * negative or below its floor by the headroom (and, through the follower, by
 * vbe). Writes at most @p max into @p out; returns how many there are.
 * Real-time safe.
 */
int os_stage_conflicts(OsStageKind kind, const float *values, OsConflict *out, int max);

#ifdef __cplusplus
}
#endif

#endif /* OUTSTAGE_H */
