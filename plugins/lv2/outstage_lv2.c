/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* LV2 wrapper: maps the ports of the table in dsp/os_ports.c onto the stage
 * API of outstage.h. It stores port pointers and forwards values; the physics
 * lives in dsp/. One descriptor per stage that os_stage_available() reports,
 * in OsStageKind order. */

#include "outstage.h"

#include <lv2/core/lv2.h>

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

/* Upper bound on ports per stage; stages with more are not offered. */
#define MAX_PORTS 64

typedef struct {
    OsStage *stage;
    uint32_t n_ports;
    uint32_t audio_in, audio_out; /* port indices */
    OsPortType type[MAX_PORTS];
    int id[MAX_PORTS]; /* OsParam or OsMeter */
    float *port[MAX_PORTS];
} Plugin;

static LV2_Descriptor descriptors[OS_STAGE_COUNT];
static uint32_t n_descriptors;
static pthread_once_t descriptors_once = PTHREAD_ONCE_INIT;

static OsStageKind kind_of(const LV2_Descriptor *d)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        const OsStageInfo *info = os_stage_info((OsStageKind)k);
        if (info && strcmp(info->uri, d->URI) == 0) {
            return (OsStageKind)k;
        }
    }
    return OS_STAGE_COUNT;
}

static LV2_Handle instantiate(const LV2_Descriptor *descriptor, double rate, const char *bundle,
                              const LV2_Feature *const *features)
{
    (void)bundle;
    (void)features;
    const OsStageKind kind = kind_of(descriptor);
    const uint32_t n = os_port_count(kind);
    if (n == 0 || n > MAX_PORTS) {
        return NULL;
    }
    Plugin *self = calloc(1, sizeof(*self));
    if (self == NULL) {
        return NULL;
    }
    self->stage = os_stage_new(kind, rate, NULL);
    if (self->stage == NULL) {
        free(self);
        return NULL;
    }
    self->n_ports = n;
    self->audio_in = self->audio_out = MAX_PORTS;
    for (uint32_t i = 0; i < n; ++i) {
        const OsPortInfo *p = os_port_get(kind, i);
        self->type[i] = p->type;
        self->id[i] = p->id;
        if (p->type == OS_PORT_AUDIO_IN && self->audio_in == MAX_PORTS) {
            self->audio_in = i;
        } else if (p->type == OS_PORT_AUDIO_OUT && self->audio_out == MAX_PORTS) {
            self->audio_out = i;
        }
    }
    if (self->audio_in == MAX_PORTS || self->audio_out == MAX_PORTS) {
        os_stage_free(self->stage);
        free(self);
        return NULL;
    }
    return self;
}

static void connect_port(LV2_Handle instance, uint32_t port, void *data)
{
    Plugin *self = instance;
    if (port < self->n_ports) {
        self->port[port] = data;
    }
}

static void activate(LV2_Handle instance)
{
    Plugin *self = instance;
    os_stage_reset(self->stage);
}

static float meter_value(const Plugin *self, const OsMeters *m, int id)
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
        return (float)os_stage_latency(self->stage);
    case OS_M_COUNT:
        break;
    }
    return 0.0f;
}

static void run(LV2_Handle instance, uint32_t n)
{
    Plugin *self = instance;

    /* Controls are read once per block; the stage clamps and smooths them. */
    for (uint32_t i = 0; i < self->n_ports; ++i) {
        if (self->type[i] == OS_PORT_CONTROL_IN && self->port[i] != NULL) {
            os_stage_set(self->stage, (OsParam)self->id[i], *self->port[i]);
        }
    }

    const float *in = self->port[self->audio_in];
    float *out = self->port[self->audio_out];
    if (out != NULL) {
        if (in == NULL) {
            /* An unconnected input is silence; the stage may work in place. */
            memset(out, 0, n * sizeof(float));
            in = out;
        }
        os_stage_process(self->stage, in, out, n);
    }

    OsMeters m;
    os_stage_meters(self->stage, &m);
    for (uint32_t i = 0; i < self->n_ports; ++i) {
        if (self->type[i] == OS_PORT_CONTROL_OUT && self->port[i] != NULL) {
            *self->port[i] = meter_value(self, &m, self->id[i]);
        }
    }
}

static void deactivate(LV2_Handle instance)
{
    (void)instance;
}

static void cleanup(LV2_Handle instance)
{
    Plugin *self = instance;
    os_stage_free(self->stage);
    free(self);
}

static const void *extension_data(const char *uri)
{
    (void)uri;
    return NULL;
}

static void make_descriptors(void)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        const OsStageKind kind = (OsStageKind)k;
        const OsStageInfo *info = os_stage_info(kind);
        if (!os_stage_available(kind) || info == NULL || os_port_count(kind) > MAX_PORTS) {
            continue;
        }
        LV2_Descriptor *d = &descriptors[n_descriptors++];
        d->URI = info->uri;
        d->instantiate = instantiate;
        d->connect_port = connect_port;
        d->activate = activate;
        d->run = run;
        d->deactivate = deactivate;
        d->cleanup = cleanup;
        d->extension_data = extension_data;
    }
}

LV2_SYMBOL_EXPORT const LV2_Descriptor *lv2_descriptor(uint32_t index)
{
    pthread_once(&descriptors_once, make_descriptors);
    return index < n_descriptors ? &descriptors[index] : NULL;
}
