/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Which circuit each stage kind simulates: the one place that names them. */

#include "os_circuit.h"

const OsCircuitOps *os_circuit_ops(OsStageKind kind)
{
    static const OsCircuitOps *const table[OS_STAGE_COUNT] = {
        [OS_STAGE_OPAMP] = &os_circuit_opamp,
        [OS_STAGE_PUSHPULL] = &os_circuit_pushpull,
    };
    return (unsigned)kind < (unsigned)OS_STAGE_COUNT ? table[kind] : NULL;
}
