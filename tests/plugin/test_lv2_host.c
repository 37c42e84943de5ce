/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The LV2 plugin as a host sees it: loaded through lilv from the build
 * directory's bundle, checked port by port against the interface contract
 * (tests/plugin/contract.h, typed from /work/shared/interface.md), then run.
 *
 * Usage: test_lv2_host BUNDLE_DIR   (with LV2_PATH including the build dir) */

#include "analysis.h"
#include "contract.h"

#include <lilv/lilv.h>

#include <limits.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#define LV2_CORE "http://lv2plug.in/ns/lv2core#"
#define LV2_UNITS "http://lv2plug.in/ns/extensions/units#"
#define LV2_PPROP "http://lv2plug.in/ns/ext/port-props#"

#define RATE 48000.0
#define MAX_PORTS 32

static const char *bundle_dir;
static LilvWorld *world;

static LilvNode *uri(const char *s)
{
    return lilv_new_uri(world, s);
}

static const ContractStage *opamp_contract(void)
{
    return &contract_stages[0];
}

static const LilvPlugin *find_plugin(const char *plugin_uri)
{
    LilvNode *u = uri(plugin_uri);
    const LilvPlugin *p = lilv_plugins_get_by_uri(lilv_world_get_all_plugins(world), u);
    lilv_node_free(u);
    return p;
}

static int group_setup(void **state)
{
    (void)state;
    world = lilv_world_new();
    if (world == NULL) {
        return -1;
    }
    lilv_world_load_all(world);
    return 0;
}

static int group_teardown(void **state)
{
    (void)state;
    lilv_world_free(world);
    return 0;
}

/* The plugin found must come from the build tree, not an installed copy. */
static void test_bundle_is_build_tree(void **state)
{
    (void)state;
    const LilvPlugin *p = find_plugin(opamp_contract()->uri);
    assert_non_null(p);
    char *path = lilv_file_uri_parse(lilv_node_as_uri(lilv_plugin_get_bundle_uri(p)), NULL);
    assert_non_null(path);
    char want[PATH_MAX], got[PATH_MAX];
    assert_non_null(realpath(bundle_dir, want));
    assert_non_null(realpath(path, got));
    assert_string_equal(got, want);
    lilv_free(path);
}

/* Contract, "Names": URI and name; no required feature (so no inPlaceBroken);
 * hardRTCapable offered (LV2 core: run() is real-time safe). */
static void check_identity(const ContractStage *c)
{
    const LilvPlugin *p = find_plugin(c->uri);
    assert_non_null(p);
    assert_true(lilv_plugin_verify(p));

    LilvNode *name = lilv_plugin_get_name(p);
    assert_non_null(name);
    assert_string_equal(lilv_node_as_string(name), c->name);
    lilv_node_free(name);

    LilvNodes *req = lilv_plugin_get_required_features(p);
    assert_int_equal(lilv_nodes_size(req), 0);
    lilv_nodes_free(req);

    LilvNode *rt = uri(LV2_CORE "hardRTCapable");
    LilvNode *broken = uri(LV2_CORE "inPlaceBroken");
    LilvNodes *opt = lilv_plugin_get_optional_features(p);
    assert_true(lilv_nodes_contains(opt, rt));
    assert_false(lilv_nodes_contains(opt, broken));
    lilv_nodes_free(opt);
    assert_false(lilv_plugin_has_feature(p, broken));
    lilv_node_free(rt);
    lilv_node_free(broken);
}

/* The unit a host would show for a contract unit: the LV2 units extension's
 * standard instance where it has one (units.ttl: db, pc, hz, mhz, frame), else the
 * units:symbol of a custom unit, typeset as in SI (ohm as the Greek capital
 * omega, microsecond with the micro sign, the oversampling factor as a
 * multiplication sign). */
