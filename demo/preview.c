/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage-preview [BUNDLE_DIR]: loads the op-amp stage plugin through lilv, as
 * a host would, and reports what it does to generated signals at a few designs of our
 * own: where the output current limiter starts to square off a 1 kHz sine,
 * where it clips against the rails, and what a short plucked phrase asks of the
 * load. Plain text on standard output. */

#include <lilv/lilv.h>
#include <lv2/core/lv2.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis.h"

#define RATE 48000.0
#define BLOCK 480

typedef struct {
    const char *name;
    const char *uri;
    double rail, load, gain, ilimit, fullscale;
    double bias, loop; /* push-pull only */
} Design;

#define OPAMP "urn:outstage:opamp"
#define PUSHPULL "urn:outstage:pushpull"

/* Scenarios of our own, not any product's. */
static const Design designs[] = {
    {"desktop headphone driver, +-12 V into 32 ohm headphones", OPAMP, 12.0, 32.0, 6.0, 25.0, 1.0,
     0.0, 0.0},
    {"op-amp straight into an 8 ohm speaker, +-15 V", OPAMP, 15.0, 8.0, 6.0, 25.0, 1.0, 0.0, 0.0},
    {"line driver, +-15 V, gain 20 dB into 600 ohm", OPAMP, 15.0, 600.0, 20.0, 25.0, 1.0, 0.0, 0.0},
    {"battery practice amp, +-9 V into 4 ohm, class B pair outside the loop", PUSHPULL, 9.0, 4.0,
     12.0, 25.0, 1.0, 0.0, 0.0},
    {"bench amp, +-15 V into 8 ohm, class AB (1.1 V bias), pair inside the loop", PUSHPULL, 15.0,
     8.0, 20.0, 25.0, 1.0, 1.1, 1.0},
};

typedef struct {
    LilvInstance *inst;
    float *controls; /* one slot per port */
    uint32_t n_ports;
    int p_in, p_out, p_peak, p_lim, p_pow, p_lat, p_diss;
    float in[BLOCK], out[BLOCK];
} Host;

static int port_index(const LilvPlugin *p, LilvWorld *w, const char *sym)
{
    LilvNode *n = lilv_new_string(w, sym);
    const LilvPort *port = lilv_plugin_get_port_by_symbol(p, n);
    lilv_node_free(n);
    return port ? (int)lilv_port_get_index(p, port) : -1;
}

static void set(Host *h, const LilvPlugin *p, LilvWorld *w, const char *sym, float v)
{
    const int i = port_index(p, w, sym);
    if (i >= 0) {
        h->controls[i] = v;
    }
}

/* Run one block of h->in through the plugin. */
static void run_block(Host *h, uint32_t n)
{
    lilv_instance_run(h->inst, n);
}

/* Level sweep of a 1 kHz sine: returns the first level (dBFS) where the limiter
 * engages and the first where THD reaches 1 %, printing a short table. */
