/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The port table: the single source of symbols, ranges and defaults.
 * Order and values follow ../shared/interface.md (the contract). */

#include "os_ports.h"

#include <stddef.h>
#include <string.h>

static const OsScalePoint enable_points[] = {{0.0f, "bypass"}, {1.0f, "on"}, {0.0f, NULL}};

static const OsScalePoint oversample_points[] = {{1.0f, "1x"}, {2.0f, "2x"},   {4.0f, "4x"},
                                                 {8.0f, "8x"}, {16.0f, "16x"}, {0.0f, NULL}};

static const OsScalePoint listen_points[] = {
    {0.0f, "output"}, {1.0f, "distortion alone"}, {0.0f, NULL}};

static const OsScalePoint load_model_points[] = {
    {0.0f, "resistor"}, {1.0f, "loudspeaker or headphone driver"}, {0.0f, NULL}};

static const OsScalePoint loop_points[] = {
    {0.0f, "feedback from op-amp output"}, {1.0f, "feedback from load"}, {0.0f, NULL}};

#define AUDIO_IN                                                                                   \
    {"in", "In", "", OS_PORT_AUDIO_IN, 0, 0, 0, 0, -1, NULL, "Audio input.", 0, 0, 0.0},           \
    {                                                                                              \
        "out", "Out", "", OS_PORT_AUDIO_OUT, 0, 0, 0, 0, -1, NULL, "Audio output.", 0, 0, 0.0      \
    }

/* A control input: ..., how it is smoothed (OS_SMOOTH_*), its SI conversion
 * (OS_SI_*) and scale, its comment. */
#define CTL(sym, nm, un, lo, hi, df, fl, id, pts, sm, si, scale, cm)                               \
    {                                                                                              \
        sym, nm, un, OS_PORT_CONTROL_IN, lo, hi, df, fl, id, pts, cm, sm, si, scale                \
    }
#define LIN OS_SMOOTH_LINEAR
#define LOG OS_SMOOTH_LOG

#define METER(sym, nm, un, hi, fl, id, cm)                                                         \
    {                                                                                              \
        sym, nm, un, OS_PORT_CONTROL_OUT, 0.0f, hi, 0.0f, fl, id, NULL, cm, 0, 0, 0.0              \
    }

#define COMMON_HEAD                                                                                \
    CTL("enable", "Enable", "", 0.0f, 1.0f, 1.0f, OS_PF_TOGGLE | OS_PF_ENABLE, OS_P_ENABLE,        \
        enable_points, OS_SMOOTH_FADE, OS_SI_SCALE, 1.0,                                           \
        "Processing on; off passes the input through, latency-aligned."),                          \
        CTL("fullscale", "Full scale", "V", 0.01f, 20.0f, 1.0f, OS_PF_LOGARITHMIC, OS_P_FULLSCALE, \
            NULL, LOG, OS_SI_SCALE, 1.0,                                                           \
            "Stage input voltage (peak) that a 0 dBFS sample stands for."),                        \
        CTL("drive", "Drive", "dB", -24.0f, 36.0f, 0.0f, 0, OS_P_DRIVE, NULL, LIN, OS_SI_DB, 1.0,  \
            "Gain in front of the stage."),                                                        \
        CTL("gain", "Closed-loop gain", "dB", 0.0f, 40.0f, 6.0f, 0, OS_P_GAIN, NULL, LIN,          \
            OS_SI_DB, 1.0,                                                                         \
            "Closed-loop voltage gain 20 log10(1 + R2/R1) of the non-inverting amplifier."),       \
        CTL("rail", "Supply rail", "V", 1.5f, 60.0f, 12.0f, 0, OS_P_RAIL, NULL, LIN, OS_SI_SCALE,  \
            1.0, "Supply voltage on each side (+rail and -rail)."),                                \
        CTL("headroom", "Swing headroom", "V", 0.0f, 5.0f, 1.5f, 0, OS_P_HEADROOM, NULL, LIN,      \
            OS_SI_SCALE, 1.0, "How far the op-amp output swing stops short of each rail."),        \
        CTL("ilimit", "Current limit", "mA", 1.0f, 200.0f, 25.0f, 0, OS_P_ILIMIT, NULL, LIN,       \
            OS_SI_SCALE, 1e-3, "Op-amp output current limit in each direction.")