static void expected_unit(const char *contract_unit, const char **std_uri, const char **symbol)
{
    static const struct {
        const char *contract, *std, *sym;
    } map[] = {
        {"dB", LV2_UNITS "db", NULL},
        {"%", LV2_UNITS "pc", NULL},
        {"MHz", LV2_UNITS "mhz", NULL},
        {"frames", LV2_UNITS "frame", NULL},
        {"V", NULL, "V"},
        {"mA", NULL, "mA"},
        {"mH", NULL, "mH"},
        {"Hz", LV2_UNITS "hz", NULL},
        {"A", NULL, "A"},
        {"W", NULL, "W"},
        {"ohm", NULL, "\xce\xa9"},
        {"V/us", NULL, "V/\xc2\xb5s"},
        {"x", NULL, "\xc3\x97"},
    };
    for (size_t i = 0; i < sizeof(map) / sizeof(map[0]); ++i) {
        if (strcmp(map[i].contract, contract_unit) == 0) {
            *std_uri = map[i].std;
            *symbol = map[i].sym;
            return;
        }
    }
    fail_msg("contract unit %s has no expectation", contract_unit);
}

static void check_port(const LilvPlugin *p, const ContractPort *c, uint32_t index)
{
    LilvNode *sym = lilv_new_string(world, c->symbol);
    const LilvPort *port = lilv_plugin_get_port_by_symbol(p, sym);
    lilv_node_free(sym);
    if (port == NULL) {
        fail_msg("port %s missing", c->symbol);
    }
    assert_int_equal(lilv_port_get_index(p, port), index);

    LilvNode *name = lilv_port_get_name(p, port);
    assert_non_null(name);
    assert_true(strlen(lilv_node_as_string(name)) > 0);
    lilv_node_free(name);

    LilvNode *in = uri(LV2_CORE "InputPort"), *out = uri(LV2_CORE "OutputPort");
    LilvNode *audio = uri(LV2_CORE "AudioPort"), *control = uri(LV2_CORE "ControlPort");
    assert_true(lilv_port_is_a(p, port, (c->flags & C_IN) ? in : out));
    assert_true(lilv_port_is_a(p, port, (c->flags & C_AUDIO) ? audio : control));
    lilv_node_free(in);
    lilv_node_free(out);
    lilv_node_free(audio);
    lilv_node_free(control);

    if ((c->flags & C_IN) && !(c->flags & C_AUDIO)) {
        LilvNode *def = NULL, *min = NULL, *max = NULL;
        lilv_port_get_range(p, port, &def, &min, &max);
        if (def == NULL || min == NULL || max == NULL) {
            fail_msg("port %s lacks a range", c->symbol);
        }
        /* Contract tables: min, max, default, exactly as single floats. */
        if (lilv_node_as_float(min) != c->min || lilv_node_as_float(max) != c->max ||
            lilv_node_as_float(def) != c->def) {
            fail_msg("port %s range %g..%g default %g, contract %g..%g default %g", c->symbol,
                     (double)lilv_node_as_float(min), (double)lilv_node_as_float(max),
                     (double)lilv_node_as_float(def), (double)c->min, (double)c->max,
                     (double)c->def);
        }
        lilv_node_free(def);
        lilv_node_free(min);
        lilv_node_free(max);
    }

    /* Contract notes column: logarithmic, enumeration, toggle. */
    LilvNode *log_prop = uri(LV2_PPROP "logarithmic");
    LilvNode *enum_prop = uri(LV2_CORE "enumeration");
    LilvNode *toggled = uri(LV2_CORE "toggled");
    if (!(c->flags & C_NO_NOTES)) {
        assert_int_equal(lilv_port_has_property(p, port, log_prop), (c->flags & C_LOG) != 0);
        assert_int_equal(lilv_port_has_property(p, port, enum_prop), (c->flags & C_ENUM) != 0);
        assert_int_equal(lilv_port_has_property(p, port, toggled), (c->flags & C_TOGGLE) != 0);
    }
    lilv_node_free(log_prop);
    lilv_node_free(enum_prop);
    lilv_node_free(toggled);

    LilvNode *unit_pred = uri(LV2_UNITS "unit");
    LilvNode *unit = lilv_port_get(p, port, unit_pred);
    if (c->unit[0] == '\0') {
        if (unit != NULL) {
            fail_msg("port %s: unit %s, contract has none", c->symbol, lilv_node_as_string(unit));
        }
    } else {
        const char *std = NULL, *symbol = NULL;
        expected_unit(c->unit, &std, &symbol);
        if (unit == NULL) {
            fail_msg("port %s: no units:unit, contract %s", c->symbol, c->unit);
        }
        if (std) {
            assert_string_equal(lilv_node_as_uri(unit), std);
        } else {
            LilvNode *sym_pred = uri(LV2_UNITS "symbol");
            LilvNode *s = lilv_world_get(world, unit, sym_pred, NULL);
            if (s == NULL) {
                fail_msg("port %s: custom unit without units:symbol", c->symbol);
            }
            assert_string_equal(lilv_node_as_string(s), symbol);
            lilv_node_free(s);
            lilv_node_free(sym_pred);
        }
    }
    lilv_node_free(unit);
    lilv_node_free(unit_pred);
}

