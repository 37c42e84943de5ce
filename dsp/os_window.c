/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_window.h"

#include <string.h>

double os_window_coefficient(int factor)
{
    /* argmin over a of max |20 log10(Hw C)| on theta in [0, 2 pi 0.42 / factor]
     * (os_window.h), by scipy.optimize.minimize_scalar (bounded, xatol 1e-10);
     * resulting ripple 0.0157, 0.00074, 0.000067, 0.000004 dB
     * (tests/filters/check_filters.py repeats the search). */
    switch (factor) {
    case 2:
        return 0.08400144;
    case 4:
        return 0.08217743;
    case 8:
        return 0.08297815;
    case 16:
        return 0.08324095;
    default:
        return 0.0;
    }
}

void os_window_reset(OsWindow *w, double a)
{
    memset(w, 0, sizeof(*w));
    w->a = a;
}

void os_window_piece(OsWindow *w, double h, double u0, double du, double v1, double dv1)
{
    /* Cubic Hermite on s in [0, 1] from (v0, slope d0) to (v1, slope d1), the
     * slopes per unit s: its integrals against 1 and against s are
     *   M0 = (v0 + v1) / 2 + (d0 - d1) / 12
     *   M1 = 3/20 v0 + 7/20 v1 + d0 / 30 - d1 / 20.
     * With u = u0 + du s the share of the step, the step's rising weight is u
     * and its falling weight 1 - u. */
    const double d0 = w->dv * h * du, d1 = dv1 * h * du;
    const double m0 = 0.5 * (w->v + v1) + (d0 - d1) * (1.0 / 12.0);
    const double m1 = 0.15 * w->v + 0.35 * v1 + d0 * (1.0 / 30.0) - d1 * 0.05;
    const double i0 = du * m0;
    const double i1 = du * (u0 * m0 + du * m1);
    w->rise += i1;
    w->fall += i0 - i1;
    w->v = v1;
    w->dv = dv1;
}

double os_window_close(OsWindow *w)
{
    const double done = w->pending + w->fall; /* W(t_{n-1}) is complete */
    const double a = w->a;
    const double y = -a * w->w2 + (1.0 + 2.0 * a) * w->w1 - a * done;
    w->w2 = w->w1;
    w->w1 = done;
    w->pending = w->rise;
    w->rise = 0.0;
    w->fall = 0.0;
    return y;
}
