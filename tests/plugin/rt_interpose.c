/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Interposers for the real-time safety test. Defined in the executable and
 * exported (export_dynamic), they take precedence over the C library for every
 * object loaded later, plugins included (ELF symbol interposition: the
 * executable comes first in the global lookup scope). Each one counts its
 * calls while rt_in_run is set and forwards to the C library: glibc's
 * __libc_* entry points for the allocator (dlsym may itself allocate), dlsym
 * RTLD_NEXT for the rest.
 *
 * With _FILE_OFFSET_BITS=64 the C library headers rename open and fopen to
 * open64 and fopen64; both names must be caught, so the interposers carry
 * explicit symbol names and this file does not include <stdio.h>. */

#define _GNU_SOURCE 1

#include "rt_interpose.h"

#include <dlfcn.h>
#include <fcntl.h>
#include <pthread.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <sys/types.h>
#include <unistd.h>

const char *const rt_names[RT_N] = {
    "malloc", "calloc", "realloc", "free", "memalign", "pthread_mutex_lock", "pthread_mutex_unlock",
    "write",  "open",   "fopen"};

volatile int rt_in_run;
volatile unsigned long rt_counts[RT_N];

#if defined(__SANITIZE_ADDRESS__)
#define RT_ASAN 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define RT_ASAN 1
#endif
#endif

#ifdef RT_ASAN

int rt_interposing(void)
{
    return 0;
}

void rt_resolve(void) {}

#else

int rt_interposing(void)
{
    return 1;
}

static inline void count(int what)
{
    if (rt_in_run) {
        rt_counts[what] = rt_counts[what] + 1;
    }
}

/* glibc's own allocator entry points. */
extern void *__libc_malloc(size_t size);
extern void *__libc_calloc(size_t n, size_t size);
extern void *__libc_realloc(void *p, size_t size);
extern void __libc_free(void *p);
extern void *__libc_memalign(size_t alignment, size_t size);

void *malloc(size_t size)
{
    count(RT_MALLOC);
    return __libc_malloc(size);
}

void *calloc(size_t n, size_t size)
{
    count(RT_CALLOC);
    return __libc_calloc(n, size);
}

void *realloc(void *p, size_t size)
{
    count(RT_REALLOC);
    return __libc_realloc(p, size);
}

void free(void *p)
{
    count(RT_FREE);
    __libc_free(p);
}

int posix_memalign(void **out, size_t alignment, size_t size)
{
    count(RT_MEMALIGN);
    if (alignment < sizeof(void *) || (alignment & (alignment - 1)) != 0) {
        return 22; /* EINVAL */
    }
    void *p = __libc_memalign(alignment, size);
    if (p == NULL && size != 0) {
        return 12; /* ENOMEM */
    }
    *out = p;
    return 0;
}

void *aligned_alloc(size_t alignment, size_t size)
{
    count(RT_MEMALIGN);
    return __libc_memalign(alignment, size);
}

void *memalign(size_t alignment, size_t size);
void *memalign(size_t alignment, size_t size)
{
    count(RT_MEMALIGN);
    return __libc_memalign(alignment, size);
}

typedef int (*MutexFn)(pthread_mutex_t *);
typedef ssize_t (*WriteFn)(int, const void *, size_t);
typedef int (*OpenFn)(const char *, int, ...);
typedef void *(*FopenFn)(const char *, const char *);

static MutexFn real_lock, real_unlock;
static WriteFn real_write;
static OpenFn real_open, real_open64;
static FopenFn real_fopen, real_fopen64;

/* POSIX leaves function pointers from dlsym to a cast through void *. */
#define NEXT(type, name) ((type)(uintptr_t)dlsym(RTLD_NEXT, name))

void rt_resolve(void)
{
    real_lock = NEXT(MutexFn, "pthread_mutex_lock");
    real_unlock = NEXT(MutexFn, "pthread_mutex_unlock");
    real_write = NEXT(WriteFn, "write");
    real_open = NEXT(OpenFn, "open");
    real_open64 = NEXT(OpenFn, "open64");
    real_fopen = NEXT(FopenFn, "fopen");
    real_fopen64 = NEXT(FopenFn, "fopen64");
}

int pthread_mutex_lock(pthread_mutex_t *m)
{
    count(RT_MUTEX_LOCK);
    if (real_lock == NULL) {
        rt_resolve();
    }
    return real_lock(m);
}

int pthread_mutex_unlock(pthread_mutex_t *m)
{
    count(RT_MUTEX_UNLOCK);
    if (real_unlock == NULL) {
        rt_resolve();
    }
    return real_unlock(m);
}

ssize_t write(int fd, const void *buf, size_t n)
{
    count(RT_WRITE);
    if (real_write == NULL) {
        rt_resolve();
    }
    return real_write(fd, buf, n);
}

int rt_open(const char *path, int flags, ...) __asm__("open");
int rt_open64(const char *path, int flags, ...) __asm__("open64");
void *rt_fopen(const char *path, const char *mode) __asm__("fopen");
void *rt_fopen64(const char *path, const char *mode) __asm__("fopen64");

/* open(2): only O_CREAT and O_TMPFILE carry a third argument, the mode. */
static unsigned open_mode(int flags, va_list ap)
{
    return (flags & O_CREAT) || (flags & O_TMPFILE) == O_TMPFILE ? va_arg(ap, unsigned) : 0u;
}

int rt_open(const char *path, int flags, ...)
{
    count(RT_OPEN);
    va_list ap;
    va_start(ap, flags);
    const unsigned mode = open_mode(flags, ap);
    va_end(ap);
    if (real_open == NULL) {
        rt_resolve();
    }
    return real_open(path, flags, mode);
}

int rt_open64(const char *path, int flags, ...)
{
    count(RT_OPEN);
    va_list ap;
    va_start(ap, flags);
    const unsigned mode = open_mode(flags, ap);
    va_end(ap);
    if (real_open64 == NULL) {
        rt_resolve();
    }
    return real_open64(path, flags, mode);
}

void *rt_fopen(const char *path, const char *mode)
{
    count(RT_FOPEN);
    if (real_fopen == NULL) {
        rt_resolve();
    }
    return real_fopen(path, mode);
}

void *rt_fopen64(const char *path, const char *mode)
{
    count(RT_FOPEN);
    if (real_fopen64 == NULL) {
        rt_resolve();
    }
    return real_fopen64(path, mode);
}

#endif