/* Contract: "one audio input in, one audio output out, then the control ports
 * below, in this order", then the outputs; symbols, ranges, defaults, units. */
static void check_ports(const ContractStage *c)
{
    const LilvPlugin *p = find_plugin(c->uri);
    assert_non_null(p);
    assert_int_equal(lilv_plugin_get_num_ports(p), c->n_ports);
    for (uint32_t i = 0; i < c->n_ports; ++i) {
        check_port(p, &c->ports[i], i);
    }

    /* Contract: oversample is an "enumeration 1, 2, 4, 8, 16". */
    LilvNode *sym = lilv_new_string(world, "oversample");
    const LilvPort *port = lilv_plugin_get_port_by_symbol(p, sym);
    lilv_node_free(sym);
    LilvScalePoints *sps = lilv_port_get_scale_points(p, port);
    assert_non_null(sps);
    int seen = 0;
    LILV_FOREACH(scale_points, it, sps)
    {
        const float v =
            lilv_node_as_float(lilv_scale_point_get_value(lilv_scale_points_get(sps, it)));
        const int f = (int)v;
        assert_true((float)f == v && f >= 1 && f <= 16 && (f & (f - 1)) == 0);
        seen |= f;
    }
    assert_int_equal(seen, 1 | 2 | 4 | 8 | 16);
    assert_int_equal(lilv_scale_points_size(sps), 5);
    lilv_scale_points_free(sps);
}

/* Contract: enable carries lv2:designation lv2:enabled, latency lv2:latency;
 * LV2 core also asks for lv2:reportsLatency on a latency port. */
static void check_designations(const ContractStage *c)
{
    const LilvPlugin *p = find_plugin(c->uri);
    assert_non_null(p);
    LilvNode *in = uri(LV2_CORE "InputPort"), *out = uri(LV2_CORE "OutputPort");
    LilvNode *enabled = uri(LV2_CORE "enabled"), *latency = uri(LV2_CORE "latency");
    LilvNode *reports = uri(LV2_CORE "reportsLatency");

    const LilvPort *en = lilv_plugin_get_port_by_designation(p, in, enabled);
    assert_non_null(en);
    assert_string_equal(lilv_node_as_string(lilv_port_get_symbol(p, en)), "enable");

    const LilvPort *lat = lilv_plugin_get_port_by_designation(p, out, latency);
    assert_non_null(lat);
    assert_string_equal(lilv_node_as_string(lilv_port_get_symbol(p, lat)), "latency");
    assert_true(lilv_port_has_property(p, lat, reports));
    assert_true(lilv_plugin_has_latency(p));
    assert_int_equal(lilv_plugin_get_latency_port_index(p), contract_find(c, "latency"));

    lilv_node_free(in);
    lilv_node_free(out);
    lilv_node_free(enabled);
    lilv_node_free(latency);
    lilv_node_free(reports);
}

/* The contract stage's kind in the library, by its LADSPA label. */
static OsStageKind kind_of(const ContractStage *c)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (strcmp(os_stage_info((OsStageKind)k)->label, c->ladspa_label) == 0) {
            return (OsStageKind)k;
        }
    }
    fail_msg("contract stage %s unknown to the library", c->uri);
    return OS_STAGE_COUNT;
}

