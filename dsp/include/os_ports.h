/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/**
 * @file os_ports.h
 * The one table of ports. The LV2 TTL (generated at build time by tools/ttlgen),
 * the LADSPA descriptors and the command line all read it, so they cannot drift
 * apart. Order, symbols, ranges and defaults follow the interface contract.
 */

#ifndef OS_PORTS_H
#define OS_PORTS_H

#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/** The stages the library simulates. */
typedef enum {
    OS_STAGE_OPAMP = 0,    /**< non-inverting op-amp driving the load */
    OS_STAGE_PUSHPULL = 1, /**< op-amp driving a complementary emitter follower */
    OS_STAGE_COUNT
} OsStageKind;

/** Parameters (control inputs), in no particular port order. */
typedef enum {
    OS_P_ENABLE = 0,
    OS_P_FULLSCALE,
    OS_P_DRIVE,
    OS_P_GAIN,
    OS_P_RAIL,
    OS_P_HEADROOM,
    OS_P_ILIMIT,
    OS_P_LOAD,
    OS_P_GBW,
    OS_P_SLEW,
    OS_P_OVERSAMPLE,
    OS_P_LISTEN,
    OS_P_TRIM,
    OS_P_BETA,
    OS_P_VBE,
    OS_P_BIAS,
    OS_P_EMITTER_R,
    OS_P_LOOP,
    OS_P_LOAD_MODEL,
    OS_P_SPEAKER_LE,
    OS_P_SPEAKER_FS,
    OS_P_SPEAKER_QMS,
    OS_P_SPEAKER_QES,
    OS_P_COUNT
} OsParam;

/** Meters (control outputs). */
typedef enum {
    OS_M_PEAK_CURRENT = 0,
    OS_M_LIMITING,
    OS_M_LOAD_POWER,
    OS_M_DISSIPATION,
    OS_M_LATENCY,
    OS_M_COUNT
} OsMeter;

/** What a port carries. */
typedef enum {
    OS_PORT_AUDIO_IN = 0,
    OS_PORT_AUDIO_OUT,
    OS_PORT_CONTROL_IN,
    OS_PORT_CONTROL_OUT
} OsPortType;

/** Port property flags. */
enum {
    OS_PF_TOGGLE = 1u << 0,      /**< 0 or 1 */
    OS_PF_LOGARITHMIC = 1u << 1, /**< best shown on a log scale */
    OS_PF_ENUMERATION = 1u << 2, /**< only the scale points are valid */
    OS_PF_INTEGER = 1u << 3,     /**< whole numbers only */
    OS_PF_ENABLE = 1u << 4,      /**< the plugin's on/off designation */
    OS_PF_LATENCY = 1u << 5      /**< reports latency in frames */
};

/** How a control input moves when it is changed during processing. */
typedef enum {
    OS_SMOOTH_NONE = 0, /**< not a control input */
    OS_SMOOTH_LINEAR,   /**< ramps linearly in its port unit (for dB ports: in dB) */
    OS_SMOOTH_LOG,      /**< ramps linearly in the logarithm of its value */
    OS_SMOOTH_JUMP,     /**< takes the new value at once */
    OS_SMOOTH_FADE,     /**< a switch whose two outputs are crossfaded (enable, listen) */
    OS_SMOOTH_RESTART   /**< restarts the signal state (the oversampling factor) */
} OsSmooth;

/** How a control input's port value becomes the value the circuit uses. */
typedef enum {
    OS_SI_SCALE = 0, /**< SI value = port value x si_scale */
    OS_SI_DB         /**< SI value = 10^(port value / 20), a ratio */
} OsSiKind;

/** A labelled value of an enumerated or toggled port. */
typedef struct {
    float value;
    const char *label;
} OsScalePoint;

/** One port as hosts see it. */
typedef struct {
    const char *symbol;  /**< LV2 symbol, LADSPA port name suffix, CLI --set name */
    const char *name;    /**< human-readable name */
    const char *unit;    /**< unit symbol: "V", "dB", "mA", "ohm", "MHz", "V/us", "%", "A", ... */
    OsPortType type;     /**< audio or control, input or output */
    float min, max, def; /**< range and default in the port's unit (controls only) */
    uint32_t flags;      /**< OS_PF_* */
    int id;              /**< OsParam for control inputs, OsMeter for control outputs, else -1 */
    const OsScalePoint *points; /**< scale points, terminated by a NULL label, or NULL */
    const char *comment;        /**< one sentence for users (rdfs:comment) */
    OsSmooth smooth;            /**< control inputs: how a change is applied */
    OsSiKind si;                /**< control inputs: conversion to the circuit's unit */
    double si_scale;            /**< with OS_SI_SCALE: SI units per port unit (mA: 1e-3) */
} OsPortInfo;

/** Whether @p kind is implemented in this build of the library. Real-time safe. */
int os_stage_available(OsStageKind kind);

/** Identity of a stage for plugin APIs. */
typedef struct {
    const char *uri;         /**< LV2 URI */
    const char *label;       /**< LADSPA label, also the CLI stage name's suffix */
    const char *cli_name;    /**< command-line stage name */
    const char *name;        /**< human-readable name */
    unsigned long ladspa_id; /**< LADSPA unique id */
    const char *comment;     /**< one paragraph for users */
} OsStageInfo;

/** Identity of @p kind, or NULL for an unknown kind. Real-time safe. */
const OsStageInfo *os_stage_info(OsStageKind kind);

/** Number of ports of @p kind (0 for an unknown kind). Real-time safe. */
uint32_t os_port_count(OsStageKind kind);

/** Port @p index of @p kind in host order, or NULL if out of range. Real-time safe. */
const OsPortInfo *os_port_get(OsStageKind kind, uint32_t index);

/** Index of the port named @p symbol, or -1. Real-time safe. */
int os_port_find(OsStageKind kind, const char *symbol);

/** The control input port for parameter @p param of @p kind, or NULL. Real-time safe. */
const OsPortInfo *os_port_for_param(OsStageKind kind, OsParam param);

#ifdef __cplusplus
}
#endif

#endif /* OS_PORTS_H */
