/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The stage pipeline shared by every circuit: level conventions of the
 * interface contract, oversampling, the circuit's trajectory (os_trajectory.c),
 * latency-aligned dry path for bypass and the residual, meters, and the guards
 * that keep hostile input out of the state. Parameters: os_params.c. */

#include "outstage.h"

#include "os_circuit.h"
#include "os_oversampler.h"
#include "os_params.h"
#include "os_trajectory.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#if defined(__SSE__) || defined(__x86_64__)
#include <xmmintrin.h>
#define OS_HAVE_MXCSR 1
#endif

/* Bypass and listen crossfades (s). */
#define FADE_TIME 0.01
/* Input samples are clamped to +-this (60 dBFS) before anything else. */
#define INPUT_CLAMP 1000.0f

struct OsStage {
    OsStageKind kind;
    double rate;
    double fade_step;

    OsParams par;
    double meter_top[OS_M_COUNT]; /* full scale of each meter port */

    /* the level conventions, from the present parameters */
    double fullscale, drive_lin, trim_lin, gain_lin;

    OsOversamplerDesign design;
    OsOversampler os;

    const OsCircuitOps *ops;
    void *circuit;
    unsigned char *saved; /* saved circuit states for the trajectory */
    OsTrajectory traj;

    /* latency-aligned dry path */
    float *dry;
    uint32_t dry_len, dry_pos;

    double mix, mix_tgt;       /* 1 processed, 0 bypassed */
    double listen, listen_tgt; /* weight of the ideal response subtracted */

    OsMeters meters;
};

const char *os_strerror(OsStatus status)
{
    switch (status) {
    case OS_OK:
        return "success";
    case OS_ERR_ARGUMENT:
        return "invalid argument";
    case OS_ERR_NO_MEMORY:
        return "out of memory";
    case OS_ERR_SAMPLE_RATE:
        return "sample rate out of range (8 kHz to 768 kHz)";
    case OS_ERR_UNAVAILABLE:
        return "stage not available in this build";
    }
    return "unknown status";
}

/* The level conventions and the circuit's coefficients from the present
 * parameters. */
static void derive(OsStage *s, OsUpdate how)
{
    const double *si = s->par.si;
    s->fullscale = si[OS_P_FULLSCALE];
    s->drive_lin = si[OS_P_DRIVE];
    s->trim_lin = si[OS_P_TRIM];
    s->gain_lin = si[OS_P_GAIN];
    s->ops->update(s->circuit, si, 1.0 / (s->rate * s->os.factor), how);
}

static void clear_signal_state(OsStage *s)
{
    const int f = s->os.factor;
    os_oversampler_init(&s->os, &s->design, f, os_trajectory_delay(f));
    os_trajectory_reset(&s->traj, f, s->rate);
    memset(s->dry, 0, s->dry_len * sizeof(float));
    s->dry_pos = 0;
}

static void free_parts(OsStage *s)
{
    free(s->dry);
    free(s->circuit);
    free(s->saved);
    free(s);
}

OsStage *os_stage_new(OsStageKind kind, double sample_rate, OsStatus *status)
{
    OsStatus st = OS_OK;
    OsStage *s = NULL;
    const OsCircuitOps *ops = os_circuit_ops(kind);
    if ((unsigned)kind >= (unsigned)OS_STAGE_COUNT) {
        st = OS_ERR_ARGUMENT;
    } else if (!os_stage_available(kind) || ops == NULL) {
        st = OS_ERR_UNAVAILABLE;
    } else if (!(sample_rate >= OS_RATE_MIN && sample_rate <= OS_RATE_MAX)) {
        st = OS_ERR_SAMPLE_RATE;
    } else if ((s = calloc(1, sizeof(*s))) == NULL) {
        st = OS_ERR_NO_MEMORY;
    }
    if (st == OS_OK && os_oversampler_design(&s->design) != 0) {
        st = OS_ERR_ARGUMENT;
    }
    if (st == OS_OK) {
        s->kind = kind;
        s->rate = sample_rate;
        s->ops = ops;
        s->fade_step = 1.0 / ceil(FADE_TIME * sample_rate);
        int maxlat = 0;
        for (int f = 1; f <= OS_OVERSAMPLE_MAX; f *= 2) {
            const int l = os_oversampler_latency(&s->design, f, os_trajectory_delay(f));
            maxlat = l > maxlat ? l : maxlat;
        }
        s->dry_len = (uint32_t)maxlat + 1;
        s->dry = calloc(s->dry_len, sizeof(float));
        s->circuit = calloc(1, ops->size);
        s->saved = calloc(OS_TRAJECTORY_MAX_DEPTH + 1, ops->state_size);
        if (s->dry == NULL || s->circuit == NULL || s->saved == NULL) {
            st = OS_ERR_NO_MEMORY;
        }
    }
    if (st != OS_OK) {
        if (s) {
            free_parts(s);
        }
        if (status) {
            *status = st;
        }
        return NULL;
    }

    os_params_init(&s->par, kind, sample_rate);
    os_trajectory_init(&s->traj, ops, s->circuit, s->saved);
    /* Meters read up to their ports' maxima (looked up once, not per block). */
    for (int m = 0; m < OS_M_COUNT; ++m) {
        s->meter_top[m] = 1e4;
    }
    for (uint32_t i = 0; i < os_port_count(kind); ++i) {
        const OsPortInfo *p = os_port_get(kind, i);
        if (p->type == OS_PORT_CONTROL_OUT && p->id >= 0 && p->id < OS_M_COUNT) {
            s->meter_top[p->id] = (double)p->max;
        }
    }
    os_stage_reset(s);
    if (status) {
        *status = OS_OK;
    }
    return s;
}

