/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_load.h
 * The load a stage drives: a resistor, or the electrical impedance of a
 * moving-coil loudspeaker or headphone driver from its Thiele-Small
 * parameters (A. N. Thiele, "Loudspeakers in vented boxes", JAES 19, 1971;
 * R. H. Small, "Closed-box loudspeaker systems, part I", JAES 20, 1972):
 * the voice coil's resistance Re and inductance Le in series with the
 * motional impedance, a parallel R-L-C whose values follow from the
 * resonance fs and the mechanical and electrical Q:
 *
 *   Res = Re Qms / Qes,   Cmes = Qes / (2 pi fs Re),   Lces = 1 / ((2 pi fs)^2 Cmes)
 *
 *   Z(s) = Re + s Le + 1 / (1/Res + 1/(s Lces) + s Cmes)
 *
 * so |Z(0)| = Re (Lces shorts the branch), Z(j 2 pi fs) = Re + Res + j 2 pi fs Le
 * (C and L cancel), and the motional peak is a parallel resonance of
 * Q = Res sqrt(Cmes / Lces) = Qms: its half-power points lie fs / Qms apart,
 * their geometric mean at fs.
 *
 * Three linear states y = (iL, vm, im): the voice-coil current, the voltage
 * across the motional branch and the current in its inductance, with
 *
 *   M y' = A y + b v,   M = diag(Le, Cmes, Lces),   b = (1, 0, 0)
 *   Le iL' = v - Re iL - vm,   Cmes vm' = iL - vm / Res - im,   Lces im' = vm
 *
 * where v is the terminal voltage. With Le = 0 the first row is algebraic
 * (iL = (v - vm) / Re) and the same equations hold as an index-1 DAE, which
 * TR-BDF2 (os_solver.h) integrates like the rest: each of its sub-steps
 * y = c + w y' reads (M - w A) y = M c + w b v, a 3x3 system whose matrix
 * depends only on the sub-step's weight. So within a sub-step the load is,
 * at its terminals, a conductance in parallel with a current source (a
 * Norton equivalent): iL = G v + J with G = w (M - w A)^-1_11 and J the first
 * row of (M - w A)^-1 times M c. A circuit solves its nonlinear unknowns
 * with that equivalent (the linear states eliminated into the residual, a
 * Schur complement), then finishes the sub-step with the terminal voltage.
 * Real-time safe throughout; internal to the DSP library.
 */

#ifndef OS_LOAD_H
#define OS_LOAD_H

#ifdef __cplusplus
extern "C" {
#endif

/** The load's component values and the factor of one sub-step. */
typedef struct {
    int speaker;  /**< 0: the resistor re alone */
    double re;    /**< the resistor, or the voice coil's resistance, ohm */
    double le;    /**< voice-coil inductance, H */
    double res;   /**< motional resistance, ohm */
    double cmes;  /**< motional capacitance, F */
    double lces;  /**< motional inductance, H */
    double w;     /**< the sub-step weight the factor is for, s */
    double ki[9]; /**< (M - w A)^-1, row-major */
    double g;     /**< the sub-step's terminal conductance, S */
} OsLoad;

/** The load's signal state: y and the rates M y' = A y + b v at one instant. */
typedef struct {
    double y[3];  /**< iL (A), vm (V), im (A) */
    double my[3]; /**< M y': V, A, V */
} OsLoadState;

/** Set up from the stage's parameters @p si (SI units, indexed by OsParam:
 *  load, load_model, speaker_le, speaker_fs, speaker_qms, speaker_qes) for
 *  sub-steps of weight @p w. Real-time safe. */
void os_load_setup(OsLoad *l, const double *si, double w);

/** The factor for sub-steps of weight @p w (s). Real-time safe. */
void os_load_set_weight(OsLoad *l, double w);

/** M c of the trapezoidal sub-step from the state @p n at its start:
 *  M y_n + w M y'_n. Real-time safe. */
void os_load_c_trap(const OsLoad *l, const OsLoadState *n, double mc[3]);

/** M c of the BDF2 sub-step from the states at the step's start @p n and at
 *  its inner point @p g: M (A_ y_g - B_ y_n) (os_solver.h). Real-time safe. */
void os_load_c_bdf2(const OsLoad *l, const OsLoadState *n, const OsLoadState *g, double mc[3]);

/** The Norton current J of the sub-step with @p mc: iL = g v + J. Real-time safe. */
static inline double os_load_norton(const OsLoad *l, const double mc[3])
{
    return l->ki[0] * mc[0] + l->ki[1] * mc[1] + l->ki[2] * mc[2];
}

/** The state at the sub-step's end for terminal voltage @p v. Real-time safe. */
void os_load_finish(const OsLoad *l, const double mc[3], double v, OsLoadState *out);

/** The rate of the terminal current diL/dt in state @p s at terminal
 *  voltage rate @p dv (V/s): my[0] / Le, or with Le = 0 (dv - vm') / Re. */
double os_load_current_rate(const OsLoad *l, const OsLoadState *s, double dv);

/** The small-signal impedance at @p f Hz: *re + j *im, ohm. Real-time safe. */
void os_load_impedance(const OsLoad *l, double f, double *re, double *im);

/** Clear the state. */
void os_load_reset(OsLoadState *s);

#ifdef __cplusplus
}
#endif

#endif /* OS_LOAD_H */
