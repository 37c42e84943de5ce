/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "audio_write.h"

#include "atomic.h"
#include "cli.h"

#include <sndfile.h>

#include <errno.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

/* Extensions and the container each names (the encodings Ogg holds are told
 * apart by extension). */
static const struct {
    const char *ext;
    int major, sub; /* sub: 0, any the container takes */
} containers[] = {
    {"wav", SF_FORMAT_WAV, 0},
    {"aif", SF_FORMAT_AIFF, 0},
    {"aiff", SF_FORMAT_AIFF, 0},
    {"aifc", SF_FORMAT_AIFF, 0},
    {"flac", SF_FORMAT_FLAC, 0},
    {"ogg", SF_FORMAT_OGG, SF_FORMAT_VORBIS},
    {"oga", SF_FORMAT_OGG, SF_FORMAT_VORBIS},
    {"opus", SF_FORMAT_OGG, SF_FORMAT_OPUS},
    {"caf", SF_FORMAT_CAF, 0},
    {"w64", SF_FORMAT_W64, 0},
    {"rf64", SF_FORMAT_RF64, 0},
    {"au", SF_FORMAT_AU, 0},
    {"snd", SF_FORMAT_AU, 0},
    {"mp3", SF_FORMAT_MPEG, SF_FORMAT_MPEG_LAYER_III},
    /* older sample and speech formats libsndfile writes */
    {"voc", SF_FORMAT_VOC, 0},
    {"8svx", SF_FORMAT_SVX, 0},
    {"svx", SF_FORMAT_SVX, 0},
    {"iff", SF_FORMAT_SVX, 0},
    {"nist", SF_FORMAT_NIST, 0},
    {"sph", SF_FORMAT_NIST, 0},
    {"paf", SF_FORMAT_PAF, 0},
    {"avr", SF_FORMAT_AVR, 0},
};

#define N_CONTAINERS (sizeof(containers) / sizeof(containers[0]))

/* Encodings to try, nearest first, after the data's own. */
static const int fallbacks[] = {SF_FORMAT_PCM_24, SF_FORMAT_PCM_16, SF_FORMAT_FLOAT,
                                SF_FORMAT_VORBIS, SF_FORMAT_OPUS};

/* Encodings libsndfile 1.2.0 accepts in a container but does not write
 * right (found by fuzz/fuzz_cli.c, then by writing every container and
 * encoding and reading it back: tests/cli/test_containers.c): VOC u-law and
 * A-law read back with one frame more than written; PAF 24-bit pads its
 * 10-frame blocks with stale samples and loses a file of fewer than 10
 * frames. They count as not writable, so the nearest other encoding is
 * chosen. */
static int broken(int format)
{
    const int major = format & SF_FORMAT_TYPEMASK, sub = format & SF_FORMAT_SUBMASK;
    return (major == SF_FORMAT_VOC && (sub == SF_FORMAT_ULAW || sub == SF_FORMAT_ALAW)) ||
           (major == SF_FORMAT_PAF && sub == SF_FORMAT_PCM_24);
}

static int writable(int format, int channels, int rate)
{
    if (broken(format)) {
        return 0;
    }
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    info.format = format;
    info.channels = channels;
    info.samplerate = rate;
    return sf_format_check(&info);
}

/* The WAV family (RIFF, its extensible header, W64, RF64) reads as one for
 * the purpose of keeping a .wav name's format. */
static int same_container(int a, int b)
{
    const int ma = a & SF_FORMAT_TYPEMASK, mb = b & SF_FORMAT_TYPEMASK;
    const int wa = ma == SF_FORMAT_WAV || ma == SF_FORMAT_WAVEX;
    const int wb = mb == SF_FORMAT_WAV || mb == SF_FORMAT_WAVEX;
    return ma == mb || (wa && wb);
}

static void known_list(char *buf, size_t len)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < N_CONTAINERS && used + 8 < len; ++i) {
        const int n = snprintf(buf + used, len - used, "%s.%s", i ? ", " : "", containers[i].ext);
        used += n > 0 ? (size_t)n : 0;
    }
}

