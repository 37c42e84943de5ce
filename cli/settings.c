/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "settings.h"

#include "cli.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Designs of our own. Values a stage does not have (bias, loop on the op-amp
 * stage) are skipped for it. Levels (fullscale, drive, trim) are left to the
 * user. */
static const CliPresetValue headphone_desk[] = {
    {"rail", 12.0f},   {"headroom", 1.5f}, {"load", 32.0f}, {"gain", 6.0f},
    {"ilimit", 25.0f}, {"bias", 0.0f},     {"loop", 1.0f},  {NULL, 0.0f}};
static const CliPresetValue speaker_direct[] = {{"rail", 15.0f}, {"headroom", 1.5f}, {"load", 8.0f},
                                                {"gain", 6.0f},  {"ilimit", 25.0f},  {"bias", 0.0f},
                                                {"loop", 1.0f},  {NULL, 0.0f}};
static const CliPresetValue battery_practice[] = {
    {"rail", 9.0f},    {"headroom", 1.5f}, {"load", 4.0f}, {"gain", 12.0f},
    {"ilimit", 25.0f}, {"bias", 0.0f},     {"loop", 0.0f}, {NULL, 0.0f}};
static const CliPresetValue bench_classab[] = {
    {"rail", 15.0f}, {"headroom", 1.5f},   {"load", 8.0f}, {"gain", 20.0f}, {"ilimit", 25.0f},
    {"bias", 1.1f},  {"emitter_r", 0.22f}, {"loop", 1.0f}, {NULL, 0.0f}};
static const CliPresetValue line_driver[] = {{"rail", 15.0f}, {"headroom", 1.5f}, {"load", 600.0f},
                                             {"gain", 20.0f}, {"ilimit", 25.0f},  {NULL, 0.0f}};

static const CliPreset presets[] = {
    {"headphone-desk",
     "desktop headphone driver: +-12 V into 32 ohm, gain 6 dB, pair (if any) in "
     "class B inside the loop",
     headphone_desk},
    {"speaker-direct", "an 8 ohm speaker straight on the output: +-15 V, gain 6 dB",
     speaker_direct},
    {"battery-practice",
     "battery practice amplifier: +-9 V into 4 ohm, gain 12 dB, pair (if any) "
     "in class B outside the loop",
     battery_practice},
    {"bench-classab",
     "bench amplifier: +-15 V into 8 ohm, gain 20 dB, pair (if any) in class AB "
     "(1.1 V bias) inside the loop",
     bench_classab},
    {"line-driver", "line driver: +-15 V into 600 ohm, gain 20 dB", line_driver},
};

#define N_PRESETS (sizeof(presets) / sizeof(presets[0]))

int cli_stage_parse(const char *name, OsStageKind *kind)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        const OsStageInfo *info = os_stage_info((OsStageKind)k);
        if (info && os_stage_available((OsStageKind)k) && strcmp(info->cli_name, name) == 0) {
            *kind = (OsStageKind)k;
            return 0;
        }
    }
    return -1;
}

const char *cli_stage_name(OsStageKind kind)
{
    const OsStageInfo *info = os_stage_info(kind);
    return info ? info->cli_name : "?";
}

void cli_settings_init(CliSettings *s, OsStageKind kind)
{
    memset(s, 0, sizeof(*s));
    s->kind = kind;
    for (int p = 0; p < OS_P_COUNT; ++p) {
        const OsPortInfo *port = os_port_for_param(kind, (OsParam)p);
        s->value[p] = port ? port->def : 0.0f;
    }
}

int cli_settings_has(const CliSettings *s, OsParam p)
{
    return os_port_for_param(s->kind, p) != NULL;
}

