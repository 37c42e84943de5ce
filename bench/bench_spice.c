/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The accurate but slow reference beside the plugin: ngspice runs the same
 * circuit (the netlist templates of spice/, filled in and run by the
 * helpers of spice/spice_util.c) on each standard tone for the same
 * simulated duration, timed by its process's CPU time. Twice: with the 81 ns
 * maximum step of the spice tests (their accuracy, checked there against a
 * 20 ns step), and with the plugin's own step at the default 4x (5.2 us at
 * 48 kHz; ngspice still shortens it where its error control asks).
 *
 * Error against the first run, as tests/spice/test_spice.c computes it: the
 * complex amplitudes of the harmonics below 20 kHz over whole periods at the
 * end of the run, aligned by the reported latency,
 *   error = sqrt(sum |H_k - H_ref,k|^2) / sqrt(sum |H_ref,k|^2).
 * At 7 kHz that is the fundamental and the 2nd harmonic; aliases land on other
 * bins and are in the alias table instead. */

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "alias.h"
#include "analysis.h"
#include "bench.h"
#include "os_bjt.h"
#include "os_opamp.h"
#include "spice_util.h"

#define RATE 48000.0
/* ngspice output points per host frame (768 kHz): fine enough that the
 * harmonics below 20 kHz of its linear interpolation are exact to far below the
 * errors shown, and whole periods of 7 kHz (7 per 48 frames) fall on it. */
#define GRID 16
/* The spice tests' maximum step: 1 / (48 kHz x 256) = 81.4 ns. */
#define TIGHT_STEPS_PER_FRAME 256.0
#define BAND_HZ 20000.0
#define MAX_TONES 8

typedef struct {
    double cpu, wall; /* s */
    double *v;        /* v(out) on the grid, V */
    size_t rows;
} SpiceRun;

