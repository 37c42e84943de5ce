/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* LADSPA wrapper: one descriptor per stage that os_stage_available() reports,
 * all built from the port table in dsp/os_ports.c. Ports keep the table's
 * order (hosts such as sox pass control values by position). The latency
 * output is named "latency", the LADSPA convention hosts look for.
 * Hints follow ladspa.h (LADSPA 1.1). */

#include "os_ported.h"

#include <ladspa.h>

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

/* Upper bound on ports per stage; stages with more are not offered. */
#define MAX_PORTS 64

/* Ports are handed to the shared binding as float pointers. */
_Static_assert(sizeof(LADSPA_Data) == sizeof(float), "LADSPA_Data must be float");

typedef struct {
    LADSPA_PortDescriptor descriptors[MAX_PORTS];
    const char *names[MAX_PORTS];
    LADSPA_PortRangeHint hints[MAX_PORTS];
} PortArrays;

static LADSPA_Descriptor descriptors[OS_STAGE_COUNT];
static PortArrays port_arrays[OS_STAGE_COUNT];
static OsStageKind kinds[OS_STAGE_COUNT];
static unsigned long n_descriptors;
static pthread_once_t descriptors_once = PTHREAD_ONCE_INIT;

static LADSPA_Handle instantiate(const LADSPA_Descriptor *descriptor, unsigned long rate)
{
    const OsStageKind kind = *(const OsStageKind *)descriptor->ImplementationData;
    return os_ported_new(kind, (double)rate);
}

static void connect_port(LADSPA_Handle instance, unsigned long port, LADSPA_Data *data)
{
    os_ported_connect(instance, (uint32_t)(port > UINT32_MAX ? UINT32_MAX : port), data);
}

static void activate(LADSPA_Handle instance)
{
    os_ported_activate(instance);
}

static void run(LADSPA_Handle instance, unsigned long n_frames)
{
    os_ported_run(instance, (uint32_t)n_frames);
}

static void deactivate(LADSPA_Handle instance)
{
    (void)instance;
}

static void cleanup(LADSPA_Handle instance)
{
    os_ported_free(instance);
}

/* The value a host derives from default hint @p hint for port @p p, by the
 * formulas of ladspa.h; NAN if the hint does not apply to the range. */
static double hint_value(const OsPortInfo *p, LADSPA_PortRangeHintDescriptor hint)
{
    const double lo = (double)p->min, hi = (double)p->max;
    const int lg = (p->flags & OS_PF_LOGARITHMIC) && lo > 0.0;
    double v;
    switch (hint) {
    case LADSPA_HINT_DEFAULT_MINIMUM:
        v = lo;
        break;
    case LADSPA_HINT_DEFAULT_LOW:
        v = lg ? exp(log(lo) * 0.75 + log(hi) * 0.25) : lo * 0.75 + hi * 0.25;
        break;
    case LADSPA_HINT_DEFAULT_MIDDLE:
        v = lg ? exp(log(lo) * 0.5 + log(hi) * 0.5) : lo * 0.5 + hi * 0.5;
        break;
    case LADSPA_HINT_DEFAULT_HIGH:
        v = lg ? exp(log(lo) * 0.25 + log(hi) * 0.75) : lo * 0.25 + hi * 0.75;
        break;
    case LADSPA_HINT_DEFAULT_MAXIMUM:
        v = hi;
        break;
    case LADSPA_HINT_DEFAULT_0:
        v = 0.0;
        break;
    case LADSPA_HINT_DEFAULT_1:
        v = 1.0;
        break;
    case LADSPA_HINT_DEFAULT_100:
        v = 100.0;
        break;
    case LADSPA_HINT_DEFAULT_440:
        v = 440.0;
        break;
    default:
        return (double)NAN;
    }
    if (p->flags & OS_PF_INTEGER) {
        v = round(v); /* ladspa.h: "must be rounded if LADSPA_HINT_INTEGER" */
    }
    return v >= lo && v <= hi ? v : (double)NAN;
}

/* How far @p v is from the table default: by ratio for positive values (the
 * ranges here span decades), otherwise by difference over the range. */
static double default_distance(const OsPortInfo *p, double v)
{
    const double d = (double)p->def;
    if (d > 0.0) {
        return v > 0.0 ? fabs(log(v / d)) : (double)INFINITY;
    }
    return fabs(v - d) / ((double)p->max - (double)p->min);
}

/* LADSPA cannot state an arbitrary default: pick the default hint whose value
 * lies nearest the table's (exact matches first, in the order listed). */
