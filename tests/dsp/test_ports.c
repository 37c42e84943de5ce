/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The port table against the interface contract (../shared/interface.md):
 * order, symbols, ranges, defaults and units, typed in here from the contract's
 * tables independently of dsp/os_ports.c. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <string.h>

#include "outstage.h"

typedef struct {
    const char *symbol;
    float min, max, def;
    const char *unit;
} Expect;

/* Contract: "Control inputs, common to both (in this order)". */
static const Expect common[] = {
    {"enable", 0, 1, 1, ""},       {"fullscale", 0.01f, 20, 1, "V"},
    {"drive", -24, 36, 0, "dB"},   {"gain", 0, 40, 6, "dB"},
    {"rail", 1.5f, 60, 12, "V"},   {"headroom", 0, 5, 1.5f, "V"},
    {"ilimit", 1, 200, 25, "mA"},  {"load", 1, 100000, -1, "ohm"},
    {"gbw", 0.1f, 100, 1, "MHz"},  {"slew", 0.1f, 100, 0.5f, "V/us"},
    {"oversample", 1, 16, 4, "x"}, {"listen", 0, 1, 0, ""},
    {"trim", -24, 24, 0, "dB"},
};

/* Contract: "Control inputs of pushpull only (after the common ones, in this order)". */
static const Expect pushpull_only[] = {
    {"beta", 10, 500, 70, ""},          {"vbe", 0.4f, 1.0f, 0.65f, "V"}, {"bias", 0, 2, 0, "V"},
    {"emitter_r", 0, 10, 0.22f, "ohm"}, {"loop", 0, 1, 1, ""},
};

/* Contract: "Control inputs added for real loads and supplies (after those
 * above, in this order)", both stages: the loudspeaker's rows, the first five
 * of that table (the others follow when they exist). */
static const Expect speaker[] = {
    {"load_model", 0, 1, 0, ""},        {"speaker_le", 0, 5, 0.3f, "mH"},
    {"speaker_fs", 10, 5000, 80, "Hz"}, {"speaker_qms", 0.5f, 30, 4, ""},
    {"speaker_qes", 0.1f, 5, 0.5f, ""},
};

/* The SI unit of each port unit (SI prefixes, BIPM SI Brochure, 9th ed.,
 * 2019): what the circuits are given. dB ports become ratios 10^(dB/20). */
static const struct {
    const char *unit;
    OsSiKind si;
    double scale;
} si_units[] = {
    {"", OS_SI_SCALE, 1.0},     {"V", OS_SI_SCALE, 1.0},   {"ohm", OS_SI_SCALE, 1.0},
    {"x", OS_SI_SCALE, 1.0},    {"mA", OS_SI_SCALE, 1e-3}, {"MHz", OS_SI_SCALE, 1e6},
    {"V/us", OS_SI_SCALE, 1e6}, {"dB", OS_SI_DB, 1.0},     {"mH", OS_SI_SCALE, 1e-3},
    {"Hz", OS_SI_SCALE, 1.0},
};

/* A control's conversion to SI units and its smoothing follow from its unit
 * and its kind: the contract's "logarithmic" controls glide on a log scale,
 * enable and listen crossfade, the oversampling factor restarts the filters,
 * the feedback point and the load model switch at once, every other control
 * glides linearly. */
static void check_conversion(const OsPortInfo *p)
{
    int found = 0;
    for (size_t i = 0; i < sizeof(si_units) / sizeof(si_units[0]); ++i) {
        if (strcmp(si_units[i].unit, p->unit) == 0) {
            found = 1;
            assert_int_equal(p->si, si_units[i].si);
            if (p->si == OS_SI_SCALE) {
                assert_true(p->si_scale == si_units[i].scale);
            }
        }
    }
    assert_true(found);
    OsSmooth want = (p->flags & OS_PF_LOGARITHMIC) ? OS_SMOOTH_LOG : OS_SMOOTH_LINEAR;
    if (p->id == OS_P_ENABLE || p->id == OS_P_LISTEN) {
        want = OS_SMOOTH_FADE;
    } else if (p->id == OS_P_OVERSAMPLE) {
        want = OS_SMOOTH_RESTART;
    } else if (p->id == OS_P_LOOP || p->id == OS_P_LOAD_MODEL) {
        want = OS_SMOOTH_JUMP;
    }
    assert_int_equal(p->smooth, want);
}

