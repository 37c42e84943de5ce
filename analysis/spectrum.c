/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "spectrum.h"

#include <fftw3.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>

/* FFTW's planner is not thread-safe (FFTW manual, "Thread safety"): only the
 * execution of a plan is. Plans are made and destroyed under this lock. */
static pthread_mutex_t planner_lock = PTHREAD_MUTEX_INITIALIZER;

int an_spectrum_rms(const double *x, size_t n, double *rms)
{
    if (n < 2 || n > (size_t)2147483647) {
        return -1;
    }
    const size_t nb = n / 2 + 1;
    double *in = fftw_malloc(n * sizeof(double));
    fftw_complex *out = fftw_malloc(nb * sizeof(fftw_complex));
    if (in == NULL || out == NULL) {
        fftw_free(in);
        fftw_free(out);
        return -1;
    }
    pthread_mutex_lock(&planner_lock);
    fftw_plan plan = fftw_plan_dft_r2c_1d((int)n, in, out, FFTW_ESTIMATE);
    pthread_mutex_unlock(&planner_lock);
    if (plan == NULL) {
        fftw_free(in);
        fftw_free(out);
        return -1;
    }
    for (size_t i = 0; i < n; ++i) {
        in[i] = x[i];
    }
    fftw_execute(plan);
    const double inv_n = 1.0 / (double)n;
    for (size_t k = 0; k < nb; ++k) {
        const double mag = hypot(out[k][0], out[k][1]) * inv_n;
        /* A real signal's energy at 0 < k < n/2 is split between k and n - k. */
        const int edge = k == 0 || (n % 2 == 0 && k == n / 2);
        rms[k] = edge ? mag : M_SQRT2 * mag;
    }
    pthread_mutex_lock(&planner_lock);
    fftw_destroy_plan(plan);
    pthread_mutex_unlock(&planner_lock);
    fftw_free(in);
    fftw_free(out);
    return 0;
}

int an_distortion(const double *x, size_t n, size_t cycles, double rate, double band_lo,
                  double band_hi, AnDistortion *d)
{
    const size_t nb = n / 2 + 1;
    if (cycles == 0 || 2 * cycles >= n || !(rate > 0.0)) {
        return -1;
    }
    double *rms = malloc(nb * sizeof(double));
    if (rms == NULL || an_spectrum_rms(x, n, rms) != 0) {
        free(rms);
        return -1;
    }
    const double bin_hz = rate / (double)n;
    const double f1 = rms[cycles];
    double harm = 0.0, resid = 0.0;
    int count = 0;
    for (size_t k = 1; k < nb; ++k) {
        const double f = (double)k * bin_hz;
        if (k == cycles || f < band_lo || f > band_hi) {
            continue;
        }
        const double p = rms[k] * rms[k];
        resid += p;
        if (k % cycles == 0) {
            harm += p;
            ++count;
        }
    }
    d->fundamental_rms = f1;
    d->thd = f1 > 0.0 ? sqrt(harm) / f1 : (double)INFINITY;
    d->thdn = f1 > 0.0 ? sqrt(resid) / f1 : (double)INFINITY;
    double sum = 0.0;
    for (size_t i = 0; i < n; ++i) {
        sum += x[i];
    }
    d->dc = sum / (double)n;
    d->harmonics = count;
    free(rms);
    return 0;
}

double an_coherent(double freq, double rate, double seconds, size_t *n, size_t *cycles)
{
    size_t len = (size_t)llround(seconds * rate);
    if (len < 4) {
        len = 4;
    }
    double c = round(freq * (double)len / rate);
    if (c < 1.0) {
        c = 1.0;
    }
    if (c >= (double)(len / 2)) {
        c = (double)(len / 2 - 1);
    }
    *n = len;
    *cycles = (size_t)c;
    return c * rate / (double)len;
}
