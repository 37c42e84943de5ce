/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "demo_audio.h"

#include "audio_write.h"
#include "cli.h"

#include <sndfile.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* rms of (y[i] - x[i - lat]) over rms of x[i - lat], i in [a, b), in dB. */
static double residual_db(const float *x, const float *y, size_t a, size_t b, size_t lat)
{
    double e = 0.0, s = 0.0;
    for (size_t i = a; i < b; ++i) {
        const double ref = (double)x[i - lat];
        const double d = (double)y[i] - ref;
        e += d * d;
        s += ref * ref;
    }
    return s > 0.0 && e > 0.0 ? 10.0 * log10(e / s) : -(double)INFINITY;
}

int cli_demo_audio(const char *path, const float *material, size_t n, double rate, uint32_t latency,
                   double quiet_start, double peak_dbfs, CliDemoAudio *out, char *err, size_t len)
{
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    SNDFILE *f = sf_open(path, SFM_READ, &info);
    if (f == NULL) {
        cli_err(err, len, "%s: cannot read back: %s", path, sf_strerror(NULL));
        return -1;
    }
    if (info.channels != 1 || (size_t)info.frames != n) {
        sf_close(f);
        cli_err(err, len, "%s: not the mono render of the material", path);
        return -1;
    }
    float *y = malloc(n * sizeof(float));
    if (y == NULL || sf_readf_float(f, y, (sf_count_t)n) != (sf_count_t)n) {
        sf_close(f);
        free(y);
        cli_err(err, len, "%s: cannot read back", path);
        return -1;
    }
    sf_close(f);
    /* Skip 0.1 s after each change of material so tails do not count twice. */
    const size_t skip = (size_t)(0.1 * rate) + latency;
    const size_t q = (size_t)(quiet_start * rate);
    out->groove_db = q > skip + 1 ? residual_db(material, y, skip, q, latency) : (double)NAN;
    out->quiet_db =
        n > q + 5 * skip ? residual_db(material, y, q + 5 * skip, n, latency) : (double)NAN;
    double peak = 0.0;
    for (size_t i = 0; i < n; ++i) {
        peak = fmax(peak, fabs((double)y[i]));
    }
    const double g = peak > 0.0 ? pow(10.0, peak_dbfs / 20.0) / peak : 1.0;
    for (size_t i = 0; i < n; ++i) {
        y[i] = (float)(g * (double)y[i]);
    }
    out->gain_db = 20.0 * log10(g);
    out->peak_dbfs = peak > 0.0 ? peak_dbfs : -(double)INFINITY;
    const int rc = cli_write_audio(path, y, n, 1, info.samplerate, info.format, err, len);
    free(y);
    return rc;
}
