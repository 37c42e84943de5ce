/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* libFuzzer harness of the DSP library's public API (outstage.h, os_ports.h).
 *
 * One input is a small program for a host: a stage kind and host rate, then
 * control changes (any parameter id, any float: out of range, NaN, inf),
 * resets and blocks of audio (0 to 8192 frames, in place or not, samples from
 * the input's bytes or from generators of sines, noise and special values:
 * NaN, inf, 1e30, subnormals). Instance A runs the program's blocks; when
 * bit 3 of the first byte is set, instance B runs the same program in one
 * block between control changes. After the program the input falls silent
 * for twice the latency plus RECOVER_SECONDS.
 *
 * A finding (abort) is:
 * - an output sample that is not finite, or beyond what the circuit can give:
 *   the load voltage cannot exceed the rails (plus half the bias between the
 *   bases), band-limiting may overshoot a clipped wave by at most as much
 *   again (the bound tests/dsp/test_robustness.c uses), and the dry path adds
 *   at most the clamped input times drive and trim; all with the least
 *   favourable parameter value the program has set so far, since ramps move
 *   between them;
 * - an output that is still not near silence at the end of the silent tail
 *   (a state that does not recover from hostile input);
 * - outputs of A and B that differ (the library documents that the output
 *   does not depend on the block size);
 * - a meter that is not finite or outside its port's range;
 * - os_stage_set/get breaking their documented contract (clamping, NaN
 *   ignored, enumerations, OS_ERR_ARGUMENT for parameters a stage lacks);
 * - os_stage_new accepting a rate or kind it documents as refused;
 * - any AddressSanitizer or UndefinedBehaviorSanitizer report.
 *
 * The work per input is bounded (MAX_FRAMES host frames and MAX_STEPS
 * oversampled steps in the program), so that libFuzzer runs many inputs per
 * second. */

#include "outstage.h"

#include "fuzz_data.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

/* Largest block, and the program's budget in host frames and oversampled steps. */
#define MAX_BLOCK 8192u
#define MAX_FRAMES 8192u
#define MAX_STEPS 8192u
/* Most operations (sets, resets, blocks) per input. */
#define MAX_OPS 512
/* Silence after the program, beyond the filters' reach (s), and how many of
 * its last frames must be quiet. */
#define RECOVER_SECONDS 0.003
#define QUIET_FRAMES 64u
/* Load voltage (V) an idle stage must have settled below by then. With no
 * input both circuits are symmetric and settle to 0 V. Measured from the
 * 60 V rail at the slowest corners (0.1 V/us slew, 0.1 MHz gain-bandwidth,
 * 40 dB gain, 1 ohm or 100 kohm, 8 to 384 kHz, 1x to 16x): at most 1.75 ms
 * after the latency to come within this (docs/fuzzing.md). */
#define QUIET_VOLTS 0.1
/* Room for the program, the tail, and the tail's latency at any factor. */
#define LOG_LEN (MAX_FRAMES + 4096u)

/* The input clamp of os_stage.c's guard: samples beyond are taken as +-this. */
#define INPUT_CLAMP 1000.0

static const double common_rates[] = {8000.0,   11025.0,  16000.0, 22050.0, 32000.0,
                                      44100.0,  48000.0,  88200.0, 96000.0, 176400.0,
                                      192000.0, 352800.0, 384000.0};
#define N_RATES (sizeof(common_rates) / sizeof(common_rates[0]))

/* Block sizes that meet the library's internal sizes. */
static const uint32_t edge_blocks[] = {0,   1,   2,   3,   7,   31,  32,   33,   64,
                                       127, 128, 255, 256, 511, 512, 1024, 4096, 8192};
#define N_EDGE_BLOCKS (sizeof(edge_blocks) / sizeof(edge_blocks[0]))

typedef struct {
    OsStageKind kind;
    double rate;
    OsStage *a, *b;
    /* the least and greatest target of each parameter so far */
    float lo[OS_P_COUNT], hi[OS_P_COUNT];
    double dry_max; /* largest |input| after the stage's clamp so far */
    uint32_t a_pos, b_pos, steps;
    double phase;  /* sine generator, cycles */
    uint32_t seed; /* noise generator */
} Run;

static float in_log[LOG_LEN], out_a[LOG_LEN], out_b[LOG_LEN];
static float block_in[MAX_BLOCK];