void os_stage_free(OsStage *stage)
{
    if (stage) {
        free_parts(stage);
    }
}

void os_stage_reset(OsStage *s)
{
    os_params_jump(&s->par);
    s->os.factor = os_params_factor(s->par.target[OS_P_OVERSAMPLE]);
    clear_signal_state(s);
    derive(s, OS_UPDATE_RESET);
    s->mix = s->mix_tgt = s->par.target[OS_P_ENABLE] >= 0.5f ? 1.0 : 0.0;
    s->listen = s->listen_tgt = s->par.target[OS_P_LISTEN] >= 0.5f ? 1.0 : 0.0;
    memset(&s->meters, 0, sizeof(s->meters));
}

OsStatus os_stage_set(OsStage *s, OsParam param, float value)
{
    if (!s) {
        return OS_ERR_ARGUMENT;
    }
    switch (os_params_set(&s->par, param, value)) {
    case OS_PARAM_REFUSED:
        return OS_ERR_ARGUMENT;
    case OS_PARAM_SAME:
    case OS_PARAM_RAMP: /* the ramp runs during processing */
        break;
    case OS_PARAM_FADE:
        if (param == OS_P_ENABLE) {
            s->mix_tgt = s->par.target[param] >= 0.5f ? 1.0 : 0.0;
        } else if (param == OS_P_LISTEN) {
            s->listen_tgt = s->par.target[param] >= 0.5f ? 1.0 : 0.0;
        }
        break;
    case OS_PARAM_RESTART:
        /* A new factor needs new filters: the signal state restarts (a short
         * gap of one latency) and the reported latency changes. */
        s->os.factor = (int)s->par.target[param];
        clear_signal_state(s);
        derive(s, OS_UPDATE_JUMP);
        break;
    case OS_PARAM_JUMPED:
        derive(s, OS_UPDATE_JUMP);
        break;
    }
    return OS_OK;
}

float os_stage_get(const OsStage *s, OsParam param)
{
    if (!s || (unsigned)param >= (unsigned)OS_P_COUNT) {
        return 0.0f;
    }
    return s->par.target[param];
}

uint32_t os_stage_latency(const OsStage *s)
{
    return (uint32_t)s->os.latency;
}

double os_stage_output_volts(const OsStage *s)
{
    return s->gain_lin * s->fullscale / s->trim_lin;
}

const OsCircuitOps *os_stage_circuit(const OsStage *s, double *si, double *volts_per_fs)
{
    memcpy(si, s->par.si, sizeof(s->par.si));
    *volts_per_fs = s->fullscale * s->drive_lin;
    return s->ops;
}

void os_stage_meters(const OsStage *s, OsMeters *m)
{
    *m = s->meters;
}

static double approach(double cur, double tgt, double step)
{
    if (cur < tgt) {
        return fmin(cur + step, tgt);
    }
    return fmax(cur - step, tgt);
}

/* Clamp meter @p m's value to its port's range; NaN reads full scale. */
static double peg(const OsStage *s, OsMeter m, double v)
{
    const double top = s->meter_top[m];
    return v >= 0.0 && v <= top ? v : v < 0.0 ? 0.0 : top;
}

