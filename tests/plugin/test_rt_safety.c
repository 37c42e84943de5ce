/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Real-time safety of run(), for the LV2 and the LADSPA plugin, two ways:
 *
 * 1. Interposition (rt_interpose.c): every malloc/calloc/realloc/free/
 *    posix_memalign/aligned_alloc/memalign, pthread_mutex_lock/unlock, write,
 *    open and fopen made while inside run() is counted; all counts must be 0.
 *    (The LV2 core spec's lv2:hardRTCapable: no allocation, no locks, no
 *    system calls that may block.)
 * 2. Seccomp strict mode (Linux prctl(2), PR_SET_SECCOMP, SECCOMP_MODE_STRICT):
 *    in a forked child the kernel kills the process on any system call other
 *    than read, write, _exit and sigreturn; the child runs the plugin under it
 *    and reports through a pipe. Its stdout and stderr go to a second pipe, so
 *    a write() by the plugin (logging) is caught as well.
 *
 * Both run the same hostile material: NaN, infinities, 1e30, subnormals, a
 * 100 FS sine, noise, square waves, with control ports set to NaN, infinities,
 * out-of-range and in-range values between blocks, block sizes 0 to 4096.
 * Contract (outstage.h, os_stage_process): non-finite input is silence, so
 * every output sample and meter must stay finite.
 *
 * Under AddressSanitizer the interposers are compiled out (they would replace
 * its allocator) and the seccomp runs are skipped (its runtime may map memory
 * lazily); the hostile material still runs, under ASan's checks. Under
 * valgrind both are skipped too (memcheck replaces every malloc, the
 * interposers' included, and makes system calls of its own on the program's
 * behalf), and OS_TEST_SHORT=1 (the valgrind setup) runs fewer blocks of the
 * same material.
 *
 * Usage: test_rt_safety LV2_BUNDLE_DIR LADSPA_SO   (LV2_PATH set by meson) */

#define _GNU_SOURCE 1

#include "contract.h"
#include "rt_interpose.h"

#include <ladspa.h>
#include <lilv/lilv.h>
#include <lv2/core/lv2.h>

#include <dlfcn.h>
#include <float.h>
#include <math.h>
#include <setjmp.h>
#include <signal.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/prctl.h>
#include <sys/syscall.h>
#include <sys/wait.h>
#include <unistd.h>

#include <linux/seccomp.h>

#ifdef OS_HAVE_VALGRIND_H
#include <valgrind/valgrind.h>
#endif

#include <cmocka.h>

#define RATE 48000
#define MAX_PORTS 32
#define MAX_BLOCK 4096
#define N_BLOCKS 3000
/* Under AddressSanitizer (a debug build, counting and seccomp off) a tenth of
 * the blocks: the sanitizer looks for memory errors, and the push-pull stage's
 * hardest settings cost seconds per block there. */
#define N_BLOCKS_SANITIZED 300
/* With OS_TEST_SHORT: every input kind (the block number modulo 10) and both
 * returns to the defaults (every 50 blocks) still come round. */
#define N_BLOCKS_SHORT 100
static uint32_t n_blocks = N_BLOCKS;

static const char *lv2_bundle;
static const char *ladspa_path;

/* ---- one plugin instance behind either API ---- */

typedef struct {
    const char *api;
    void (*run)(void *handle, uint32_t n);
    void (*connect)(void *handle, uint32_t port, float *data);
    void *handle;
    const ContractStage *c;
    float ctl[MAX_PORTS];
    float in[MAX_BLOCK], out[MAX_BLOCK];
    /* LV2 */
    LilvWorld *world;
    LilvInstance *lilv;
    /* LADSPA */
    const LADSPA_Descriptor *ld;
} Rt;

static const LV2_Descriptor *lv2_desc;

static void lv2_run(void *h, uint32_t n)
{
    lv2_desc->run(h, n);
}

static void lv2_connect(void *h, uint32_t port, float *data)
{
    lv2_desc->connect_port(h, port, data);
}

static const LADSPA_Descriptor *ladspa_desc;

static void ladspa_run(void *h, uint32_t n)
{
    ladspa_desc->run(h, n);
}

static void ladspa_connect(void *h, uint32_t port, float *data)
{
    ladspa_desc->connect_port(h, port, data);
}

