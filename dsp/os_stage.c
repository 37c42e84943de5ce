/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The stage machinery shared by every circuit: parameter targets and
 * smoothing, level conventions of the interface contract, oversampling,
 * latency-aligned dry path for bypass and the residual, meters, and the
 * guards that keep hostile input out of the state. */

#include "outstage.h"

#include "os_circuit.h"
#include "os_oversampler.h"
#include "os_window.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#if defined(__SSE__) || defined(__x86_64__)
#include <xmmintrin.h>
#define OS_HAVE_MXCSR 1
#endif

/* Parameter ramps last this long (s): long enough that sweeping a control
 * makes no zipper noise, short enough to feel immediate. */
#define SMOOTH_TIME 0.02
/* Bypass and listen crossfades (s). */
#define FADE_TIME 0.01
/* Input samples are clamped to +-this (60 dBFS) before anything else. */
#define INPUT_CLAMP 1000.0f
/* A step is taken again in two halves when the circuit's loop derivative
 * changes across it by more than this share at 4x, scaled with the step (the
 * change across a step grows with its length). See window_step(). Chosen on
 * the standard tones of docs/performance.md: at 4x, 0.02 costs more and gains
 * little, 0.1 loses 2 dB; scaled, 16x reaches -121/-113 dBc on the op-amp and
 * loop-1 tones where a fixed 0.05 gave -117/-104. Refining on the follower's
 * gain as well (a transistor turning on or off) made the class-B tone worse. */
#define REFINE_JAC_4X 0.05

typedef struct {
    double cur; /* value in the smoothing domain (log for logarithmic ports) */
    double tgt;
    double step;
    int left;
    int log_domain;
} Ramp;

struct OsStage {
    OsStageKind kind;
    double rate;
    int ramp_len;
    double fade_step;

    float target[OS_P_COUNT];           /* in port units, clamped */
    const OsPortInfo *port[OS_P_COUNT]; /* this stage's port, NULL if it lacks one */
    double meter_top[OS_M_COUNT];       /* full scale of each meter port */
    Ramp ramp[OS_P_COUNT];
    int ramping;

    /* derived, base rate */
    double fullscale, drive_lin, trim_lin, gain_lin;
    OsCircuitParams cp;

    OsOversamplerDesign design;
    OsOversampler os;

    OsOpampStage opamp, opamp_saved;
    OsPushpullStage pushpull, pushpull_saved;
    double vin_hist[3]; /* the last three oversampled inputs, oldest first */

