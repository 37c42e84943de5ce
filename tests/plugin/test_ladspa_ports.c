/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The LADSPA object as a host sees it: descriptors, labels, ids, port names,
 * order and range hints against the interface contract (contract.h, typed
 * from /work/shared/interface.md) and the port table; and the audio it makes
 * against the DSP library driven directly with the same settings.
 *
 * Usage: test_ladspa_ports PATH/TO/outstage.so */

#include "contract.h"
#include "outstage.h"

#include <ladspa.h>

#include <dlfcn.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

static const char *so_path;
static void *lib;
static LADSPA_Descriptor_Function descriptor_fn;

static int group_setup(void **state)
{
    (void)state;
    lib = dlopen(so_path, RTLD_NOW | RTLD_LOCAL);
    if (lib == NULL) {
        fprintf(stderr, "dlopen %s: %s\n", so_path, dlerror());
        return -1;
    }
    descriptor_fn = (LADSPA_Descriptor_Function)(uintptr_t)dlsym(lib, "ladspa_descriptor");
    return descriptor_fn ? 0 : -1;
}

static int group_teardown(void **state)
{
    (void)state;
    dlclose(lib);
    return 0;
}

static const LADSPA_Descriptor *find(const char *label)
{
    const LADSPA_Descriptor *d;
    for (unsigned long i = 0; (d = descriptor_fn(i)) != NULL; ++i) {
        if (strcmp(d->Label, label) == 0) {
            return d;
        }
    }
    return NULL;
}

static OsStageKind kind_of_label(const char *label)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        if (strcmp(os_stage_info((OsStageKind)k)->label, label) == 0) {
            return (OsStageKind)k;
        }
    }
    return OS_STAGE_COUNT;
}

/* Contract, "Names": one shared object holding a descriptor per stage, with
 * labels outstage_opamp / outstage_pushpull and the given names. Every stage
 * the library offers must be there, and nothing else. */
static void test_descriptors(void **state)
{
    (void)state;
    unsigned long n = 0;
    const LADSPA_Descriptor *d;
    while ((d = descriptor_fn(n)) != NULL) {
        ++n;
        int known = 0;
        for (unsigned s = 0; s < CONTRACT_N_STAGES; ++s) {
            if (strcmp(d->Label, contract_stages[s].ladspa_label) == 0) {
                assert_string_equal(d->Name, contract_stages[s].name);
                known = 1;
            }
        }
        if (!known) {
            fail_msg("descriptor with unknown label %s", d->Label);
        }
        const OsStageKind k = kind_of_label(d->Label);
        assert_true(k < OS_STAGE_COUNT && os_stage_available(k));
        assert_int_equal(d->UniqueID, os_stage_info(k)->ladspa_id);
        /* ladspa.h: hard RT capable, and in-place processing works. */
        assert_true(LADSPA_IS_HARD_RT_CAPABLE(d->Properties));
        assert_false(LADSPA_IS_INPLACE_BROKEN(d->Properties));
    }
    unsigned long available = 0;
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        available += os_stage_available((OsStageKind)k) != 0;
    }
    assert_int_equal(n, available);
    assert_non_null(find("outstage_opamp"));
}

/* The default a host derives from a hint, by the formulas of ladspa.h
 * (LADSPA 1.1, "LADSPA_HINT_DEFAULT_*"), written out here independently of the
 * plugin. */
