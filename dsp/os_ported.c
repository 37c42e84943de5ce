/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_ported.h"

#include <stdlib.h>
#include <string.h>

/* Upper bound on ports per stage; the table has at most 25. */
#define MAX_PORTS 64

struct OsPorted {
    OsStage *stage;
    uint32_t n_ports;
    uint32_t audio_in, audio_out;
    OsPortType type[MAX_PORTS];
    int id[MAX_PORTS]; /* OsParam or OsMeter */
    float *port[MAX_PORTS];
};

OsPorted *os_ported_new(OsStageKind kind, double rate)
{
    const uint32_t n = os_port_count(kind);
    if (n == 0 || n > MAX_PORTS) {
        return NULL;
    }
    OsPorted *p = calloc(1, sizeof(*p));
    if (p == NULL) {
        return NULL;
    }
    p->stage = os_stage_new(kind, rate, NULL);
    p->n_ports = n;
    p->audio_in = p->audio_out = MAX_PORTS;
    for (uint32_t i = 0; i < n; ++i) {
        const OsPortInfo *info = os_port_get(kind, i);
        p->type[i] = info->type;
        p->id[i] = info->id;
        if (info->type == OS_PORT_AUDIO_IN && p->audio_in == MAX_PORTS) {
            p->audio_in = i;
        } else if (info->type == OS_PORT_AUDIO_OUT && p->audio_out == MAX_PORTS) {
            p->audio_out = i;
        }
    }
    if (p->stage == NULL || p->audio_in == MAX_PORTS || p->audio_out == MAX_PORTS) {
        os_ported_free(p);
        return NULL;
    }
    return p;
}

void os_ported_free(OsPorted *p)
{
    if (p) {
        os_stage_free(p->stage);
        free(p);
    }
}

void os_ported_connect(OsPorted *p, uint32_t index, float *data)
{
    if (index < p->n_ports) {
        p->port[index] = data;
    }
}

/* Hand every connected control input to the stage (it clamps and ramps). */
static void read_controls(OsPorted *p)
{
    for (uint32_t i = 0; i < p->n_ports; ++i) {
        if (p->type[i] == OS_PORT_CONTROL_IN && p->port[i] != NULL) {
            os_stage_set(p->stage, (OsParam)p->id[i], *p->port[i]);
        }
    }
}

void os_ported_activate(OsPorted *p)
{
    /* Start at the host's settings, not at the defaults: the reset jumps every
     * ramp to its target, so the first block does not glide for 20 ms. */
    read_controls(p);
    os_stage_reset(p->stage);
}

static float meter_value(const OsPorted *p, const OsMeters *m, int id)
{
    switch ((OsMeter)id) {
    case OS_M_PEAK_CURRENT:
        return (float)m->peak_current;
    case OS_M_LIMITING:
        return (float)m->limiting;
    case OS_M_LOAD_POWER:
        return (float)m->load_power;
    case OS_M_DISSIPATION:
        return (float)m->dissipation;
    case OS_M_LATENCY:
        return (float)os_stage_latency(p->stage);
    case OS_M_COUNT:
        break;
    }
    return 0.0f;
}

void os_ported_run(OsPorted *p, uint32_t n)
{
    read_controls(p);
    const float *in = p->port[p->audio_in];
    float *out = p->port[p->audio_out];
    if (out != NULL) {
        if (in == NULL) {
            /* An unconnected input is silence; the stage may work in place. */
            memset(out, 0, n * sizeof(float));
            in = out;
        }
        os_stage_process(p->stage, in, out, n);
    }
    OsMeters m;
    os_stage_meters(p->stage, &m);
    for (uint32_t i = 0; i < p->n_ports; ++i) {
        if (p->type[i] == OS_PORT_CONTROL_OUT && p->port[i] != NULL) {
            *p->port[i] = meter_value(p, &m, p->id[i]);
        }
    }
}