static void process(OsStage *s, const float *in, float *out, double *vload, uint32_t n)
{
#ifdef OS_HAVE_MXCSR
    /* Flush denormals to zero (FTZ, bit 15) and treat them as zero (DAZ, bit 6)
     * while we run; restore the host's mode afterwards. */
    const unsigned int csr = _mm_getcsr();
    _mm_setcsr(csr | 0x8040u);
#endif
    double y[OS_OVERSAMPLE_MAX];
    double peak = 0.0, peak_v = 0.0, power = 0.0, iters = 0.0;
    uint32_t limited = 0, steps = 0;
    const int factor = s->os.factor;
    const double inv_factor = 1.0 / factor;
    double dissipation = 0.0;

    for (uint32_t i = 0; i < n; ++i) {
        if (s->par.ramping) {
            os_params_advance(&s->par);
            derive(s, OS_UPDATE_RAMP);
        }
        if (s->ops->frame) {
            s->ops->frame(s->circuit);
        }
        float smp = in[i];
        if (!isfinite(smp)) {
            smp = 0.0f;
        }
        smp = smp > INPUT_CLAMP ? INPUT_CLAMP : smp < -INPUT_CLAMP ? -INPUT_CLAMP : smp;

        /* Contract: stage input voltage = sample x fullscale x 10^(drive/20). */
        os_oversampler_up(&s->os, (double)smp * s->fullscale * s->drive_lin, y);
        double psum = 0.0;
        for (int k = 0; k < factor; ++k) {
            OsStepResult r;
            y[k] = os_trajectory_step(&s->traj, y[k], &r);
            peak = fmax(peak, fabs(r.iload));
            peak_v = fmax(peak_v, fabs(r.vload));
            psum += r.vload * r.iload;
            dissipation += r.dissipation;
            limited += (uint32_t)r.limiting;
            iters += r.iters;
        }
        power += psum * inv_factor;
        steps += (uint32_t)factor;
        const double v = os_oversampler_down(&s->os, y);
        if (vload) {
            vload[i] = v;
        }

        /* Dry path, delayed by the latency. */
        s->dry[s->dry_pos] = smp;
        uint32_t rd = s->dry_pos + s->dry_len - (uint32_t)s->os.latency;
        if (rd >= s->dry_len) {
            rd -= s->dry_len;
        }
        const double dry = (double)s->dry[rd];
        if (++s->dry_pos == s->dry_len) {
            s->dry_pos = 0;
        }

        /* Contract: output = vload / (G x fullscale) x 10^(trim/20); the residual
         * subtracts the ideal linear response, the input x drive x trim. */
        s->mix = approach(s->mix, s->mix_tgt, s->fade_step);
        s->listen = approach(s->listen, s->listen_tgt, s->fade_step);
        double wet = v / (s->gain_lin * s->fullscale) * s->trim_lin;
        wet -= s->listen * dry * s->drive_lin * s->trim_lin;
        double o = s->mix * wet + (1.0 - s->mix) * dry;
        if (fabs(o) < 1e-30) {
            o = 0.0;
        }
        out[i] = (float)o;
    }

    /* A state that is not finite can only come from a fault; start afresh
     * rather than output silence forever. */
    if (!s->ops->ok(s->circuit)) {
        clear_signal_state(s);
    }

    /* Meters stay within their ports' ranges: a value beyond (only settings far
     * outside physical sense get there, e.g. gigaampere idle currents) pegs at
     * the top of the scale, as a real meter would. */
    s->meters.peak_current = peg(s, OS_M_PEAK_CURRENT, peak);
    s->meters.peak_load_v = peak_v;
    s->meters.limiting = steps ? 100.0 * limited / steps : 0.0;
    s->meters.load_power = peg(s, OS_M_LOAD_POWER, n ? power / n : 0.0);
    s->meters.dissipation = peg(s, OS_M_DISSIPATION, steps ? dissipation / steps : 0.0);
    s->meters.newton_iters = steps ? iters / steps : 0.0;
#ifdef OS_HAVE_MXCSR
    _mm_setcsr(csr);
#endif
}

void os_stage_process(OsStage *s, const float *in, float *out, uint32_t n)
{
    process(s, in, out, NULL, n);
}

void os_stage_process_probe(OsStage *s, const float *in, float *out, double *vload, uint32_t n)
{
    process(s, in, out, vload, n);
}
