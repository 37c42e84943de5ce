/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "os_oversampler.h"

#include <string.h>

int os_oversampler_design(OsOversamplerDesign *d)
{
    for (int j = 1; j <= OS_OVERSAMPLE_MAX_LOG2; ++j) {
        /* In cycles per sample at this stage's rate 2^j fs: keep 0..OS_PASSBAND fs,
         * reject from 2^(j-1) fs - OS_PASSBAND fs, where the first image of the
         * kept band lies. */
        const double scale = 1.0 / (double)(1 << j);
        const double pass = OS_PASSBAND * scale;
        const double stop = 0.5 - OS_PASSBAND * scale;
        if (os_halfband_design(&d->stage[j - 1], stop - pass, OS_STOPBAND_DB) != 0) {
            return -1;
        }
    }
    return 0;
}

static int log2_of(int factor)
{
    int m = 0;
    while (m < OS_OVERSAMPLE_MAX_LOG2 && (2 << m) <= factor) {
        ++m;
    }
    return m;
}

/* Round trip delay at the top rate, before padding. */
static int raw_delay(const OsOversamplerDesign *d, int m)
{
    int t = 0;
    for (int j = 1; j <= m; ++j) {
        /* each direction delays by 2K-1 samples at rate 2^j fs = 2^(m-j) top-rate samples */
        t += 2 * os_halfband_delay(&d->stage[j - 1]) << (m - j);
    }
    return t;
}

int os_oversampler_latency(const OsOversamplerDesign *d, int factor, int inner)
{
    const int m = log2_of(factor);
    const int f = 1 << m;
    const int t = raw_delay(d, m) + inner;
    return (t + (f - t % f) % f) / f;
}

void os_oversampler_init(OsOversampler *os, const OsOversamplerDesign *d, int factor, int inner)
{
    memset(os, 0, sizeof(*os));
    os->design = d;
    os->log2f = log2_of(factor);
    os->factor = 1 << os->log2f;
    const int t = raw_delay(d, os->log2f) + inner;
    os->pad = (os->factor - t % os->factor) % os->factor;
    os->latency = (t + os->pad) / os->factor;
    for (int j = 0; j < os->log2f; ++j) {
        os_halfband_reset(&os->up[j], &d->stage[j]);
        os_halfband_reset(&os->down[j], &d->stage[j]);
    }
}

void os_oversampler_up(OsOversampler *os, double x, double *y)
{
    double tmp[OS_OVERSAMPLE_MAX];
    y[0] = x;
    int n = 1;
    for (int j = 0; j < os->log2f; ++j) {
        /* the stage is stateful: feed it in time order */
        for (int i = 0; i < n; ++i) {
            tmp[i] = y[i];
        }
        for (int i = 0; i < n; ++i) {
            os_halfband_up(&os->up[j], tmp[i], &y[2 * i], &y[2 * i + 1]);
        }
        n *= 2;
    }
    if (os->pad > 0) {
        /* delay line of pad samples at the top rate */
        for (int i = 0; i < n; ++i) {
            const double v = y[i];
            y[i] = os->pad_line[os->pad_pos];
            os->pad_line[os->pad_pos] = v;
            if (++os->pad_pos == os->pad) {
                os->pad_pos = 0;
            }
        }
    }
}

double os_oversampler_down(OsOversampler *os, double *y)
{
    int n = os->factor;
    for (int j = os->log2f - 1; j >= 0; --j) {
        for (int i = 0; i < n / 2; ++i) {
            y[i] = os_halfband_down(&os->down[j], y[2 * i], y[2 * i + 1]);
        }
        n /= 2;
    }
    return y[0];
}
