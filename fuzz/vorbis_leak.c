/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The leak fuzz/lsan.supp suppresses, without outstage: libsndfile writes a
 * short Ogg Vorbis file of CHANNELS channels (default 6) and closes it.
 * Under valgrind on Debian 12 (libsndfile 1.2.0, libvorbisenc 1.3.7) 1, 2
 * and 3 channels lose nothing; 6 lose 2848 bytes allocated in
 * vorbis_encode_setup_init. Not built by meson:
 *   cc fuzz/vorbis_leak.c -o vorbis_leak -lsndfile
 *   valgrind --leak-check=full ./vorbis_leak 6 */

#include <sndfile.h>

#include <stdlib.h>
#include <string.h>

int main(int argc, char **argv)
{
    SF_INFO info;
    memset(&info, 0, sizeof(info));
    info.samplerate = 48000;
    info.channels = argc > 1 ? atoi(argv[1]) : 6;
    info.format = SF_FORMAT_OGG | SF_FORMAT_VORBIS;
    if (info.channels < 1 || info.channels > 8) {
        return 2;
    }
    SNDFILE *f = sf_open(argc > 2 ? argv[2] : "vorbis_leak.ogg", SFM_WRITE, &info);
    if (f == NULL) {
        return 1;
    }
    static float silence[8 * 256];
    sf_writef_float(f, silence, 256);
    return sf_close(f) != 0;
}