static void connect_all(Rt *rt)
{
    for (uint32_t i = 0; i < rt->c->n_ports; ++i) {
        const ContractPort *p = &rt->c->ports[i];
        if (p->flags & C_AUDIO) {
            rt->connect(rt->handle, i, (p->flags & C_IN) ? rt->in : rt->out);
        } else {
            rt->ctl[i] = (p->flags & C_IN) ? p->def : 0.0f;
            rt->connect(rt->handle, i, &rt->ctl[i]);
        }
    }
}

/* Which contract stage the next session opens: every stage is checked. */
static unsigned stage_of(void **state)
{
    return *(const unsigned *)*state;
}

static void open_lv2(Rt *rt, unsigned stage)
{
    memset(rt, 0, sizeof(*rt));
    rt->api = "LV2";
    rt->c = &contract_stages[stage];
    rt->world = lilv_world_new();
    assert_non_null(rt->world);
    lilv_world_load_all(rt->world);
    LilvNode *u = lilv_new_uri(rt->world, rt->c->uri);
    const LilvPlugin *p = lilv_plugins_get_by_uri(lilv_world_get_all_plugins(rt->world), u);
    lilv_node_free(u);
    assert_non_null(p);
    /* the build tree's bundle, not an installed copy */
    char *path = lilv_file_uri_parse(lilv_node_as_uri(lilv_plugin_get_bundle_uri(p)), NULL);
    char want[PATH_MAX], got[PATH_MAX];
    assert_non_null(realpath(lv2_bundle, want));
    assert_non_null(realpath(path, got));
    assert_string_equal(got, want);
    lilv_free(path);
    rt->lilv = lilv_plugin_instantiate(p, RATE, NULL);
    assert_non_null(rt->lilv);
    lv2_desc = lilv_instance_get_descriptor(rt->lilv);
    rt->handle = lilv_instance_get_handle(rt->lilv);
    rt->run = lv2_run;
    rt->connect = lv2_connect;
    connect_all(rt);
    lilv_instance_activate(rt->lilv);
}

static void open_ladspa(Rt *rt, unsigned stage)
{
    memset(rt, 0, sizeof(*rt));
    rt->api = "LADSPA";
    rt->c = &contract_stages[stage];
    void *lib = dlopen(ladspa_path, RTLD_NOW | RTLD_LOCAL);
    if (lib == NULL) {
        fail_msg("dlopen %s: %s", ladspa_path, dlerror());
    }
    LADSPA_Descriptor_Function fn =
        (LADSPA_Descriptor_Function)(uintptr_t)dlsym(lib, "ladspa_descriptor");
    assert_non_null(fn);
    for (unsigned long i = 0; (rt->ld = fn(i)) != NULL; ++i) {
        if (strcmp(rt->ld->Label, rt->c->ladspa_label) == 0) {
            break;
        }
    }
    assert_non_null(rt->ld);
    ladspa_desc = rt->ld;
    rt->handle = rt->ld->instantiate(rt->ld, RATE);
    assert_non_null(rt->handle);
    rt->run = ladspa_run;
    rt->connect = ladspa_connect;
    connect_all(rt);
    if (rt->ld->activate) {
        rt->ld->activate(rt->handle);
    }
    /* the library stays loaded for the process: descriptors point into it */
}

static void close_rt(Rt *rt)
{
    if (rt->lilv) {
        lilv_instance_deactivate(rt->lilv);
        lilv_instance_free(rt->lilv);
        lilv_world_free(rt->world);
    } else {
        if (rt->ld->deactivate) {
            rt->ld->deactivate(rt->handle);
        }
        rt->ld->cleanup(rt->handle);
    }
}

/* ---- hostile material; no system calls, so it may run under seccomp ---- */

static uint32_t lcg(uint32_t *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes LCG */
    return *s >> 8;
}

static float uniform(uint32_t *s)
{
    return (float)lcg(s) / 16777216.0f * 2.0f - 1.0f;
}

static float hostile_value(uint32_t *s)
{
    static const float v[] = {NAN, INFINITY, -INFINITY, 1e30f, -1e30f, 1e-40f, -0.0f, FLT_MIN / 4};
    return v[lcg(s) % (sizeof(v) / sizeof(v[0]))];
}

