/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "audio_write.h"

#include "atomic.h"
#include "cli.h"

#include <sndfile.h>

#include <string.h>

int cli_write_audio(const char *path, const float *x, size_t frames, int channels, int rate,
                    int format, char *err, size_t len)
{
    CliAtomic a;
    if (cli_atomic_open(&a, path, err, len) != 0) {
        return -1;
    }
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    info.samplerate = rate;
    info.channels = channels;
    info.format = format;
    SNDFILE *f = sf_open_fd(a.fd, SFM_WRITE, &info, SF_FALSE);
    if (f == NULL) {
        cli_err(err, len, "%s: cannot write: %s", path, sf_strerror(NULL));
        cli_atomic_abort(&a);
        return -1;
    }
    sf_command(f, SFC_SET_CLIPPING, NULL, SF_TRUE);
    const sf_count_t n = (sf_count_t)frames;
    int bad = sf_writef_float(f, x, n) != n;
    if (bad) {
        cli_err(err, len, "%s: cannot write: %s", path, sf_strerror(f));
    }
    if (sf_close(f) != 0 && !bad) {
        cli_err(err, len, "%s: cannot write", path);
        bad = 1;
    }
    if (bad) {
        cli_atomic_abort(&a);
        return -1;
    }
    return cli_atomic_commit(&a, err, len);
}