#define COMMON_TAIL                                                                                \
    CTL("gbw", "Gain-bandwidth", "MHz", 0.1f, 100.0f, 1.0f, OS_PF_LOGARITHMIC, OS_P_GBW, NULL,     \
        LOG, OS_SI_SCALE, 1e6, "Op-amp gain-bandwidth product."),                                  \
        CTL("slew", "Slew rate", "V/us", 0.1f, 100.0f, 0.5f, OS_PF_LOGARITHMIC, OS_P_SLEW, NULL,   \
            LOG, OS_SI_SCALE, 1e6, "Op-amp slew rate."),                                           \
        CTL("oversample", "Oversampling", "x", 1.0f, 16.0f, 4.0f,                                  \
            OS_PF_ENUMERATION | OS_PF_INTEGER, OS_P_OVERSAMPLE, oversample_points,                 \
            OS_SMOOTH_RESTART, OS_SI_SCALE, 1.0,                                                   \
            "Oversampling factor of the circuit simulation."),                                     \
        CTL("listen", "Listen", "", 0.0f, 1.0f, 0.0f, OS_PF_ENUMERATION | OS_PF_INTEGER,           \
            OS_P_LISTEN, listen_points, OS_SMOOTH_FADE, OS_SI_SCALE, 1.0,                          \
            "0 plays the output, 1 the residual: the output minus the ideal linear response."),    \
        CTL("trim", "Output trim", "dB", -24.0f, 24.0f, 0.0f, 0, OS_P_TRIM, NULL, LIN, OS_SI_DB,   \
            1.0, "Output gain.")

#define LOAD(df)                                                                                   \
    CTL("load", "Load", "ohm", 1.0f, 100000.0f, df, OS_PF_LOGARITHMIC, OS_P_LOAD, NULL, LOG,       \
        OS_SI_SCALE, 1.0,                                                                          \
        "Load resistance from the output to ground; with the loudspeaker model, the voice "        \
        "coil's resistance Re.")

/* The loudspeaker or headphone driver (os_load.h), after every older control
 * of both stages (../shared/interface.md). */
#define SPEAKER                                                                                    \
    CTL("load_model", "Load model", "", 0.0f, 1.0f, 0.0f, OS_PF_ENUMERATION | OS_PF_INTEGER,       \
        OS_P_LOAD_MODEL, load_model_points, OS_SMOOTH_JUMP, OS_SI_SCALE, 1.0,                      \
        "0 a resistor (Load ohms); 1 a moving-coil driver's impedance from its Thiele-Small "      \
        "parameters, Load being its voice-coil resistance Re."),                                   \
        CTL("speaker_le", "Voice-coil inductance", "mH", 0.0f, 5.0f, 0.3f, 0, OS_P_SPEAKER_LE,     \
            NULL, LIN, OS_SI_SCALE, 1e-3, "Inductance Le of the driver's voice coil."),            \
        CTL("speaker_fs", "Driver resonance", "Hz", 10.0f, 5000.0f, 80.0f, OS_PF_LOGARITHMIC,      \
            OS_P_SPEAKER_FS, NULL, LOG, OS_SI_SCALE, 1.0,                                          \
            "Resonance frequency fs of the driver in free air."),                                  \
        CTL("speaker_qms", "Mechanical Q", "", 0.5f, 30.0f, 4.0f, OS_PF_LOGARITHMIC,               \
            OS_P_SPEAKER_QMS, NULL, LOG, OS_SI_SCALE, 1.0,                                         \
            "Mechanical Q of the driver at resonance (Qms)."),                                     \
        CTL("speaker_qes", "Electrical Q", "", 0.1f, 5.0f, 0.5f, OS_PF_LOGARITHMIC,                \
            OS_P_SPEAKER_QES, NULL, LOG, OS_SI_SCALE, 1.0,                                         \
            "Electrical Q of the driver at resonance (Qes); with Qms it sets the impedance "       \
            "peak Re (1 + Qms / Qes) at fs.")

#define METERS_HEAD                                                                                \
    METER("peak_current", "Peak load current", "A", 100.0f, 0, OS_M_PEAK_CURRENT,                  \
          "Largest magnitude of load current during the last block."),                             \
        METER("limiting", "Current limiting", "%", 100.0f, 0, OS_M_LIMITING,                       \
              "Share of the last block's oversampled steps with the op-amp current limiter "       \
              "engaged."),                                                                         \
        METER("load_power", "Load power", "W", 10000.0f, 0, OS_M_LOAD_POWER,                       \
              "Mean power delivered to the load during the last block.")

#define METER_LATENCY                                                                              \
    METER("latency", "Latency", "frames", 1024.0f, OS_PF_LATENCY | OS_PF_INTEGER, OS_M_LATENCY,    \
          "Processing delay in frames.")