static double decode_default(const LADSPA_PortRangeHint *h)
{
    const LADSPA_PortRangeHintDescriptor d = h->HintDescriptor;
    const double lo = (double)h->LowerBound, hi = (double)h->UpperBound;
    const int lg = LADSPA_IS_HINT_LOGARITHMIC(d) != 0;
    double v;
    if (LADSPA_IS_HINT_DEFAULT_MINIMUM(d)) {
        v = lo;
    } else if (LADSPA_IS_HINT_DEFAULT_LOW(d)) {
        v = lg ? exp(log(lo) * 0.75 + log(hi) * 0.25) : lo * 0.75 + hi * 0.25;
    } else if (LADSPA_IS_HINT_DEFAULT_MIDDLE(d)) {
        v = lg ? exp(log(lo) * 0.5 + log(hi) * 0.5) : lo * 0.5 + hi * 0.5;
    } else if (LADSPA_IS_HINT_DEFAULT_HIGH(d)) {
        v = lg ? exp(log(lo) * 0.25 + log(hi) * 0.75) : lo * 0.25 + hi * 0.75;
    } else if (LADSPA_IS_HINT_DEFAULT_MAXIMUM(d)) {
        v = hi;
    } else if (LADSPA_IS_HINT_DEFAULT_0(d)) {
        v = 0.0;
    } else if (LADSPA_IS_HINT_DEFAULT_1(d)) {
        v = 1.0;
    } else if (LADSPA_IS_HINT_DEFAULT_100(d)) {
        v = 100.0;
    } else if (LADSPA_IS_HINT_DEFAULT_440(d)) {
        v = 440.0;
    } else {
        return (double)NAN;
    }
    return LADSPA_IS_HINT_INTEGER(d) ? round(v) : v;
}

/* What a LADSPA host ends up with for each opamp control input. LADSPA cannot
 * state an arbitrary default; these are the nearest it can (worked out by hand
 * from the ladspa.h formulas and the contract's ranges; ratio distance for
 * positive values):
 *   gain 6 dB      -> LOW of 0..40        = 10 dB   (candidates 0, 1, 10, 20)
 *   rail 12 V      -> LOW of 1.5..60      = 16.125 V (1.5, 16.1, 30.8)
 *   headroom 1.5 V -> LOW of 0..5         = 1.25 V  (1, 1.25, 2.5)
 *   ilimit 25 mA   -> LOW of 1..200       = 50.75 mA (1, 50.75, 100)
 *   load 32 ohm    -> log LOW of 1..1e5   = 17.78 ohm (1, 17.8, 100, 316)
 *   slew 0.5 V/us  -> log LOW of 0.1..100 = 0.562 V/us (0.1, 0.562, 1)
 *   oversample 4   -> LOW of 1..16 = 4.75, rounded (INTEGER) to 5, which the
 *                     stage snaps to 4 (nearest power of two on a log scale)
 *   speaker_le 0.3 mH -> 1 of 0..5          = 1 mH     (0, 1, 1.25, 2.5)
 *   speaker_fs 80 Hz  -> 100 of log 10..5000 = 100 Hz  (47.3, 100, 224)
 *   speaker_qms 4     -> log MIDDLE of 0.5..30 = 3.873 (1.39, 3.87, 10.8)
 *   speaker_qes 0.5   -> log MIDDLE of 0.1..5  = 0.7071 (0.266, 0.707, 1)
 * and the rest are exactly the contract's defaults. */
static const struct {
    const char *symbol;
    double value;
} ladspa_defaults[] = {
    {"enable", 1.0},       {"fullscale", 1.0},         {"drive", 0.0},
    {"gain", 10.0},        {"rail", 16.125},           {"headroom", 1.25},
    {"ilimit", 50.75},     {"load", 17.7827941},       {"gbw", 1.0},
    {"slew", 0.5623413},   {"oversample", 5.0},        {"listen", 0.0},
    {"trim", 0.0},         {"load_model", 0.0},        {"speaker_le", 1.0},
    {"speaker_fs", 100.0}, {"speaker_qms", 3.8729833}, {"speaker_qes", 0.70710678},
};

static double expected_default(const char *symbol)
{
    for (size_t i = 0; i < sizeof(ladspa_defaults) / sizeof(ladspa_defaults[0]); ++i) {
        if (strcmp(ladspa_defaults[i].symbol, symbol) == 0) {
            return ladspa_defaults[i].value;
        }
    }
    fail_msg("no expected default for %s", symbol);
    return 0.0;
}

/* Contract: "LADSPA uses the same order" as LV2: in, out, the control inputs
 * in the contract's order, then the outputs; the latency output is named
 * "latency" (the LADSPA convention the contract names). Names come from the
 * port table, ranges and scales from the contract. */