int cli_audio_ext_check(const char *path, char *err, size_t len)
{
    char ext[16];
    cli_path_ext(path, ext, sizeof(ext));
    if (ext[0] == '\0') {
        return 0;
    }
    for (size_t i = 0; i < N_CONTAINERS; ++i) {
        if (strcmp(ext, containers[i].ext) == 0) {
            return 0;
        }
    }
    char list[256];
    known_list(list, sizeof(list));
    cli_err(err, len, "%s: unknown audio extension '.%s'; name the output %s", path, ext, list);
    return -1;
}

void cli_audio_format_name(int format, char *buf, size_t len)
{
    SF_FORMAT_INFO major = {.format = format & SF_FORMAT_TYPEMASK};
    SF_FORMAT_INFO sub = {.format = format & SF_FORMAT_SUBMASK};
    const int ok_major = sf_command(NULL, SFC_GET_FORMAT_INFO, &major, sizeof(major)) == 0;
    const int ok_sub = sf_command(NULL, SFC_GET_FORMAT_INFO, &sub, sizeof(sub)) == 0;
    snprintf(buf, len, "%s, %s", ok_major ? major.name : "?", ok_sub ? sub.name : "?");
}

/* Big-endian 32-bit fields of an IFF chunk header. */
static uint32_t be32(const unsigned char *b)
{
    return (uint32_t)b[0] << 24 | (uint32_t)b[1] << 16 | (uint32_t)b[2] << 8 | (uint32_t)b[3];
}

static void put_be32(unsigned char *b, uint32_t v)
{
    b[0] = (unsigned char)(v >> 24);
    b[1] = (unsigned char)(v >> 16);
    b[2] = (unsigned char)(v >> 8);
    b[3] = (unsigned char)v;
}

int cli_audio_fix_aiff_pad(int fd, int format, long long frames, int channels)
{
    const int major = format & SF_FORMAT_TYPEMASK, sub = format & SF_FORMAT_SUBMASK;
    const int one_byte = sub == SF_FORMAT_PCM_S8 || sub == SF_FORMAT_PCM_U8 ||
                         sub == SF_FORMAT_ULAW || sub == SF_FORMAT_ALAW;
    const long long bytes = frames * channels;
    if (major != SF_FORMAT_AIFF || !one_byte || bytes % 2 == 0 || bytes > 0x7ffffff0LL) {
        return 0;
    }
    /* FORM header, then chunks: COMM (numChannels, numSampleFrames, ...) and
     * SSND (offset, blockSize, the samples); the pad byte after an odd chunk
     * counts in FORM's size and not in the chunk's (EA IFF 85; Apple, "Audio
     * Interchange File Format" 1.3, 1989; both from memory). */
    unsigned char h[12];
    if (pread(fd, h, 12, 0) != 12 || memcmp(h, "FORM", 4) != 0) {
        return 0;
    }
    const off_t end = (off_t)be32(h + 4) + 8;
    off_t at = 12, comm = -1, ssnd = -1;
    uint32_t comm_frames = 0, ssnd_size = 0;
    while (at + 8 <= end) {
        unsigned char c[14];
        if (pread(fd, c, 14, at) < 8) {
            return 0;
        }
        const uint32_t size = be32(c + 4);
        if (memcmp(c, "COMM", 4) == 0 && size >= 6) {
            comm = at;
            comm_frames = be32(c + 10);
        } else if (memcmp(c, "SSND", 4) == 0) {
            ssnd = at;
            ssnd_size = size;
        }
        at += 8 + (off_t)size + (off_t)(size & 1);
    }
    const uint32_t want = (uint32_t)(8 + bytes);
    if (comm < 0 || ssnd < 0 || ssnd_size != want + 1 ||
        comm_frames != (uint32_t)(frames + (channels == 1))) {
        return 0; /* not the miscount this mends */
    }
    unsigned char b[4];
    put_be32(b, want);
    if (pwrite(fd, b, 4, ssnd + 4) != 4) {
        return -1;
    }
    put_be32(b, (uint32_t)frames);
    return pwrite(fd, b, 4, comm + 10) == 4 ? 1 : -1;
}

