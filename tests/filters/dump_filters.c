/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Prints what the DSP library's oversampler is made of, for an outside check
 * (check_filters.py, with scipy): the taps of every half-band stage as
 * os_oversampler_design() makes them, and for every factor the reported
 * latency and the impulse response of the whole round trip (interpolate, then
 * decimate), one host frame per value. Plain text, one record per line:
 *   passband P            OS_PASSBAND, share of the host rate
 *   stopband_db A         OS_STOPBAND_DB, the design target
 *   stage J N h0 h1 ...   stage J (1 = next to the host rate), N taps
 *   factor F L M r0 ...   factor F, reported latency L frames, M values */

#include <stdio.h>

#include "os_oversampler.h"
#include "os_solver.h"
#include "os_window.h"

#define IMPULSE_FRAMES 256

int main(void)
{
    static OsOversamplerDesign d;
    if (os_oversampler_design(&d) != 0) {
        fprintf(stderr, "dump_filters: os_oversampler_design failed\n");
        return 1;
    }
    printf("passband %.17g\n", OS_PASSBAND);
    printf("stopband_db %.17g\n", OS_STOPBAND_DB);
    for (int j = 1; j <= OS_OVERSAMPLE_MAX_LOG2; ++j) {
        const OsHalfband *hb = &d.stage[j - 1];
        const int n = 4 * hb->k - 1;
        double h[4 * OS_HALFBAND_MAX_K];
        os_halfband_taps(hb, h);
        printf("stage %d %d", j, n);
        for (int i = 0; i < n; ++i) {
            printf(" %.17g", h[i]);
        }
        printf("\n");
    }
    for (int f = 1; f <= OS_OVERSAMPLE_MAX; f *= 2) {
        static OsOversampler os;
        os_oversampler_init(&os, &d, f, 0);
        printf("factor %d %d %d", os.factor, os_oversampler_latency(&d, f, 0), IMPULSE_FRAMES);
        double y[OS_OVERSAMPLE_MAX];
        for (int i = 0; i < IMPULSE_FRAMES; ++i) {
            os_oversampler_up(&os, i == 0 ? 1.0 : 0.0, y);
            printf(" %.17g", os_oversampler_down(&os, y));
        }
        printf("\n");
    }
    /* the band-limited sampling's compensation (os_window.h) */
    printf("trbdf2_g %.17g\n", OS_TRBDF2_G);
    for (int f = 2; f <= OS_OVERSAMPLE_MAX; f *= 2) {
        printf("window %d %.17g\n", f, os_window_coefficient(f));
    }
    return ferror(stdout) ? 1 : 0;
}
