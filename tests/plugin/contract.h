/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The port contract, typed in by hand from /work/shared/interface.md
 * ("outstage: the public interface contract", sections "Names", "Control
 * inputs, common to both", "Control inputs of pushpull only", "Control
 * inputs added for real loads and supplies" and "Control outputs"). It is deliberately independent
 * of dsp/os_ports.c: the plugin tests compare what hosts see against this, not against the code. */

#ifndef OS_TEST_CONTRACT_H
#define OS_TEST_CONTRACT_H

#include <string.h>

enum {
    C_IN = 1u << 0,      /* input (else output) */
    C_AUDIO = 1u << 1,   /* audio (else control) */
    C_LOG = 1u << 2,     /* contract says "logarithmic" */
    C_ENUM = 1u << 3,    /* contract says "enumeration" */
    C_TOGGLE = 1u << 4,  /* contract unit "toggle" */
    C_ENABLED = 1u << 5, /* lv2:designation lv2:enabled */
    C_LATENCY = 1u << 6, /* lv2:designation lv2:latency */
    C_NO_NOTES = 1u << 7 /* the contract's table has no notes column here, so
                            it neither asks for nor rules out a scale */
};

typedef struct {
    const char *symbol;
    const char *unit; /* the contract's unit column ("" for none or toggle) */
    float min, max, def;
    unsigned flags;
} ContractPort;

typedef struct {
    const char *uri;
    const char *ladspa_label;
    const char *name;
    const ContractPort *ports;
    unsigned n_ports;
} ContractStage;

#define C_AUDIO_PORTS                                                                              \
    {"in", "", 0, 0, 0, C_IN | C_AUDIO},                                                           \
    {                                                                                              \
        "out", "", 0, 0, 0, C_AUDIO                                                                \
    }

#define C_COMMON_HEAD                                                                              \
    {"enable", "", 0.0f, 1.0f, 1.0f, C_IN | C_TOGGLE | C_ENABLED},                                 \
        {"fullscale", "V", 0.01f, 20.0f, 1.0f, C_IN | C_LOG},                                      \
        {"drive", "dB", -24.0f, 36.0f, 0.0f, C_IN}, {"gain", "dB", 0.0f, 40.0f, 6.0f, C_IN},       \
        {"rail", "V", 1.5f, 60.0f, 12.0f, C_IN}, {"headroom", "V", 0.0f, 5.0f, 1.5f, C_IN},        \
    {                                                                                              \
        "ilimit", "mA", 1.0f, 200.0f, 25.0f, C_IN                                                  \
    }

#define C_COMMON_TAIL                                                                              \
    {"gbw", "MHz", 0.1f, 100.0f, 1.0f, C_IN | C_LOG},                                              \
        {"slew", "V/us", 0.1f, 100.0f, 0.5f, C_IN | C_LOG},                                        \
        {"oversample", "x", 1.0f, 16.0f, 4.0f, C_IN | C_ENUM},                                     \
        {"listen", "", 0.0f, 1.0f, 0.0f, C_IN | C_ENUM},                                           \
    {                                                                                              \
        "trim", "dB", -24.0f, 24.0f, 0.0f, C_IN                                                    \
    }

/* Control outputs: the contract gives no range, so min/max are unchecked. */
#define C_METERS_HEAD                                                                              \
    {"peak_current", "A", 0, 0, 0, 0}, {"limiting", "%", 0, 0, 0, 0},                              \
    {                                                                                              \
        "load_power", "W", 0, 0, 0, 0                                                              \
    }
#define C_LATENCY_PORT                                                                             \
    {                                                                                              \
        "latency", "frames", 0, 0, 0, C_LATENCY                                                    \
    }

/* "Control inputs added for real loads and supplies (after those above, in
 * this order)": the loudspeaker's five, the first of that table's rows (the
 * supply's and the pair's follow them when they exist). */
#define C_SPEAKER                                                                                  \
    {"load_model", "", 0.0f, 1.0f, 0.0f, C_IN | C_ENUM},                                           \
        {"speaker_le", "mH", 0.0f, 5.0f, 0.3f, C_IN},                                              \
        {"speaker_fs", "Hz", 10.0f, 5000.0f, 80.0f, C_IN | C_LOG},                                 \
        {"speaker_qms", "", 0.5f, 30.0f, 4.0f, C_IN | C_LOG},                                      \
    {                                                                                              \
        "speaker_qes", "", 0.1f, 5.0f, 0.5f, C_IN | C_LOG                                          \
    }

static const ContractPort contract_opamp_ports[] = {
    C_AUDIO_PORTS,  C_COMMON_HEAD, {"load", "ohm", 1.0f, 100000.0f, 32.0f, C_IN | C_LOG},
    C_COMMON_TAIL,  C_SPEAKER,     C_METERS_HEAD,
    C_LATENCY_PORT,
};

static const ContractPort contract_pushpull_ports[] = {
    C_AUDIO_PORTS,
    C_COMMON_HEAD,
    {"load", "ohm", 1.0f, 100000.0f, 8.0f, C_IN | C_LOG},
    C_COMMON_TAIL,
    {"beta", "", 10.0f, 500.0f, 70.0f, C_IN | C_NO_NOTES},
    {"vbe", "V", 0.4f, 1.0f, 0.65f, C_IN | C_NO_NOTES},
    {"bias", "V", 0.0f, 2.0f, 0.0f, C_IN | C_NO_NOTES},
    {"emitter_r", "ohm", 0.0f, 10.0f, 0.22f, C_IN | C_NO_NOTES},
    {"loop", "", 0.0f, 1.0f, 1.0f, C_IN | C_NO_NOTES},
    C_SPEAKER,
    C_METERS_HEAD,
    {"dissipation", "W", 0, 0, 0, 0},
    C_LATENCY_PORT,
};

#define C_COUNT(a) ((unsigned)(sizeof(a) / sizeof((a)[0])))

static const ContractStage contract_stages[] = {
    {"urn:outstage:opamp", "outstage_opamp", "Op-amp output stage", contract_opamp_ports,
     C_COUNT(contract_opamp_ports)},
    {"urn:outstage:pushpull", "outstage_pushpull", "Push-pull follower stage",
     contract_pushpull_ports, C_COUNT(contract_pushpull_ports)},
};

#define CONTRACT_N_STAGES C_COUNT(contract_stages)

/* Index of @p symbol in @p st, or -1. */
static inline int contract_find(const ContractStage *st, const char *symbol)
{
    for (unsigned i = 0; i < st->n_ports; ++i) {
        if (strcmp(st->ports[i].symbol, symbol) == 0) {
            return (int)i;
        }
    }
    return -1;
}

#endif
