/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* --set and --preset against the port table, the contract's single source of
 * symbols and ranges (../shared/interface.md, "Control inputs"): every control
 * input is settable at its ends, nothing outside a range is clamped silently,
 * and each refusal names the symbol and its allowed range. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "settings.h"

static char err[CLI_ERR_LEN];

static int assign(CliSettings *s, const char *sym, double v)
{
    char text[128];
    snprintf(text, sizeof(text), "%s=%.17g", sym, v);
    err[0] = '\0';
    return cli_settings_assign(s, text, err, sizeof(err));
}

static int assign_text(CliSettings *s, const char *text)
{
    err[0] = '\0';
    return cli_settings_assign(s, text, err, sizeof(err));
}

/* One line, naming what is wrong. */
static void assert_message(const char *a, const char *b)
{
    assert_null(strchr(err, '\n'));
    assert_non_null(strstr(err, a));
    if (b) {
        assert_non_null(strstr(err, b));
    }
}

/* Every control input of every stage: min, max and default accepted and kept;
 * beyond either end refused with the symbol and both ends in the message. */
static void every_control_range(void **state)
{
    (void)state;
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        const OsStageKind kind = (OsStageKind)k;
        int checked = 0;
        for (uint32_t i = 0; i < os_port_count(kind); ++i) {
            const OsPortInfo *p = os_port_get(kind, i);
            if (p->type != OS_PORT_CONTROL_IN) {
                continue;
            }
            CliSettings s;
            cli_settings_init(&s, kind);
            assert_true(s.value[p->id] == p->def);
            const float ends[] = {p->min, p->max, p->def};
            for (int e = 0; e < 3; ++e) {
                assert_int_equal(assign(&s, p->symbol, (double)ends[e]), 0);
                assert_true(s.value[p->id] == ends[e]);
            }
            char lo[32], hi[32];
            snprintf(lo, sizeof(lo), "%g", (double)p->min);
            snprintf(hi, sizeof(hi), "%g", (double)p->max);
            const double span = (double)(p->max - p->min);
            assert_int_equal(assign(&s, p->symbol, (double)p->max + 0.01 * span), -1);
            assert_message(p->symbol, hi);
            assert_message(lo, NULL);
            assert_int_equal(assign(&s, p->symbol, (double)p->min - 0.01 * span), -1);
            assert_message(p->symbol, lo);
            assert_true(s.value[p->id] == p->def); /* a refused value changes nothing */
            ++checked;
        }
        printf("%s: %d controls, each refused beyond its range\n", cli_stage_name(kind), checked);
        assert_int_equal(checked, kind == OS_STAGE_OPAMP ? 18 : 23);
    }
}

/* Enumerations take only their listed values (contract: oversample 1, 2, 4,
 * 8, 16; listen and loop 0 or 1). */
static void enumerations(void **state)
{
    (void)state;
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_PUSHPULL);
    assert_int_equal(assign(&s, "oversample", 3.0), -1);
    assert_message("oversample", "1, 2, 4, 8, 16");
    assert_int_equal(assign(&s, "oversample", 8.0), 0);
    assert_int_equal(assign(&s, "loop", 0.5), -1);
    assert_message("loop", NULL);
    assert_int_equal(assign(&s, "listen", 1.0), 0);
    assert_int_equal(assign(&s, "enable", 2.0), -1);
}

static void malformed_and_unknown(void **state)
{
    (void)state;
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_OPAMP);
    const char *bad_number[] = {"rail=",    "rail=abc",   "rail=nan",
                                "rail=inf", "rail=1e999", "rail=12V"};
    for (size_t i = 0; i < sizeof(bad_number) / sizeof(bad_number[0]); ++i) {
        assert_int_equal(assign_text(&s, bad_number[i]), -1);
        assert_message("rail", "1.5 to 60 V");
    }
    assert_int_equal(assign_text(&s, "rail"), -1);
    assert_message("SYMBOL=VALUE", NULL);
    assert_int_equal(assign_text(&s, "=3"), -1);
    assert_int_equal(assign_text(&s, "volume=3"), -1);
    assert_message("volume", "opamp");
    /* A push-pull control on the op-amp stage, a meter, an audio port. */
    assert_int_equal(assign_text(&s, "bias=1"), -1);
    assert_message("bias", "opamp");
    assert_int_equal(assign_text(&s, "latency=0"), -1);
    assert_message("latency", "meter");
    assert_int_equal(assign_text(&s, "peak_current=1"), -1);
    assert_int_equal(assign_text(&s, "in=1"), -1);
    assert_true(s.value[OS_P_RAIL] == 12.0f);
}

/* Presets: every value lies in its port's range (so a preset never depends on
 * clamping), applies to the stages that have it, and a wrong name lists them. */
static void presets(void **state)
{
    (void)state;
    assert_true(cli_preset_count() >= 4);
    for (size_t i = 0; i < cli_preset_count(); ++i) {
        const CliPreset *p = cli_preset_get(i);
        for (int k = 0; k < OS_STAGE_COUNT; ++k) {
            CliSettings s;
            cli_settings_init(&s, (OsStageKind)k);
            assert_int_equal(cli_settings_preset(&s, p->name, err, sizeof(err)), 0);
            for (const CliPresetValue *v = p->set; v->symbol; ++v) {
                const int idx = os_port_find((OsStageKind)k, v->symbol);
                if (idx < 0) {
                    assert_int_equal(k, OS_STAGE_OPAMP); /* only push-pull extras may lack */
                    continue;
                }
                const OsPortInfo *port = os_port_get((OsStageKind)k, (uint32_t)idx);
                assert_true(v->value >= port->min && v->value <= port->max);
                assert_true(s.value[port->id] == v->value);
            }
        }
    }
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_OPAMP);
    assert_int_equal(cli_settings_preset(&s, "loudest", err, sizeof(err)), -1);
    assert_message("loudest", "headphone-desk");
}

/* The stage receives every value (os_stage_get reads the target back) and the
 * sample rate range of outstage.h is enforced with a message. */
static void stage_gets_values(void **state)
{
    (void)state;
    CliSettings s;
    cli_settings_init(&s, OS_STAGE_PUSHPULL);
    assert_int_equal(assign(&s, "rail", 9.0), 0);
    assert_int_equal(assign(&s, "bias", 1.1), 0);
    assert_int_equal(assign(&s, "load", 4.0), 0);
    OsStage *st = cli_stage_new(&s, 48000.0, err, sizeof(err));
    assert_non_null(st);
    assert_true(os_stage_get(st, OS_P_RAIL) == 9.0f);
    assert_true(os_stage_get(st, OS_P_BIAS) == 1.1f);
    assert_true(os_stage_get(st, OS_P_LOAD) == 4.0f);
    os_stage_free(st);
    assert_null(cli_stage_new(&s, 4000.0, err, sizeof(err)));
    assert_message("4000", "8000");
    OsStageKind kind;
    assert_int_equal(cli_stage_parse("opamp", &kind), 0);
    assert_int_equal(kind, OS_STAGE_OPAMP);
    assert_int_equal(cli_stage_parse("pushpull", &kind), 0);
    assert_int_equal(cli_stage_parse("valve", &kind), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(every_control_range),   cmocka_unit_test(enumerations),
        cmocka_unit_test(malformed_and_unknown), cmocka_unit_test(presets),
        cmocka_unit_test(stage_gets_values),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