static void sweep(Host *h, const Design *d)
{
    const double f = 1000.0;
    double limit_onset = (double)NAN, thd_onset = (double)NAN;
    double thd_onset_vpk = 0.0, thd_onset_power = 0.0;
    const double g = pow(10.0, d->gain / 20.0);
    printf("  %8s %10s %9s %9s %10s %10s\n", "level", "Vpk load", "I peak", "limiting", "THD",
           h->p_diss >= 0 ? "Pdiss" : "");
    for (int db = -30; db <= 12; db += 3) {
        const double amp = pow(10.0, db / 20.0);
        const size_t settle = 4800, n = 9600;
        double *y = malloc(n * sizeof(double));
        double peak_i = 0.0, lim = 0.0, pow_w = 0.0, diss = 0.0;
        lilv_instance_activate(h->inst); /* fresh state per level */
        for (size_t pos = 0; pos < settle + n; pos += BLOCK) {
            for (uint32_t i = 0; i < BLOCK; ++i) {
                h->in[i] = (float)(amp * sin(2.0 * M_PI * f * (double)(pos + i) / RATE));
            }
            run_block(h, BLOCK);
            if (pos >= settle) {
                for (uint32_t i = 0; i < BLOCK; ++i) {
                    y[pos - settle + i] = (double)h->out[i];
                }
                peak_i = fmax(peak_i, (double)h->controls[h->p_peak]);
                lim += (double)h->controls[h->p_lim] / (double)(n / BLOCK);
                pow_w += (double)h->controls[h->p_pow] / (double)(n / BLOCK);
                if (h->p_diss >= 0) {
                    diss += (double)h->controls[h->p_diss] / (double)(n / BLOCK);
                }
            }
        }
        lilv_instance_deactivate(h->inst);
        const double thd = an_thd(y, n, RATE, f, 20);
        /* Contract: output sample = vload / (G x fullscale). */
        const double vpk = an_peak(y, n) * g * d->fullscale;
        printf("  %5d dB %8.3f V %7.1f mA %8.1f %% %8.3f %%", db, vpk, 1e3 * peak_i, lim,
               100.0 * thd);
        if (h->p_diss >= 0) {
            printf(" %8.3f W", diss);
        }
        printf("\n");
        if (isnan(limit_onset) && lim > 0.0) {
            limit_onset = db;
        }
        if (isnan(thd_onset) && thd >= 0.01) {
            thd_onset = db;
            thd_onset_vpk = vpk;
            thd_onset_power = pow_w;
        }
        free(y);
    }
    const int pp = strcmp(d->uri, PUSHPULL) == 0;
    /* The pair multiplies the op-amp's current by beta + 1 (70 by default). */
    const double vlim = d->ilimit * 1e-3 * (pp ? 71.0 : 1.0) * d->load;
    const double vswing = d->rail - 1.5 - (pp ? 0.65 : 0.0);
    printf("  current limit %.0f mA%s x %.0f ohm = %.2f V; swing about %.1f V: %s limits first\n",
           d->ilimit, pp ? " x (beta + 1)" : "", d->load, vlim, vswing,
           vlim < vswing ? "the current limiter" : "the supply rail");
    if (!isnan(limit_onset)) {
        printf("  current limiter first engages at %.0f dBFS\n", limit_onset);
    } else {
        printf("  current limiter never engages in this sweep\n");
    }
    if (!isnan(thd_onset)) {
        printf("  THD reaches 1 %% at %.0f dBFS: %.2f V peak, %.3f W into the load\n", thd_onset,
               thd_onset_vpk, thd_onset_power);
    }
}

/* A short generated phrase: plucked notes with a fast attack and exponential
 * decay, peaking at -3 dBFS. Reports what the load asked of the stage. */
static void phrase(Host *h)
{
    const double notes[] = {110.0, 146.8, 164.8, 98.0, 110.0, 220.0, 196.0, 130.8};
    const size_t per = (size_t)(0.25 * RATE), n = per * 8;
    double peak_i = 0.0, lim = 0.0, pow_w = 0.0;
    lilv_instance_activate(h->inst);
    for (size_t pos = 0; pos < n; pos += BLOCK) {
        for (uint32_t i = 0; i < BLOCK; ++i) {
            const size_t t = pos + i;
            const double tn = (double)(t % per) / RATE;
            const double f = notes[t / per];
            const double env = 0.7 * exp(-tn * 9.0) * (1.0 - exp(-tn * 2000.0));
            h->in[i] = (float)(env * (sin(2.0 * M_PI * f * tn) + 0.3 * sin(4.0 * M_PI * f * tn)));
        }
        run_block(h, BLOCK);
        peak_i = fmax(peak_i, (double)h->controls[h->p_peak]);
        lim += (double)h->controls[h->p_lim] / (double)(n / BLOCK);
        pow_w += (double)h->controls[h->p_pow] / (double)(n / BLOCK);
    }
    lilv_instance_deactivate(h->inst);
    printf("  plucked phrase at -3 dBFS peak: peak load current %.1f mA, limiter engaged %.1f %% "
           "of the time, mean load power %.1f mW\n",
           1e3 * peak_i, lim, 1e3 * pow_w);
}