static double wall_now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double children_cpu(void)
{
    struct rusage ru;
    getrusage(RUSAGE_CHILDREN, &ru);
    return (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec +
           (double)ru.ru_stime.tv_sec + 1e-6 * (double)ru.ru_stime.tv_usec;
}

static double get(const OsStage *s, OsParam p)
{
    return (double)os_stage_get(s, p);
}

/* Fill the stage's template with its settings (read back from the stage, port
 * units to SI as the port table defines them), run ngspice, read v(out). */
static int run_ngspice(const BenchOptions *o, const char *ngspice, const AlTone *t, double tmax,
                       size_t frames, SpiceRun *run)
{
    const int pp = t->kind == OS_STAGE_PUSHPULL;
    OsStage *s = al_make_stage(t, RATE, 4);
    if (!s) {
        return -1;
    }
    const double dt = 1.0 / (RATE * GRID);
    const size_t rows = frames * GRID + 1;
    const double tstop = (double)(rows - 1) * dt;

    char dir[256], tmpl[1024], netlist[512], log[512], table[512];
    if (sp_mkdtemp(dir, sizeof(dir), "bench") != 0) {
        os_stage_free(s);
        return -1;
    }
    const char *name = pp ? "pushpull_stage.cir" : "opamp_stage.cir";
    snprintf(tmpl, sizeof(tmpl), "%s/%s.in", o->spice_dir, name);
    snprintf(netlist, sizeof(netlist), "%s/%s", dir, name);
    snprintf(log, sizeof(log), "%s/ngspice.log", dir);
    snprintf(table, sizeof(table), "%s/table.txt", dir);

    SpSubst sub = {.n = 0};
    SpCircuit k;
    sp_circuit_of(s, t->amp, t->freq, &k);
    sp_put_circuit(&sub, &k, pp);
    const size_t cols = sp_put_transient(&sub, pp, dt, tstop, tmax, table);
    os_stage_free(s);

    int rc = sp_write_netlist(tmpl, &sub, netlist);
    if (rc == 0) {
        const double c0 = children_cpu(), w0 = wall_now();
        rc = sp_run(ngspice, dir, name, log);
        run->wall = wall_now() - w0;
        run->cpu = children_cpu() - c0;
        if (rc != 0) {
            fprintf(stderr, "outstage-bench: ngspice exited with status %d\n", rc);
            sp_print_log_tail(log);
        }
    }
    double *tab = NULL;
    size_t got = 0;
    if (rc == 0) {
        tab = sp_read_table(table, cols, &got);
        if (!tab || got < rows) {
            fprintf(stderr, "outstage-bench: %zu of %zu rows from ngspice\n", got, rows);
            sp_print_log_tail(log);
            rc = -1;
        }
    }
    if (rc == 0) {
        run->v = malloc(rows * sizeof(double));
        run->rows = rows;
        rc = run->v ? 0 : -1;
        for (size_t j = 0; rc == 0 && j < rows; ++j) {
            /* the rows must sit on the expected grid */
            if (fabs(tab[cols * j] - (double)j * dt) > 1e-3 * dt) {
                fprintf(stderr, "outstage-bench: ngspice row %zu at %.15g s\n", j, tab[cols * j]);
                rc = -1;
            }
            run->v[j] = tab[cols * j + 1];
        }
    }
    free(tab);
    static const char *const files[] = {"opamp_stage.cir", "pushpull_stage.cir", "ngspice.log",
                                        "table.txt"};
    sp_cleanup(dir, files, sizeof(files) / sizeof(files[0]), rc != 0, "bench");
    return rc;
}

/* Harmonic error of x (sampled at @p rx Hz) against the reference r (at
 * @p rr Hz), both over @p frames host frames from the same time. */
static double harmonic_error(const double *x, double rx, const double *r, double rr, size_t frames,
                             double f0)
{
    return an_harmonic_error(x, (size_t)llround((double)frames * rx / RATE), rx, r,
                             (size_t)llround((double)frames * rr / RATE), rr, f0, BAND_HZ);
}

/* Load voltage of the plugin for the first @p frames of the tone after its
 * latency: frame i is the voltage at time i / RATE. */
static double *plugin_wave(const AlTone *t, int factor, size_t frames)
{
    OsStage *s = al_make_stage(t, RATE, factor);
    const size_t lat = s ? os_stage_latency(s) : 0;
    const size_t total = frames + lat;
    float *in = malloc(total * sizeof(float)), *out = malloc(total * sizeof(float));
    double *v = malloc(total * sizeof(double));
    if (!s || !in || !out || !v) {
        os_stage_free(s);
        free(in);
        free(out);
        free(v);
        return NULL;
    }
    for (size_t i = 0; i < total; ++i) {
        in[i] = (float)(t->amp * al_sine(i, RATE, t->freq));
    }
    for (size_t pos = 0; pos < total; pos += 512) {
        const uint32_t len = (uint32_t)(total - pos < 512 ? total - pos : 512);
        os_stage_process_probe(s, in + pos, out + pos, v + pos, len);
    }
    for (size_t i = 0; i < frames; ++i) {
        v[i] = v[i + lat];
    }
    os_stage_free(s);
    free(in);
    free(out);
    return v;
}

/* The static curve's output on the tone, in volts at the load. */
static double *curve_wave(BenchCurve c, const AlTone *t, size_t frames)
{
    float *in = malloc(frames * sizeof(float)), *out = malloc(frames * sizeof(float));
    double *v = malloc(frames * sizeof(double));
    OsStage *s = al_make_stage(t, RATE, 1);
    if (!in || !out || !v || !s) {
        free(in);
        free(out);
        free(v);
        os_stage_free(s);
        return NULL;
    }
    const double scale = pow(10.0, get(s, OS_P_GAIN) / 20.0) * get(s, OS_P_FULLSCALE);
    os_stage_free(s);
    for (size_t i = 0; i < frames; ++i) {
        in[i] = (float)(t->amp * al_sine(i, RATE, t->freq));
    }
    bench_curve_apply(c, in, out, frames);
    for (size_t i = 0; i < frames; ++i) {
        v[i] = (double)out[i] * scale;
    }
    free(in);
    free(out);
    return v;
}

/* ns per frame of the plugin on the tone, over the speed table's duration. */
static double plugin_ns(const BenchOptions *o, const AlTone *t, int factor)
{
    const size_t n = (size_t)(o->seconds * RATE);
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    OsStage *s = al_make_stage(t, RATE, factor);
    double ns = (double)NAN, iters = 0.0;
    if (x && y && s) {
        for (size_t i = 0; i < n; ++i) {
            x[i] = (float)(t->amp * al_sine(i, RATE, t->freq));
        }
        ns = 1e9 * bench_time_stage(s, x, y, n, o->repeat, &iters) / (double)n;
    }
    os_stage_free(s);
    free(x);
    free(y);
    return ns;
}

/* ns per frame of a static curve on the tone: passes until 0.2 s of CPU. */
static double curve_ns(const BenchOptions *o, BenchCurve c, const AlTone *t)
{
    const size_t n = (size_t)(o->seconds * RATE);
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    double best = (double)NAN;
    if (x && y) {
        for (size_t i = 0; i < n; ++i) {
            x[i] = (float)(t->amp * al_sine(i, RATE, t->freq));
        }
        volatile float sink = 0.0f;
        double spent = 0.0;
        best = 1e300;
        for (int pass = 0; pass < 3 || spent < 0.2; ++pass) {
            const double t0 = bench_cpu_now();
            bench_curve_apply(c, x, y, n);
            const double el = bench_cpu_now() - t0;
            sink += y[(size_t)pass % n];
            best = fmin(best, el);
            spent += el;
        }
        (void)sink;
        best *= 1e9 / (double)n;
    }
    free(x);
    free(y);
    return best;
}

int bench_spice(const BenchOptions *o)
{
    const char *ngspice = o->ngspice ? o->ngspice : sp_find_ngspice();
    printf("\n## Side by side: ngspice, the plugin and the static curves\n\n");
    if (!ngspice || !o->spice_dir) {
        printf("ngspice %s: skipped (give --ngspice PATH and --spice-dir spice).\n",
               ngspice ? "found, but no --spice-dir" : "not found");
        return 0;
    }
    size_t nt = 0;
    const AlTone *tones = al_tones(&nt);
    const size_t frames = (size_t)llround(o->spice_seconds * RATE);
    /* Compared: whole repetition periods at the end, at most 20 ms, at most
     * half the run (the first half lets both settle). */
    const size_t period = al_record_length(RATE, 7000.0, 0.0);
    size_t win = al_record_length(RATE, 7000.0, fmin(0.02, 0.5 * o->spice_seconds));
    while (win > frames / 2 && win > period) {
        win -= period;
    }
    if (frames < 2 * period || win > frames / 2) {
        printf("--spice-seconds %.4g is too short for a comparison.\n", o->spice_seconds);
        return 1;
    }
    const size_t i0 = frames - win;
    const double tmax[2] = {1.0 / (RATE * TIGHT_STEPS_PER_FRAME), 1.0 / (RATE * 4.0)};

    printf("ngspice: %s, the netlists of spice/ (reltol 1e-6, gear), %.4g s of each "
           "standard tone at 48 kHz, output on a %.0f kHz grid; CPU time of the ngspice "
           "process (user + system; writing its table included). Error: harmonics below "
           "20 kHz over the last %.1f ms (whole periods), against ngspice at 81 ns "
           "(tests/spice/test_spice.c's measure). Plugin and curves: ns/frame on %.2f s of "
           "the same tone, fastest of %d. x real time: seconds of audio per second of one "
           "core. Alias: worst single alias or inharmonic component (alias table).\n\n",
           ngspice, o->spice_seconds, RATE * GRID / 1e3, 1e3 * (double)win / RATE, o->seconds,
           o->repeat);
    printf("| tone | method | ns/frame | x real time | cost / plugin 4x | error vs ngspice (%%) "
           "| worst alias (dBc) |\n|---|---|---|---|---|---|---|\n");
    fflush(stdout);
    int rc = 0;
    SpiceRun stats[MAX_TONES][2];
    int done[MAX_TONES] = {0};
    for (size_t ti = 0; ti < nt && ti < MAX_TONES; ++ti) {
        const AlTone *t = &tones[ti];
        if (!os_stage_available(t->kind)) {
            continue;
        }
        if (al_record_length(RATE, t->freq, 0.0) > period) {
            /* the comparison needs whole repetitions of the output within the
             * last part of the run; the slewed 9973 Hz tones repeat only every
             * second (the slew limit is compared with ngspice in tests/spice:
             * opamp_slew and pushpull_spectrum_slew) */
            printf("| %s | not compared here: the output repeats every %.3g s | | | | | |\n",
                   t->name, (double)al_record_length(RATE, t->freq, 0.0) / RATE);
            continue;
        }
        SpiceRun runs[2];
        memset(runs, 0, sizeof(runs));
        if (run_ngspice(o, ngspice, t, tmax[0], frames, &runs[0]) != 0 ||
            run_ngspice(o, ngspice, t, tmax[1], frames, &runs[1]) != 0) {
            printf("| %s | ngspice failed | | | | | |\n", t->name);
            free(runs[0].v);
            free(runs[1].v);
            rc = 1;
            continue;
        }
        const double *ref = runs[0].v + i0 * GRID;
        const double ns4 = plugin_ns(o, t, 4);
        for (int m = 0; m < 2; ++m) {
            const double ns = 1e9 * runs[m].cpu / (double)frames;
            char err[32] = "reference";
            if (m == 1) {
                snprintf(err, sizeof(err), "%.5f",
                         100.0 * harmonic_error(runs[1].v + i0 * GRID, RATE * GRID, ref,
                                                RATE * GRID, win, t->freq));
            }
            printf("| %s | ngspice, max step %.3g us | %.0f | %.4f | %.3g | %s | none "
                   "(continuous time) |\n",
                   t->name, 1e6 * tmax[m], ns, 1e9 / ns / RATE, ns / ns4, err);
        }
        for (int factor = 1; factor <= 16; factor *= 2) {
            if (factor != 1 && factor != 4 && factor != 16) {
                continue;
            }
            double *v = plugin_wave(t, factor, frames);
            AlResult ar;
            const int have_alias = bench_alias(ti, RATE, factor, o->alias_seconds, &ar) == 0;
            const double ns = factor == 4 ? ns4 : plugin_ns(o, t, factor);
            if (!v) {
                rc = 1;
                continue;
            }
            printf("| %s | plugin %dx%s | %.0f | %.1f | %.3g | %.4f | %.1f |\n", t->name, factor,
                   factor == 4 ? " (default)" : "", ns, 1e9 / ns / RATE, ns / ns4,
                   100.0 * harmonic_error(v + i0, RATE, ref, RATE * GRID, win, t->freq),
                   have_alias ? ar.worst_dbc : (double)NAN);
            free(v);
        }
        for (int c = 0; c < BENCH_CURVE_COUNT; ++c) {
            if (bench_curve_tone((BenchCurve)c) != ti) {
                continue;
            }
            double *v = curve_wave((BenchCurve)c, t, frames);
            const size_t m = al_record_length(RATE, t->freq, o->alias_seconds);
            float *cx = malloc(m * sizeof(float)), *cy = malloc(m * sizeof(float));
            double *cd = malloc(m * sizeof(double));
            AlResult ar = {0};
            int ok = v && cx && cy && cd;
            if (ok) {
                for (size_t i = 0; i < m; ++i) {
                    cx[i] = (float)(t->amp * al_sine(i, RATE, t->freq));
                }
                bench_curve_apply((BenchCurve)c, cx, cy, m);
                for (size_t i = 0; i < m; ++i) {
                    cd[i] = (double)cy[i];
                }
                ok = al_analyse(cd, m, RATE, t->freq, &ar) == 0;
            }
            if (ok) {
                const double ns = curve_ns(o, (BenchCurve)c, t);
                printf("| %s | %s, no oversampling | %.2f | %.0f | %.3g | %.3f | %.1f |\n", t->name,
                       bench_curve_name((BenchCurve)c), ns, 1e9 / ns / RATE, ns / ns4,
                       100.0 * harmonic_error(v + i0, RATE, ref, RATE * GRID, win, t->freq),
                       ar.worst_dbc);
            } else {
                rc = 1;
            }
            free(v);
            free(cx);
            free(cy);
            free(cd);
        }
        fflush(stdout);
        for (int m = 0; m < 2; ++m) {
            stats[ti][m] = runs[m];
            stats[ti][m].v = NULL;
            free(runs[m].v);
        }
        done[ti] = 1;
    }
    printf("\nThe ngspice runs themselves (CPU: user + system time of its process):\n\n"
           "| tone | max step (us) | simulated (s) | CPU (s) | CPU s per s of audio | wall (s) "
           "|\n|---|---|---|---|---|---|\n");
    for (size_t ti = 0; ti < nt && ti < MAX_TONES; ++ti) {
        for (int m = 0; done[ti] && m < 2; ++m) {
            printf("| %s | %.4g | %.4g | %.3f | %.1f | %.3f |\n", tones[ti].name, 1e6 * tmax[m],
                   o->spice_seconds, stats[ti][m].cpu, stats[ti][m].cpu / o->spice_seconds,
                   stats[ti][m].wall);
        }
    }
    fflush(stdout);
    return rc;
}