static const char *kind_name(OsStageKind kind)
{
    const OsStageInfo *info = os_stage_info(kind);
    return info ? info->cli_name : "?";
}

/* Port value of a dB parameter as a ratio. */
static double db(float v)
{
    return pow(10.0, (double)v / 20.0);
}

static void note_targets(Run *r)
{
    for (int p = 0; p < OS_P_COUNT; ++p) {
        const float v = os_stage_get(r->a, (OsParam)p);
        r->lo[p] = v < r->lo[p] ? v : r->lo[p];
        r->hi[p] = v > r->hi[p] ? v : r->hi[p];
    }
}

/* The largest |output sample| the stage can give with the settings so far. */
static double output_bound(const Run *r)
{
    const double vmax = (double)r->hi[OS_P_RAIL] + 0.5 * (double)r->hi[OS_P_BIAS];
    const double g_lo = db(r->lo[OS_P_GAIN]), fs_lo = (double)r->lo[OS_P_FULLSCALE];
    const double trim_hi = db(r->hi[OS_P_TRIM]), drive_hi = db(r->hi[OS_P_DRIVE]);
    const double wet = (2.0 * vmax + 0.5) / (g_lo * fs_lo) * trim_hi;
    const double dry = r->dry_max * (drive_hi * trim_hi + 1.0);
    return 1.001 * (wet + dry) + 1e-6;
}

static void check_meters(const Run *r)
{
    OsMeters m;
    os_stage_meters(r->a, &m);
    const double v[] = {m.peak_current, m.limiting, m.load_power, m.dissipation};
    const char *names[] = {"peak_current", "limiting", "load_power", "dissipation"};
    const OsMeter ids[] = {OS_M_PEAK_CURRENT, OS_M_LIMITING, OS_M_LOAD_POWER, OS_M_DISSIPATION};
    for (int i = 0; i < 4; ++i) {
        double top = 1e300;
        for (uint32_t k = 0; k < os_port_count(r->kind); ++k) {
            const OsPortInfo *port = os_port_get(r->kind, k);
            if (port->type == OS_PORT_CONTROL_OUT && port->id == (int)ids[i]) {
                top = (double)port->max;
            }
        }
        if (!(v[i] >= 0.0 && v[i] <= top)) {
            fuzz_fail("%s at %g Hz: meter %s = %g, outside 0 .. %g", kind_name(r->kind), r->rate,
                      names[i], v[i], top);
        }
    }
    if (!(m.newton_iters >= 0.0 && isfinite(m.newton_iters))) {
        fuzz_fail("%s at %g Hz: newton_iters = %g", kind_name(r->kind), r->rate, m.newton_iters);
    }
}

/* B catches up with A: the frames since its last call, in one block. */
static void sync_b(Run *r)
{
    if (r->b == NULL) {
        return;
    }
    const uint32_t n = r->a_pos - r->b_pos;
    os_stage_process(r->b, in_log + r->b_pos, out_b + r->b_pos, n);
    r->b_pos = r->a_pos;
}

static int param_is_continuous(const OsPortInfo *port)
{
    return !(port->flags & (OS_PF_TOGGLE | OS_PF_INTEGER | OS_PF_ENUMERATION));
}

static float pick_value(FuzzData *d, const OsPortInfo *port)
{
    const uint8_t mode = fuzz_u8(d) % 8;
    const float lo = port ? port->min : 0.0f, hi = port ? port->max : 1.0f;
    switch (mode) {
    case 0:
        return fuzz_special_value(d);
    case 1:
        return fuzz_float_bits(d);
    case 2:
        return lo;
    case 3:
        return hi;
    case 4:
        return port ? port->def : 0.5f;
    case 5: {
        const double t = fuzz_u16(d) / 65535.0;
        if (port && (port->flags & OS_PF_LOGARITHMIC) && lo > 0.0f) {
            return (float)((double)lo * pow((double)hi / (double)lo, t));
        }
        return (float)((double)lo + t * ((double)hi - (double)lo));
    }
    case 6:
        return fuzz_u8(d) & 1 ? nextafterf(lo, -INFINITY) : nextafterf(hi, INFINITY);
    default:
        return (float)((int8_t)fuzz_u8(d)) * 0.5f;
    }
}

