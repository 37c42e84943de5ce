/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "analysis.h"

#include <math.h>
#include <stdlib.h>

void an_harmonic(const double *x, size_t n, double rate, double f0, int k, double *re, double *im)
{
    double sr = 0.0, si = 0.0;
    const double w = 2.0 * M_PI * f0 * k / rate;
    for (size_t i = 0; i < n; ++i) {
        sr += x[i] * cos(w * (double)i);
        si -= x[i] * sin(w * (double)i);
    }
    *re = 2.0 * sr / (double)n;
    *im = 2.0 * si / (double)n;
}

double an_harmonic_amp(const double *x, size_t n, double rate, double f0, int k)
{
    double re, im;
    an_harmonic(x, n, rate, f0, k, &re, &im);
    return hypot(re, im);
}

double an_thd(const double *x, size_t n, double rate, double f0, int kmax)
{
    const double a1 = an_harmonic_amp(x, n, rate, f0, 1);
    double s = 0.0;
    for (int k = 2; k <= kmax && k * f0 < 0.5 * rate; ++k) {
        const double a = an_harmonic_amp(x, n, rate, f0, k);
        s += a * a;
    }
    return sqrt(s) / a1;
}

double an_harmonic_error(const double *x, size_t nx, double rx, const double *r, size_t nr,
                         double rr, double f0, double band_hz)
{
    double num = 0.0, den = 0.0;
    for (int k = 1; k * f0 < band_hz; ++k) {
        double xr, xi, rre, rim;
        an_harmonic(x, nx, rx, f0, k, &xr, &xi);
        an_harmonic(r, nr, rr, f0, k, &rre, &rim);
        num += (xr - rre) * (xr - rre) + (xi - rim) * (xi - rim);
        den += rre * rre + rim * rim;
    }
    return sqrt(num / den);
}

double an_peak(const double *x, size_t n)
{
    double p = 0.0;
    for (size_t i = 0; i < n; ++i) {
        p = fmax(p, fabs(x[i]));
    }
    return p;
}

double an_rms(const double *x, size_t n)
{
    double s = 0.0;
    for (size_t i = 0; i < n; ++i) {
        s += x[i] * x[i];
    }
    return n ? sqrt(s / (double)n) : 0.0;
}

size_t an_whole_periods(size_t n, double rate, double f0)
{
    const double period = rate / f0;
    for (size_t p = (size_t)floor((double)n / period); p > 0; --p) {
        const double len = (double)p * period;
        if (fabs(len - round(len)) < 1e-9) {
            return (size_t)round(len);
        }
    }
    return 0;
}

void an_run_sine(OsStage *stage, double rate, double f0, double amp, size_t settle, size_t n,
                 double *vload, double *out)
{
    enum { BLOCK = 256 };
    float in[BLOCK], o[BLOCK];
    double v[BLOCK];
    const size_t total = settle + n;
    for (size_t pos = 0; pos < total; pos += BLOCK) {
        const size_t len = total - pos < BLOCK ? total - pos : BLOCK;
        for (size_t i = 0; i < len; ++i) {
            in[i] = (float)(amp * sin(2.0 * M_PI * f0 * (double)(pos + i) / rate));
        }
        os_stage_process_probe(stage, in, o, v, (uint32_t)len);
        for (size_t i = 0; i < len; ++i) {
            const size_t t = pos + i;
            if (t >= settle) {
                if (vload) {
                    vload[t - settle] = v[i];
                }
                if (out) {
                    out[t - settle] = (double)o[i];
                }
            }
        }
    }
}
