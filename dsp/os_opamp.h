/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_opamp.h
 * Behavioural macro-model of a general-purpose op-amp, shared by every stage.
 *
 * One state, the voltage x of the internal high-impedance node (the output
 * stage's input, "open-circuit output voltage"), obeys (all rates in V/s):
 *
 *   dx/dt = SR tanh(wt vd / SR) - wp x
 *           - SR [E((io - Ilim)/Ik) - E((-io - Ilim)/Ik)]     current limiter
 *           - SR [E((x - Vsw)/w)    - E((-x - Vsw)/w)]        swing clamp
 *
 * vd  differential input voltage (V), io output current (A, out of the pin),
 * wt  = 2 pi GBW, wp = wt / A0 (dominant pole, A0 open-loop gain),
 * SR  slew rate (V/s): the input stage's tail current over the compensation
 *     capacitor, reached when the stage saturates (Boyle, Cohn, Pederson and
 *     Solomon, "Macromodeling of integrated circuit operational amplifiers",
 *     IEEE J. Solid-State Circuits SC-9(6), 1974: SR = I_tail / Cc, wt = gm / Cc),
 * Ilim current limit; Ik = VT / Rs its knee, with Rs = OS_VSENSE / Ilim the
 *     sense resistor of a sense-resistor-and-transistor limiter whose transistor
 *     diverts the drive current exponentially (Ebers-Moll) once io Rs nears its
 *     turn-on voltage,
 * Vsw = rail - headroom (at least OS_SWING_MIN_SHARE x rail), w the knee width
 *     of the swing clamp,
 * E(u) = exp(u), continued linearly above OS_EXP_MAX.
 *
 * The clamps are scaled by SR, so at full overdrive they balance the saturated
 * input stage exactly at io = Ilim and x = Vsw, and x never winds up beyond
 * them: recovery from current limiting or clipping is immediate.
 *
 * The output pin is x behind the sense resistor: vo = x - Rs io.
 */

#ifndef OS_OPAMP_H
#define OS_OPAMP_H

#include <math.h>

#include "os_circuit.h"
#include "os_fastmath.h"
#include "os_ports.h"

#ifdef __cplusplus
extern "C" {
#endif

/** Open-loop DC gain, 200 V/mV: a typical general-purpose bipolar op-amp data
 *  sheet figure (from memory). */
#define OS_OPAMP_A0 2.0e5
/** Turn-on voltage of the current-sense transistor, V (common practice: a
 *  silicon Vbe of about 0.6-0.7 V). Sets Rs = OS_VSENSE / Ilim. */
#define OS_VSENSE 0.65
/** Knee width of the swing clamp, V (a modelling choice, not a datasheet value). */
#define OS_SWING_KNEE 0.05
/** The swing never shrinks below this share of the rail, so every setting is valid. */
#define OS_SWING_MIN_SHARE 0.05
/** Linear continuation point of the clamp exponentials. A converged solution
 *  never needs E above about 3 (the clamps balance an input stage bounded by
 *  SR), so continuing linearly above E = exp(8) = 2981 changes no solution; it
 *  keeps Newton iterates out of a far exponential tail, down which they could
 *  only creep one unit of the exponent per iteration, and prevents overflow. */
#define OS_EXP_MAX 8.0
/** Boltzmann constant (J/K), elementary charge (C), 27 degC in kelvin (CODATA 2018). */
#define OS_BOLTZMANN 1.380649e-23
#define OS_CHARGE 1.602176634e-19
#define OS_T_NOMINAL 300.15
/** Thermal voltage kT/q at 27 degC, the SPICE default temperature: 25.86 mV. */
#define OS_VT (OS_BOLTZMANN * OS_T_NOMINAL / OS_CHARGE)

/** Coefficients derived from the op-amp's parameters. */
typedef struct {
    double sr;     /**< slew rate, V/s */
    double kin;    /**< wt / SR, 1/V */
    double wp;     /**< dominant pole, rad/s */
    double vsw;    /**< output swing limit, V */
    double inv_w;  /**< 1 / swing knee width, 1/V */
    double ilim;   /**< current limit, A */
    double inv_ik; /**< 1 / current-limit knee width, 1/A */
    double rs;     /**< sense resistor, ohm */
} OsOpampCoeffs;

/** Derive coefficients from a stage's parameters @p si (SI units, indexed by
 *  OsParam: gbw in Hz, slew in V/s, rail and headroom in V, ilimit in A).
 *  Real-time safe. */
void os_opamp_coeffs_from(const double *si, OsOpampCoeffs *c);

/** Rate of the internal node and its partial derivatives. */
typedef struct {
    double f;      /**< dx/dt, V/s */
    double df_dx;  /**< partial derivative by x, 1/s */
    double df_dvd; /**< by vd, 1/s */
    double df_dio; /**< by io, V/(s A) */
    double limit;  /**< share of the drive diverted by the current limiter, 0..1+ */
} OsOpampRate;

/* Below this argument exp(u) < 2.1e-9: a clamp term this small moves the
 * internal node by under 2.1e-9 x SR x h per step (0.2 nV at 0.5 V/us and
 * 192 kHz), far below the solver's 0.1 uV tolerance, so it is skipped. */
#define OS_EXP_NEGLIGIBLE (-20.0)

/** exp(u) continued linearly above OS_EXP_MAX; *d receives the derivative.
 *  Inline (with os_opamp_rate()): the circuits' Newton loops call it. */
static inline double os_exp_lim(double u, double *d)
{
    if (u > OS_EXP_MAX) {
        const double e = os_exp(OS_EXP_MAX);
        *d = e;
        return e * (1.0 + (u - OS_EXP_MAX));
    }
    if (u < OS_EXP_NEGLIGIBLE) {
        *d = 0.0;
        return 0.0;
    }
    const double e = os_exp(u);
    *d = e;
    return e;
}

/** Evaluate dx/dt at state @p x, differential input @p vd, output current @p io.
 *  Real-time safe. */
static inline void os_opamp_rate(const OsOpampCoeffs *c, double x, double vd, double io,
                                 OsOpampRate *r)
{
    /* one exp instead of the library's tanh (os_fastmath.h) */
    double dt;
    const double t = os_tanh_d(c->kin * vd, &dt);
    double dp, dn;

    /* Current limiter: diverted drive on each polarity. */
    const double lp = os_exp_lim((io - c->ilim) * c->inv_ik, &dp);
    const double ln = os_exp_lim((-io - c->ilim) * c->inv_ik, &dn);
    /* Swing clamp. */
    double sp, sn;
    const double cp = os_exp_lim((x - c->vsw) * c->inv_w, &sp);
    const double cn = os_exp_lim((-x - c->vsw) * c->inv_w, &sn);

    r->f = c->sr * (t - (lp - ln) - (cp - cn)) - c->wp * x;
    r->df_dvd = c->sr * c->kin * dt;
    r->df_dio = -c->sr * c->inv_ik * (dp + dn);
    r->df_dx = -c->sr * c->inv_w * (sp + sn) - c->wp;
    r->limit = lp > ln ? lp : ln;
}

/** The op-amp's regime indicator (os_circuit.h): the input pair's argument
 *  kin vd, near 0 while the loop tracks, beyond a few units while the op-amp
 *  slews. Its limiter and swing clamp bend the loop derivative, which the
 *  trajectory's halving test watches instead. Real-time safe. */
static inline double os_opamp_indicator(const OsOpampCoeffs *c, double vd)
{
    return c->kin * vd;
}

/** Number of op-amp indicators, and their zones. */
#define OS_OPAMP_INDICATORS 1
extern const OsIndicator os_opamp_zones[OS_OPAMP_INDICATORS];

#ifdef __cplusplus
}
#endif

#endif /* OS_OPAMP_H */
