/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "demo.h"

#include "audio_write.h"
#include "cli.h"
#include "demo_audio.h"
#include "demo_report.h"
#include "figures.h"
#include "material.h"
#include "render.h"

#include <sndfile.h>

#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#define RATE 48000

/* Designs of our own. The level controls put the material's peaks at or a
 * little past the push-pull stage's limit; trim = -drive keeps every file
 * level-matched to the material below the limits, so no file can exceed it by
 * more than a band-limited overshoot. */
const CliDemoDesign cli_demo_designs[CLI_DEMO_DESIGNS] = {
    {"battery-practice",
     "battery practice amplifier, +-9 V into a 4 ohm speaker,\n  gain 12 dB, "
     "class B pair outside the loop",
     2.5, 0.0},
    {"headphone-desk",
     "desktop headphone driver, +-12 V into 32 ohm headphones,\n  gain 6 dB, "
     "class B pair inside the loop",
     1.0, 0.0},
    {"bench-classab",
     "bench amplifier, +-15 V into an 8 ohm speaker,\n  gain 20 dB, class AB pair "
     "(1.1 V bias) inside the loop",
     1.0, 6.0},
};

void cli_demo_spec_init(CliDemoSpec *spec)
{
    spec->dir = "outstage-demo";
    spec->seconds = 8.0;
    spec->jobs = 0;
}

/* Shared by the workers. */
typedef struct {
    const CliDemoSpec *spec;
    char *material;
    const float *x; /* the material itself */
    size_t frames;
    CliDemoJob *job;
    size_t n_jobs, next;
    pthread_mutex_t lock;
} Queue;

static char *join(const char *dir, const char *name, const char *suffix)
{
    const size_t n = strlen(dir) + strlen(name) + strlen(suffix) + 2;
    char *p = malloc(n);
    if (p) {
        snprintf(p, n, "%s/%s%s", dir, name, suffix);
    }
    return p;
}

static void run_job(Queue *q, CliDemoJob *j)
{
    const CliDemoDesign *d = j->design;
    char name[96];
    snprintf(name, sizeof(name), "%s-%s", d->slug, cli_stage_name(j->settings.kind));
    char *wav = join(q->spec->dir, name, ".wav");
    char *transfer = join(q->spec->dir, name, "-transfer.png");
    char *thd = join(q->spec->dir, name, "-thd.png");
    if (!wav || !transfer || !thd) {
        cli_err(j->err, sizeof(j->err), "out of memory");
        j->failed = 1;
    }
    CliRenderJob r = {q->material, wav, NULL, j->settings, 0, 0};
    if (!j->failed && cli_render(&r, &j->render, j->err, sizeof(j->err)) != 0) {
        j->failed = 1;
    }
    if (!j->failed &&
        cli_demo_audio(wav, q->x, q->frames, RATE, j->render.latency,
                       cli_material_quiet_start(q->spec->seconds), CLI_MATERIAL_PEAK_DBFS,
                       &j->audio, j->err, sizeof(j->err)) != 0) {
        j->failed = 1;
    }
    CliSweepSpec ss;
    cli_sweep_spec_init(&ss, &j->settings);
    ss.rate = RATE;
    ss.step = 2.0; /* coarse: the demo must stay quick */
    if (!j->failed && cli_sweep_run(&ss, &j->sweep, j->err, sizeof(j->err)) != 0) {
        j->failed = 1;
    }
    CliFigureSpec fs;
    cli_figure_spec_init(&fs, &j->settings);
    fs.rate = RATE;
    if (!j->failed && (cli_figure_transfer(transfer, &fs, j->err, sizeof(j->err)) != 0 ||
                       cli_figure_thd(thd, &ss, &j->sweep, j->err, sizeof(j->err)) != 0)) {
        j->failed = 1;
    }
    snprintf(j->name, sizeof(j->name), "%s", name);
    free(wav);
    free(transfer);
    free(thd);
}

static void *worker(void *arg)
{
    Queue *q = arg;
    for (;;) {
        pthread_mutex_lock(&q->lock);
        const size_t i = q->next++;
        pthread_mutex_unlock(&q->lock);
        if (i >= q->n_jobs || cli_interrupted) {
            return NULL;
        }
        run_job(q, &q->job[i]);
    }
}