int cli_audio_empty_ok(int format)
{
    const int major = format & SF_FORMAT_TYPEMASK;
    return major != SF_FORMAT_FLAC && major != SF_FORMAT_MPEG &&
           (format & SF_FORMAT_SUBMASK) != SF_FORMAT_OPUS;
}

int cli_audio_format_for(const char *path, int base, int channels, int rate, int *format, char *err,
                         size_t len)
{
    char ext[16];
    cli_path_ext(path, ext, sizeof(ext));
    int major = -1, sub = 0;
    for (size_t i = 0; i < N_CONTAINERS; ++i) {
        if (strcmp(ext, containers[i].ext) == 0) {
            major = containers[i].major;
            sub = containers[i].sub;
        }
    }
    if (ext[0] == '\0' || (major >= 0 && same_container(major, base) &&
                           (sub == 0 || sub == (base & SF_FORMAT_SUBMASK)))) {
        *format = base; /* no extension, or the data's own container */
        if (writable(base, channels, rate)) {
            return 0;
        }
        if (!broken(base)) {
            char name[160];
            cli_audio_format_name(base, name, sizeof(name));
            cli_err(err, len, "%s: libsndfile cannot write %s with %d channels at %d Hz", path,
                    name, channels, rate);
            return -1;
        }
        major = base & SF_FORMAT_TYPEMASK; /* the same container, another encoding */
        sub = 0;
    }
    if (major < 0) {
        return cli_audio_ext_check(path, err, len);
    }
    if (major == SF_FORMAT_WAV && channels > 2) {
        major = SF_FORMAT_WAVEX; /* its header carries the channel layout */
    }
    if (sub != 0) {
        *format = major | sub;
        if (writable(*format, channels, rate)) {
            return 0;
        }
    } else {
        *format = major | (base & SF_FORMAT_SUBMASK);
        if (writable(*format, channels, rate)) {
            return 0;
        }
        for (size_t i = 0; i < sizeof(fallbacks) / sizeof(fallbacks[0]); ++i) {
            *format = major | fallbacks[i];
            if (writable(*format, channels, rate)) {
                return 0;
            }
        }
    }
    SF_FORMAT_INFO info = {.format = major};
    const int named = sf_command(NULL, SFC_GET_FORMAT_INFO, &info, sizeof(info)) == 0;
    cli_err(err, len, "%s: libsndfile cannot write %s%s with %d channels at %d Hz", path,
            named ? info.name : "this container", sub == SF_FORMAT_OPUS ? " (Opus)" : "", channels,
            rate);
    return -1;
}

int cli_write_audio(const char *path, const float *x, size_t frames, int channels, int rate,
                    int format, char *err, size_t len)
{
    int chosen;
    if (cli_audio_format_for(path, format, channels, rate, &chosen, err, len) != 0) {
        return -1;
    }
    if (frames == 0 && !cli_audio_empty_ok(chosen)) {
        cli_err(err, len, "%s: an empty file of this format cannot be written", path);
        return -1;
    }
    CliAtomic a;
    if (cli_atomic_open(&a, path, err, len) != 0) {
        return -1;
    }
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    info.samplerate = rate;
    info.channels = channels;
    info.format = chosen;
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
    if (!bad && (a.tmp || a.spooled) &&
        cli_audio_fix_aiff_pad(a.fd, chosen, (long long)frames, channels) < 0) {
        cli_err(err, len, "%s: cannot write: %s", path, strerror(errno));
        bad = 1;
    }
    if (bad) {
        cli_atomic_abort(&a);
        return -1;
    }
    return cli_atomic_commit(&a, err, len);
}