/* Every stage the library offers is in the bundle (its TTL and manifest), and
 * no other: a stage made available without a manifest entry fails here. */
static void test_stage_set(void **state)
{
    (void)state;
    for (unsigned s = 0; s < CONTRACT_N_STAGES; ++s) {
        const ContractStage *c = &contract_stages[s];
        const int want = os_stage_available(kind_of(c)) != 0;
        print_message("%s: library %s, bundle %s\n", c->uri, want ? "has it" : "lacks it",
                      find_plugin(c->uri) ? "has it" : "lacks it");
        assert_int_equal(find_plugin(c->uri) != NULL, want);
    }
}

/* The descriptive checks, for every stage the bundle holds. */
static void for_each_available(void (*check)(const ContractStage *))
{
    for (unsigned s = 0; s < CONTRACT_N_STAGES; ++s) {
        if (os_stage_available(kind_of(&contract_stages[s]))) {
            check(&contract_stages[s]);
        }
    }
}

static void test_identity(void **state)
{
    (void)state;
    for_each_available(check_identity);
}

static void test_ports_match_contract(void **state)
{
    (void)state;
    for_each_available(check_ports);
}

static void test_designations(void **state)
{
    (void)state;
    for_each_available(check_designations);
}

/* ---- running the plugin ---- */

typedef struct {
    LilvInstance *inst;
    const ContractStage *c;
    float ctl[MAX_PORTS];
} Host;

static uint32_t idx(const Host *h, const char *symbol)
{
    const int i = contract_find(h->c, symbol);
    assert_true(i >= 0);
    return (uint32_t)i;
}

static void host_set(Host *h, const char *symbol, float v)
{
    h->ctl[idx(h, symbol)] = v;
}

static float host_get(const Host *h, const char *symbol)
{
    return h->ctl[idx(h, symbol)];
}

/* Instantiate at RATE with every control at its contract default; meters
 * start as NaN so a test can tell whether run() wrote them. */
static void host_open(Host *h)
{
    h->c = opamp_contract();
    const LilvPlugin *p = find_plugin(h->c->uri);
    assert_non_null(p);
    h->inst = lilv_plugin_instantiate(p, RATE, NULL);
    assert_non_null(h->inst);
    for (uint32_t i = 0; i < h->c->n_ports; ++i) {
        const ContractPort *cp = &h->c->ports[i];
        if (!(cp->flags & C_AUDIO)) {
            h->ctl[i] = (cp->flags & C_IN) ? cp->def : NAN;
            lilv_instance_connect_port(h->inst, i, &h->ctl[i]);
        }
    }
    lilv_instance_activate(h->inst);
}

static void host_close(Host *h)
{
    lilv_instance_deactivate(h->inst);
    lilv_instance_free(h->inst);
}

static void host_run(Host *h, const float *in, float *out, uint32_t n)
{
    lilv_instance_connect_port(h->inst, idx(h, "in"), (void *)(uintptr_t)in);
    lilv_instance_connect_port(h->inst, idx(h, "out"), out);
    lilv_instance_run(h->inst, n);
}

/* Run a whole buffer in blocks of @p block frames. */
static void host_run_blocks(Host *h, const float *in, float *out, size_t n, uint32_t block)
{
    for (size_t i = 0; i < n; i += block) {
        const uint32_t m = (uint32_t)(n - i < block ? n - i : block);
        host_run(h, in + i, out + i, m);
    }
}

static void sine(float *x, size_t n, double amp, double f0)
{
    for (size_t i = 0; i < n; ++i) {
        x[i] = (float)(amp * sin(2.0 * M_PI * f0 * (double)i / RATE));
    }
}

#define SETTLE 12000 /* 0.25 s: well past the 20 ms parameter ramps */
#define SPAN 4800    /* 100 periods of 1 kHz at 48 kHz */
#define TOTAL (SETTLE + SPAN)