/* The stage's control inputs, comma-separated, for messages. */
static void list_controls(OsStageKind kind, char *buf, size_t len)
{
    size_t used = 0;
    buf[0] = '\0';
    for (uint32_t i = 0; i < os_port_count(kind); ++i) {
        const OsPortInfo *port = os_port_get(kind, i);
        if (port->type != OS_PORT_CONTROL_IN) {
            continue;
        }
        const int w = snprintf(buf + used, len - used, "%s%s", used ? ", " : "", port->symbol);
        if (w < 0 || (size_t)w >= len - used) {
            return;
        }
        used += (size_t)w;
    }
}

/* "1 to 200 mA", or "one of 0, 1 (output, distortion alone)" for an enumeration. */
static void describe_range(const OsPortInfo *port, char *buf, size_t len)
{
    if (port->points && (port->flags & (OS_PF_ENUMERATION | OS_PF_TOGGLE))) {
        size_t used = (size_t)snprintf(buf, len, "one of");
        const OsScalePoint *pt;
        for (pt = port->points; pt->label && used < len; ++pt) {
            used += (size_t)snprintf(buf + used, len - used, "%s %g", pt == port->points ? "" : ",",
                                     (double)pt->value);
        }
        for (pt = port->points; pt->label && used < len; ++pt) {
            used += (size_t)snprintf(buf + used, len - used, "%s%s",
                                     pt == port->points ? " (" : ", ", pt->label);
        }
        if (used < len) {
            snprintf(buf + used, len - used, ")");
        }
        return;
    }
    snprintf(buf, len, "%g to %g%s%s", (double)port->min, (double)port->max,
             port->unit[0] ? " " : "", port->unit);
}

int cli_settings_assign(CliSettings *s, const char *assignment, char *err, size_t len)
{
    const char *eq = strchr(assignment, '=');
    const char *stage = cli_stage_name(s->kind);
    if (eq == NULL || eq == assignment) {
        cli_err(err, len, "--set %s: expected SYMBOL=VALUE", assignment);
        return -1;
    }
    char symbol[64];
    const size_t n = (size_t)(eq - assignment);
    if (n >= sizeof(symbol)) {
        cli_err(err, len, "--set %s: no such control on stage %s", assignment, stage);
        return -1;
    }
    memcpy(symbol, assignment, n);
    symbol[n] = '\0';
    const int index = os_port_find(s->kind, symbol);
    const OsPortInfo *port = index >= 0 ? os_port_get(s->kind, (uint32_t)index) : NULL;
    char list[512];
    list_controls(s->kind, list, sizeof(list));
    if (port == NULL || port->type == OS_PORT_AUDIO_IN || port->type == OS_PORT_AUDIO_OUT) {
        cli_err(err, len, "--set %s: stage %s has no control '%s' (controls: %s)", assignment,
                stage, symbol, list);
        return -1;
    }
    if (port->type == OS_PORT_CONTROL_OUT) {
        cli_err(err, len, "--set %s: '%s' is a meter of stage %s, not a setting (controls: %s)",
                assignment, symbol, stage, list);
        return -1;
    }
    char range[160];
    describe_range(port, range, sizeof(range));
    const char *text = eq + 1;
    double v = 0.0;
    const int parsed = cli_number(text, &v);
    if (parsed == -2) {
        cli_err(err, len, "--set %s: out of range; %s takes %s", assignment, symbol, range);
        return -1;
    }
    if (parsed != 0) {
        cli_err(err, len, "--set %s: '%s' is not a decimal number; %s takes %s", assignment, text,
                symbol, range);
        return -1;
    }
    if (port->points && (port->flags & (OS_PF_ENUMERATION | OS_PF_TOGGLE))) {
        int ok = 0;
        for (const OsScalePoint *pt = port->points; pt->label; ++pt) {
            ok |= v == (double)pt->value;
        }
        if (!ok) {
            cli_err(err, len, "--set %s: %s takes %s", assignment, symbol, range);
            return -1;
        }
    } else if ((float)v < port->min || (float)v > port->max) {
        /* Compared as the float the port holds: "0.1" is the port's 0.1f. */
        cli_err(err, len, "--set %s: out of range; %s takes %s", assignment, symbol, range);
        return -1;
    }
    s->value[port->id] = (float)v;
    return 0;
}

