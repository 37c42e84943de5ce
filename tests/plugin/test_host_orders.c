/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What hosts do to a plugin, through both APIs (LV2 loaded by lilv from the
 * build directory's bundle, LADSPA through its descriptor) and for both
 * stages. The references are the APIs' own rules and the plugin's promises:
 *
 *  - block sizes 1 to 8192, odd ones, in-place buffers and run(0) between
 *    blocks give, bit for bit, the output of one run per stretch between
 *    control changes: the DSP works frame by frame, controls are read once per
 *    run() and ramp per frame (dsp/include/os_ported.h), and the contract
 *    makes the command line's stream, rendered in its own blocks, equal to
 *    the LV2 plugin's; a host splits its blocks at automation events;
 *  - activate after deactivate gives the output of a new instance (LV2 core,
 *    lv2.h, and ladspa.h on activate(): "the plugin instance must reset all
 *    state information dependent on the history of the plugin instance");
 *  - ports may be connected after activate() (both headers: "connect_port()
 *    may be called before or after activate()"): control values connected
 *    late act as values changed at the first run(); a control port pointed
 *    at another location between runs reads the new location; unconnected
 *    ports are tolerated (house style: connect_port stores pointers and
 *    tolerates NULL) and an unconnected input is silence;
 *  - every sample rate from 8 kHz to 384 kHz at the lowest and highest
 *    oversampling gives finite output, the same for any block size; rates
 *    outside the library's 8 kHz .. 768 kHz are refused (NULL), not crashed on;
 *  - eight threads running LV2 instances at once each give what one instance
 *    alone gives (LV2 core, "Threading Rules": the audio functions of
 *    different instances may run concurrently); the library itself is
 *    checked the same way in tests/dsp/test_threads.c.
 *
 * OS_TEST_SHORT=1 (the valgrind setup) runs the same checks on less material:
 * block sizes 1, 127, 8192 and the irregular pattern, five of the fourteen
 * rates, shorter runs.
 *
 * Usage: test_host_orders LV2_BUNDLE_DIR LADSPA_SO   (LV2_PATH set by meson) */

#include "contract.h"

#include <ladspa.h>
#include <lilv/lilv.h>

#include <dlfcn.h>
#include <float.h>
#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#define MAX_PORTS 32
#define RATE 48000.0

static const char *lv2_bundle;
static const char *ladspa_path;
static LilvWorld *world;
static void *ladspa_lib;
static LADSPA_Descriptor_Function ladspa_fn;
static int short_mode;

enum { API_LV2 = 0, API_LADSPA = 1, N_APIS = 2 };
static const char *const api_names[N_APIS] = {"LV2", "LADSPA"};

/* ---- one instance behind either API ---- */

typedef struct {
    int api;
    const ContractStage *c;
    LilvInstance *lv2;
    const LADSPA_Descriptor *ld;
    LADSPA_Handle lh;
    float ctl[MAX_PORTS];
} Plug;

static const LilvPlugin *lv2_plugin(const char *uri)
{
    LilvNode *u = lilv_new_uri(world, uri);
    const LilvPlugin *p = lilv_plugins_get_by_uri(lilv_world_get_all_plugins(world), u);
    lilv_node_free(u);
    return p;
}

static const LADSPA_Descriptor *ladspa_find(const char *label)
{
    const LADSPA_Descriptor *d;
    for (unsigned long i = 0; (d = ladspa_fn(i)) != NULL; ++i) {
        if (strcmp(d->Label, label) == 0) {
            return d;
        }
    }
    return NULL;
}

/* Instantiate without connecting or activating; 0 if the plugin refused. */
static int plug_new(Plug *p, int api, unsigned stage, double rate)
{
    memset(p, 0, sizeof(*p));
    p->api = api;
    p->c = &contract_stages[stage];
    for (uint32_t i = 0; i < p->c->n_ports; ++i) {
        const ContractPort *cp = &p->c->ports[i];
        p->ctl[i] = (cp->flags & C_IN) && !(cp->flags & C_AUDIO) ? cp->def : NAN;
    }
    if (api == API_LV2) {
        const LilvPlugin *lp = lv2_plugin(p->c->uri);
        assert_non_null(lp);
        p->lv2 = lilv_plugin_instantiate(lp, rate, NULL);
        return p->lv2 != NULL;
    }
    p->ld = ladspa_find(p->c->ladspa_label);
    assert_non_null(p->ld);
    p->lh = p->ld->instantiate(p->ld, (unsigned long)rate);
    return p->lh != NULL;
}

static void plug_connect(Plug *p, uint32_t port, float *data)
{
    if (p->api == API_LV2) {
        lilv_instance_connect_port(p->lv2, port, data);
    } else {
        p->ld->connect_port(p->lh, port, data);
    }
}

static void plug_connect_controls(Plug *p)
{
    for (uint32_t i = 0; i < p->c->n_ports; ++i) {
        if (!(p->c->ports[i].flags & C_AUDIO)) {
            plug_connect(p, i, &p->ctl[i]);
        }
    }
}

static void plug_activate(Plug *p)
{
    if (p->api == API_LV2) {
        lilv_instance_activate(p->lv2);
    } else if (p->ld->activate) {
        p->ld->activate(p->lh);
    }
}

static void plug_deactivate(Plug *p)
{
    if (p->api == API_LV2) {
        lilv_instance_deactivate(p->lv2);
    } else if (p->ld->deactivate) {
        p->ld->deactivate(p->lh);
    }
}

static void plug_run(Plug *p, uint32_t n)
{
    if (p->api == API_LV2) {
        lilv_instance_run(p->lv2, n);
    } else {
        p->ld->run(p->lh, n);
    }
}

static void plug_free(Plug *p)
{
    if (p->api == API_LV2) {
        lilv_instance_free(p->lv2);
    } else {
        p->ld->cleanup(p->lh);
    }
}

static uint32_t port_of(const Plug *p, const char *symbol)
{
    const int i = contract_find(p->c, symbol);
    if (i < 0) {
        fail_msg("no port %s", symbol);
    }
    return (uint32_t)i;
}

static void plug_set(Plug *p, const char *symbol, float v)
{
    p->ctl[port_of(p, symbol)] = v;
}

/* Instantiate at @p rate with the controls connected at their defaults, then
 * @p settings ("symbol", value pairs, NULL-terminated) set, then activate. */
typedef struct {
    const char *symbol;
    float value;
} Set;

static void plug_open(Plug *p, int api, unsigned stage, double rate, const Set *settings)
{
    assert_true(plug_new(p, api, stage, rate));
    plug_connect_controls(p);
    for (int i = 0; settings && settings[i].symbol; ++i) {
        if (contract_find(p->c, settings[i].symbol) >= 0) {
            plug_set(p, settings[i].symbol, settings[i].value);
        }
    }
    plug_activate(p);
}

static void plug_close(Plug *p)
{
    plug_deactivate(p);
    plug_free(p);
}

/* Run in->out (may be the same) in one call. */
static void plug_process(Plug *p, const float *in, float *out, uint32_t n)
{
    plug_connect(p, port_of(p, "in"), (float *)(uintptr_t)in);
    plug_connect(p, port_of(p, "out"), out);
    plug_run(p, n);
}

/* ---- material ---- */

static unsigned next_rand(unsigned *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes' LCG */
    return *s >> 8;
}

/* A loud sine that clips the op-amp stage into its default load (two fifths),
 * a noise burst (one fifth) and a quiet stretch (the push-pull stage's dead
 * zone). */
static void make_material(float *x, size_t n, double rate)
{
    unsigned seed = 5u;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / rate;
        const size_t part = 5 * i / n;
        double v;
        if (part < 2) {
            v = 0.9 * sin(2.0 * M_PI * 997.0 * t);
        } else if (part == 2) {
            v = 0.8 * ((double)next_rand(&seed) / 16777216.0 * 2.0 - 1.0);
        } else {
            v = 0.02 * sin(2.0 * M_PI * 211.0 * t);
        }
        x[i] = (float)v;
    }
}

static size_t count_differ(const float *a, const float *b, size_t n)
{
    size_t d = 0;
    for (size_t i = 0; i < n; ++i) {
        d += memcmp(&a[i], &b[i], sizeof(float)) != 0;
    }
    return d;
}

static void assert_finite(const float *x, size_t n)
{
    for (size_t i = 0; i < n; ++i) {
        if (!isfinite(x[i])) {
            fail_msg("sample %zu is %g", i, (double)x[i]);
        }
    }
}

static int available(unsigned stage)
{
    return lv2_plugin(contract_stages[stage].uri) != NULL &&
           ladspa_find(contract_stages[stage].ladspa_label) != NULL;
}

/* ---- block sizes ---- */

/* A host splits its blocks at automation events: drive changes at e1 (a
 * ramp), oversample at e2 (the filters restart). */
typedef struct {
    size_t e1, e2, n;
} Events;

static void apply_event(Plug *p, size_t at, const Events *ev)
{
    if (at == ev->e1) {
        plug_set(p, "drive", 12.0f);
    } else if (at == ev->e2) {
        plug_set(p, "oversample", 2.0f);
    }
}

/* Run the material from @p x into @p y in blocks of @p block (0: irregular
 * sizes 0 .. 8192 from a fixed sequence), split at the events, in place when
 * @p in_place, with run(0) at each stretch's start. */
static void run_in_blocks(Plug *p, const float *x, float *y, const Events *ev, uint32_t block,
                          int in_place)
{
    const size_t stops[] = {ev->e1, ev->e2, ev->n};
    unsigned seed = 99u;
    size_t pos = 0;
    if (in_place) {
        memcpy(y, x, ev->n * sizeof(float));
    }
    for (int s = 0; s < 3; ++s) {
        apply_event(p, pos, ev);
        plug_process(p, in_place ? y + pos : x + pos, y + pos, 0);
        while (pos < stops[s]) {
            size_t len = block ? block : next_rand(&seed) % 8193u;
            len = len < stops[s] - pos ? len : stops[s] - pos;
            plug_process(p, in_place ? y + pos : x + pos, y + pos, (uint32_t)len);
            pos += len;
        }
    }
}

static const Set loaded[] = {{"load", 8.0f}, {"drive", 3.0f}, {NULL, 0.0f}};

static void test_block_sizes(void **state)
{
    (void)state;
    static const uint32_t all_sizes[] = {1,    2,    3,    17,   64,   127,  128, 441,
                                         1000, 1024, 4095, 4096, 8191, 8192, 0};
    static const uint32_t short_sizes[] = {1, 127, 8192, 0};
    const uint32_t *sizes = short_mode ? short_sizes : all_sizes;
    const size_t n_sizes = short_mode ? sizeof(short_sizes) / sizeof(short_sizes[0])
                                      : sizeof(all_sizes) / sizeof(all_sizes[0]);
    /* The first stretch holds one whole block of 8192. */
    const Events ev = {8192 + 300, 8192 + 2300, 8192 + 4000};
    float *x = malloc(ev.n * sizeof(float)), *ref = malloc(ev.n * sizeof(float));
    float *y = malloc(ev.n * sizeof(float));
    assert_non_null(x && ref && y);
    make_material(x, ev.n, RATE);
    for (unsigned stage = 0; stage < CONTRACT_N_STAGES; ++stage) {
        if (!available(stage)) {
            continue;
        }
        for (int api = 0; api < N_APIS; ++api) {
            Plug p;
            plug_open(&p, api, stage, RATE, loaded);
            const size_t stops[] = {ev.e1, ev.e2, ev.n};
            size_t pos = 0;
            for (int s = 0; s < 3; ++s) {
                apply_event(&p, pos, &ev);
                plug_process(&p, x + pos, ref + pos, (uint32_t)(stops[s] - pos));
                pos = stops[s];
            }
            const float latency = p.ctl[port_of(&p, "latency")];
            plug_close(&p);
            assert_finite(ref, ev.n);
            size_t worst = 0;
            for (size_t k = 0; k < n_sizes; ++k) {
                plug_open(&p, api, stage, RATE, loaded);
                run_in_blocks(&p, x, y, &ev, sizes[k], (int)(k % 2));
                const size_t d = count_differ(y, ref, ev.n);
                if (d) {
                    print_message("%s %s, blocks of %u%s: %zu of %zu samples differ\n",
                                  api_names[api], p.c->ladspa_label, sizes[k],
                                  k % 2 ? " in place" : "", d, ev.n);
                }
                worst = d > worst ? d : worst;
                assert_true(p.ctl[port_of(&p, "latency")] == latency);
                plug_close(&p);
            }
            print_message("%-6s %-17s: %zu block patterns (1 .. 8192, irregular, in place "
                          "and not, run(0) between): largest number of samples differing "
                          "from one run per stretch %zu of %zu\n",
                          api_names[api], contract_stages[stage].ladspa_label, n_sizes, worst,
                          ev.n);
            assert_int_equal(worst, 0);
        }
    }
    free(x);
    free(ref);
    free(y);
}

/* ---- activate / deactivate ---- */

#define BLOCK 256

static void run_blocks(Plug *p, const float *x, float *y, size_t n)
{
    for (size_t pos = 0; pos < n; pos += BLOCK) {
        plug_process(p, x + pos, y + pos, (uint32_t)(n - pos < BLOCK ? n - pos : BLOCK));
    }
}

/* The meters a fresh instance wrote must be the ones this one wrote. */
static void assert_same_outputs(const Plug *a, const Plug *b)
{
    for (uint32_t i = 0; i < a->c->n_ports; ++i) {
        const ContractPort *cp = &a->c->ports[i];
        if (!(cp->flags & (C_IN | C_AUDIO))) {
            if (memcmp(&a->ctl[i], &b->ctl[i], sizeof(float)) != 0) {
                fail_msg("%s: %g after reactivation, %g from a new instance", cp->symbol,
                         (double)a->ctl[i], (double)b->ctl[i]);
            }
        }
    }
}

/* Compare one activation's run of @p x with a new instance's, with the same
 * control values. */
static void check_like_new(Plug *a, const float *x, float *y, float *z, size_t n, int cycle)
{
    run_blocks(a, x, y, n);
    Plug f;
    assert_true(plug_new(&f, a->api, (unsigned)(a->c - contract_stages), RATE));
    memcpy(f.ctl, a->ctl, sizeof(f.ctl));
    plug_connect_controls(&f);
    plug_activate(&f);
    run_blocks(&f, x, z, n);
    const size_t d = count_differ(y, z, n);
    print_message("%-6s %-17s activation %d: %zu of %zu samples differ from a new instance\n",
                  api_names[a->api], a->c->ladspa_label, cycle, d, n);
    assert_int_equal(d, 0);
    assert_same_outputs(a, &f);
    plug_close(&f);
}

static void test_activation_cycles(void **state)
{
    (void)state;
    const size_t n = short_mode ? 1200 : 9600;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    float *z = malloc(n * sizeof(float));
    assert_non_null(x && y && z);
    make_material(x, n, RATE);
    for (unsigned stage = 0; stage < CONTRACT_N_STAGES; ++stage) {
        if (!available(stage)) {
            continue;
        }
        for (int api = 0; api < N_APIS; ++api) {
            Plug a;
            plug_open(&a, api, stage, RATE, loaded);
            check_like_new(&a, x, y, z, n, 1);
            plug_deactivate(&a);
            /* new settings while inactive, then a new activation */
            plug_set(&a, "drive", 9.0f);
            plug_set(&a, "oversample", 8.0f);
            plug_set(&a, "rail", 9.0f);
            plug_activate(&a);
            check_like_new(&a, x, y, z, n, 2);
            /* a stretch of silence left in the state, run(0), an activation
             * with no run at all, and again */
            plug_process(&a, z, y, 0);
            plug_deactivate(&a);
            plug_activate(&a);
            plug_deactivate(&a);
            plug_activate(&a);
            check_like_new(&a, x, y, z, n, 3);
            plug_close(&a);
            /* instantiate and clean up without ever activating */
            Plug b;
            assert_true(plug_new(&b, api, stage, RATE));
            plug_free(&b);
        }
    }
    free(x);
    free(y);
    free(z);
}

/* ---- ports connected late, moved, or not at all ---- */

static const Set host_values[] = {{"drive", 6.0f}, {"load", 12.0f},      {"oversample", 8.0f},
                                  {"rail", 9.0f},  {"bias", 0.6f},       {"loop", 0.0f},
                                  {"gain", 12.0f}, {"fullscale", 0.75f}, {NULL, 0.0f}};

static void set_all(Plug *p, const Set *s)
{
    for (int i = 0; s[i].symbol; ++i) {
        if (contract_find(p->c, s[i].symbol) >= 0) {
            plug_set(p, s[i].symbol, s[i].value);
        }
    }
}

static void test_ports_late_and_moved(void **state)
{
    (void)state;
    const size_t n = short_mode ? 1200 : 9600;
    float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
    float *z = malloc(n * sizeof(float)), *zero = calloc(n, sizeof(float));
    assert_non_null(x && y && z && zero);
    make_material(x, n, RATE);
    for (unsigned stage = 0; stage < CONTRACT_N_STAGES; ++stage) {
        if (!available(stage)) {
            continue;
        }
        for (int api = 0; api < N_APIS; ++api) {
            /* Late: activate with nothing connected, then connect the host's
             * values. Reference: connected at the defaults before activate,
             * the same values set just before the first run. */
            Plug late, ref;
            assert_true(plug_new(&late, api, stage, RATE));
            plug_activate(&late);
            set_all(&late, host_values);
            plug_connect_controls(&late);
            run_blocks(&late, x, y, n);
            plug_open(&ref, api, stage, RATE, NULL);
            set_all(&ref, host_values);
            run_blocks(&ref, x, z, n);
            size_t d = count_differ(y, z, n);
            print_message("%-6s %-17s: ports connected after activate: %zu of %zu samples "
                          "differ from values changed at the first run\n",
                          api_names[api], late.c->ladspa_label, d, n);
            assert_int_equal(d, 0);
            plug_close(&late);
            plug_close(&ref);

            /* Moved: after some blocks the drive port points at another
             * float; the reference changes the value in place at that point. */
            Plug moved;
            plug_open(&moved, api, stage, RATE, loaded);
            plug_open(&ref, api, stage, RATE, loaded);
            float other = 9.0f;
            for (size_t pos = 0; pos < n; pos += BLOCK) {
                const uint32_t len = (uint32_t)(n - pos < BLOCK ? n - pos : BLOCK);
                if (pos == 4 * BLOCK) {
                    plug_connect(&moved, port_of(&moved, "drive"), &other);
                    plug_set(&moved, "drive", -20.0f); /* the old location, no longer read */
                    plug_set(&ref, "drive", 9.0f);
                }
                plug_process(&moved, x + pos, y + pos, len);
                plug_process(&ref, x + pos, z + pos, len);
            }
            d = count_differ(y, z, n);
            print_message("%-6s %-17s: control port moved between runs: %zu samples differ\n",
                          api_names[api], moved.c->ladspa_label, d);
            assert_int_equal(d, 0);
            plug_close(&moved);
            plug_close(&ref);

            /* Unconnected: the input is silence; no output or no meters is
             * no crash, and connecting them again resumes. */
            Plug un;
            plug_open(&un, api, stage, RATE, loaded);
            plug_open(&ref, api, stage, RATE, loaded);
            plug_connect(&un, port_of(&un, "in"), NULL);
            plug_connect(&un, port_of(&un, "out"), y);
            plug_run(&un, (uint32_t)n);
            plug_process(&ref, zero, z, (uint32_t)n);
            d = count_differ(y, z, n);
            print_message("%-6s %-17s: unconnected input: %zu samples differ from silence\n",
                          api_names[api], un.c->ladspa_label, d);
            assert_int_equal(d, 0);
            plug_connect(&un, port_of(&un, "out"), NULL);
            plug_connect(&un, port_of(&un, "in"), x);
            plug_run(&un, BLOCK);
            for (uint32_t i = 0; i < un.c->n_ports; ++i) {
                if (!(un.c->ports[i].flags & C_AUDIO)) {
                    plug_connect(&un, i, NULL);
                }
            }
            plug_process(&un, x, y, (uint32_t)n);
            assert_finite(y, n);
            plug_connect_controls(&un);
            plug_process(&un, x, y, (uint32_t)n);
            assert_finite(y, n);
            for (uint32_t i = 0; i < un.c->n_ports; ++i) {
                if (!(un.c->ports[i].flags & (C_IN | C_AUDIO))) {
                    assert_true(isfinite(un.ctl[i]));
                }
            }
            plug_close(&un);
            plug_close(&ref);
        }
    }
    free(x);
    free(y);
    free(z);
    free(zero);
}

/* ---- sample rates ---- */

static void test_sample_rates(void **state)
{
    (void)state;
    static const double rates[] = {8000.0,   11025.0,  16000.0,  22050.0, 32000.0,
                                   44100.0,  48000.0,  64000.0,  88200.0, 96000.0,
                                   176400.0, 192000.0, 352800.0, 384000.0};
    static const float factors[] = {1.0f, 16.0f};
    /* short: the ends of the range and the common rates between */
    static const double short_rates[] = {8000.0, 44100.0, 96000.0, 192000.0, 384000.0};
    const double *use = short_mode ? short_rates : rates;
    const size_t n_rates = short_mode ? sizeof(short_rates) / sizeof(short_rates[0])
                                      : sizeof(rates) / sizeof(rates[0]);
    for (size_t r = 0; r < n_rates; ++r) {
        /* 20 ms of material (5 ms when short), at least a few blocks */
        const size_t n =
            (size_t)fmax(short_mode ? 300.0 : 1000.0, (short_mode ? 0.005 : 0.02) * use[r]);
        float *x = malloc(n * sizeof(float)), *y = malloc(n * sizeof(float));
        float *z = malloc(n * sizeof(float));
        assert_non_null(x && y && z);
        make_material(x, n, use[r]);
        for (unsigned stage = 0; stage < CONTRACT_N_STAGES; ++stage) {
            if (!available(stage)) {
                continue;
            }
            for (int api = 0; api < N_APIS; ++api) {
                for (size_t f = 0; f < sizeof(factors) / sizeof(factors[0]); ++f) {
                    const Set s[] = {{"load", 8.0f}, {"oversample", factors[f]}, {NULL, 0.0f}};
                    Plug a, b;
                    plug_open(&a, api, stage, use[r], s);
                    plug_open(&b, api, stage, use[r], s);
                    plug_process(&a, x, y, (uint32_t)n);
                    memcpy(z, x, n * sizeof(float));
                    for (size_t pos = 0; pos < n; pos += 97) {
                        const uint32_t len = (uint32_t)(n - pos < 97 ? n - pos : 97);
                        plug_process(&b, z + pos, z + pos, len);
                    }
                    assert_finite(y, n);
                    const size_t d = count_differ(y, z, n);
                    if (d) {
                        print_message("%s %s at %g Hz x%g: %zu of %zu samples differ between "
                                      "one block and blocks of 97 in place\n",
                                      api_names[api], a.c->ladspa_label, use[r], (double)factors[f],
                                      d, n);
                    }
                    assert_int_equal(d, 0);
                    for (uint32_t i = 0; i < a.c->n_ports; ++i) {
                        if (!(a.c->ports[i].flags & (C_IN | C_AUDIO))) {
                            assert_true(isfinite(a.ctl[i]));
                        }
                    }
                    plug_close(&a);
                    plug_close(&b);
                }
            }
        }
        free(x);
        free(y);
        free(z);
    }
    print_message("%zu rates from 8 to 384 kHz, x1 and x16, both stages, LV2 and LADSPA: "
                  "finite, one block equal to blocks of 97 in place\n",
                  n_rates);
    /* Outside the library's range the plugin refuses to instantiate. */
    static const double refused[] = {7999.0, 768001.0, 1.0};
    for (size_t r = 0; r < sizeof(refused) / sizeof(refused[0]); ++r) {
        for (unsigned stage = 0; stage < CONTRACT_N_STAGES; ++stage) {
            for (int api = 0; api < N_APIS; ++api) {
                if (available(stage)) {
                    Plug p;
                    assert_false(plug_new(&p, api, stage, refused[r]));
                }
            }
        }
    }
}

/* ---- threads ---- */

#define N_THREADS 8

typedef struct {
    Plug p;
    const float *x;
    float *y;
    size_t n;
    pthread_barrier_t *start;
} Worker;

static void *worker(void *arg)
{
    Worker *w = arg;
    pthread_barrier_wait(w->start);
    run_blocks(&w->p, w->x, w->y, w->n);
    return NULL;
}

static const Set thread_settings[N_THREADS / 2][3] = {
    {{NULL, 0.0f}},
    {{"load", 8.0f}, {"oversample", 16.0f}, {NULL, 0.0f}},
    {{"drive", 12.0f}, {"oversample", 1.0f}, {NULL, 0.0f}},
    {{"bias", 1.2f}, {"slew", 0.1f}, {NULL, 0.0f}},
};

static void test_lv2_threads(void **state)
{
    (void)state;
    const size_t n = short_mode ? 2400 : 24000;
    float *x = malloc(n * sizeof(float));
    assert_non_null(x);
    make_material(x, n, RATE);
    float *ref[N_THREADS];
    Worker w[N_THREADS];
    pthread_t tid[N_THREADS];
    pthread_barrier_t start;
    assert_int_equal(pthread_barrier_init(&start, NULL, N_THREADS), 0);
    /* Instantiated by the host's main thread (lilv's world is not for
     * concurrent use), run from eight threads at once. */
    for (int t = 0; t < N_THREADS; ++t) {
        const unsigned stage = (unsigned)t % CONTRACT_N_STAGES;
        const Set *s = thread_settings[t / 2];
        ref[t] = malloc(n * sizeof(float));
        w[t].y = calloc(n, sizeof(float));
        assert_non_null(ref[t] && w[t].y);
        Plug alone;
        plug_open(&alone, API_LV2, stage, RATE, s);
        run_blocks(&alone, x, ref[t], n);
        plug_close(&alone);
        plug_open(&w[t].p, API_LV2, stage, RATE, s);
        w[t].x = x;
        w[t].n = n;
        w[t].start = &start;
    }
    for (int t = 0; t < N_THREADS; ++t) {
        assert_int_equal(pthread_create(&tid[t], NULL, worker, &w[t]), 0);
    }
    size_t differ = 0;
    for (int t = 0; t < N_THREADS; ++t) {
        assert_int_equal(pthread_join(tid[t], NULL), 0);
        differ += count_differ(w[t].y, ref[t], n);
        plug_close(&w[t].p);
        free(w[t].y);
        free(ref[t]);
    }
    pthread_barrier_destroy(&start);
    print_message("%d LV2 instances (both stages) in %d threads at once, %zu frames each: %zu "
                  "samples differ from one instance alone\n",
                  N_THREADS, N_THREADS, n, differ);
    assert_int_equal(differ, 0);
    free(x);
}

static int group_setup(void **state)
{
    (void)state;
    world = lilv_world_new();
    if (world == NULL) {
        return -1;
    }
    lilv_world_load_all(world);
    /* the build tree's bundle, not an installed copy */
    const LilvPlugin *p = lv2_plugin(contract_stages[0].uri);
    if (p == NULL) {
        fprintf(stderr, "%s not found on LV2_PATH\n", contract_stages[0].uri);
        return -1;
    }
    char *path = lilv_file_uri_parse(lilv_node_as_uri(lilv_plugin_get_bundle_uri(p)), NULL);
    char want[PATH_MAX], got[PATH_MAX];
    const int same = realpath(lv2_bundle, want) && realpath(path, got) && strcmp(want, got) == 0;
    lilv_free(path);
    if (!same) {
        fprintf(stderr, "the LV2 bundle found is not %s\n", lv2_bundle);
        return -1;
    }
    ladspa_lib = dlopen(ladspa_path, RTLD_NOW | RTLD_LOCAL);
    if (ladspa_lib == NULL) {
        fprintf(stderr, "dlopen %s: %s\n", ladspa_path, dlerror());
        return -1;
    }
    ladspa_fn = (LADSPA_Descriptor_Function)(uintptr_t)dlsym(ladspa_lib, "ladspa_descriptor");
    return ladspa_fn ? 0 : -1;
}

static int group_teardown(void **state)
{
    (void)state;
    lilv_world_free(world);
    if (ladspa_lib) {
        dlclose(ladspa_lib);
    }
    return 0;
}

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: %s LV2_BUNDLE_DIR LADSPA_SO\n", argv[0]);
        return 2;
    }
    lv2_bundle = argv[1];
    ladspa_path = argv[2];
    short_mode = getenv("OS_TEST_SHORT") != NULL;
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_block_sizes),          cmocka_unit_test(test_activation_cycles),
        cmocka_unit_test(test_ports_late_and_moved), cmocka_unit_test(test_sample_rates),
        cmocka_unit_test(test_lv2_threads),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
