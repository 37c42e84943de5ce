/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* A stage's control values as the command line gives them: the port table's
 * symbols (control inputs only), presets of our own, and range checks whose
 * messages name the symbol and its allowed range. Nothing is clamped here: a
 * value outside its port's range is an error. */

#ifndef CLI_SETTINGS_H
#define CLI_SETTINGS_H

#include <stddef.h>

#include "outstage.h"

/** Every control value of one stage, in port units. */
typedef struct {
    OsStageKind kind;
    float value[OS_P_COUNT]; /**< only the stage's own parameters are meaningful */
} CliSettings;

/** One value of a preset. */
typedef struct {
    const char *symbol;
    float value;
} CliPresetValue;

/** A named design of our own. */
typedef struct {
    const char *name;          /**< what --preset takes */
    const char *summary;       /**< one line for --help and the man page */
    const CliPresetValue *set; /**< values, terminated by a NULL symbol */
} CliPreset;

/** The stage named @p name ("opamp", "pushpull"): 0 and *kind, or -1. */
int cli_stage_parse(const char *name, OsStageKind *kind);

/** The command-line name of @p kind. */
const char *cli_stage_name(OsStageKind kind);

/** Every value of @p kind at its port default. */
void cli_settings_init(CliSettings *s, OsStageKind kind);

/** Whether the stage of @p s has parameter @p p. */
int cli_settings_has(const CliSettings *s, OsParam p);

/**
 * Apply "SYMBOL=VALUE". Returns 0, or -1 with a one-line message in @p err for
 * a malformed assignment, a symbol the stage lacks, a control output, a value
 * that is not a finite number, outside the port's range, or not one of an
 * enumeration's values.
 */
int cli_settings_assign(CliSettings *s, const char *assignment, char *err, size_t len);

/** Apply preset @p name (values for parameters the stage lacks are skipped).
 *  Returns 0, or -1 with a message naming the presets there are. */
int cli_settings_preset(CliSettings *s, const char *name, char *err, size_t len);

/** Number of presets. */
size_t cli_preset_count(void);

/** Preset @p i, or NULL. */
const CliPreset *cli_preset_get(size_t i);

/**
 * A new stage at @p rate Hz with every value of @p s set and already reached
 * (os_stage_reset() after the sets: no glide from the defaults at the start).
 * NULL with a message if the rate is refused or memory runs out.
 */
OsStage *cli_stage_new(const CliSettings *s, double rate, char *err, size_t len);

/** Closed-loop gain G = 10^(gain/20) of @p s. */
double cli_settings_gain(const CliSettings *s);

/** Volts at the stage input per unit sample: fullscale x 10^(drive/20). */
double cli_settings_volts_per_unit(const CliSettings *s);

/** Where the stage's output should stop growing, and whether the current limit
 *  or the swing sets it: os_stage_expected_limit() for the values of @p s. */
double cli_settings_expected_limit(const CliSettings *s, int *current_limited);

/** Most impossible combinations one design reports (os_stage_conflicts()). */
#define CLI_MAX_CONFLICTS 4

/** The output's peak in load volts above the circuit's own by this factor
 *  earns a note on stderr (band-limiting's overshoot of a clipped waveform). */
#define CLI_OVERSHOOT_NOTE 1.05

/** One line for @p c with the controls' values from @p s, e.g. "rail=1.5
 *  headroom=5 ask for the op-amp's output swing (rail - headroom) of -3.5 V;
 *  the stage uses 0.075 V: the swing's floor, ...". */
void cli_conflict_text(const CliSettings *s, const OsConflict *c, char *buf, size_t len);

#endif