static LADSPA_PortRangeHintDescriptor default_hint(const OsPortInfo *p)
{
    static const LADSPA_PortRangeHintDescriptor candidates[] = {
        LADSPA_HINT_DEFAULT_0,      LADSPA_HINT_DEFAULT_1,       LADSPA_HINT_DEFAULT_100,
        LADSPA_HINT_DEFAULT_440,    LADSPA_HINT_DEFAULT_MINIMUM, LADSPA_HINT_DEFAULT_MAXIMUM,
        LADSPA_HINT_DEFAULT_MIDDLE, LADSPA_HINT_DEFAULT_LOW,     LADSPA_HINT_DEFAULT_HIGH};
    LADSPA_PortRangeHintDescriptor best = LADSPA_HINT_DEFAULT_NONE;
    double best_d = (double)INFINITY;
    for (size_t i = 0; i < sizeof(candidates) / sizeof(candidates[0]); ++i) {
        const double v = hint_value(p, candidates[i]);
        if (isnan(v)) {
            continue;
        }
        const double d = default_distance(p, v);
        if (d < best_d) {
            best_d = d;
            best = candidates[i];
        }
    }
    return best;
}

static void fill_port(const OsPortInfo *p, LADSPA_PortDescriptor *desc, const char **name,
                      LADSPA_PortRangeHint *hint)
{
    static const LADSPA_PortDescriptor types[] = {
        LADSPA_PORT_AUDIO | LADSPA_PORT_INPUT, LADSPA_PORT_AUDIO | LADSPA_PORT_OUTPUT,
        LADSPA_PORT_CONTROL | LADSPA_PORT_INPUT, LADSPA_PORT_CONTROL | LADSPA_PORT_OUTPUT};
    *desc = types[p->type];
    *name = (p->flags & OS_PF_LATENCY) ? "latency" : p->name;
    hint->HintDescriptor = 0;
    hint->LowerBound = 0.0f;
    hint->UpperBound = 0.0f;
    if (p->type == OS_PORT_AUDIO_IN || p->type == OS_PORT_AUDIO_OUT) {
        return;
    }
    if (p->flags & OS_PF_TOGGLE) {
        /* ladspa.h: TOGGLED goes with no other hint but DEFAULT_0 or DEFAULT_1. */
        hint->HintDescriptor =
            LADSPA_HINT_TOGGLED | (p->def > 0.0f ? LADSPA_HINT_DEFAULT_1 : LADSPA_HINT_DEFAULT_0);
        return;
    }
    LADSPA_PortRangeHintDescriptor h = LADSPA_HINT_BOUNDED_BELOW | LADSPA_HINT_BOUNDED_ABOVE;
    if (p->flags & OS_PF_LOGARITHMIC) {
        h |= LADSPA_HINT_LOGARITHMIC;
    }
    if (p->flags & OS_PF_INTEGER) {
        h |= LADSPA_HINT_INTEGER;
    }
    if (p->type == OS_PORT_CONTROL_IN) {
        h |= default_hint(p);
    } else {
        /* Meaningless for an output, but sox (14.4) asks every control port,
         * outputs included, for a value or a default: with one, users pass
         * just the inputs by position, as the contract intends. */
        h |= LADSPA_HINT_DEFAULT_MINIMUM;
    }
    hint->HintDescriptor = h;
    hint->LowerBound = p->min;
    hint->UpperBound = p->max;
}

static void make_descriptors(void)
{
    for (int k = 0; k < OS_STAGE_COUNT; ++k) {
        const OsStageKind kind = (OsStageKind)k;
        const OsStageInfo *info = os_stage_info(kind);
        const uint32_t n = os_port_count(kind);
        if (!os_stage_available(kind) || info == NULL || n == 0 || n > MAX_PORTS) {
            continue;
        }
        PortArrays *pa = &port_arrays[n_descriptors];
        for (uint32_t i = 0; i < n; ++i) {
            fill_port(os_port_get(kind, i), &pa->descriptors[i], &pa->names[i], &pa->hints[i]);
        }
        kinds[n_descriptors] = kind;
        LADSPA_Descriptor *d = &descriptors[n_descriptors++];
        d->UniqueID = info->ladspa_id;
        d->Label = info->label;
        d->Properties = LADSPA_PROPERTY_HARD_RT_CAPABLE;
        d->Name = info->name;
        d->Maker = "outstage developers";
        d->Copyright = "ISC";
        d->PortCount = n;
        d->PortDescriptors = pa->descriptors;
        d->PortNames = pa->names;
        d->PortRangeHints = pa->hints;
        d->ImplementationData = &kinds[n_descriptors - 1];
        d->instantiate = instantiate;
        d->connect_port = connect_port;
        d->activate = activate;
        d->run = run;
        d->run_adding = NULL;
        d->set_run_adding_gain = NULL;
        d->deactivate = deactivate;
        d->cleanup = cleanup;
    }
}

__attribute__((visibility("default"))) const LADSPA_Descriptor *
ladspa_descriptor(unsigned long index)
{
    pthread_once(&descriptors_once, make_descriptors);
    return index < n_descriptors ? &descriptors[index] : NULL;
}