/* Gain (dB) of the 1 kHz fundamental from input to output over the last SPAN
 * frames, and the residual out[n] - g in[n - latency] relative to the input
 * (dB, rms), with g the ideal linear gain of the contract. */
static void measure_gain(const float *in, const float *out, uint32_t lat, double ideal_db,
                         double *gain_db, double *resid_db)
{
    static double xi[SPAN], xo[SPAN], r[SPAN];
    const double g = pow(10.0, ideal_db / 20.0);
    for (size_t i = 0; i < SPAN; ++i) {
        xi[i] = (double)in[SETTLE + i - lat];
        xo[i] = (double)out[SETTLE + i];
        r[i] = xo[i] - g * xi[i];
    }
    *gain_db = 20.0 * log10(an_harmonic_amp(xo, SPAN, RATE, 1000.0, 1) /
                            an_harmonic_amp(xi, SPAN, RATE, 1000.0, 1));
    *resid_db = 20.0 * log10(an_rms(r, SPAN) / (g * an_rms(xi, SPAN)));
}

/* Contract, "Levels in and out": below clipping the plugin is transparent
 * apart from drive and trim. The tolerances come from the circuit: at 1 kHz an
 * op-amp of 1 MHz GBW has an open-loop gain of about -j1000, so at G = 2 the
 * loop gain is T = -j500 and the closed-loop gain G T / (1 + T) is short by
 * only 1/(2 |T|^2) = 2e-6 in magnitude but lags by 1/|T| = 2 mrad (the
 * feedback error factor T / (1 + T), as in Franco, "Design with Operational
 * Amplifiers and Analog Integrated Circuits", ch. 6). The half-band filters of
 * 100 dB stopband ripple by about 1e-5 in the passband (Kaiser's design
 * relation, delta = 10^(-A/20)). So we allow 0.01 dB of gain error and a
 * residual (after the reported latency) of -40 dB: five times the 2 mrad
 * (-54 dB) the phase lag alone would leave. */
static void test_transparent(void **state)
{
    (void)state;
    static const struct {
        double amp, drive, trim, ideal_db;
    } cases[] = {
        {0.1, 0.0, 0.0, 0.0},      /* 0.2 V on 32 ohm: 6 mA of a 25 mA limit */
        {0.025, 12.0, -12.0, 0.0}, /* the same stage voltage via drive, undone by trim */
        {0.05, 0.0, 6.0, 6.0},     /* trim alone */
        {0.05, 6.0, 0.0, 6.0},     /* drive alone */
    };
    static float in[TOTAL], out[TOTAL];
    for (size_t k = 0; k < sizeof(cases) / sizeof(cases[0]); ++k) {
        Host h;
        host_open(&h);
        host_set(&h, "drive", (float)cases[k].drive);
        host_set(&h, "trim", (float)cases[k].trim);
        sine(in, TOTAL, cases[k].amp, 1000.0);
        host_run_blocks(&h, in, out, TOTAL, 256);
        const uint32_t lat = (uint32_t)host_get(&h, "latency");
        for (size_t i = 0; i < TOTAL; ++i) {
            assert_true(isfinite(out[i]));
        }
        double gain_db, resid_db;
        measure_gain(in, out, lat, cases[k].ideal_db, &gain_db, &resid_db);
        print_message("amp %.3f drive %+.0f trim %+.0f: gain %+.4f dB (ideal %+.1f), "
                      "residual %.1f dB, latency %u\n",
                      cases[k].amp, cases[k].drive, cases[k].trim, gain_db, cases[k].ideal_db,
                      resid_db, lat);
        assert_true(fabs(gain_db - cases[k].ideal_db) < 0.01);
        assert_true(resid_db < -40.0);
        host_close(&h);
    }
}

/* LV2 core, lv2:latency: the reported latency is the plugin's delay in frames.
 * Measured as the position of the largest output sample after a single
 * low-level click (0.01 FS: 20 mV on the load), at every oversampling factor. */