static void fill_input(float *x, uint32_t n, uint32_t block, uint32_t *s)
{
    const uint32_t kind = block % 10;
    for (uint32_t i = 0; i < n; ++i) {
        float v;
        switch (kind) {
        case 0:
            v = NAN;
            break;
        case 1:
            v = (i & 1) ? INFINITY : -INFINITY;
            break;
        case 2:
            v = (i & 1) ? 1e30f : -1e30f;
            break;
        case 3:
            v = (i & 1) ? 1e-40f : -FLT_MIN / 8;
            break;
        case 4:
            v = 100.0f * sinf(0.13f * (float)i);
            break;
        case 5:
            v = uniform(s);
            break;
        case 6:
            v = 0.0f;
            break;
        case 7:
            v = (lcg(s) & 3) ? uniform(s) : hostile_value(s);
            break;
        case 8:
            v = ((i / 24) & 1) ? 1.0f : -1.0f;
            break;
        default:
            v = 1.0f;
        }
        x[i] = v;
    }
}

static void set_controls(Rt *rt, uint32_t block, uint32_t *s)
{
    for (uint32_t i = 0; i < rt->c->n_ports; ++i) {
        const ContractPort *p = &rt->c->ports[i];
        if ((p->flags & C_AUDIO) || !(p->flags & C_IN)) {
            continue;
        }
        const uint32_t r = lcg(s) % 16;
        if (block % 50 == 0) {
            rt->ctl[i] = p->def; /* return to sane settings now and then */
        } else if (r == 0) {
            rt->ctl[i] = hostile_value(s);
        } else if (r == 1) {
            rt->ctl[i] = p->min - 1e6f;
        } else if (r == 2) {
            rt->ctl[i] = p->max * 1e6f + 1.0f;
        } else if (r < 6) {
            rt->ctl[i] = p->min + (p->max - p->min) * (uniform(s) * 0.5f + 0.5f);
        }
    }
}

typedef struct {
    uint32_t magic;
    uint32_t runs;
    uint32_t nonfinite; /* output samples or meters that were not finite */
    unsigned long counts[RT_N];
} Report;

#define REPORT_MAGIC 0x52545354u

static void hostile_session(Rt *rt, Report *rep)
{
    static const uint32_t sizes[] = {0, 1, 2, 17, 64, 256, 1024, MAX_BLOCK};
    uint32_t s = 12345u;
    for (uint32_t b = 0; b < n_blocks; ++b) {
        const uint32_t n = sizes[lcg(&s) % (sizeof(sizes) / sizeof(sizes[0]))];
        fill_input(rt->in, n, b, &s);
        set_controls(rt, b, &s);

        rt_in_run = 1;
        rt->run(rt->handle, n);
        rt_in_run = 0;
        ++rep->runs;

        for (uint32_t i = 0; i < n; ++i) {
            rep->nonfinite += !isfinite(rt->out[i]);
        }
        for (uint32_t i = 0; i < rt->c->n_ports; ++i) {
            const ContractPort *p = &rt->c->ports[i];
            if (!(p->flags & (C_AUDIO | C_IN))) {
                rep->nonfinite += !isfinite(rt->ctl[i]);
            }
        }
    }
    for (int k = 0; k < RT_N; ++k) {
        rep->counts[k] = rt_counts[k];
    }
}

static void check_report(const char *api, const char *how, const Report *rep, int counted)
{
    print_message("%s %s: %u runs, %u non-finite outputs", api, how, rep->runs, rep->nonfinite);
    unsigned long total = 0;
    for (int k = 0; k < RT_N; ++k) {
        total += rep->counts[k];
        if (rep->counts[k]) {
            print_message(", %s x%lu", rt_names[k], rep->counts[k]);
        }
    }
    print_message(counted ? ", %lu forbidden calls in run()\n" : "\n", total);
    assert_int_equal(rep->runs, n_blocks);
    assert_int_equal(rep->nonfinite, 0);
    if (counted) {
        assert_int_equal(total, 0);
    }
}

static int asan(void)
{
    return !rt_interposing();
}

static int under_valgrind(void)
{
#ifdef OS_HAVE_VALGRIND_H
    return RUNNING_ON_VALGRIND != 0;
#else
    return 0;
#endif
}

/* Whether strict seccomp can run the plugin here. */
static int no_seccomp(void)
{
    return asan() || under_valgrind();
}