static void test_opamp_ports(void **state)
{
    (void)state;
    const ContractStage *c = &contract_stages[0];
    const LADSPA_Descriptor *d = find(c->ladspa_label);
    assert_non_null(d);
    assert_int_equal(d->PortCount, c->n_ports);
    for (unsigned i = 0; i < c->n_ports; ++i) {
        const ContractPort *cp = &c->ports[i];
        const OsPortInfo *tp = os_port_get(OS_STAGE_OPAMP, i);
        const LADSPA_PortDescriptor pd = d->PortDescriptors[i];
        const LADSPA_PortRangeHint *h = &d->PortRangeHints[i];
        const LADSPA_PortRangeHintDescriptor hd = h->HintDescriptor;

        assert_non_null(tp);
        assert_string_equal(tp->symbol, cp->symbol); /* the table keeps the contract's order */
        assert_true(!LADSPA_IS_PORT_INPUT(pd) != !LADSPA_IS_PORT_OUTPUT(pd));
        assert_int_equal(LADSPA_IS_PORT_INPUT(pd) != 0, (cp->flags & C_IN) != 0);
        assert_int_equal(LADSPA_IS_PORT_AUDIO(pd) != 0, (cp->flags & C_AUDIO) != 0);
        assert_int_equal(LADSPA_IS_PORT_CONTROL(pd) != 0, (cp->flags & C_AUDIO) == 0);
        assert_string_equal(d->PortNames[i], (cp->flags & C_LATENCY) ? "latency" : tp->name);

        if (cp->flags & C_AUDIO) {
            continue;
        }
        if (!(cp->flags & C_IN)) {
            /* outputs: a default so that sox (which asks every control port for
             * a value) takes the inputs alone by position */
            assert_true(LADSPA_IS_HINT_HAS_DEFAULT(hd));
            assert_int_equal(LADSPA_IS_HINT_INTEGER(hd) != 0, (cp->flags & C_LATENCY) != 0);
            continue;
        }
        if (cp->flags & C_TOGGLE) {
            /* ladspa.h: TOGGLED goes with no other hint but DEFAULT_0/1. */
            assert_int_equal(hd, LADSPA_HINT_TOGGLED | (cp->def > 0.0f ? LADSPA_HINT_DEFAULT_1
                                                                       : LADSPA_HINT_DEFAULT_0));
            continue;
        }
        assert_true(LADSPA_IS_HINT_BOUNDED_BELOW(hd) && LADSPA_IS_HINT_BOUNDED_ABOVE(hd));
        assert_false(LADSPA_IS_HINT_SAMPLE_RATE(hd));
        assert_false(LADSPA_IS_HINT_TOGGLED(hd));
        assert_true(h->LowerBound == cp->min);
        assert_true(h->UpperBound == cp->max);
        assert_int_equal(LADSPA_IS_HINT_LOGARITHMIC(hd) != 0, (cp->flags & C_LOG) != 0);
        /* the contract's enumerations (oversample 1..16, listen 0/1) are whole numbers */
        assert_int_equal(LADSPA_IS_HINT_INTEGER(hd) != 0, (cp->flags & C_ENUM) != 0);

        const double got = decode_default(h), want = expected_default(cp->symbol);
        print_message("%-10s default: contract %g, LADSPA %g\n", cp->symbol, (double)cp->def, got);
        assert_true(got >= (double)cp->min && got <= (double)cp->max);
        if (fabs(got - want) > 1e-6 * fmax(1.0, fabs(want))) {
            fail_msg("%s: LADSPA default %.9g, expected %.9g", cp->symbol, got, want);
        }
    }
}

/* Hand map from contract symbol to library parameter: the test's own, so that
 * a port wired to the wrong parameter in the wrapper or the table shows. */
