/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Every container the command line names by extension, from every encoding an
 * input may bring, at 1 to 3 channels and lengths that are odd, even, shorter
 * and longer than a codec block: what cli_write_audio() writes (the encoding
 * cli_audio_format_for() chooses) reads back through libsndfile with exactly
 * the frames written and every sample within the chosen encoding's
 * quantisation. The lossy codecs (Vorbis, Opus, MP3) are left to
 * test_outputs.py. This sweep found libsndfile 1.2.0 writing VOC u-law and
 * A-law with one frame too many, PAF 24-bit with its blocks padded by stale
 * samples, and AIFF in one-byte encodings with the pad byte counted as a frame
 * (cli/audio_write.c). */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <math.h>
#include <sndfile.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "audio_write.h"
#include "cli.h"

/* The extensions the man page lists for lossless containers. */
static const char *const exts[] = {"wav", "aif",  "aiff", "aifc", "flac", "caf",
                                   "w64", "rf64", "au",   "snd",  "voc",  "8svx",
                                   "svx", "iff",  "nist", "sph",  "paf",  "avr"};

/* The encodings an input may bring, in a WAV. */
static const int bases[] = {SF_FORMAT_PCM_U8, SF_FORMAT_PCM_16, SF_FORMAT_PCM_24, SF_FORMAT_PCM_32,
                            SF_FORMAT_FLOAT,  SF_FORMAT_DOUBLE, SF_FORMAT_ULAW,   SF_FORMAT_ALAW};

/* The largest error of a sample of magnitude up to 0.5 stored in @p sub and
 * read back: half a step of linear PCM (one step, as libsndfile may truncate);
 * for G.711 u-law and A-law, 16 steps per segment (ITU-T G.711, from memory),
 * so a step is at most 1/16 of the segment's upper end, 1/32 of 0.5 x 2. */
static double tolerance(int sub)
{
    switch (sub) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8:
        return 1.0 / 128.0;
    case SF_FORMAT_PCM_16:
        return 1.0 / 32768.0;
    case SF_FORMAT_PCM_24:
        return 1.0 / 8388608.0;
    case SF_FORMAT_PCM_32:
        return 1e-9;
    case SF_FORMAT_FLOAT:
    case SF_FORMAT_DOUBLE:
        return 0.0;
    case SF_FORMAT_ULAW:
    case SF_FORMAT_ALAW:
        return 1.0 / 32.0;
    default:
        return 1.0 / 8388608.0; /* FLAC and the rest: at least 24 bits here */
    }
}

static void every_container(void **state)
{
    (void)state;
    char dir[] = "/tmp/outstage-containers-XXXXXX";
    assert_non_null(mkdtemp(dir));
    const int counts[] = {1, 5, 29, 64, 1001};
    enum { MAXF = 1001, MAXC = 3 };
    static float x[MAXF * MAXC], y[(MAXF + 16) * MAXC];
    for (int k = 0; k < MAXF * MAXC; ++k) {
        x[k] = 0.5f * sinf(0.37f * (float)k);
    }
    int written = 0, refused = 0, failed = 0;
    for (size_t e = 0; e < sizeof(exts) / sizeof(exts[0]); ++e) {
        for (size_t b = 0; b < sizeof(bases) / sizeof(bases[0]); ++b) {
            for (int ch = 1; ch <= MAXC; ++ch) {
                for (size_t c = 0; c < sizeof(counts) / sizeof(counts[0]); ++c) {
                    const int n = counts[c];
                    char path[96], err[CLI_ERR_LEN];
                    snprintf(path, sizeof(path), "%s/out.%s", dir, exts[e]);
                    const int base = SF_FORMAT_WAV | bases[b];
                    int chosen = 0;
                    if (cli_audio_format_for(path, base, ch, 48000, &chosen, err, sizeof(err)) !=
                        0) {
                        ++refused; /* e.g. 8SVX with two channels: said, not written */
                        continue;
                    }
                    assert_int_equal(
                        cli_write_audio(path, x, (size_t)n, ch, 48000, base, err, sizeof(err)), 0);
                    SF_INFO info;
                    memset(&info, 0, sizeof(info));
                    SNDFILE *f = sf_open(path, SFM_READ, &info);
                    sf_count_t got = -1;
                    double worst = 0.0;
                    if (f != NULL) {
                        got = sf_readf_float(f, y, MAXF + 16);
                        for (sf_count_t k = 0; k < (got < n ? got : n) * ch; ++k) {
                            worst = fmax(worst, fabs((double)y[k] - (double)x[k]));
                        }
                        sf_close(f);
                    }
                    const double tol = tolerance(chosen & SF_FORMAT_SUBMASK);
                    char name[160];
                    cli_audio_format_name(chosen, name, sizeof(name));
                    if (got != n || info.frames != n || info.channels != ch || worst > tol) {
                        printf("FAIL .%s from WAV %#x, %d ch, %d frames: %s; header %lld, read "
                               "%lld frames, %d ch, largest error %.3g (allowed %.3g)\n",
                               exts[e], base, ch, n, name, (long long)info.frames, (long long)got,
                               info.channels, worst, tol);
                        ++failed;
                    }
                    ++written;
                    unlink(path);
                }
            }
        }
    }
    rmdir(dir);
    printf("%zu extensions x %zu input encodings x 1-3 channels x 5 lengths: %d files written "
           "and read back, %d combinations refused, %d wrong\n",
           sizeof(exts) / sizeof(exts[0]), sizeof(bases) / sizeof(bases[0]), written, refused,
           failed);
    assert_true(written > 1000);
    assert_int_equal(failed, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(every_container)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