static void op_set(Run *r, FuzzData *d)
{
    /* Ids past OS_P_COUNT too: the library must refuse them. Five bits, so
     * that a kept input means the same when parameters are added. */
    const OsParam p = (OsParam)(fuzz_u8(d) & 31u);
    const OsPortInfo *port = p < OS_P_COUNT ? os_port_for_param(r->kind, p) : NULL;
    const float v = pick_value(d, port);
    sync_b(r);
    const float before = port ? os_stage_get(r->a, p) : 0.0f;
    const OsStatus sa = os_stage_set(r->a, p, v);
    const OsStatus sb = r->b ? os_stage_set(r->b, p, v) : sa;
    if (sa != sb) {
        fuzz_fail("os_stage_set(%d, %g): two instances answer %d and %d", (int)p, (double)v,
                  (int)sa, (int)sb);
    }
    if (port == NULL) {
        if (sa != OS_ERR_ARGUMENT) {
            fuzz_fail("%s: os_stage_set of parameter %d it lacks returned %d, not OS_ERR_ARGUMENT",
                      kind_name(r->kind), (int)p, (int)sa);
        }
        return;
    }
    if (sa != OS_OK) {
        fuzz_fail("%s: os_stage_set(%s, %g) returned %d", kind_name(r->kind), port->symbol,
                  (double)v, (int)sa);
    }
    const float got = os_stage_get(r->a, p);
    if (!(got >= port->min && got <= port->max)) {
        fuzz_fail("%s: %s set to %g reads back %g, outside %g .. %g", kind_name(r->kind),
                  port->symbol, (double)v, (double)got, (double)port->min, (double)port->max);
    }
    if (isnan(v)) {
        if (got != before) {
            fuzz_fail("%s: NaN changed %s from %g to %g", kind_name(r->kind), port->symbol,
                      (double)before, (double)got);
        }
    } else if (param_is_continuous(port)) {
        const float want = v < port->min ? port->min : v > port->max ? port->max : v;
        if (got != want) {
            fuzz_fail("%s: %s set to %g reads back %g, not %g", kind_name(r->kind), port->symbol,
                      (double)v, (double)got, (double)want);
        }
    } else if (port->points) {
        int ok = 0;
        for (const OsScalePoint *pt = port->points; pt->label; ++pt) {
            ok |= got == pt->value;
        }
        if (!ok) {
            fuzz_fail("%s: %s set to %g reads back %g, not one of its values", kind_name(r->kind),
                      port->symbol, (double)v, (double)got);
        }
    }
    note_targets(r);
}

static void op_reset(Run *r)
{
    sync_b(r);
    os_stage_reset(r->a);
    if (r->b) {
        os_stage_reset(r->b);
    }
    OsMeters m;
    os_stage_meters(r->a, &m);
    if (m.peak_current != 0.0 || m.load_power != 0.0 || m.limiting != 0.0 || m.dissipation != 0.0) {
        fuzz_fail("%s: meters not cleared by os_stage_reset", kind_name(r->kind));
    }
}

static uint32_t pick_block(FuzzData *d)
{
    switch (fuzz_u8(d) % 4) {
    case 0:
        return fuzz_u8(d) % 65u;
    case 1:
        return fuzz_u16(d) % 1025u;
    case 2:
        return fuzz_u16(d) % (MAX_BLOCK + 1u);
    default:
        return edge_blocks[fuzz_u8(d) % N_EDGE_BLOCKS];
    }
}

static uint32_t noise(Run *r)
{
    r->seed = r->seed * 1664525u + 1013904223u; /* Numerical Recipes' LCG */
    return r->seed;
}

static double noise_unit(Run *r)
{
    return (double)(noise(r) >> 8) / 8388608.0 - 1.0;
}

