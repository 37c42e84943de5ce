/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* LV2 wrapper: maps the ports of the table in dsp/os_ports.c onto the stage
 * API of outstage.h. It stores port pointers and forwards values; the physics
 * lives in dsp/. One descriptor per stage that os_stage_available() reports,
 * in OsStageKind order. */

#include "os_ported.h"

#include <lv2/core/lv2.h>

#include <pthread.h>
#include <string.h>

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
    return os_ported_new(kind_of(descriptor), rate);
}

static void connect_port(LV2_Handle instance, uint32_t port, void *data)
{
    os_ported_connect(instance, port, data);
}

static void activate(LV2_Handle instance)
{
    os_ported_activate(instance);
}

static void run(LV2_Handle instance, uint32_t n)
{
    os_ported_run(instance, n);
}

static void deactivate(LV2_Handle instance)
{
    (void)instance;
}

static void cleanup(LV2_Handle instance)
{
    os_ported_free(instance);
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
        if (!os_stage_available(kind) || info == NULL) {
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
