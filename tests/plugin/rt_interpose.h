/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Counters of calls into the C library that real-time code must not make
 * (allocation, locking, file I/O), kept by interposers defined in the test
 * executable (rt_interpose.c). Counting happens only while rt_in_run is set. */

#ifndef OS_TEST_RT_INTERPOSE_H
#define OS_TEST_RT_INTERPOSE_H

enum {
    RT_MALLOC = 0,
    RT_CALLOC,
    RT_REALLOC,
    RT_FREE,
    RT_MEMALIGN, /* posix_memalign, aligned_alloc, memalign */
    RT_MUTEX_LOCK,
    RT_MUTEX_UNLOCK,
    RT_WRITE,
    RT_OPEN,  /* open, open64 */
    RT_FOPEN, /* fopen, fopen64 */
    RT_N
};

extern const char *const rt_names[RT_N];
extern volatile int rt_in_run;
extern volatile unsigned long rt_counts[RT_N];

/** Whether the interposers are compiled in (not under AddressSanitizer, whose
 *  own allocator they would replace). */
int rt_interposing(void);

/** Look up the next definitions of the interposed functions; call early. */
void rt_resolve(void);

#endif