static const OsPortInfo opamp_ports[] = {
    AUDIO_IN, COMMON_HEAD, LOAD(32.0f), COMMON_TAIL, SPEAKER, METERS_HEAD, METER_LATENCY,
};

static const OsPortInfo pushpull_ports[] = {
    AUDIO_IN,
    COMMON_HEAD,
    LOAD(8.0f),
    COMMON_TAIL,
    CTL("beta", "Transistor beta", "", 10.0f, 500.0f, 70.0f, 0, OS_P_BETA, NULL, LIN, OS_SI_SCALE,
        1.0, "Forward current gain of each output transistor."),
    CTL("vbe", "Base-emitter voltage", "V", 0.4f, 1.0f, 0.65f, 0, OS_P_VBE, NULL, LIN, OS_SI_SCALE,
        1.0, "Base-emitter voltage at 100 mA collector current and 27 degC."),
    CTL("bias", "Bias", "V", 0.0f, 2.0f, 0.0f, 0, OS_P_BIAS, NULL, LIN, OS_SI_SCALE, 1.0,
        "DC voltage between the two bases: 0 is class B, about 2 x vbe is class AB."),
    CTL("emitter_r", "Emitter resistor", "ohm", 0.0f, 10.0f, 0.22f, 0, OS_P_EMITTER_R, NULL, LIN,
        OS_SI_SCALE, 1.0, "Emitter resistor of each transistor."),
    CTL("loop", "Feedback point", "", 0.0f, 1.0f, 1.0f, OS_PF_ENUMERATION | OS_PF_INTEGER,
        OS_P_LOOP, loop_points, OS_SMOOTH_JUMP, OS_SI_SCALE, 1.0,
        "0 takes feedback from the op-amp output, 1 from the load (follower inside the loop)."),
    SPEAKER,
    METERS_HEAD,
    METER("dissipation", "Transistor dissipation", "W", 10000.0f, 0, OS_M_DISSIPATION,
          "Mean power dissipated in the two output transistors during the last block."),
    METER_LATENCY,
};

static const OsStageInfo stage_infos[OS_STAGE_COUNT] = {
    {"urn:outstage:opamp", "outstage_opamp", "opamp", "Op-amp output stage", 5841UL,
     "A non-inverting amplifier on a general-purpose op-amp driving a load resistor: finite "
     "gain-bandwidth, slew-rate limit, output swing short of the rails and an output current "
     "limiter, solved as a circuit and oversampled."},
    {"urn:outstage:pushpull", "outstage_pushpull", "pushpull", "Push-pull follower stage", 5842UL,
     "An op-amp driving a complementary BJT emitter-follower pair into a load: crossover dead "
     "zone, bias, emitter resistors and feedback point, solved as a circuit and oversampled."},
};

#define COUNT_OF(a) ((uint32_t)(sizeof(a) / sizeof((a)[0])))

int os_stage_available(OsStageKind kind)
{
    return kind == OS_STAGE_OPAMP || kind == OS_STAGE_PUSHPULL;
}

const OsStageInfo *os_stage_info(OsStageKind kind)
{
    if ((unsigned)kind >= (unsigned)OS_STAGE_COUNT) {
        return NULL;
    }
    return &stage_infos[kind];
}

uint32_t os_port_count(OsStageKind kind)
{
    switch (kind) {
    case OS_STAGE_OPAMP:
        return COUNT_OF(opamp_ports);
    case OS_STAGE_PUSHPULL:
        return COUNT_OF(pushpull_ports);
    default:
        return 0;
    }
}

const OsPortInfo *os_port_get(OsStageKind kind, uint32_t index)
{
    if (index >= os_port_count(kind)) {
        return NULL;
    }
    return kind == OS_STAGE_OPAMP ? &opamp_ports[index] : &pushpull_ports[index];
}

int os_port_find(OsStageKind kind, const char *symbol)
{
    const uint32_t n = os_port_count(kind);
    for (uint32_t i = 0; symbol != NULL && i < n; ++i) {
        if (strcmp(os_port_get(kind, i)->symbol, symbol) == 0) {
            return (int)i;
        }
    }
    return -1;
}

const OsPortInfo *os_port_for_param(OsStageKind kind, OsParam param)
{
    const uint32_t n = os_port_count(kind);
    for (uint32_t i = 0; i < n; ++i) {
        const OsPortInfo *p = os_port_get(kind, i);
        if (p->type == OS_PORT_CONTROL_IN && p->id == (int)param) {
            return p;
        }
    }
    return NULL;
}