static void fill_block(Run *r, FuzzData *d, float *x, uint32_t n)
{
    const uint8_t gen = fuzz_u8(d) % 8;
    /* amplitude 10^(k/10) for k in -128..127: 1e-13 .. 5e12, or a special value */
    const uint8_t ab = fuzz_u8(d);
    const double amp = ab & 1 ? (double)fuzz_special_value(d) : pow(10.0, (int8_t)ab / 10.0);
    switch (gen) {
    case 0: /* the input's own bytes, as float bits */
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = fuzz_float_bits(d);
        }
        break;
    case 1: { /* a sine below Nyquist, continuous across blocks */
        const double f = (fuzz_u8(d) + 1.0) / 520.0;
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = (float)(amp * sin(2.0 * M_PI * r->phase));
            r->phase = fmod(r->phase + f, 1.0);
        }
        break;
    }
    case 2: /* a constant */
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = (float)amp;
        }
        break;
    case 3: /* white noise */
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = (float)(amp * noise_unit(r));
        }
        break;
    case 4: { /* noise with special values strewn in */
        const uint32_t every = 1u + fuzz_u8(d);
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = i % every == 0 ? fuzz_special[noise(r) % FUZZ_N_SPECIAL]
                                  : (float)(amp * noise_unit(r));
        }
        break;
    }
    case 5: { /* a square wave: the hardest slewing */
        const uint32_t half = 1u + fuzz_u8(d);
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = (float)((i / half) % 2 ? -amp : amp);
        }
        break;
    }
    case 6: /* 16-bit samples from the input */
        for (uint32_t i = 0; i < n; ++i) {
            x[i] = (float)((int16_t)fuzz_u16(d) / 32768.0);
        }
        break;
    default:
        memset(x, 0, n * sizeof(float));
        break;
    }
}

static void check_block(Run *r, const float *y, uint32_t n, uint32_t at)
{
    const double bound = output_bound(r);
    for (uint32_t i = 0; i < n; ++i) {
        if (!isfinite(y[i])) {
            fuzz_fail("%s at %g Hz: output frame %u is %g", kind_name(r->kind), r->rate,
                      (unsigned)(at + i), (double)y[i]);
        }
        if (fabs((double)y[i]) > bound) {
            fuzz_fail("%s at %g Hz: output frame %u is %g, beyond the bound %g", kind_name(r->kind),
                      r->rate, (unsigned)(at + i), (double)y[i], bound);
        }
    }
}

/* One block through A: @p x is its input (copied to the log first). */
static void process_a(Run *r, const float *x, uint32_t n, int in_place)
{
    memcpy(in_log + r->a_pos, x, n * sizeof(float));
    for (uint32_t i = 0; i < n; ++i) {
        const double v = isfinite(x[i]) ? fmin(fabs((double)x[i]), INPUT_CLAMP) : 0.0;
        r->dry_max = fmax(r->dry_max, v);
    }
    float *y = out_a + r->a_pos;
    if (in_place) {
        memcpy(y, x, n * sizeof(float));
        os_stage_process(r->a, y, y, n);
    } else {
        os_stage_process(r->a, x, y, n);
    }
    check_block(r, y, n, r->a_pos);
    check_meters(r);
    r->a_pos += n;
}

static void op_block(Run *r, FuzzData *d)
{
    const uint32_t factor = (uint32_t)os_stage_get(r->a, OS_P_OVERSAMPLE);
    uint32_t n = pick_block(d);
    const uint32_t frames_left = MAX_FRAMES - r->a_pos;
    const uint32_t steps_left = (MAX_STEPS - r->steps) / factor;
    n = n < frames_left ? n : frames_left;
    n = n < steps_left ? n : steps_left;
    const int in_place = fuzz_u8(d) & 1;
    fill_block(r, d, block_in, n);
    process_a(r, block_in, n, in_place);
    r->steps += n * factor;
}

/* The documented refusals of os_stage_new. */
static void check_refusals(FuzzData *d)
{
    static const double bad_rates[] = {0.0,   -48000.0,         7999.999,          768000.001,
                                       1e300, (double)INFINITY, -(double)INFINITY, (double)NAN};
    const double rate = bad_rates[fuzz_u8(d) % (sizeof(bad_rates) / sizeof(bad_rates[0]))];
    OsStatus st = OS_OK;
    OsStage *s = os_stage_new(OS_STAGE_OPAMP, rate, &st);
    if (s != NULL || st != OS_ERR_SAMPLE_RATE) {
        fuzz_fail("os_stage_new at %g Hz: %s, status %d", rate, s ? "accepted" : "refused",
                  (int)st);
    }
    s = os_stage_new(OS_STAGE_COUNT, 48000.0, &st);
    if (s != NULL || st != OS_ERR_ARGUMENT) {
        fuzz_fail("os_stage_new of kind OS_STAGE_COUNT: status %d", (int)st);
    }
    os_stage_free(NULL);
}

