/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Writing a buffer the tool made (demo material, measurement records) as an
 * audio file, atomically. */

#ifndef CLI_AUDIO_WRITE_H
#define CLI_AUDIO_WRITE_H

#include <stddef.h>

/**
 * Write @p frames interleaved frames of @p channels channels at @p rate Hz to
 * @p path in libsndfile format @p format (e.g. SF_FORMAT_WAV | SF_FORMAT_FLOAT).
 * Returns 0, or -1 with a message naming @p path; nothing is left behind on
 * failure.
 */
int cli_write_audio(const char *path, const float *x, size_t frames, int channels, int rate,
                    int format, char *err, size_t len);

#endif
