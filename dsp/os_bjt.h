/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_bjt.h
 * The bipolar transistor of the push-pull stage: Ebers-Moll in transport form
 * (J. J. Ebers and J. L. Moll, "Large-signal behavior of junction transistors",
 * Proc. IRE 42, 1954), which is also the SPICE Gummel-Poon model with only IS
 * and BF set (BR = 1, no Early effect, high injection, leakage or resistances;
 * Nagel, "SPICE2", UCB/ERL M520, 1975):
 *
 *   IF = Is (exp(Vbe/VT) - 1),  IR = Is (exp(Vbc/VT) - 1)
 *   Ic = IF - IR (1 + 1/BR),  Ib = IF/BF + IR/BR,  Ie = Ic + Ib = IF (1 + 1/BF) - IR
 *
 * written for an NPN; a PNP is the same with Veb, Vcb and every current reversed.
 * Is follows from the `vbe` setting: the base-emitter voltage at Ic = 100 mA in
 * the forward-active region, Is = 0.1 A / (exp(vbe/VT) - 1).
 */

#ifndef OS_BJT_H
#define OS_BJT_H

#ifdef __cplusplus
extern "C" {
#endif

/** Collector current at which the `vbe` setting is specified, A. */
#define OS_BJT_IC_REF 0.1
/** Exponentials continue linearly above this argument: far beyond any current
 *  the circuit can carry (exp(80) x 1e-12 A), so it only guards against overflow
 *  during Newton iterations. */
#define OS_BJT_EXP_MAX 80.0

/** One transistor type. */
typedef struct {
    double is;     /**< saturation current, A */
    double inv_bf; /**< 1 / forward current gain */
    double inv_br; /**< 1 / reverse current gain (BR = 1) */
    double vcrit;  /**< junction voltage above which Newton steps are limited, V */
} OsBjt;

/** Currents and their derivatives at one bias point (NPN sense). */
typedef struct {
    double ie, ib, ic;         /**< A */
    double die_dvbe, die_dvbc; /**< S */
    double dib_dvbe, dib_dvbc; /**< S */
} OsBjtEval;

/** Set up from the base-emitter voltage @p vbe (V) at 100 mA and the forward
 *  current gain @p beta. Real-time safe. */
void os_bjt_init(OsBjt *t, double vbe, double beta);

/** Evaluate at @p vbe and @p vbc (V). Real-time safe. */
void os_bjt_eval(const OsBjt *t, double vbe, double vbc, OsBjtEval *e);

/** Limit a Newton update of a junction voltage from @p vold to @p vnew, as SPICE
 *  does (pnjlim: logarithmic steps above the critical voltage; Nagel 1975). */
double os_bjt_limit(const OsBjt *t, double vnew, double vold);

#ifdef __cplusplus
}
#endif

#endif /* OS_BJT_H */