    /* band-limited sampling of the trajectory (os_window.h) */
    OsWindow win;
    double win_vin;  /* input at the last oversampled step */
    double last_jac; /* the circuit's regime there */

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

static double ramp_value(const Ramp *r)
{
    return r->log_domain ? exp(r->cur) : r->cur;
}

/* Circuit parameters from the smoothed values. */
static void derive(OsStage *s)
{
    const Ramp *r = s->ramp;
    s->fullscale = ramp_value(&r[OS_P_FULLSCALE]);
    s->drive_lin = pow(10.0, ramp_value(&r[OS_P_DRIVE]) / 20.0);
    s->trim_lin = pow(10.0, ramp_value(&r[OS_P_TRIM]) / 20.0);
    s->gain_lin = pow(10.0, ramp_value(&r[OS_P_GAIN]) / 20.0);
    OsCircuitParams *p = &s->cp;
    p->gain = s->gain_lin;
    p->rail = ramp_value(&r[OS_P_RAIL]);
    p->headroom = ramp_value(&r[OS_P_HEADROOM]);
    p->ilimit = ramp_value(&r[OS_P_ILIMIT]) * 1e-3;
    p->load = ramp_value(&r[OS_P_LOAD]);
    p->gbw = ramp_value(&r[OS_P_GBW]) * 1e6;
    p->slew = ramp_value(&r[OS_P_SLEW]) * 1e6;
    p->beta = ramp_value(&r[OS_P_BETA]);
    p->vbe = ramp_value(&r[OS_P_VBE]);
    p->bias = ramp_value(&r[OS_P_BIAS]);
    p->emitter_r = ramp_value(&r[OS_P_EMITTER_R]);
    p->loop = ramp_value(&r[OS_P_LOOP]);
    const double h = 1.0 / (s->rate * s->os.factor);
    if (s->kind == OS_STAGE_PUSHPULL) {
        os_pushpull_stage_update(&s->pushpull, p, h);
    } else {
        os_opamp_stage_update(&s->opamp, p, h);
    }
}

static void ramp_jump(Ramp *r)
{
    r->cur = r->tgt;
    r->left = 0;
}

static void set_ramp_target(OsStage *s, OsParam p, float value, int jump)
{
    Ramp *r = &s->ramp[p];
    r->tgt = r->log_domain ? log((double)value) : (double)value;
    if (jump) {
        ramp_jump(r);
        return;
    }
    r->left = s->ramp_len;
    r->step = (r->tgt - r->cur) / r->left;
    s->ramping = 1;
}

static int valid_factor(float v)
{
    /* nearest of 1, 2, 4, 8, 16 on a log scale */
    const double l = log2((double)v);
    int m = (int)lround(l);
    if (m < 0) {
        m = 0;
    }
    if (m > OS_OVERSAMPLE_MAX_LOG2) {
        m = OS_OVERSAMPLE_MAX_LOG2;
    }
    return 1 << m;
}

static int window_delay(int factor)
{
    return factor > 1 ? OS_WINDOW_DELAY : 0;
}

static void clear_signal_state(OsStage *s)
{
    os_oversampler_init(&s->os, &s->design, s->os.factor, window_delay(s->os.factor));
    os_window_reset(&s->win, os_window_coefficient(s->os.factor));
    memset(s->vin_hist, 0, sizeof(s->vin_hist));
    s->last_jac = 0.0;

    os_opamp_stage_reset(&s->opamp);
    os_pushpull_stage_reset(&s->pushpull);
    memset(s->dry, 0, s->dry_len * sizeof(float));
    s->dry_pos = 0;
}

OsStage *os_stage_new(OsStageKind kind, double sample_rate, OsStatus *status)
{
    OsStatus st = OS_OK;
    OsStage *s = NULL;
    if ((unsigned)kind >= (unsigned)OS_STAGE_COUNT) {
        st = OS_ERR_ARGUMENT;
    } else if (!os_stage_available(kind)) {
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
        s->ramp_len = (int)ceil(SMOOTH_TIME * sample_rate);
        s->fade_step = 1.0 / ceil(FADE_TIME * sample_rate);
        int maxlat = 0;
        for (int f = 1; f <= OS_OVERSAMPLE_MAX; f *= 2) {
            const int l = os_oversampler_latency(&s->design, f, window_delay(f));
            maxlat = l > maxlat ? l : maxlat;
        }
        s->dry_len = (uint32_t)maxlat + 1;
        s->dry = calloc(s->dry_len, sizeof(float));
        if (s->dry == NULL) {
            st = OS_ERR_NO_MEMORY;
        }
    }
    if (st != OS_OK) {
        if (s) {
            free(s->dry);
            free(s);
        }
        if (status) {
            *status = st;
        }
        return NULL;
    }

    /* Every parameter starts at its port default; parameters this stage lacks
     * take the push-pull defaults so the derived values stay meaningful. */
    for (int p = 0; p < OS_P_COUNT; ++p) {
        const OsPortInfo *info = os_port_for_param(kind, (OsParam)p);
        if (!info) {
            info = os_port_for_param(OS_STAGE_PUSHPULL, (OsParam)p);
        }
        s->port[p] = os_port_for_param(kind, (OsParam)p);
        s->ramp[p].log_domain = (info->flags & OS_PF_LOGARITHMIC) != 0;
        s->target[p] = info->def;
        set_ramp_target(s, (OsParam)p, info->def, 1);
    }
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
    s->ramping = 0;
    const int f0 = valid_factor(s->target[OS_P_OVERSAMPLE]);
    os_oversampler_init(&s->os, &s->design, f0, window_delay(f0));
    os_stage_reset(s);
    if (status) {
        *status = OS_OK;
    }
    return s;
}

void os_stage_free(OsStage *stage)
{
    if (stage) {
        free(stage->dry);
        free(stage);
    }
}

void os_stage_reset(OsStage *s)
{
    for (int p = 0; p < OS_P_COUNT; ++p) {
        ramp_jump(&s->ramp[p]);
    }
    s->ramping = 0;
    const int f = valid_factor(s->target[OS_P_OVERSAMPLE]);
    s->os.factor = f;
    clear_signal_state(s);
    derive(s);
    s->mix = s->mix_tgt = s->target[OS_P_ENABLE] >= 0.5f ? 1.0 : 0.0;
    s->listen = s->listen_tgt = s->target[OS_P_LISTEN] >= 0.5f ? 1.0 : 0.0;
    memset(&s->meters, 0, sizeof(s->meters));
}

OsStatus os_stage_set(OsStage *s, OsParam param, float value)
{
    if (!s || (unsigned)param >= (unsigned)OS_P_COUNT || !s->port[param]) {
        return OS_ERR_ARGUMENT;
    }
    if (isnan(value)) {
        return OS_OK;
    }
    const OsPortInfo *info = s->port[param];
    value = value < info->min ? info->min : value > info->max ? info->max : value;
    if (info->flags & (OS_PF_TOGGLE | OS_PF_INTEGER)) {
        value = param == OS_P_OVERSAMPLE ? (float)valid_factor(value) : roundf(value);
    }
    if (value == s->target[param]) {
        return OS_OK;
    }
    s->target[param] = value;
    switch (param) {
    case OS_P_ENABLE:
        s->mix_tgt = value >= 0.5f ? 1.0 : 0.0;
        break;
    case OS_P_LISTEN:
        s->listen_tgt = value >= 0.5f ? 1.0 : 0.0;
        break;
    case OS_P_OVERSAMPLE:
        /* A new factor needs new filters: the signal state restarts (a short
         * gap of one latency) and the reported latency changes. */
        s->os.factor = (int)value;
        clear_signal_state(s);
        derive(s);
        break;
    case OS_P_LOOP:
        set_ramp_target(s, param, value, 1);
        derive(s);
        break;
    default:
        set_ramp_target(s, param, value, 0);
        break;
    }
    return OS_OK;
}

float os_stage_get(const OsStage *s, OsParam param)
{
    if (!s || (unsigned)param >= (unsigned)OS_P_COUNT) {
        return 0.0f;
    }
    return s->target[param];
}

uint32_t os_stage_latency(const OsStage *s)
{
    return (uint32_t)s->os.latency;
}

void os_stage_circuit(const OsStage *s, OsCircuitParams *p, double *volts_per_fs)
{
    *p = s->cp;
    *volts_per_fs = s->fullscale * s->drive_lin;
}

void os_stage_meters(const OsStage *s, OsMeters *m)
{
    *m = s->meters;
}

static void advance_ramps(OsStage *s)
{
    int any = 0;
    for (int p = 0; p < OS_P_COUNT; ++p) {
        Ramp *r = &s->ramp[p];
        if (r->left > 0) {
            if (--r->left == 0) {
                r->cur = r->tgt;
            } else {
                r->cur += r->step;
                any = 1;
            }
        }
    }
    s->ramping = any;
    derive(s);
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

/* One oversampled step of the circuit to input vin, vin_g at its inner point. */
static void step(OsStage *s, double vin, double vin_g, OsStepResult *r)
{
    if (s->kind == OS_STAGE_PUSHPULL) {
        os_pushpull_stage_step(&s->pushpull, vin, vin_g, r);
    } else {
        os_opamp_stage_step(&s->opamp, vin, vin_g, r);
    }
}

/* The input within the present step, at share u of it: the Lagrange cubic
 * through the last three oversampled inputs (t0 - 2h, t0 - h, t0) and the
 * present one (t0 + h). The oversampled input is band-limited to the kept
 * band, so the cubic's error at 4x is 0.6 % at 19 kHz (a straight line's:
 * 4.7 %), and it needs no sample from the future, so no latency. */
static double input_at(const double *hist, double vin, double u)
{
    const double um = u - 1.0, up = u + 1.0, upp = u + 2.0;
    return hist[0] * (-up * u * um / 6.0) + hist[1] * (upp * u * um * 0.5) +
           hist[2] * (-upp * up * um * 0.5) + vin * (upp * up * u / 6.0);
}

static void push_input(double *hist, double vin)
{
    hist[0] = hist[1];
    hist[1] = hist[2];
    hist[2] = vin;
}

static void set_step(OsStage *s, double h)
{
    if (s->kind == OS_STAGE_PUSHPULL) {
        os_pushpull_stage_set_step(&s->pushpull, h);
    } else {
        os_opamp_stage_set_step(&s->opamp, h);
    }
}

/* Whether the op-amp changed its regime between two step ends: its current
 * limiter, slew limit or swing clamp engaging or letting go, or (in the
 * push-pull stage) the loop through the follower changing its gain, across a
 * piece @p share host frames long (the threshold scales with it). */
static int regime_changed(double jac0, const OsStepResult *r, double share)
{
    const double a0 = fabs(jac0), a1 = fabs(r->jac);
    const double lo = a0 < a1 ? a0 : a1;
    return fabs(r->jac - jac0) > REFINE_JAC_4X * 4.0 * share * lo;
}

/* One step of the circuit (from 0 to du of the oversampled step h) into the
 * window, as two cubic pieces: to the TR-BDF2 inner point, then to the end. */
static void window_add(OsStage *s, double h, double u0, double du, const OsStepResult *r)
{
    os_window_piece(&s->win, h, u0, du * OS_TRBDF2_G, r->vmid, r->dvmid);
    os_window_piece(&s->win, h, u0 + du * OS_TRBDF2_G, du * (1.0 - OS_TRBDF2_G), r->vload,
                    r->dvload);
}

/* The step just taken (input vin, result *r) enters the window. Where the
 * circuit changed its regime within it, the step is taken again as two halves
 * from the saved state, so that the window sees the corner. Returns the
 * window's output sample; *r ends as the result at the step's end. */
/* Levels of halving: a halved piece across which the op-amp still changes
 * regime is halved once more (quarters) in the push-pull stage, where the
 * op-amp slews across the dead zone and its corners come and go within a
 * quarter step: one level left the loop-1 tone at -69.8 dBc at 4x, two reach
 * -84.5. The op-amp stage's limiter corners need one level (-96.0 dBc; a
 * second gave -93.9 and cost 40 % more on the loud program, halving again
 * nine halves in ten while the limiter is engaged). */
#define REFINE_DEPTH_OPAMP 1
#define REFINE_DEPTH_PUSHPULL 2

/* The piece of the present step from share u0 to u0 + du, already taken from
 * the saved state into *r: if the op-amp changed regime across it (its loop
 * derivative jac0 at the start), take it again as two halves, down to
 * REFINE_DEPTH_* levels; then add it to the window. */
static void refine(OsStage *s, const OsOpampStage *so, const OsPushpullStage *sp, double vin,
                   double h, double u0, double du, double jac0, int depth, OsStepResult *r)
{
    const int levels = s->kind == OS_STAGE_PUSHPULL ? REFINE_DEPTH_PUSHPULL : REFINE_DEPTH_OPAMP;
    if (depth >= levels || !regime_changed(jac0, r, du / s->os.factor)) {
        window_add(s, h, u0, du, r);
        return;
    }
    if (s->kind == OS_STAGE_PUSHPULL) {
        s->pushpull = *sp;
    } else {
        s->opamp = *so;
    }
    int iters = r->iters;
    const double g = OS_TRBDF2_G, hd = 0.5 * du;
    for (int half = 0; half < 2; ++half) {
        const double a = u0 + half * hd;
        /* the state at the half's start, in case it is halved again (only the
         * active circuit's: the other's is never read) */
        OsOpampStage o;
        OsPushpullStage p;
        if (depth + 1 < levels) {
            if (s->kind == OS_STAGE_PUSHPULL) {
                p = s->pushpull;
            } else {
                o = s->opamp;
            }
        }
        const double j0 = half == 0 ? jac0 : s->last_jac;
        set_step(s, hd * h);
        step(s, input_at(s->vin_hist, vin, a + hd), input_at(s->vin_hist, vin, a + hd * g), r);
        iters += r->iters;
        refine(s, &o, &p, vin, h, a, hd, j0, depth + 1, r);
        s->last_jac = r->jac;
    }
    set_step(s, h);
    r->iters = iters;
}

/* The step just taken (input vin, result *r) enters the window, retaken in
 * halves where the op-amp changed its regime within it. Returns the window's
 * output sample; *r ends as the result at the step's end. */
static double window_step(OsStage *s, double vin, double h, OsStepResult *r)
{
    const double jac0 = s->last_jac;
    refine(s, &s->opamp_saved, &s->pushpull_saved, vin, h, 0.0, 1.0, jac0, 0, r);
    s->last_jac = r->jac;
    return os_window_close(&s->win);
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
    double peak = 0.0, power = 0.0, iters = 0.0;
    uint32_t limited = 0, steps = 0;
    const int factor = s->os.factor;
    const double inv_factor = 1.0 / factor;
    const int pushpull = s->kind == OS_STAGE_PUSHPULL;
    const int windowed = s->win.a != 0.0;
    const double h = 1.0 / (s->rate * factor);
    double dissipation = 0.0;

    for (uint32_t i = 0; i < n; ++i) {
        if (s->ramping) {
            advance_ramps(s);
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
            if (windowed) {
                /* kept in case the step has to be taken again in halves */
                if (pushpull) {
                    s->pushpull_saved = s->pushpull;
                } else {
                    s->opamp_saved = s->opamp;
                }
            }
            const double vin = y[k];
            /* at 1x the input is not band-limited below the step rate: a
             * straight line, which cannot overshoot */
            const double vin_g = windowed ? input_at(s->vin_hist, vin, OS_TRBDF2_G)
                                          : s->vin_hist[2] + OS_TRBDF2_G * (vin - s->vin_hist[2]);
            step(s, vin, vin_g, &r);
            if (windowed) {
                y[k] = window_step(s, vin, h, &r);
            } else {
                y[k] = r.vload;
            }
            push_input(s->vin_hist, vin);
            peak = fmax(peak, fabs(r.iload));
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
    if (!(pushpull ? os_pushpull_stage_ok(&s->pushpull) : os_opamp_stage_ok(&s->opamp))) {
        clear_signal_state(s);
    }

    /* Meters stay within their ports' ranges: a value beyond (only settings far
     * outside physical sense get there, e.g. gigaampere idle currents) pegs at
     * the top of the scale, as a real meter would. */
    s->meters.peak_current = peg(s, OS_M_PEAK_CURRENT, peak);
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
