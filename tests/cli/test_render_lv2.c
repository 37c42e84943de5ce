/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* `outstage render` against the LV2 plugin, loaded through lilv from the build
 * directory's bundle as a host would load it (the contract: the tool's output
 * for a given setting equals the LV2 plugin's, sample for sample). A 3-channel
 * file goes through the built executable; each channel goes through its own
 * plugin instance in 512-frame blocks (the tool uses 4096). The host sets the
 * controls, runs an empty block so the plugin reads them, and activates the
 * plugin afresh, which starts it at those values, as the tool starts.
 *
 * Usage: test_render_lv2 OUTSTAGE_EXE BUNDLE_DIR */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>

#include <lilv/lilv.h>
#include <sndfile.h>

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#define RATE 48000
#define FRAMES 30000
#define CHANNELS 3
#define BLOCK 512

static const char *exe, *bundle;
static LilvWorld *world;
static char dir[] = "/tmp/outstage-render-XXXXXX";

/* Settings by symbol, as --set takes them and as the host sets the ports. */
typedef struct {
    const char *symbol;
    float value;
} Set;

static int run_tool(const char *const *argv)
{
    const pid_t pid = fork();
    if (pid == 0) {
        execv(exe, (char *const *)argv);
        _exit(127);
    }
    int status = 0;
    waitpid(pid, &status, 0);
    return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/* Three different channels: a loud low sine into the limits, a decaying
 * pluck with a little noise, a quiet tone for the crossover region. */
static void make_input(const char *path, int format)
{
    float *x = malloc((size_t)FRAMES * CHANNELS * sizeof(float));
    assert_non_null(x);
    unsigned s = 1u;
    for (int i = 0; i < FRAMES; ++i) {
        const double t = (double)i / RATE;
        s = s * 1664525u + 1013904223u;
        x[i * CHANNELS + 0] = (float)(0.9 * sin(2.0 * M_PI * 110.0 * t));
        x[i * CHANNELS + 1] = (float)(0.7 * exp(-4.0 * t) * sin(2.0 * M_PI * 330.0 * t) +
                                      0.01 * ((double)(s >> 9) / 4194304.0 - 1.0));
        x[i * CHANNELS + 2] = (float)(0.02 * sin(2.0 * M_PI * 997.0 * t));
    }
    SF_INFO info = {.samplerate = RATE, .channels = CHANNELS, .format = format};
    SNDFILE *f = sf_open(path, SFM_WRITE, &info);
    assert_non_null(f);
    assert_int_equal(sf_writef_float(f, x, FRAMES), FRAMES);
    sf_close(f);
    free(x);
}

static float *read_all(const char *path, SF_INFO *info)
{
    memset(info, 0, sizeof(*info));
    SNDFILE *f = sf_open(path, SFM_READ, info);
    assert_non_null(f);
    float *x = malloc((size_t)info->frames * (size_t)info->channels * sizeof(float));
    assert_non_null(x);
    assert_int_equal(sf_readf_float(f, x, info->frames), info->frames);
    sf_close(f);
    return x;
}

/* Each channel of @p in through its own plugin instance; interleaved result. */
static float *through_plugin(const char *uri, const float *in, const Set *sets, size_t n_sets)
{
    LilvNode *u = lilv_new_uri(world, uri);
    const LilvPlugin *p = lilv_plugins_get_by_uri(lilv_world_get_all_plugins(world), u);
    lilv_node_free(u);
    assert_non_null(p);
    const uint32_t n_ports = lilv_plugin_get_num_ports(p);
    float mins[64], maxs[64], defs[64], ctl[64];
    assert_true(n_ports <= 64);
    lilv_plugin_get_port_ranges_float(p, mins, maxs, defs);
    float *out = calloc((size_t)FRAMES * CHANNELS, sizeof(float));
    float bin[BLOCK], bout[BLOCK];
    assert_non_null(out);
    for (int c = 0; c < CHANNELS; ++c) {
        LilvInstance *inst = lilv_plugin_instantiate(p, RATE, NULL);
        assert_non_null(inst);
        int in_port = -1, out_port = -1;
        for (uint32_t i = 0; i < n_ports; ++i) {
            const LilvPort *port = lilv_plugin_get_port_by_index(p, i);
            const char *sym = lilv_node_as_string(lilv_port_get_symbol(p, port));
            ctl[i] = isnan(defs[i]) ? 0.0f : defs[i];
            for (size_t k = 0; k < n_sets; ++k) {
                if (strcmp(sym, sets[k].symbol) == 0) {
                    ctl[i] = sets[k].value;
                }
            }
            if (strcmp(sym, "in") == 0) {
                in_port = (int)i;
            } else if (strcmp(sym, "out") == 0) {
                out_port = (int)i;
            } else {
                lilv_instance_connect_port(inst, i, &ctl[i]);
            }
        }
        assert_true(in_port >= 0 && out_port >= 0);
        lilv_instance_connect_port(inst, (uint32_t)in_port, bin);
        lilv_instance_connect_port(inst, (uint32_t)out_port, bout);
        lilv_instance_activate(inst);
        lilv_instance_run(inst, 0); /* the plugin reads its controls */
        lilv_instance_deactivate(inst);
        lilv_instance_activate(inst); /* and starts afresh at them */
        for (int pos = 0; pos < FRAMES; pos += BLOCK) {
            const int m = FRAMES - pos < BLOCK ? FRAMES - pos : BLOCK;
            for (int i = 0; i < m; ++i) {
                bin[i] = in[(pos + i) * CHANNELS + c];
            }
            lilv_instance_run(inst, (uint32_t)m);
            for (int i = 0; i < m; ++i) {
                out[(pos + i) * CHANNELS + c] = bout[i];
            }
        }
        lilv_instance_deactivate(inst);
        lilv_instance_free(inst);
    }
    return out;
}

static void path_in(char *buf, size_t len, const char *name)
{
    snprintf(buf, len, "%s/%s", dir, name);
}

/* Render with the tool and with the plugin: with @p compensate the tool's
 * default (the latency removed, the tail rendered), else --stream (the
 * plugin's own stream). Returns the number of differing samples. */
static long compare(const char *stage, const char *uri, const Set *sets, size_t n_sets,
                    int compensate, int format)
{
    char in[512], out[512], report[512];
    path_in(in, sizeof(in), "in.wav");
    path_in(out, sizeof(out), "out.wav");
    path_in(report, sizeof(report), "report.json");
    make_input(in, format);
    char setv[16][64];
    const char *argv[64] = {exe, "render", stage, in, out, "--quiet", "--report", report};
    int argc = 8;
    for (size_t k = 0; k < n_sets; ++k) {
        snprintf(setv[k], sizeof(setv[k]), "%s=%.9g", sets[k].symbol, (double)sets[k].value);
        argv[argc++] = "--set";
        argv[argc++] = setv[k];
    }
    if (!compensate) {
        argv[argc++] = "--stream";
    }
    argv[argc] = NULL;
    assert_int_equal(run_tool(argv), 0);

    SF_INFO iinfo, oinfo;
    float *x = read_all(in, &iinfo);
    float *y = read_all(out, &oinfo);
    /* Contract: same rate, channel count and format; same length. */
    assert_int_equal(oinfo.samplerate, iinfo.samplerate);
    assert_int_equal(oinfo.channels, CHANNELS);
    assert_int_equal(oinfo.format, iinfo.format);
    assert_int_equal(oinfo.frames, FRAMES);
    float *ref = through_plugin(uri, x, sets, n_sets);
    if ((format & SF_FORMAT_SUBMASK) != SF_FORMAT_FLOAT) {
        /* The plugin's output through the same libsndfile conversion. */
        char conv[512];
        path_in(conv, sizeof(conv), "plugin.wav");
        SF_INFO cinfo = iinfo;
        SNDFILE *f = sf_open(conv, SFM_WRITE, &cinfo);
        assert_non_null(f);
        sf_command(f, SFC_SET_CLIPPING, NULL, SF_TRUE);
        assert_int_equal(sf_writef_float(f, ref, FRAMES), FRAMES);
        sf_close(f);
        free(ref);
        ref = read_all(conv, &cinfo);
    }
    /* The plugin reports its latency; compensated, the tool's frame i is the
     * plugin's frame i + latency. */
    const int lat = compensate ? 48 : 0; /* 4x oversampling: 48 frames (README) */
    long differ = 0;
    double worst = 0.0, peak = 0.0;
    for (int i = 0; i + lat < FRAMES; ++i) {
        for (int c = 0; c < CHANNELS; ++c) {
            const float a = y[i * CHANNELS + c], b = ref[(i + lat) * CHANNELS + c];
            differ += a != b;
            worst = fmax(worst, fabs((double)a - (double)b));
            peak = fmax(peak, fabs((double)b));
        }
    }
    printf("%s%s, %s: %d frames x %d channels, %ld samples differ (largest difference %g, "
           "output peak %.3f)\n",
           stage, compensate ? " (latency compensated)" : " --stream",
           (format & SF_FORMAT_SUBMASK) == SF_FORMAT_FLOAT ? "float WAV" : "24-bit WAV", FRAMES,
           CHANNELS, differ, worst, peak);
    assert_true(peak > 0.01); /* something came out */
    free(x);
    free(y);
    free(ref);
    unlink(in);
    unlink(out);
    unlink(report);
    return differ;
}

static const Set pushpull_sets[] = {{"rail", 9.0f}, {"load", 4.0f},  {"gain", 12.0f},
                                    {"loop", 0.0f}, {"drive", 6.0f}, {"fullscale", 2.0f},
                                    {"trim", -6.0f}};
static const Set opamp_sets[] = {{"load", 16.0f}, {"drive", 3.0f}, {"slew", 0.3f}, {"rail", 9.0f}};

static void pushpull_equals_plugin(void **state)
{
    (void)state;
    assert_int_equal(compare("pushpull", "urn:outstage:pushpull", pushpull_sets, 7, 0,
                             SF_FORMAT_WAV | SF_FORMAT_FLOAT),
                     0);
}

static void opamp_equals_plugin(void **state)
{
    (void)state;
    assert_int_equal(
        compare("opamp", "urn:outstage:opamp", opamp_sets, 4, 0, SF_FORMAT_WAV | SF_FORMAT_FLOAT),
        0);
}

static void compensated_is_shifted_plugin(void **state)
{
    (void)state;
    assert_int_equal(
        compare("opamp", "urn:outstage:opamp", opamp_sets, 4, 1, SF_FORMAT_WAV | SF_FORMAT_FLOAT),
        0);
}

static void pcm24_follows_input(void **state)
{
    (void)state;
    assert_int_equal(compare("pushpull", "urn:outstage:pushpull", pushpull_sets, 7, 0,
                             SF_FORMAT_WAV | SF_FORMAT_PCM_24),
                     0);
}

static int setup(void **state)
{
    (void)state;
    world = lilv_world_new();
    /* The build directory's bundle alone, not an installed copy. */
    char uri_dir[4096];
    snprintf(uri_dir, sizeof(uri_dir), "%s/", bundle);
    lilv_world_load_specifications(world);
    lilv_world_load_plugin_classes(world);
    LilvNode *b = lilv_new_file_uri(world, NULL, uri_dir);
    lilv_world_load_bundle(world, b);
    lilv_node_free(b);
    return mkdtemp(dir) ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    char p[512];
    path_in(p, sizeof(p), "plugin.wav");
    unlink(p);
    rmdir(dir);
    lilv_world_free(world);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc < 3) {
        fprintf(stderr, "usage: test_render_lv2 OUTSTAGE_EXE BUNDLE_DIR\n");
        return 2;
    }
    exe = argv[1];
    bundle = argv[2];
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(pushpull_equals_plugin),
        cmocka_unit_test(opamp_equals_plugin),
        cmocka_unit_test(compensated_is_shifted_plugin),
        cmocka_unit_test(pcm24_follows_input),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