static const struct {
    const char *symbol;
    OsParam param;
    float value; /* a setting away from the default, still in range */
} settings[] = {
    {"enable", OS_P_ENABLE, 1.0f},
    {"fullscale", OS_P_FULLSCALE, 2.0f},
    {"drive", OS_P_DRIVE, 3.0f},
    {"gain", OS_P_GAIN, 12.0f},
    {"rail", OS_P_RAIL, 9.0f},
    {"headroom", OS_P_HEADROOM, 1.0f},
    {"ilimit", OS_P_ILIMIT, 40.0f},
    {"load", OS_P_LOAD, 50.0f},
    {"gbw", OS_P_GBW, 3.0f},
    {"slew", OS_P_SLEW, 2.0f},
    {"oversample", OS_P_OVERSAMPLE, 2.0f},
    {"listen", OS_P_LISTEN, 0.0f},
    {"trim", OS_P_TRIM, -2.0f},
};

/* The wrapper holds no physics: for the same settings its output equals the
 * DSP library's, sample for sample, and its latency and meters are the
 * library's. The material clips on the rails and the current limit. */
static void test_same_as_library(void **state)
{
    (void)state;
    enum { N = 9600, B = 160 };
    const ContractStage *c = &contract_stages[0];
    const LADSPA_Descriptor *d = find(c->ladspa_label);
    assert_non_null(d);
    static float in[N], out_plugin[N], out_lib[N];
    float ctl[32] = {0};
    for (size_t i = 0; i < N; ++i) {
        in[i] = (float)(0.9 * sin(2.0 * M_PI * 441.0 * (double)i / 48000.0));
    }

    LADSPA_Handle h = d->instantiate(d, 48000);
    assert_non_null(h);
    OsStatus st;
    OsStage *s = os_stage_new(OS_STAGE_OPAMP, 48000.0, &st);
    assert_non_null(s);
    /* activate() takes the connected controls as the settings without a ramp
     * (os_ported.h); the library gets the same values and a reset. */
    for (size_t k = 0; k < sizeof(settings) / sizeof(settings[0]); ++k) {
        const int port = contract_find(c, settings[k].symbol);
        assert_true(port >= 0);
        ctl[port] = settings[k].value;
        assert_int_equal(os_stage_set(s, settings[k].param, settings[k].value), OS_OK);
    }
    for (unsigned i = 0; i < c->n_ports; ++i) {
        if (!(c->ports[i].flags & C_AUDIO)) {
            d->connect_port(h, i, &ctl[i]);
        }
    }
    d->connect_port(h, (unsigned long)contract_find(c, "in"), in);
    d->connect_port(h, (unsigned long)contract_find(c, "out"), out_plugin);
    if (d->activate) {
        d->activate(h);
    }
    os_stage_reset(s);

    for (size_t i = 0; i < N; i += B) {
        d->connect_port(h, (unsigned long)contract_find(c, "in"), in + i);
        d->connect_port(h, (unsigned long)contract_find(c, "out"), out_plugin + i);
        d->run(h, B);
        os_stage_process(s, in + i, out_lib + i, B);
    }
    size_t differ = 0;
    for (size_t i = 0; i < N; ++i) {
        differ += out_plugin[i] != out_lib[i];
    }
    OsMeters m;
    os_stage_meters(s, &m);
    print_message("LADSPA vs library: %zu of %d samples differ; latency %g vs %u; "
                  "peak current %g vs %g A; limiting %g vs %g %%\n",
                  differ, N, (double)ctl[contract_find(c, "latency")], os_stage_latency(s),
                  (double)ctl[contract_find(c, "peak_current")], m.peak_current,
                  (double)ctl[contract_find(c, "limiting")], m.limiting);
    assert_int_equal(differ, 0);
    assert_true(ctl[contract_find(c, "latency")] == (float)os_stage_latency(s));
    assert_true(ctl[contract_find(c, "peak_current")] == (float)m.peak_current);
    assert_true(ctl[contract_find(c, "limiting")] == (float)m.limiting);
    assert_true(ctl[contract_find(c, "load_power")] == (float)m.load_power);
    assert_true(m.limiting > 0.0); /* the settings do reach the limiter */

    if (d->deactivate) {
        d->deactivate(h);
    }
    d->cleanup(h);
    os_stage_free(s);
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: %s PATH/TO/outstage.so\n", argv[0]);
        return 2;
    }
    so_path = argv[1];
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_descriptors),
        cmocka_unit_test(test_opamp_ports),
        cmocka_unit_test(test_same_as_library),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