int main(int argc, char **argv)
{
    LilvWorld *world = lilv_world_new();
    if (argc > 1) {
        /* The bundle directory given, e.g. <build>/outstage.lv2/, and the system's
         * specifications. */
        const size_t len = strlen(argv[1]);
        char *dir = malloc(len + 2);
        if (dir == NULL) {
            return 1;
        }
        snprintf(dir, len + 2, "%s%s", argv[1], len == 0 || argv[1][len - 1] != '/' ? "/" : "");
        lilv_world_load_specifications(world);
        LilvNode *bundle = lilv_new_file_uri(world, NULL, dir);
        lilv_world_load_bundle(world, bundle);
        lilv_node_free(bundle);
        free(dir);
    } else {
        lilv_world_load_all(world); /* honours LV2_PATH */
    }
    printf("outstage preview: the plugins through lilv at %.0f Hz\n\n", RATE);
    for (size_t k = 0; k < sizeof(designs) / sizeof(designs[0]); ++k) {
        const Design *d = &designs[k];
        LilvNode *uri = lilv_new_uri(world, d->uri);
        const LilvPlugin *plug = lilv_plugins_get_by_uri(lilv_world_get_all_plugins(world), uri);
        lilv_node_free(uri);
        if (!plug) {
            fprintf(stderr,
                    "outstage-preview: plugin %s not found; give the bundle directory "
                    "(<build>/outstage.lv2) as the argument or set LV2_PATH\n",
                    d->uri);
            return 1;
        }
        Host h;
        memset(&h, 0, sizeof(h));
        h.n_ports = lilv_plugin_get_num_ports(plug);
        h.controls = calloc(h.n_ports, sizeof(float));
        float *mins = calloc(h.n_ports, sizeof(float)), *maxs = calloc(h.n_ports, sizeof(float));
        float *defs = calloc(h.n_ports, sizeof(float));
        lilv_plugin_get_port_ranges_float(plug, mins, maxs, defs);
        h.inst = lilv_plugin_instantiate(plug, RATE, NULL);
        if (!h.inst || !h.controls || !mins || !maxs || !defs) {
            fprintf(stderr, "outstage-preview: cannot instantiate %s\n", d->uri);
            free(h.controls);
            free(mins);
            free(maxs);
            free(defs);
            return 1;
        }
        for (uint32_t i = 0; i < h.n_ports; ++i) {
            h.controls[i] = isnan(defs[i]) ? 0.0f : defs[i];
        }
        h.p_in = port_index(plug, world, "in");
        h.p_out = port_index(plug, world, "out");
        h.p_peak = port_index(plug, world, "peak_current");
        h.p_lim = port_index(plug, world, "limiting");
        h.p_pow = port_index(plug, world, "load_power");
        h.p_lat = port_index(plug, world, "latency");
        h.p_diss = port_index(plug, world, "dissipation");
        for (uint32_t i = 0; i < h.n_ports; ++i) {
            if ((int)i == h.p_in) {
                lilv_instance_connect_port(h.inst, i, h.in);
            } else if ((int)i == h.p_out) {
                lilv_instance_connect_port(h.inst, i, h.out);
            } else {
                lilv_instance_connect_port(h.inst, i, &h.controls[i]);
            }
        }
        set(&h, plug, world, "rail", (float)d->rail);
        set(&h, plug, world, "load", (float)d->load);
        set(&h, plug, world, "gain", (float)d->gain);
        set(&h, plug, world, "ilimit", (float)d->ilimit);
        set(&h, plug, world, "fullscale", (float)d->fullscale);
        set(&h, plug, world, "bias", (float)d->bias);
        set(&h, plug, world, "loop", (float)d->loop);
        printf("%s (%s)\n", d->name, lilv_node_as_string(lilv_plugin_get_name(plug)));
        sweep(&h, d);
        phrase(&h);
        printf("  latency %.0f frames\n\n", (double)h.controls[h.p_lat]);
        lilv_instance_free(h.inst);
        free(h.controls);
        free(mins);
        free(maxs);
        free(defs);
    }
    lilv_world_free(world);
    return 0;
}
