/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage-bench: one run prints, as markdown tables, the speed of each stage
 * at every rate and oversampling factor with its latency and alias level, the
 * alias table of the standard tones, the cost of silence and denormal input,
 * the cost on a fixed set of signals with the worst blocks and under automation,
 * a plain static clipping curve without oversampling, and ngspice on the same
 * circuits with its error against the plugin, and the harmonic each worst
 * alias folds from, measured in the continuous-time waveform. See
 * docs/performance.md. */

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "bench.h"

double bench_cpu_now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

void bench_program(float *x, size_t n, double rate)
{
    unsigned seed = 1u;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / rate;
        const double env = exp(-fmod(t, 0.25) * 12.0);
        seed = seed * 1664525u + 1013904223u; /* Numerical Recipes' LCG */
        const double noise = ((double)(seed >> 9) / 8388608.0 - 1.0);
        x[i] = (float)(0.45 * sin(2.0 * M_PI * 110.0 * t) + 0.3 * sin(2.0 * M_PI * 331.0 * t) +
                       0.25 * env * noise);
    }
}

double bench_time_stage(OsStage *stage, const float *x, float *y, size_t n, int repeat,
                        double *iters)
{
    double best = 1e300;
    for (int r = 0; r < repeat; ++r) {
        os_stage_reset(stage);
        double it = 0.0;
        const double t0 = bench_cpu_now();
        for (size_t pos = 0; pos < n; pos += 512) {
            const uint32_t len = (uint32_t)(n - pos < 512 ? n - pos : 512);
            os_stage_process(stage, x + pos, y + pos, len);
            OsMeters m;
            os_stage_meters(stage, &m);
            it += m.newton_iters * len;
        }
        const double el = bench_cpu_now() - t0;
        if (el < best) {
            best = el;
            *iters = it / (double)n;
        }
    }
    return best;
}

static void usage(FILE *f)
{
    fprintf(f, "usage: outstage-bench [--quick] [--seconds S] [--repeat R] [--alias-seconds S]\n"
               "                      [--spice-seconds S] [--ngspice PATH] [--spice-dir DIR]\n"
               "                      [--sections speed,signals,static,spice,fold]\n"
               "  --quick           short run to see that everything works (CI); figures rough\n"
               "  --seconds S       loud program per speed measurement (default 3)\n"
               "  --repeat R        repetitions per speed measurement, the fastest counts (3)\n"
               "  --alias-seconds S coherent record per alias measurement (1)\n"
               "  --spice-seconds S duration simulated by ngspice per comparison (0.1)\n"
               "  --ngspice PATH    ngspice executable (default: from PATH)\n"
               "  --spice-dir DIR   directory with the netlist templates (spice/)\n"
               "  --sections LIST   which parts to run (default all)\n");
}

static int parse_double(const char *s, double lo, double hi, double *v)
{
    char *end = NULL;
    const double d = strtod(s, &end);
    if (!end || *end != '\0' || !(d >= lo && d <= hi)) {
        return -1;
    }
    *v = d;
    return 0;
}

int main(int argc, char **argv)
{
    BenchOptions o = {3.0, 3, 1.0, 0.1, NULL, NULL};
    const char *sections = "speed,signals,static,spice,fold";
    for (int i = 1; i < argc; ++i) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        double d = 0.0;
        if (strcmp(a, "--quick") == 0) {
            o.seconds = 0.2;
            o.repeat = 1;
            o.alias_seconds = 0.05;
            o.spice_seconds = 0.005;
            continue;
        }
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            usage(stdout);
            return 0;
        }
        if (!v) {
            fprintf(stderr, "outstage-bench: %s needs a value\n", a);
            return 2;
        }
        ++i;
        if (strcmp(a, "--seconds") == 0 && parse_double(v, 0.01, 3600.0, &d) == 0) {
            o.seconds = d;
        } else if (strcmp(a, "--repeat") == 0 && parse_double(v, 1.0, 100.0, &d) == 0) {
            o.repeat = (int)d;
        } else if (strcmp(a, "--alias-seconds") == 0 && parse_double(v, 0.001, 60.0, &d) == 0) {
            o.alias_seconds = d;
        } else if (strcmp(a, "--spice-seconds") == 0 && parse_double(v, 0.002, 60.0, &d) == 0) {
            o.spice_seconds = d;
        } else if (strcmp(a, "--ngspice") == 0) {
            o.ngspice = *v ? v : NULL;
        } else if (strcmp(a, "--spice-dir") == 0) {
            o.spice_dir = v;
        } else if (strcmp(a, "--sections") == 0) {
            sections = v;
        } else {
            fprintf(stderr, "outstage-bench: bad option or value: %s %s\n", a, v);
            usage(stderr);
            return 2;
        }
    }

    printf("# outstage benchmark\n\nOne core, CPU time of the measuring thread (ngspice: "
           "its process's user + system time). Loud program %.2f s per speed figure, fastest "
           "of %d; alias records of %.3g s; ngspice runs of %.3g s.\n",
           o.seconds, o.repeat, o.alias_seconds, o.spice_seconds);
    fflush(stdout);
    int rc = 0;
    if (strstr(sections, "speed")) {
        rc |= bench_speed(&o);
    }
    if (strstr(sections, "signals")) {
        rc |= bench_signals(&o);
    }
    if (strstr(sections, "static")) {
        rc |= bench_static(&o);
    }
    if (strstr(sections, "spice")) {
        rc |= bench_spice(&o);
    }
    if (strstr(sections, "fold")) {
        rc |= bench_fold(&o);
    }
    return rc ? 1 : 0;
}
