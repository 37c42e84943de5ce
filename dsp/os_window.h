/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_window.h
 * Band-limited sampling of the circuit's trajectory at the oversampled rate.
 *
 * Sampling the load voltage v(t) at the oversampled rate 1/h folds every
 * harmonic above 1/(2h) back; docs/performance.md shows that at 4x the
 * simulation already gives the true waveform's samples, and that those
 * harmonics (a current limiter's knee, a transistor turning on within 50 ns)
 * are really there. So the stage filters the continuous trajectory before it
 * is sampled: each output sample is v weighted by a triangle two steps wide,
 *
 *   W(t_n) = (1/h) integral v(t) (1 - |t - t_n| / h) dt,
 *
 * whose response sinc^2(f h) has double zeros at every multiple of the
 * oversampled rate, where the harmonics that fold into the audio band lie
 * (-40 dB at 1/h - 17 kHz, -72 dB at 1/h - 3 kHz for 4x at 48 kHz). Within a
 * step v(t) is taken as two cubic Hermite pieces, through the value and slope
 * at the step's start, at the TR-BDF2 inner point t + g h and at its end (the
 * circuit reports all three: os_circuit.h), so a corner the solver meets
 * inside a step shapes the window's integral; steps in which the op-amp
 * changes its regime are taken again in pieces (os_trajectory.c). A three-tap
 * filter [-a, 1 + 2a, -a] then restores the passband. Its coefficient is the
 * minimax choice for |H C - 1| over the kept band 0 .. OS_PASSBAND x fs, H the
 * chain's response to a tone when the loop is fast against the step (the
 * common case: then the node values follow the input exactly, the inner value
 * of a whole step is the cubic interpolation of the input of os_trajectory.c,
 * and the slopes follow from the TR-BDF2 relations
 * f_g = 2 (x_g - x_0) / (g h) - f_0 and f_1 = (x_1 - A x_g + B x_0) / w).
 * Measured on the op-amp stage at its defaults, that model predicts the
 * response to 0.0005 dB (4x, 5-19 kHz). The cubic's own small droop offsets
 * the fourth-order term of sinc^2 that three taps cannot match: with an exact
 * inner input the best three taps leave 0.0033 dB at 4x, and five taps (one
 * step more delay, one frame more latency at 4x) would be needed.
 * Delay: two oversampled steps, which the oversampler's rounding pad absorbs
 * (os_oversampler_init(), inner = 2).
 *
 * The idea of filtering the continuous-time signal before sampling instead of
 * the samples is that of antiderivative antialiasing (Parker, Zavalishin and
 * Le Bivic, DAFx 2016; Bilbao, Esqueda, Parker and Valimaki, IEEE SPL 2017,
 * where a rectangular, then a triangular kernel is integrated in closed form);
 * here the kernel is integrated along the solver's own trajectory.
 */

#ifndef OS_WINDOW_H
#define OS_WINDOW_H

#ifdef __cplusplus
extern "C" {
#endif

/** Delay of the window and its compensation, oversampled steps. */
#define OS_WINDOW_DELAY 2

/** Running state. */
typedef struct {
    double a;          /**< compensation coefficient, 0: window off */
    double v, dv;      /**< load voltage and its slope (V/s) at the last point */
    double rise, fall; /**< moments of the step being built */
    double pending;    /**< W(t_n) so far: the fall of the step before t_n is missing */
    double w1, w2;     /**< completed W(t_{n-1}), W(t_{n-2}) */
} OsWindow;

/** Minimax compensation coefficient for oversampling @p factor (0 for 1x:
 *  no window, plain samples). */
double os_window_coefficient(int factor);

/** Clear the state; @p a from os_window_coefficient(). Real-time safe. */
void os_window_reset(OsWindow *w, double a);

/** Add the piece of the present step from u0 to u0 + du (shares of the step h,
 *  seconds) that ends at load voltage @p v1 with slope @p dv1 (V/s). Pieces of
 *  one step come in order and cover it. Real-time safe. */
void os_window_piece(OsWindow *w, double h, double u0, double du, double v1, double dv1);

/** End the step: returns the output sample OS_WINDOW_DELAY steps back.
 *  Real-time safe. */
double os_window_close(OsWindow *w);

#ifdef __cplusplus
}
#endif

#endif /* OS_WINDOW_H */