static void test_latency_matches_click(void **state)
{
    (void)state;
    static const float factors[] = {1, 2, 4, 8, 16};
    enum { N = 4096, AT = 300 };
    static float in[N], out[N];
    for (size_t k = 0; k < sizeof(factors) / sizeof(factors[0]); ++k) {
        Host h;
        host_open(&h);
        host_set(&h, "oversample", factors[k]);
        memset(in, 0, sizeof(in));
        host_run_blocks(&h, in, out, N, 512); /* settle on silence */
        in[AT] = 0.01f;
        host_run_blocks(&h, in, out, N, 512);
        size_t arg = 0;
        for (size_t i = 0; i < N; ++i) {
            if (fabsf(out[i]) > fabsf(out[arg])) {
                arg = i;
            }
        }
        const float lat = host_get(&h, "latency");
        print_message("oversample %2.0f: latency port %.0f, click peak at +%zu (%.5f)\n",
                      (double)factors[k], (double)lat, arg - AT, (double)out[arg]);
        assert_true(arg >= AT);
        assert_true(fabsf(out[arg]) > 0.005f); /* the click came through */
        assert_true((float)(arg - AT) == lat);
        host_close(&h);
    }
}

/* LV2 core: run() with sample_count 0 is legal. It must not touch the audio
 * and must still leave the meters defined. */
static void test_run_zero(void **state)
{
    (void)state;
    Host h;
    host_open(&h);
    float in[4] = {0.5f, 0.5f, 0.5f, 0.5f}, out[4] = {7, 7, 7, 7};
    host_run(&h, in, out, 0);
    for (int i = 0; i < 4; ++i) {
        assert_true(out[i] == 7.0f);
    }
    assert_true(isfinite(host_get(&h, "peak_current")));
    assert_true(isfinite(host_get(&h, "latency")));
    host_run(&h, in, out, 4);
    for (int i = 0; i < 4; ++i) {
        assert_true(isfinite(out[i]));
    }
    host_close(&h);
}

/* LV2 core: without lv2:inPlaceBroken a host may connect in and out to the
 * same buffer. Two instances, one in place, one not, fed the same signal and
 * the same control changes, must give identical output. The signal is loud
 * enough to reach the current limiter so the nonlinear path is covered. */
static void test_in_place(void **state)
{
    (void)state;
    enum { N = 24000, B = 300 };
    static float in[N], sep[N], inplace[N];
    Host a, b;
    host_open(&a);
    host_open(&b);
    sine(in, N, 0.8, 997.0);
    memcpy(inplace, in, sizeof(in));
    for (size_t i = 0; i < N; i += B) {
        if (i == N / 2) {
            host_set(&a, "drive", 9.0f);
            host_set(&b, "drive", 9.0f);
        }
        host_run(&a, in + i, sep + i, B);
        host_run(&b, inplace + i, inplace + i, B);
        assert_true(host_get(&a, "peak_current") == host_get(&b, "peak_current"));
    }
    size_t differ = 0;
    for (size_t i = 0; i < N; ++i) {
        differ += sep[i] != inplace[i];
    }
    print_message("in-place vs separate: %zu of %d samples differ\n", differ, N);
    assert_int_equal(differ, 0);
    assert_true(host_get(&a, "limiting") > 0.0f);
    host_close(&a);
    host_close(&b);
}

/* Meters against Ohm's law. Below clipping, load voltage V = a G fullscale
 * (contract, "Levels in and out"), peak current V/R and mean power V^2/(2R)
 * for a sine of peak V into R. The block holds whole periods (480 frames = 10
 * periods of 1 kHz) so the mean is exact. Tolerance 1 %: the closed-loop gain
 * error is far smaller (see test_transparent), and at 4x oversampling the
 * sampled peak of a 1 kHz sine is within cos(pi / 192) = 0.99987 of the true
 * peak. */