/* Whether the interposers see the plugin's calls: valgrind's memcheck puts its
 * own allocator in place of every malloc, the executable's included, so under
 * it the counts would be zero whatever run() did (test_interposers_bind
 * fails there: it found this). */
static int counting(void)
{
    return !asan() && !under_valgrind();
}

/* ---- the tests ---- */

/* The interposers must be what a loaded plugin binds to: the global lookup
 * (dlsym RTLD_DEFAULT, the scope a plugin's undefined symbols resolve in) has
 * to find them, and calling through it has to count. Without this the zero
 * counts below would prove nothing. */
static void test_interposers_bind(void **state)
{
    (void)state;
    if (!counting()) {
        skip();
    }
    static const char *const names[] = {"malloc",
                                        "free",
                                        "calloc",
                                        "realloc",
                                        "posix_memalign",
                                        "pthread_mutex_lock",
                                        "pthread_mutex_unlock",
                                        "write",
                                        "open",
                                        "open64",
                                        "fopen",
                                        "fopen64"};
    void *self = dlopen(NULL, RTLD_NOW);
    assert_non_null(self);
    for (size_t i = 0; i < sizeof(names) / sizeof(names[0]); ++i) {
        void *global = dlsym(RTLD_DEFAULT, names[i]);
        void *mine = dlsym(self, names[i]);
        void *libc = dlsym(RTLD_NEXT, names[i]);
        if (global == NULL || global != mine || global == libc) {
            fail_msg("%s does not bind to the test's interposer", names[i]);
        }
    }
    dlclose(self);

    typedef void *(*MallocFn)(size_t);
    typedef void (*FreeFn)(void *);
    MallocFn m = (MallocFn)(uintptr_t)dlsym(RTLD_DEFAULT, "malloc");
    FreeFn f = (FreeFn)(uintptr_t)dlsym(RTLD_DEFAULT, "free");
    const unsigned long before = rt_counts[RT_MALLOC] + rt_counts[RT_FREE];
    rt_in_run = 1;
    f(m(16));
    rt_in_run = 0;
    assert_int_equal(rt_counts[RT_MALLOC] + rt_counts[RT_FREE], before + 2);
    memset((void *)rt_counts, 0, sizeof(rt_counts));
}

/* Strict seccomp must kill a child that makes any other system call, or the
 * seccomp runs below would prove nothing. */
static void test_seccomp_kills(void **state)
{
    (void)state;
    if (no_seccomp()) {
        skip();
    }
    const pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (prctl(PR_SET_SECCOMP, SECCOMP_MODE_STRICT) != 0) {
            syscall(SYS_exit, 3);
        }
        syscall(SYS_getpid);
        syscall(SYS_exit, 0);
    }
    int status = 0;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFSIGNALED(status));
    assert_int_equal(WTERMSIG(status), SIGKILL);
}

static void counted_session(Rt *rt)
{
    Report rep;
    memset(&rep, 0, sizeof(rep));
    memset((void *)rt_counts, 0, sizeof(rt_counts));
    hostile_session(rt, &rep);
    check_report(rt->api, "in process", &rep, counting());
}