int cli_settings_preset(CliSettings *s, const char *name, char *err, size_t len)
{
    for (size_t i = 0; i < N_PRESETS; ++i) {
        if (strcmp(presets[i].name, name) != 0) {
            continue;
        }
        for (const CliPresetValue *v = presets[i].set; v->symbol; ++v) {
            const int index = os_port_find(s->kind, v->symbol);
            const OsPortInfo *port = index >= 0 ? os_port_get(s->kind, (uint32_t)index) : NULL;
            if (port && port->type == OS_PORT_CONTROL_IN) {
                s->value[port->id] = v->value;
            }
        }
        return 0;
    }
    char list[256];
    size_t used = 0;
    list[0] = '\0';
    for (size_t i = 0; i < N_PRESETS; ++i) {
        used += (size_t)snprintf(list + used, sizeof(list) - used, "%s%s", i ? ", " : "",
                                 presets[i].name);
        if (used >= sizeof(list)) {
            break;
        }
    }
    cli_err(err, len, "--preset %s: no such preset (presets: %s)", name, list);
    return -1;
}

size_t cli_preset_count(void)
{
    return N_PRESETS;
}

const CliPreset *cli_preset_get(size_t i)
{
    return i < N_PRESETS ? &presets[i] : NULL;
}

OsStage *cli_stage_new(const CliSettings *s, double rate, char *err, size_t len)
{
    OsStatus status = OS_OK;
    OsStage *stage = os_stage_new(s->kind, rate, &status);
    if (stage == NULL) {
        if (status == OS_ERR_SAMPLE_RATE) {
            cli_err(err, len,
                    "sample rate %.15g Hz is outside the %.15g to %.15g Hz the stage runs at", rate,
                    OS_RATE_MIN, OS_RATE_MAX);
        } else {
            cli_err(err, len, "cannot create the %s stage: %s", cli_stage_name(s->kind),
                    os_strerror(status));
        }
        return NULL;
    }
    for (int p = 0; p < OS_P_COUNT; ++p) {
        if (cli_settings_has(s, (OsParam)p)) {
            os_stage_set(stage, (OsParam)p, s->value[p]);
        }
    }
    /* Jump to the values: a file starts at its setting, not at a glide from the
     * defaults. The LV2 plugin does the same when a host activates it after
     * setting its controls (see the render test). */
    os_stage_reset(stage);
    return stage;
}

double cli_settings_gain(const CliSettings *s)
{
    return pow(10.0, (double)s->value[OS_P_GAIN] / 20.0);
}

double cli_settings_volts_per_unit(const CliSettings *s)
{
    return (double)s->value[OS_P_FULLSCALE] * pow(10.0, (double)s->value[OS_P_DRIVE] / 20.0);
}

double cli_settings_expected_limit(const CliSettings *s, int *current_limited)
{
    return os_stage_expected_limit(s->kind, s->value, current_limited);
}

void cli_conflict_text(const CliSettings *s, const OsConflict *c, char *buf, size_t len)
{
    char names[128];
    size_t used = 0;
    names[0] = '\0';
    char list[64];
    snprintf(list, sizeof(list), "%s", c->controls);
    char *save = NULL;
    for (char *t = strtok_r(list, " ", &save); t; t = strtok_r(NULL, " ", &save)) {
        const int index = os_port_find(s->kind, t);
        const OsPortInfo *port = index >= 0 ? os_port_get(s->kind, (uint32_t)index) : NULL;
        if (port && used < sizeof(names)) {
            const int n = snprintf(names + used, sizeof(names) - used, "%s%s=%g", used ? " " : "",
                                   t, (double)s->value[port->id]);
            used += n > 0 ? (size_t)n : 0;
        }
    }
    snprintf(buf, len, "%s ask for %s of %.3g %s; the stage uses %.3g %s: %s", names, c->quantity,
             c->asked, c->unit, c->used, c->unit, c->why);
}