static int make_dir(const char *dir, char *err, size_t len)
{
    struct stat st;
    if (mkdir(dir, 0777) == 0) {
        return 0;
    }
    if (errno == EEXIST && stat(dir, &st) == 0 && S_ISDIR(st.st_mode)) {
        return 0;
    }
    cli_err(err, len, "%s: cannot make the demo folder: %s", dir,
            errno == EEXIST ? "a file of that name exists" : strerror(errno));
    return -1;
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* The jobs: every design through every stage. */
static void make_jobs(CliDemoJob *job)
{
    char unused[CLI_ERR_LEN];
    size_t k = 0;
    for (size_t d = 0; d < CLI_DEMO_DESIGNS; ++d) {
        for (int kind = 0; kind < OS_STAGE_COUNT; ++kind) {
            CliDemoJob *j = &job[k++];
            const CliDemoDesign *des = &cli_demo_designs[d];
            j->design = des;
            cli_settings_init(&j->settings, (OsStageKind)kind);
            cli_settings_preset(&j->settings, des->slug, unused, sizeof(unused));
            j->settings.value[OS_P_FULLSCALE] = (float)des->fullscale;
            j->settings.value[OS_P_DRIVE] = (float)des->drive;
            j->settings.value[OS_P_TRIM] = (float)-des->drive;
        }
    }
}

int cli_demo_run(const CliDemoSpec *spec, char *err, size_t len)
{
    const double t0 = now();
    if (!(spec->seconds >= 3.0 && spec->seconds <= 600.0)) {
        cli_err(err, len, "--seconds %g: the demo material lasts 3 to 600 s", spec->seconds);
        return -1;
    }
    if (make_dir(spec->dir, err, len) != 0) {
        return -1;
    }
    const size_t frames = (size_t)(spec->seconds * RATE);
    float *x = malloc(frames * sizeof(float));
    Queue q;
    memset(&q, 0, sizeof(q));
    q.spec = spec;
    q.material = join(spec->dir, "material", ".wav");
    q.n_jobs = CLI_DEMO_DESIGNS * OS_STAGE_COUNT;
    q.job = calloc(q.n_jobs, sizeof(CliDemoJob));
    if (!x || !q.material || !q.job) {
        free(x);
        free(q.material);
        free(q.job);
        cli_err(err, len, "out of memory");
        return -1;
    }
    cli_material(x, frames, RATE);
    int rc =
        cli_write_audio(q.material, x, frames, 1, RATE, SF_FORMAT_WAV | SF_FORMAT_PCM_24, err, len);
    q.x = x;
    q.frames = frames;
    make_jobs(q.job);

    long cpus = sysconf(_SC_NPROCESSORS_ONLN);
    size_t threads = spec->jobs > 0 ? (size_t)spec->jobs : (size_t)(cpus > 0 ? cpus : 1);
    threads = threads > q.n_jobs ? q.n_jobs : threads;
    pthread_t tid[CLI_DEMO_DESIGNS * OS_STAGE_COUNT];
    size_t started = 0;
    if (rc == 0) {
        pthread_mutex_init(&q.lock, NULL);
        for (size_t i = 1; i < threads; ++i) {
            started += pthread_create(&tid[started], NULL, worker, &q) == 0;
        }
        worker(&q); /* this thread works too */
        for (size_t i = 0; i < started; ++i) {
            pthread_join(tid[i], NULL);
        }
        pthread_mutex_destroy(&q.lock);
    }
    for (size_t i = 0; rc == 0 && i < q.n_jobs; ++i) {
        if (q.job[i].failed) {
            cli_err(err, len, "%s", q.job[i].err);
            rc = -1;
        }
    }
    if (rc == 0 && cli_interrupted) {
        cli_err(err, len, "%s: interrupted", spec->dir);
        rc = -1;
    }
    if (rc == 0) {
        const CliDemoSummary sum = {spec->dir, spec->seconds, RATE, started + 1, now() - t0};
        rc = cli_demo_report(&sum, q.job, q.n_jobs, err, len);
    }
    for (size_t i = 0; i < q.n_jobs; ++i) {
        cli_render_result_free(&q.job[i].render);
        cli_sweep_free(&q.job[i].sweep);
    }
    free(q.job);
    free(q.material);
    free(x);
    return rc;
}
