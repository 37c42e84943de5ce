/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_params.h"

#include "os_oversampler.h"

#include <math.h>
#include <string.h>

static double domain_of(const OsPortInfo *port, float value)
{
    return port->smooth == OS_SMOOTH_LOG ? log((double)value) : (double)value;
}

/* The SI value of a ramp's present position. */
static double si_of(const OsPortInfo *port, const OsRamp *r)
{
    const double v = port->smooth == OS_SMOOTH_LOG ? exp(r->cur) : r->cur;
    return port->si == OS_SI_DB ? pow(10.0, v / 20.0) : v * port->si_scale;
}

static void refresh(OsParams *p)
{
    for (int i = 0; i < OS_P_COUNT; ++i) {
        if (p->port[i]) {
            p->si[i] = si_of(p->port[i], &p->ramp[i]);
        }
    }
}

int os_params_factor(float v)
{
    /* nearest of 1, 2, 4, 8, 16 on a log scale */
    int m = (int)lround(log2((double)v));
    m = m < 0 ? 0 : m > OS_OVERSAMPLE_MAX_LOG2 ? OS_OVERSAMPLE_MAX_LOG2 : m;
    return 1 << m;
}

void os_params_init(OsParams *p, OsStageKind kind, double rate)
{
    memset(p, 0, sizeof(*p));
    p->ramp_len = (int)ceil(OS_SMOOTH_TIME * rate);
    for (int i = 0; i < OS_P_COUNT; ++i) {
        const OsPortInfo *port = os_port_for_param(kind, (OsParam)i);
        p->port[i] = port;
        if (port) {
            p->target[i] = port->def;
            p->ramp[i].cur = p->ramp[i].tgt = domain_of(port, port->def);
        }
    }
    refresh(p);
}

OsParamChange os_params_set(OsParams *p, OsParam param, float value)
{
    if ((unsigned)param >= (unsigned)OS_P_COUNT || !p->port[param]) {
        return OS_PARAM_REFUSED;
    }
    if (isnan(value)) {
        return OS_PARAM_SAME;
    }
    const OsPortInfo *port = p->port[param];
    value = value < port->min ? port->min : value > port->max ? port->max : value;
    if (port->flags & (OS_PF_TOGGLE | OS_PF_INTEGER)) {
        value = port->smooth == OS_SMOOTH_RESTART ? (float)os_params_factor(value) : roundf(value);
    }
    if (value == p->target[param]) {
        return OS_PARAM_SAME;
    }
    p->target[param] = value;
    OsRamp *r = &p->ramp[param];
    r->tgt = domain_of(port, value);
    switch (port->smooth) {
    case OS_SMOOTH_LINEAR:
    case OS_SMOOTH_LOG:
        r->left = p->ramp_len;
        r->step = (r->tgt - r->cur) / r->left;
        p->ramping = 1;
        return OS_PARAM_RAMP;
    case OS_SMOOTH_FADE:
    case OS_SMOOTH_RESTART:
    case OS_SMOOTH_JUMP:
    case OS_SMOOTH_NONE:
        break;
    }
    r->cur = r->tgt;
    r->left = 0;
    p->si[param] = si_of(port, r);
    return port->smooth == OS_SMOOTH_FADE      ? OS_PARAM_FADE
           : port->smooth == OS_SMOOTH_RESTART ? OS_PARAM_RESTART
                                               : OS_PARAM_JUMPED;
}

void os_params_jump(OsParams *p)
{
    for (int i = 0; i < OS_P_COUNT; ++i) {
        p->ramp[i].cur = p->ramp[i].tgt;
        p->ramp[i].left = 0;
    }
    p->ramping = 0;
    refresh(p);
}

void os_params_advance(OsParams *p)
{
    int any = 0;
    for (int i = 0; i < OS_P_COUNT; ++i) {
        OsRamp *r = &p->ramp[i];
        if (r->left > 0) {
            if (--r->left == 0) {
                r->cur = r->tgt;
            } else {
                r->cur += r->step;
                any = 1;
            }
        }
    }
    p->ramping = any;
    refresh(p);
}
