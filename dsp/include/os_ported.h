/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_ported.h
 * A stage seen through its port table: what every plugin API wrapper does
 * (LV2 and LADSPA share the life cycle instantiate, connect, activate, run,
 * cleanup), written once. Ports are plain float pointers in the table's order,
 * so this knows nothing of any plugin API.
 */

#ifndef OS_PORTED_H
#define OS_PORTED_H

#include "outstage.h"

#ifdef __cplusplus
extern "C" {
#endif

/** A stage with one pointer per port. */
typedef struct OsPorted OsPorted;

/** Create the stage @p kind at @p rate with unconnected ports; NULL on failure.
 *  Not real-time safe. */
OsPorted *os_ported_new(OsStageKind kind, double rate);

/** Free; accepts NULL. Not real-time safe. */
void os_ported_free(OsPorted *p);

/** Connect port @p index (table order) to @p data; NULL disconnects. Indices
 *  beyond the table are ignored. Real-time safe. */
void os_ported_connect(OsPorted *p, uint32_t index, float *data);

/** The plugin's activate: take the connected controls' values as the
 *  stage's settings without a ramp, and clear the signal state. Real-time safe. */
void os_ported_activate(OsPorted *p);

/**
 * Run @p n frames: read every connected control input once (the stage clamps
 * and smooths), process the audio (an unconnected input counts as silence; in
 * and out may be the same buffer), write every connected control output.
 * Real-time safe.
 */
void os_ported_run(OsPorted *p, uint32_t n);

#ifdef __cplusplus
}
#endif

#endif /* OS_PORTED_H */