static void check_control(OsStageKind k, uint32_t idx, const Expect *e, float load_def)
{
    const OsPortInfo *p = os_port_get(k, idx);
    assert_non_null(p);
    assert_string_equal(p->symbol, e->symbol);
    assert_int_equal(p->type, OS_PORT_CONTROL_IN);
    assert_true(p->min == e->min && p->max == e->max);
    assert_true(p->def == (e->def < 0 ? load_def : e->def));
    assert_string_equal(p->unit, e->unit);
    assert_ptr_equal(os_port_for_param(k, (OsParam)p->id), p);
    check_conversion(p);
}

static void check_stage(OsStageKind k, float load_def, const char *const *outputs, size_t nout)
{
    uint32_t i = 0;
    assert_string_equal(os_port_get(k, i)->symbol, "in");
    assert_int_equal(os_port_get(k, i++)->type, OS_PORT_AUDIO_IN);
    assert_string_equal(os_port_get(k, i)->symbol, "out");
    assert_int_equal(os_port_get(k, i++)->type, OS_PORT_AUDIO_OUT);
    for (size_t c = 0; c < sizeof(common) / sizeof(common[0]); ++c) {
        check_control(k, i++, &common[c], load_def);
    }
    if (k == OS_STAGE_PUSHPULL) {
        for (size_t c = 0; c < sizeof(pushpull_only) / sizeof(pushpull_only[0]); ++c) {
            check_control(k, i++, &pushpull_only[c], load_def);
        }
    }
    for (size_t c = 0; c < sizeof(speaker) / sizeof(speaker[0]); ++c) {
        check_control(k, i++, &speaker[c], load_def);
    }
    for (size_t o = 0; o < nout; ++o) {
        const OsPortInfo *p = os_port_get(k, i++);
        assert_non_null(p);
        assert_string_equal(p->symbol, outputs[o]);
        assert_int_equal(p->type, OS_PORT_CONTROL_OUT);
    }
    assert_int_equal(os_port_count(k), i);
    assert_int_equal(os_port_find(k, "latency"), (int)i - 1);
}

static void opamp_ports(void **state)
{
    (void)state;
    const char *const outs[] = {"peak_current", "limiting", "load_power", "latency"};
    check_stage(OS_STAGE_OPAMP, 32.0f, outs, 4);
    assert_string_equal(os_stage_info(OS_STAGE_OPAMP)->uri, "urn:outstage:opamp");
    assert_string_equal(os_stage_info(OS_STAGE_OPAMP)->label, "outstage_opamp");
    assert_string_equal(os_stage_info(OS_STAGE_OPAMP)->name, "Op-amp output stage");
}

static void pushpull_ports(void **state)
{
    (void)state;
    const char *const outs[] = {"peak_current", "limiting", "load_power", "dissipation", "latency"};
    check_stage(OS_STAGE_PUSHPULL, 8.0f, outs, 5);
    assert_string_equal(os_stage_info(OS_STAGE_PUSHPULL)->uri, "urn:outstage:pushpull");
    assert_string_equal(os_stage_info(OS_STAGE_PUSHPULL)->label, "outstage_pushpull");
    assert_string_equal(os_stage_info(OS_STAGE_PUSHPULL)->name, "Push-pull follower stage");
}

/* Setters clamp to the range and ignore NaN (contract: every control clamped). */
static void setters_clamp(void **state)
{
    (void)state;
    OsStage *s = os_stage_new(OS_STAGE_OPAMP, 48000.0, NULL);
    assert_non_null(s);
    for (uint32_t i = 0; i < os_port_count(OS_STAGE_OPAMP); ++i) {
        const OsPortInfo *p = os_port_get(OS_STAGE_OPAMP, i);
        if (p->type != OS_PORT_CONTROL_IN) {
            continue;
        }
        assert_true(os_stage_get(s, (OsParam)p->id) == p->def);
        os_stage_set(s, (OsParam)p->id, p->max * 10.0f + 100.0f);
        assert_true(os_stage_get(s, (OsParam)p->id) == p->max);
        os_stage_set(s, (OsParam)p->id, -1e9f);
        assert_true(os_stage_get(s, (OsParam)p->id) == p->min);
        os_stage_set(s, (OsParam)p->id, NAN);
        assert_true(os_stage_get(s, (OsParam)p->id) == p->min);
    }
    os_stage_set(s, OS_P_OVERSAMPLE, 5.0f);
    assert_true(os_stage_get(s, OS_P_OVERSAMPLE) == 4.0f);
    assert_int_equal(os_stage_set(s, OS_P_BETA, 100.0f), OS_ERR_ARGUMENT);
    assert_null(os_stage_new(OS_STAGE_OPAMP, 1000.0, NULL));
    os_stage_free(s);
    os_stage_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(opamp_ports),
        cmocka_unit_test(pushpull_ports),
        cmocka_unit_test(setters_clamp),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
