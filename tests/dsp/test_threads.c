/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Instances in parallel threads. A host may run many instances at once, each
 * from its own thread (LV2 core, "Threading Rules": the audio functions of
 * different instances may be called concurrently); each must give, bit for
 * bit, what one instance run alone gives on the same input and settings. Eight
 * threads each run two instances, interleaving their blocks, of eight
 * different jobs (both stages, every oversampling factor, three host rates, a
 * control change in the middle); half the threads set the host's usual
 * flush-to-zero and denormals-are-zero modes first, which must not change a
 * bit either. The reference is the same library in one thread, run before
 * the threads start. OS_TEST_SHORT=1 (the valgrind setup) runs less material
 * with the same checks. */

#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>

#include <cmocka.h>
#include <float.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "outstage.h"

#if defined(__SSE__) || defined(__x86_64__)
#include <xmmintrin.h>
#define HAVE_MXCSR 1
#endif

#define N_THREADS 8
#define N_JOBS 8
#define BLOCK 333 /* odd, so blocks straddle the change points differently */

typedef struct {
    OsParam p;
    float v;
} Set;

typedef struct {
    OsStageKind kind;
    double rate;
    Set set[6]; /* terminated by v = NAN */
    Set change; /* applied at the middle of the material (NAN: none) */
} Job;

#define END                                                                                        \
    {                                                                                              \
        OS_P_COUNT, NAN                                                                            \
    }

static const Job jobs[N_JOBS] = {
    {OS_STAGE_OPAMP, 48000.0, {END}, {OS_P_DRIVE, 12.0f}},
    {OS_STAGE_OPAMP,
     48000.0,
     {{OS_P_LOAD, 8.0f}, {OS_P_OVERSAMPLE, 16.0f}, END},
     {OS_P_COUNT, NAN}},
    {OS_STAGE_OPAMP,
     44100.0,
     {{OS_P_SLEW, 0.1f}, {OS_P_RAIL, 5.0f}, {OS_P_OVERSAMPLE, 1.0f}, END},
     {OS_P_LISTEN, 1.0f}},
    {OS_STAGE_OPAMP,
     96000.0,
     {{OS_P_GAIN, 40.0f}, {OS_P_GBW, 100.0f}, {OS_P_OVERSAMPLE, 2.0f}, END},
     {OS_P_ENABLE, 0.0f}},
    {OS_STAGE_PUSHPULL, 48000.0, {END}, {OS_P_BIAS, 1.2f}},
    {OS_STAGE_PUSHPULL,
     48000.0,
     {{OS_P_LOOP, 0.0f}, {OS_P_LOAD, 4.0f}, {OS_P_DRIVE, 12.0f}, {OS_P_OVERSAMPLE, 8.0f}, END},
     {OS_P_OVERSAMPLE, 2.0f}},
    {OS_STAGE_PUSHPULL,
     44100.0,
     {{OS_P_BIAS, 1.2f}, {OS_P_BETA, 500.0f}, {OS_P_GBW, 100.0f}, {OS_P_SLEW, 100.0f}, END},
     {OS_P_COUNT, NAN}},
    {OS_STAGE_PUSHPULL,
     96000.0,
     {{OS_P_OVERSAMPLE, 16.0f}, {OS_P_EMITTER_R, 0.0f}, END},
     {OS_P_TRIM, -12.0f}},
};

/* Material: a sweep into clipping, noise, a few hostile samples, silence. */
static size_t frames;
static float *material;
static float *reference[N_JOBS];

static unsigned next_rand(unsigned *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes' LCG */
    return *s >> 8;
}

static void make_material(void)
{
    unsigned seed = 11u;
    double ph = 0.0;
    for (size_t i = 0; i < frames; ++i) {
        const double u = (double)i / (double)frames;
        double x;
        if (u < 0.5) {
            ph += 2.0 * M_PI * 100.0 * pow(120.0, 2.0 * u) / 48000.0;
            x = (0.1 + 1.8 * u) * sin(ph);
        } else if (u < 0.8) {
            x = (double)next_rand(&seed) / 16777216.0 * 2.0 - 1.0;
        } else {
            x = 0.0;
        }
        material[i] = (float)x;
    }
    const float bad[] = {NAN, INFINITY, -INFINITY, 1e30f, FLT_MIN / 4.0f};
    for (size_t k = 0; k < sizeof(bad) / sizeof(bad[0]); ++k) {
        material[frames / 4 + 31 * k] = bad[k];
    }
}

static OsStage *open_job(const Job *j)
{
    OsStage *s = os_stage_new(j->kind, j->rate, NULL);
    if (s == NULL) {
        return NULL;
    }
    for (int i = 0; i < 6 && !isnan(j->set[i].v); ++i) {
        os_stage_set(s, j->set[i].p, j->set[i].v);
    }
    os_stage_reset(s);
    return s;
}

