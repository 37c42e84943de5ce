/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Speed of each stage on a loud program: nanoseconds per frame, times faster
 * than real time, Newton iterations per step, latency. A measurement program,
 * not a test: nothing here asserts on time. */

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "outstage.h"

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

/* A loud program: two detuned tones and a decaying burst every 250 ms, peaks
 * near 0 dBFS, so the default op-amp stage (32 ohm, 25 mA) spends much of the time
 * in current limit. */
static void program(float *x, size_t n, double rate)
{
    unsigned seed = 1u;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / rate;
        const double env = exp(-fmod(t, 0.25) * 12.0);
        seed = seed * 1664525u + 1013904223u;
        const double noise = ((double)(seed >> 9) / 8388608.0 - 1.0);
        x[i] = (float)(0.45 * sin(2.0 * M_PI * 110.0 * t) + 0.3 * sin(2.0 * M_PI * 331.0 * t) +
                       0.25 * env * noise);
    }
}

int main(int argc, char **argv)
{
    double seconds = 10.0;
    for (int i = 1; i + 1 < argc; ++i) {
        if (strcmp(argv[i], "--seconds") == 0) {
            seconds = atof(argv[i + 1]);
        }
    }
    const double rates[] = {44100.0, 48000.0, 96000.0};
    const int factors[] = {1, 2, 4, 8, 16};
    printf("| stage | rate (Hz) | oversample | ns/frame | x real time | Newton it/step | latency "
           "(frames) |\n|---|---|---|---|---|---|---|\n");
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (!os_stage_available((OsStageKind)k)) {
            continue;
        }
        for (size_t r = 0; r < sizeof(rates) / sizeof(rates[0]); ++r) {
            const size_t n = (size_t)(seconds * rates[r]);
            float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
            if (!x || !y) {
                return 1;
            }
            program(x, n, rates[r]);
            for (size_t f = 0; f < sizeof(factors) / sizeof(factors[0]); ++f) {
                OsStage *s = os_stage_new((OsStageKind)k, rates[r], NULL);
                if (!s) {
                    return 1;
                }
                os_stage_set(s, OS_P_OVERSAMPLE, (float)factors[f]);
                os_stage_reset(s);
                double iters = 0.0;
                const double t0 = now();
                for (size_t pos = 0; pos < n; pos += 512) {
                    const uint32_t len = (uint32_t)(n - pos < 512 ? n - pos : 512);
                    os_stage_process(s, x + pos, y + pos, len);
                    OsMeters m;
                    os_stage_meters(s, &m);
                    iters += m.newton_iters * len;
                }
                const double el = now() - t0;
                printf("| %s | %.0f | %d | %.1f | %.0f | %.2f | %u |\n",
                       os_stage_info((OsStageKind)k)->cli_name, rates[r], factors[f],
                       1e9 * el / (double)n, seconds / el, iters / (double)n, os_stage_latency(s));
                os_stage_free(s);
            }
            free(x);
            free(y);
        }
    }
    return 0;
}
