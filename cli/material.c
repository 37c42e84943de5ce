/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "material.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>

#define BEAT 0.5 /* s, 120 beats per minute */
#define QUIET_TAIL 2.0

/* xorshift32 (Marsaglia 2003): the same noise on every machine. */
static double noise(uint32_t *state)
{
    uint32_t s = *state;
    s ^= s << 13;
    s ^= s >> 17;
    s ^= s << 5;
    *state = s;
    return (double)s / 2147483648.0 - 1.0;
}

/* A plucked string, roughly: harmonics whose decay quickens with order, a 3 ms attack. */
static double pluck(double t, double f)
{
    if (t < 0.0) {
        return 0.0;
    }
    double y = 0.0;
    for (int h = 1; h <= 8; ++h) {
        y += sin(2.0 * M_PI * f * h * t) * exp(-t * (2.5 + 2.0 * h)) / h;
    }
    return y * (1.0 - exp(-t / 0.003));
}

/* Kick: a sine falling from 120 to 45 Hz with a 0.3 s decay; phase is the
 * integral of the falling frequency. */
static double kick(double t)
{
    if (t < 0.0 || t > 0.6) {
        return 0.0;
    }
    const double tau = 0.04;
    const double phase = 2.0 * M_PI * (45.0 * t + (120.0 - 45.0) * tau * (1.0 - exp(-t / tau)));
    return sin(phase) * exp(-t / 0.3) * (1.0 - exp(-t / 0.001));
}

static double decay(double t, double tau)
{
    return t < 0.0 ? 0.0 : exp(-t / tau);
}

/* Pad: an A minor triad, two slightly detuned sines per note, slow attack. */
static double pad(double t)
{
    static const double notes[] = {220.0, 261.63, 329.63};
    double y = 0.0;
    for (int i = 0; i < 3; ++i) {
        y += sin(2.0 * M_PI * notes[i] * 0.998 * t) + sin(2.0 * M_PI * notes[i] * 1.002 * t);
    }
    return y / 6.0 * (1.0 - exp(-t / 0.4));
}

double cli_material_quiet_start(double seconds)
{
    return seconds - QUIET_TAIL > 0.0 ? seconds - QUIET_TAIL : 0.0;
}

void cli_material(float *x, size_t n, double rate)
{
    /* Bass line in eighths, two bars repeated: A, C, D, E, G below middle C. */
    static const double bass[16] = {55.0, 55.0, 65.41, 55.0,  73.42, 73.42, 82.41, 73.42,
                                    55.0, 55.0, 98.0,  82.41, 73.42, 65.41, 61.74, 49.0};
    const double seconds = (double)n / rate;
    const double quiet = cli_material_quiet_start(seconds);
    double *groove = calloc(n, sizeof(double)), *bed = calloc(n, sizeof(double));
    if (groove == NULL || bed == NULL) {
        free(groove);
        free(bed);
        for (size_t i = 0; i < n; ++i) {
            x[i] = 0.0f;
        }
        return;
    }
    uint32_t seed = 0x2545F491u;
    double hp = 0.0, prev = 0.0;
    for (size_t i = 0; i < n; ++i) {
        const double t = (double)i / rate;
        const double beat_t = fmod(t, BEAT), eighth_t = fmod(t, BEAT / 2.0);
        const long beat = (long)(t / BEAT), eighth = (long)(t / (BEAT / 2.0));
        const double nz = noise(&seed);
        /* Hi-hat: noise through a first difference (a gentle high-pass). */
        hp = nz - prev;
        prev = nz;
        double y = 0.0;
        /* The groove stops with a 50 ms fade rather than a click. */
        const double fade = fmin(1.0, (quiet - t) / 0.05);
        if (t < quiet) {
            y += 0.9 * kick(beat % 2 == 0 ? beat_t : -1.0);
            y += beat % 2 == 1
                     ? (0.35 * nz + 0.25 * sin(2.0 * M_PI * 185.0 * beat_t)) * decay(beat_t, 0.12)
                     : 0.0;
            y += 0.08 * hp * decay(eighth_t, 0.03);
            y += 0.55 * pluck(eighth_t, bass[eighth % 16]);
        }
        groove[i] = fade > 0.0 ? fade * y : 0.0;
        bed[i] = pad(t);
    }
    double gpeak = 1e-12, ppeak = 1e-12;
    for (size_t i = 0; i < n; ++i) {
        gpeak = fmax(gpeak, fabs(groove[i]));
        ppeak = fmax(ppeak, fabs(bed[i]));
    }
    /* The pad sits CLI_MATERIAL_PAD_DBFS under the material's peak; then the whole is scaled
     * to that peak exactly. */
    const double pad_gain =
        pow(10.0, (CLI_MATERIAL_PAD_DBFS - CLI_MATERIAL_PEAK_DBFS) / 20.0) * gpeak / ppeak;
    double peak = 1e-12;
    for (size_t i = 0; i < n; ++i) {
        groove[i] += pad_gain * bed[i];
        peak = fmax(peak, fabs(groove[i]));
    }
    const double g = pow(10.0, CLI_MATERIAL_PEAK_DBFS / 20.0) / peak;
    for (size_t i = 0; i < n; ++i) {
        x[i] = (float)(g * groove[i]);
    }
    free(groove);
    free(bed);
}
