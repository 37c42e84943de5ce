/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Audio output: the container chosen from the output's name, and writing a
 * buffer the tool made (demo material, measurement records) atomically. */

#ifndef CLI_AUDIO_WRITE_H
#define CLI_AUDIO_WRITE_H

#include <stddef.h>

/**
 * The libsndfile format to write @p path in, from its extension: .wav, .aif /
 * .aiff / .aifc, .flac, .ogg / .oga (Vorbis), .opus, .caf, .w64, .rf64, .au /
 * .snd, .mp3 (where this libsndfile writes MPEG). @p base is the format the
 * data has (the input's, or what the tool would write): a name without an
 * extension, or with one of @p base's own container, keeps @p base whole;
 * otherwise @p base's encoding is kept where the new container takes it, else
 * the nearest it does (24-bit for FLAC from float, Vorbis for Ogg ...). An
 * unknown extension, or a container that cannot hold @p channels channels at
 * @p rate Hz, is refused. Returns 0 with *format set, or -1 with a message
 * naming @p path.
 */
int cli_audio_format_for(const char *path, int base, int channels, int rate, int *format, char *err,
                         size_t len);

/** 0 if @p path has no extension or one cli_audio_format_for() knows; else
 *  -1 with a message listing the known ones. */
int cli_audio_ext_check(const char *path, char *err, size_t len);

/** The format's name, e.g. "WAV (Microsoft), 32 bit float". */
void cli_audio_format_name(int format, char *buf, size_t len);

/** Mend the header of an AIFF file libsndfile 1.2.0 has just written on
 *  @p fd (closed by libsndfile, still open here) with @p frames frames of
 *  @p channels channels in a one-byte encoding (8-bit PCM, u-law, A-law) when
 *  the samples are an odd number of bytes: it counts the chunk's pad byte in
 *  the SSND chunk's size and, for one channel, as one more frame, which reads
 *  back as an extra last sample (a u-law 0 byte: -0.98 of full scale, a
 *  click). Changes nothing in any other file. Returns 1 when mended, 0 when
 *  there was nothing to mend, -1 on a write error (errno set). */
int cli_audio_fix_aiff_pad(int fd, int format, long long frames, int channels);

/** Whether libsndfile writes a file of this format that reads back when it
 *  holds no frames (its FLAC and MPEG writers put out nothing at
 *  all, its Opus writer a stream that does not decode). */
int cli_audio_empty_ok(int format);

/**
 * Write @p frames interleaved frames of @p channels channels at @p rate Hz to
 * @p path, in the container its name asks for (cli_audio_format_for(), from
 * @p format, e.g. SF_FORMAT_WAV | SF_FORMAT_FLOAT). Returns 0, or -1 with a
 * message naming @p path; nothing is left behind on failure.
 */
int cli_write_audio(const char *path, const float *x, size_t frames, int channels, int rate,
                    int format, char *err, size_t len);

#endif