/* Blocks [pos, pos + BLOCK) of job @p j, with its change at the middle. */
static void run_block(OsStage *s, const Job *j, size_t pos, float *out)
{
    const size_t len = frames - pos < BLOCK ? frames - pos : BLOCK;
    const size_t mid = frames / 2;
    if (!isnan(j->change.v) && pos <= mid && mid < pos + len) {
        os_stage_process(s, material + pos, out + pos, (uint32_t)(mid - pos));
        os_stage_set(s, j->change.p, j->change.v);
        os_stage_process(s, material + mid, out + mid, (uint32_t)(pos + len - mid));
    } else {
        os_stage_process(s, material + pos, out + pos, (uint32_t)len);
    }
}

typedef struct {
    int index;
    int jobs[2];
    float *out[2];
    pthread_barrier_t *start;
    int ok;
} Worker;

static void *worker(void *arg)
{
    Worker *w = arg;
#ifdef HAVE_MXCSR
    if (w->index % 2) {
        /* what many hosts set on their audio threads: FTZ (bit 15), DAZ (bit 6) */
        _mm_setcsr(_mm_getcsr() | 0x8040u);
    }
#endif
    OsStage *s[2];
    for (int k = 0; k < 2; ++k) {
        s[k] = open_job(&jobs[w->jobs[k]]);
    }
    w->ok = s[0] != NULL && s[1] != NULL;
    pthread_barrier_wait(w->start);
    for (size_t pos = 0; w->ok && pos < frames; pos += BLOCK) {
        for (int k = 0; k < 2; ++k) {
            run_block(s[k], &jobs[w->jobs[k]], pos, w->out[k]);
        }
    }
    os_stage_free(s[0]);
    os_stage_free(s[1]);
    return NULL;
}

static void parallel_equals_alone(void **state)
{
    (void)state;
    const int short_mode = getenv("OS_TEST_SHORT") != NULL;
    frames = short_mode ? 4800 : 28800; /* 0.1 s or 0.6 s at 48 kHz */
    material = malloc(frames * sizeof(float));
    assert_non_null(material);
    make_material();
    for (int j = 0; j < N_JOBS; ++j) {
        reference[j] = malloc(frames * sizeof(float));
        assert_non_null(reference[j]);
        OsStage *s = open_job(&jobs[j]);
        assert_non_null(s);
        for (size_t pos = 0; pos < frames; pos += BLOCK) {
            run_block(s, &jobs[j], pos, reference[j]);
        }
        os_stage_free(s);
        for (size_t i = 0; i < frames; ++i) {
            assert_true(isfinite(reference[j][i]));
        }
    }

    pthread_barrier_t start;
    assert_int_equal(pthread_barrier_init(&start, NULL, N_THREADS), 0);
    Worker w[N_THREADS];
    pthread_t tid[N_THREADS];
    for (int t = 0; t < N_THREADS; ++t) {
        w[t].index = t;
        w[t].jobs[0] = t % N_JOBS;
        w[t].jobs[1] = (t + 3) % N_JOBS;
        w[t].start = &start;
        w[t].ok = 0;
        for (int k = 0; k < 2; ++k) {
            w[t].out[k] = calloc(frames, sizeof(float));
            assert_non_null(w[t].out[k]);
        }
        assert_int_equal(pthread_create(&tid[t], NULL, worker, &w[t]), 0);
    }
    size_t differ = 0;
    for (int t = 0; t < N_THREADS; ++t) {
        assert_int_equal(pthread_join(tid[t], NULL), 0);
        assert_true(w[t].ok);
        for (int k = 0; k < 2; ++k) {
            const float *ref = reference[w[t].jobs[k]];
            size_t d = 0;
            for (size_t i = 0; i < frames; ++i) {
                d += memcmp(&w[t].out[k][i], &ref[i], sizeof(float)) != 0;
            }
            if (d) {
                printf("thread %d, job %d (%s): %zu of %zu samples differ from the instance "
                       "alone\n",
                       t, w[t].jobs[k], os_stage_info(jobs[w[t].jobs[k]].kind)->cli_name, d,
                       frames);
            }
            differ += d;
            free(w[t].out[k]);
        }
    }
    pthread_barrier_destroy(&start);
    printf("%d threads x 2 instances, %zu frames each: %zu samples differ from one instance "
           "alone\n",
           N_THREADS, frames, differ);
    assert_int_equal(differ, 0);
    for (int j = 0; j < N_JOBS; ++j) {
        free(reference[j]);
    }
    free(material);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(parallel_equals_alone),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