static double pick_rate(FuzzData *d)
{
    const uint8_t mode = fuzz_u8(d);
    if (mode < 128) {
        return common_rates[mode % N_RATES];
    }
    /* anywhere from 8 kHz to 384 kHz, fractions of a hertz included */
    return 8000.0 + (double)fuzz_u32(d) / 4294967295.0 * (384000.0 - 8000.0);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    FuzzData d = {data, size};
    Run r;
    memset(&r, 0, sizeof(r));
    const uint8_t head = fuzz_u8(&d);
    r.kind = head & 1 ? OS_STAGE_PUSHPULL : OS_STAGE_OPAMP;
    if (head & 2) {
        check_refusals(&d);
    }
    r.rate = pick_rate(&d);
    r.seed = fuzz_u32(&d);
    OsStatus st = OS_ERR_ARGUMENT;
    r.a = os_stage_new(r.kind, r.rate, &st);
    if (r.a == NULL || st != OS_OK) {
        fuzz_fail("os_stage_new(%s, %g Hz) failed: %s", kind_name(r.kind), r.rate, os_strerror(st));
    }
    if (head & 8) {
        r.b = os_stage_new(r.kind, r.rate, NULL);
        if (r.b == NULL) {
            fuzz_fail("os_stage_new(%s, %g Hz) failed", kind_name(r.kind), r.rate);
        }
    }
    for (int p = 0; p < OS_P_COUNT; ++p) {
        r.lo[p] = r.hi[p] = os_stage_get(r.a, (OsParam)p);
    }
    /* Settings before the first block, glided to from the defaults, or taken
     * at once (head bit 2) as by a host that activates after setting them. */
    const int n_initial = fuzz_u8(&d) % 24;
    for (int i = 0; i < n_initial; ++i) {
        op_set(&r, &d);
    }
    if (head & 4) {
        op_reset(&r);
    }
    for (int ops = 0; ops < MAX_OPS && fuzz_left(&d) > 0 && r.a_pos < MAX_FRAMES; ++ops) {
        const uint8_t op = fuzz_u8(&d) % 16;
        if (op < 5) {
            op_set(&r, &d);
        } else if (op == 5) {
            op_reset(&r);
        } else {
            op_block(&r, &d);
        }
    }
    sync_b(&r);
    for (uint32_t i = 0; r.b && i < r.a_pos; ++i) {
        if (memcmp(&out_a[i], &out_b[i], sizeof(float)) != 0) {
            fuzz_fail("%s at %g Hz: frame %u is %.9g in the program's blocks but %.9g in one "
                      "block",
                      kind_name(r.kind), r.rate, (unsigned)i, (double)out_a[i], (double)out_b[i]);
        }
    }

    /* The hostile input stops: silence for twice the latency and RECOVER_SECONDS. */
    const uint32_t latency = os_stage_latency(r.a);
    if (latency > 1024u || (r.b && latency != os_stage_latency(r.b))) {
        fuzz_fail("%s: latency %u", kind_name(r.kind), (unsigned)latency);
    }
    /* The oversampler's filters are linear phase: they hold the input of the
     * last 2 x latency frames (the group delay either side), and they ring
     * at their band edge for that long. */
    const uint32_t tail = 2u * latency + (uint32_t)ceil(RECOVER_SECONDS * r.rate) + QUIET_FRAMES;
    const uint32_t tail_at = r.a_pos;
    memset(block_in, 0, sizeof(block_in));
    for (uint32_t left = tail; left > 0;) {
        const uint32_t n = left < 512u ? left : 512u;
        process_a(&r, block_in, n, 0);
        left -= n;
    }

    /* Quiet at the end: |output| x G x fullscale / trim is the load voltage;
     * the least favourable settings so far give its least value. */
    const double to_volts =
        db(r.lo[OS_P_GAIN]) * (double)r.lo[OS_P_FULLSCALE] / db(r.hi[OS_P_TRIM]);
    for (uint32_t i = tail_at + tail - QUIET_FRAMES; i < tail_at + tail; ++i) {
        const double v = fabs((double)out_a[i]) * to_volts;
        if (v > QUIET_VOLTS) {
            fuzz_fail("%s at %g Hz: %u frames after the input fell silent the load is still at "
                      "%g V (output %g)",
                      kind_name(r.kind), r.rate, (unsigned)(i - tail_at), v, (double)out_a[i]);
        }
    }
    os_stage_free(r.a);
    os_stage_free(r.b);
    return 0;
}
