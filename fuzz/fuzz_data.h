/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What both harnesses share: the fuzz input read as a stream of small
 * decisions (a byte, a 16-bit number, a float), which reads zeros once the
 * input is used up so that every input is a complete, valid program; the
 * special float values hostile hosts and files produce; and the report of a
 * finding, which prints one line and aborts so that libFuzzer keeps the input. */

#ifndef FUZZ_DATA_H
#define FUZZ_DATA_H

#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/** The rest of a fuzz input. */
typedef struct {
    const uint8_t *p;
    size_t n;
} FuzzData;

/** Bytes left. */
static inline size_t fuzz_left(const FuzzData *d)
{
    return d->n;
}

/** The next byte, or 0 once the input is used up. */
static inline uint8_t fuzz_u8(FuzzData *d)
{
    if (d->n == 0) {
        return 0;
    }
    --d->n;
    return *d->p++;
}

/** The next two bytes, little-endian. */
static inline uint16_t fuzz_u16(FuzzData *d)
{
    const uint16_t lo = fuzz_u8(d);
    return (uint16_t)(lo | (uint16_t)(fuzz_u8(d) << 8));
}

/** The next four bytes, little-endian. */
static inline uint32_t fuzz_u32(FuzzData *d)
{
    const uint32_t lo = fuzz_u16(d);
    return lo | (uint32_t)fuzz_u16(d) << 16;
}

/** The next four bytes as the bits of a float (any float: NaN, inf, subnormal). */
static inline float fuzz_float_bits(FuzzData *d)
{
    const uint32_t u = fuzz_u32(d);
    float f;
    memcpy(&f, &u, sizeof(f));
    return f;
}

/** Up to @p max bytes, returned as a pointer into the input; *len receives the count. */
static inline const uint8_t *fuzz_bytes(FuzzData *d, size_t max, size_t *len)
{
    const size_t n = max < d->n ? max : d->n;
    const uint8_t *p = d->p;
    d->p += n;
    d->n -= n;
    *len = n;
    return p;
}

/** Values at the edges of float: what a broken host, plugin or file hands over. */
static const float fuzz_special[] = {
    0.0f,
    -0.0f,
    1.0f,
    -1.0f,
    0.5f,
    1e-6f,
    1000.0f,
    -1000.0f,
    1000.5f,
    1e30f,
    -1e30f,
    3e38f,
    FLT_MAX,
    -FLT_MAX,
    FLT_MIN,
    FLT_MIN / 4.0f,
    -FLT_MIN / 4.0f,
    1.4e-45f,
    1e-30f,
    16.0f,
    100.0f,
    (float)INFINITY,
    -(float)INFINITY,
    (float)NAN,
    -(float)NAN,
};

#define FUZZ_N_SPECIAL (sizeof(fuzz_special) / sizeof(fuzz_special[0]))

/** One of fuzz_special, chosen by the next byte. */
static inline float fuzz_special_value(FuzzData *d)
{
    return fuzz_special[fuzz_u8(d) % FUZZ_N_SPECIAL];
}

/** A finding: print what broke (one line, with the harness's context) and abort,
 *  so that libFuzzer saves the input as crash-<hash>. */
#if defined(__GNUC__)
__attribute__((format(printf, 1, 2), noreturn))
#endif
static inline void
fuzz_fail(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("FINDING: ", stderr);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
    fflush(stderr);
    abort();
}

#endif
