/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "alias.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>

#include <fftw3.h>

/* Issue 4: "a 7 kHz sine driven 6 dB into the op-amp's current limit", and the
 * crossover cases. The op-amp stage at its defaults (32 ohm, 25 mA, gain 6 dB,
 * fullscale 1 V) limits at 25 mA x 32 ohm = 0.8 V at the load, 0.4 FS at the
 * output; 0.8 FS in asks for 1.6 V, twice that. The push-pull cases at -6 dBFS
 * ask for 1 V into 8 ohm, well inside the current limit, so what they show is
 * the crossover: class B (bias 0), the follower outside the loop (loop 0), and
 * inside a loop whose op-amp slews across the dead zone at each crossing
 * (loop 1; at 7 kHz the default 0.5 V/us is slew-limited there).
 *
 * Issue 9: the hard-slewed tone. 4 V peak at 9973 Hz needs 0.25 V/us; the
 * op-amp gives 0.1, so it slews for most of each half cycle and turns round at
 * each peak, and those turnarounds are the corners the trajectory must place
 * inside the step. 9973 Hz is prime: no product of it falls on another's bin,
 * and the record is a whole second (the output repeats every 48000 frames at
 * 48 kHz). 10 kohm keeps the current limit out of it; the push-pull stage runs
 * in class AB (bias 1.1 V, the follower conducting through the crossing)
 * inside the loop, so the same op-amp corners pass through the follower. */
static const AlTone tones[] = {
    {"opamp_limit",
     "op-amp, 7 kHz at 0.8 FS (6 dB into the 25 mA limit)",
     OS_STAGE_OPAMP,
     7000.0,
     0.8,
     {{NULL, 0.0f}}},
    {"pushpull_b_loop0",
     "push-pull class B, follower outside the loop, 7 kHz at -6 dBFS",
     OS_STAGE_PUSHPULL,
     7000.0,
     0.5,
     {{"loop", 0.0f}, {"bias", 0.0f}, {NULL, 0.0f}}},
    {"pushpull_b_loop1",
     "push-pull class B, follower inside the loop, 7 kHz at -6 dBFS",
     OS_STAGE_PUSHPULL,
     7000.0,
     0.5,
     {{"loop", 1.0f}, {"bias", 0.0f}, {NULL, 0.0f}}},
    {"opamp_slew",
     "op-amp, 9973 Hz asked 4 V peak of a 0.1 V/us op-amp into 10 kohm (slewing)",
     OS_STAGE_OPAMP,
     9973.0,
     1.0,
     {{"fullscale", 2.0f}, {"slew", 0.1f}, {"load", 10000.0f}, {NULL, 0.0f}}},
    {"pushpull_slew",
     "push-pull class AB (bias 1.1 V), follower inside the loop, the same slewed tone",
     OS_STAGE_PUSHPULL,
     9973.0,
     1.0,
     {{"fullscale", 2.0f},
      {"slew", 0.1f},
      {"load", 10000.0f},
      {"bias", 1.1f},
      {"loop", 1.0f},
      {NULL, 0.0f}}},
};

const AlTone *al_tones(size_t *count)
{
    *count = sizeof(tones) / sizeof(tones[0]);
    return tones;
}

static long long gcd_ll(long long a, long long b)
{
    while (b != 0) {
        const long long t = a % b;
        a = b;
        b = t;
    }
    return a;
}

/* Whole Hz, or -1. */
static long long whole_hz(double f)
{
    const double r = round(f);
    return f > 0.0 && fabs(f - r) < 1e-9 && r < 1e12 ? (long long)r : -1;
}

size_t al_record_length(double rate, double f0, double seconds)
{
    const long long fs = whole_hz(rate), f = whole_hz(f0);
    if (fs <= 0 || f <= 0) {
        return 0;
    }
    /* the output repeats every fs / gcd(f0, fs) samples */
    const size_t period = (size_t)(fs / gcd_ll(f, fs));
    size_t n = (size_t)ceil(seconds * rate / (double)period);
    return (n < 1 ? 1 : n) * period;
}