static void test_meters(void **state)
{
    (void)state;
    enum { B = 480, N = 48 * B };
    static float in[N], out[N];
    Host h;
    host_open(&h);
    const double a = 0.1, g = pow(10.0, 6.0 / 20.0), r = 32.0;
    sine(in, N, a, 1000.0);
    host_run_blocks(&h, in, out, N, B);
    const double v = a * g * 1.0;
    const double ipk = (double)host_get(&h, "peak_current"),
                 pw = (double)host_get(&h, "load_power");
    print_message("clean: peak current %.4f mA (Ohm %.4f), load power %.4f mW (%.4f), "
                  "limiting %.2f %%\n",
                  ipk * 1e3, v / r * 1e3, pw * 1e3, v * v / (2 * r) * 1e3,
                  (double)host_get(&h, "limiting"));
    assert_true(fabs(ipk / (v / r) - 1.0) < 0.01);
    assert_true(fabs(pw / (v * v / (2 * r)) - 1.0) < 0.01);
    assert_true(host_get(&h, "limiting") == 0.0f);
    assert_true(host_get(&h, "latency") >= 0.0f);

    /* Driven 2.5x past the 25 mA limit (a sine asking 62 mA): the peak current
     * is held near the limit (contract: "output current limiter with a soft
     * knee"); allow the knee, VT / (0.65 V / 25 mA) = 4 % of the limit. */
    sine(in, N, 1.0, 1000.0);
    host_run_blocks(&h, in, out, N, B);
    const double ipk2 = (double)host_get(&h, "peak_current"),
                 lim = (double)host_get(&h, "limiting");
    print_message("overdriven: peak current %.4f mA (limit 25), limiting %.2f %%\n", ipk2 * 1e3,
                  lim);
    assert_true(fabs(ipk2 / 0.025 - 1.0) < 0.04);
    assert_true(lim > 0.0 && lim < 100.0);
    host_close(&h);
}

/* Contract: enable = 0 passes the input delayed by the reported latency (after
 * a click-free crossfade); listen = 1 outputs the residual, which at a clean
 * level is small next to the signal and at a clipping level is not. */
static void test_bypass_and_listen(void **state)
{
    (void)state;
    static float in[TOTAL], out[TOTAL];
    Host h;
    host_open(&h);
    host_set(&h, "enable", 0.0f);
    sine(in, TOTAL, 0.9, 1000.0);
    host_run_blocks(&h, in, out, TOTAL, 256);
    const uint32_t lat = (uint32_t)host_get(&h, "latency");
    size_t differ = 0;
    for (size_t i = SETTLE; i < TOTAL; ++i) {
        differ += out[i] != in[i - lat];
    }
    assert_int_equal(differ, 0);
    host_close(&h);

    static const double amps[] = {0.1, 1.0};
    double resid[2];
    for (int k = 0; k < 2; ++k) {
        static double r[SPAN];
        host_open(&h);
        host_set(&h, "listen", 1.0f);
        sine(in, TOTAL, amps[k], 1000.0);
        host_run_blocks(&h, in, out, TOTAL, 256);
        for (size_t i = 0; i < SPAN; ++i) {
            r[i] = (double)out[SETTLE + i];
        }
        resid[k] = 20.0 * log10(an_rms(r, SPAN) / (amps[k] / sqrt(2.0)));
        host_close(&h);
    }
    print_message("listen: residual %.1f dB re input at 0.1 FS, %.1f dB at 1.0 FS\n", resid[0],
                  resid[1]);
    assert_true(resid[0] < -40.0); /* as test_transparent */
    assert_true(resid[1] > -20.0); /* 2.5x past the current limit: gross clipping */
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: %s BUNDLE_DIR\n", argv[0]);
        return 2;
    }
    bundle_dir = argv[1];
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_bundle_is_build_tree),
        cmocka_unit_test(test_stage_set),
        cmocka_unit_test(test_identity),
        cmocka_unit_test(test_ports_match_contract),
        cmocka_unit_test(test_designations),
        cmocka_unit_test(test_transparent),
        cmocka_unit_test(test_latency_matches_click),
        cmocka_unit_test(test_run_zero),
        cmocka_unit_test(test_in_place),
        cmocka_unit_test(test_meters),
        cmocka_unit_test(test_bypass_and_listen),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