static void seccomp_session(Rt *rt)
{
    int rep_pipe[2], log_pipe[2];
    assert_int_equal(pipe(rep_pipe), 0);
    assert_int_equal(pipe(log_pipe), 0);
    fflush(NULL);
    const pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        close(rep_pipe[0]);
        close(log_pipe[0]);
        dup2(log_pipe[1], 1);
        dup2(log_pipe[1], 2);
        close(log_pipe[1]);
        memset((void *)rt_counts, 0, sizeof(rt_counts));
        Report rep;
        memset(&rep, 0, sizeof(rep));
        if (prctl(PR_SET_SECCOMP, SECCOMP_MODE_STRICT) != 0) {
            syscall(SYS_exit, 3);
        }
        hostile_session(rt, &rep);
        rep.magic = REPORT_MAGIC;
        /* A plugin that buffered output on stdout would flush it here. */
        fflush(NULL);
        if (write(rep_pipe[1], &rep, sizeof(rep)) != (ssize_t)sizeof(rep)) {
            syscall(SYS_exit, 4);
        }
        syscall(SYS_exit, 0);
    }
    close(rep_pipe[1]);
    close(log_pipe[1]);

    char buf[512];
    size_t logged = 0;
    ssize_t got;
    while ((got = read(log_pipe[0], buf, sizeof(buf))) > 0) {
        if (logged == 0) {
            fprintf(stderr, "plugin wrote: %.*s\n", (int)got, buf);
        }
        logged += (size_t)got;
    }
    close(log_pipe[0]);
    Report rep;
    memset(&rep, 0, sizeof(rep));
    const ssize_t r = read(rep_pipe[0], &rep, sizeof(rep));
    close(rep_pipe[0]);
    int status = 0;
    assert_int_equal(waitpid(pid, &status, 0), pid);

    if (WIFSIGNALED(status)) {
        fail_msg("%s: child killed by signal %d%s", rt->api, WTERMSIG(status),
                 WTERMSIG(status) == SIGKILL ? " (seccomp: run() made a system call)" : "");
    }
    assert_true(WIFEXITED(status));
    assert_int_equal(WEXITSTATUS(status), 0);
    assert_int_equal(r, (ssize_t)sizeof(rep));
    assert_int_equal(rep.magic, REPORT_MAGIC);
    print_message("%s seccomp strict: child exited normally, %zu bytes on stdout/stderr\n", rt->api,
                  logged);
    assert_int_equal(logged, 0);
    check_report(rt->api, "under seccomp", &rep, 1);
}

static void test_lv2_counted(void **state)
{
    Rt *rt = calloc(1, sizeof(*rt));
    assert_non_null(rt);
    open_lv2(rt, stage_of(state));
    counted_session(rt);
    close_rt(rt);
    free(rt);
}

static void test_lv2_seccomp(void **state)
{
    if (no_seccomp()) {
        skip();
    }
    Rt *rt = calloc(1, sizeof(*rt));
    assert_non_null(rt);
    open_lv2(rt, stage_of(state)); /* fresh instance: its first run() under seccomp */
    seccomp_session(rt);
    close_rt(rt);
    free(rt);
}

static void test_ladspa_counted(void **state)
{
    Rt *rt = calloc(1, sizeof(*rt));
    assert_non_null(rt);
    open_ladspa(rt, stage_of(state));
    counted_session(rt);
    close_rt(rt);
    free(rt);
}

static void test_ladspa_seccomp(void **state)
{
    if (no_seccomp()) {
        skip();
    }
    Rt *rt = calloc(1, sizeof(*rt));
    assert_non_null(rt);
    open_ladspa(rt, stage_of(state));
    seccomp_session(rt);
    close_rt(rt);
    free(rt);
}

int main(int argc, char **argv)
{
    rt_resolve();
    if (argc != 3) {
        fprintf(stderr, "usage: %s LV2_BUNDLE_DIR LADSPA_SO\n", argv[0]);
        return 2;
    }
    lv2_bundle = argv[1];
    ladspa_path = argv[2];
    if (asan()) {
        n_blocks = N_BLOCKS_SANITIZED;
        printf("AddressSanitizer build: allocation/lock/I-O counting and the seccomp runs are "
               "skipped; %u blocks of the hostile material still run\n",
               (unsigned)n_blocks);
    }
    if (getenv("OS_TEST_SHORT") != NULL && n_blocks > N_BLOCKS_SHORT) {
        n_blocks = N_BLOCKS_SHORT;
        printf("OS_TEST_SHORT: %u blocks of the hostile material\n", (unsigned)n_blocks);
    }
    if (under_valgrind()) {
        printf("under valgrind: the counting of forbidden calls and the seccomp runs are "
               "skipped (memcheck replaces the allocator and makes system calls of its own); "
               "the hostile material runs under memcheck\n");
    }
    static unsigned opamp = 0, pushpull = 1;
    _Static_assert(CONTRACT_N_STAGES == 2, "one session set per stage below");
#define SESSIONS(f)                                                                                \
    {"opamp: " #f, f, NULL, NULL, &opamp},                                                         \
    {                                                                                              \
        "pushpull: " #f, f, NULL, NULL, &pushpull                                                  \
    }
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_interposers_bind),
        cmocka_unit_test(test_seccomp_kills),
        SESSIONS(test_lv2_counted),
        SESSIONS(test_lv2_seccomp),
        SESSIONS(test_ladspa_counted),
        SESSIONS(test_ladspa_seccomp),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