int al_analyse(const double *x, size_t n, double rate, double f0, AlResult *r)
{
    const long long fs = whole_hz(rate), f = whole_hz(f0);
    if (fs <= 0 || f <= 0 || n < 4 || n % (size_t)(fs / gcd_ll(f, fs)) != 0) {
        return -1;
    }
    const long long g = gcd_ll(f, fs);
    double *in = fftw_malloc(n * sizeof(*in));
    fftw_complex *out = fftw_malloc((n / 2 + 1) * sizeof(*out));
    if (!in || !out) {
        fftw_free(in);
        fftw_free(out);
        return -1;
    }
    /* FFTW_ESTIMATE leaves the input alone while planning. */
    fftw_plan plan = fftw_plan_dft_r2c_1d((int)n, in, out, FFTW_ESTIMATE);
    for (size_t i = 0; i < n; ++i) {
        in[i] = x[i]; /* NOLINT(clang-analyzer-core.uninitialized.Assign): x holds n samples */
    }
    fftw_execute(plan);

    /* Bin b is b fs / n Hz. In integers: on the grid when b fs is a multiple of
     * n g, a harmonic when a multiple of n f0. Mean-square power of bin b: for
     * 0 < b < n/2, 2 |X|^2 / n^2 (a sine of peak A = 2 |X| / n has A^2 / 2);
     * at n/2, |X|^2 / n^2. */
    const double nn = (double)n * (double)n;
    const long long ln = (long long)n;
    double fund = 0.0, harm = 0.0, alias = 0.0, offgrid = 0.0, worst = 0.0, audio = 0.0;
    double band = 0.0;
    size_t worst_bin = 0, audio_bin = 0;
    for (size_t b = 1; b <= n / 2; ++b) {
        const double re = out[b][0], im = out[b][1];
        const double p = (2 * b == n ? 1.0 : 2.0) * (re * re + im * im) / nn;
        const long long num = (long long)b * fs;
        if (num % (ln * f) == 0) {
            if (num == ln * f) {
                fund = p;
            } else {
                harm += p;
            }
            continue;
        }
        if (num % (ln * g) == 0) {
            alias += p;
        } else {
            offgrid += p;
        }
        if (p > worst) {
            worst = p;
            worst_bin = b;
        }
        const double hz = (double)b * rate / (double)n;
        if (hz >= AL_AUDIO_LO_HZ && hz <= AL_AUDIO_HZ) {
            band += p;
        }
        if (p > audio && hz <= AL_AUDIO_HZ) {
            audio = p;
            audio_bin = b;
        }
    }
    fftw_destroy_plan(plan);
    fftw_free(in);
    fftw_free(out);

    const double tiny = 1e-300;
    r->fund_amp = sqrt(2.0 * fund);
    r->worst_dbc = 10.0 * log10((worst + tiny) / fund);
    r->worst_hz = (double)worst_bin * rate / (double)n;
    r->audio_dbc = 10.0 * log10((audio + tiny) / fund);
    r->audio_hz = (double)audio_bin * rate / (double)n;
    r->total_dbc = 10.0 * log10((alias + offgrid + tiny) / fund);
    r->audio_total_dbc = 10.0 * log10((band + tiny) / fund);
    r->alias_dbc = 10.0 * log10((alias + tiny) / fund);
    r->offgrid_dbc = 10.0 * log10((offgrid + tiny) / fund);
    r->harmonic_dbc = 10.0 * log10((harm + tiny) / fund);
    return fund > 0.0 ? 0 : -1;
}

double al_sine(size_t i, double rate, double f0)
{
    /* phase i f0 / fs cycles, reduced modulo 1 in integers: exact, so every
     * period of the record gets the same samples */
    const long long fs = whole_hz(rate), f = whole_hz(f0);
    if (fs <= 0 || f < 0) {
        return sin(2.0 * M_PI * f0 * (double)i / rate);
    }
    const long long k = ((long long)(i % (size_t)fs) * f) % fs;
    return sin(2.0 * M_PI * (double)k / (double)fs);
}

size_t al_settle_frames(double rate, unsigned latency)
{
    return (size_t)ceil(0.05 * rate) + latency;
}

OsStage *al_make_stage(const AlTone *t, double rate, int factor)
{
    OsStage *s = os_stage_new(t->kind, rate, NULL);
    if (!s) {
        return NULL;
    }
    os_stage_set(s, OS_P_OVERSAMPLE, (float)factor);
    for (int i = 0; i < AL_MAX_SETS && t->set[i].symbol; ++i) {
        const int port = os_port_find(t->kind, t->set[i].symbol);
        const OsPortInfo *p = port >= 0 ? os_port_get(t->kind, (uint32_t)port) : NULL;
        if (!p || p->id < 0) {
            os_stage_free(s);
            return NULL;
        }
        os_stage_set(s, (OsParam)p->id, t->set[i].value);
    }
    os_stage_reset(s); /* parameters at their targets, no smoothing ramp */
    return s;
}

int al_measure_tone(const AlTone *t, double rate, int factor, double seconds, AlResult *r)
{
    const size_t n = al_record_length(rate, t->freq, seconds);
    OsStage *s = n ? al_make_stage(t, rate, factor) : NULL;
    double *rec = n ? malloc(n * sizeof(*rec)) : NULL;
    if (!s || !rec) {
        os_stage_free(s);
        free(rec);
        return -1;
    }
    enum { BLOCK = 256 };
    float in[BLOCK], out[BLOCK];
    const size_t settle = al_settle_frames(rate, os_stage_latency(s));
    const size_t total = settle + n;
    for (size_t pos = 0; pos < total; pos += BLOCK) {
        const size_t len = total - pos < BLOCK ? total - pos : BLOCK;
        for (size_t i = 0; i < len; ++i) {
            in[i] = (float)(t->amp * al_sine(pos + i, rate, t->freq));
        }
        os_stage_process(s, in, out, (uint32_t)len);
        for (size_t i = 0; i < len; ++i) {
            if (pos + i >= settle) {
                rec[pos + i - settle] = (double)out[i];
            }
        }
    }
    os_stage_free(s);
    const int rc = al_analyse(rec, n, rate, t->freq, r);
    free(rec);
    return rc;
}
