/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* What every comparison with ngspice needs: netlist templates with @NAME@
 * placeholders, a scratch directory, running ngspice in batch mode, and reading
 * the table that its wrdata command writes. Used by the tests in tests/spice/
 * and the benchmark; prints its complaints to stderr. */

#ifndef OS_SPICE_UTIL_H
#define OS_SPICE_UTIL_H

#include <stddef.h>

#include "outstage.h"

/* Exit status that meson reads as "skipped". */
#define SP_EXIT_SKIP 77

#if defined(__GNUC__)
#define SP_PRINTF(f, a) __attribute__((format(printf, f, a)))
#else
#define SP_PRINTF(f, a)
#endif

/* Values for the placeholders of a template. */
typedef struct {
    struct {
        const char *name;
        char value[256];
    } item[48];
    int n;
} SpSubst;

/* Give placeholder @p name the printf-formatted value. */
void sp_put(SpSubst *s, const char *name, const char *fmt, ...) SP_PRINTF(3, 4);

/* The circuit a stage simulates, read back from its ports (port units to SI,
 * as the port table defines them): what the netlist templates take. */
typedef struct {
    double vin_amp; /* stage input peak, V: amp x fullscale x 10^(drive/20) */
    double freq, gain_db, rail, headroom, ilimit, load, gbw,
        slew;                         /* Hz, dB, V, V, A, ohm, Hz, V/s */
    double is, beta, bias, emitter_r; /* the follower (push-pull stage): A, -, V, ohm */
    int loop;                         /* 1: feedback from the load */
    /* the load (dsp/os_load.h): 1 a loudspeaker of voice-coil resistance
     * load, inductance le (H), resonance fs (Hz), mechanical and electrical Q */
    int speaker;
    double le, fs, qms, qes;
    /* the input source's netlist line(s) for node in; empty: the sine of
     * vin_amp and freq (sp_put_circuit()) */
    char source[256];
} SpCircuit;

/* @p k from stage @p s driven by a sine of @p amp full-scale units at @p freq. */
void sp_circuit_of(const OsStage *s, double amp, double freq, SpCircuit *k);

/* The placeholders both templates share (the op-amp, the load, the source, the
 * model's constants, FEEDBACK_R2 from the op-amp pin or, with @p follower and
 * loop 1, from the load) and, with @p follower, the pair's. */
void sp_put_circuit(SpSubst *sub, const SpCircuit *k, int follower);

/* The transient analysis of either template: output every @p dt s to
 * @p tstop, steps of at most @p tmax, the table written to @p table. Returns
 * the table's columns (time and the template's voltages: 3 for the op-amp
 * stage's, 5 with @p follower). */
size_t sp_put_transient(SpSubst *sub, int follower, double dt, double tstop, double tmax,
                        const char *table);

/* The whole file at @p path as a string (free() it), or NULL. */
char *sp_read_text(const char *path);

/* Copy the template at @p tmpl_path to @p out with every @NAME@ replaced. An
 * unknown placeholder is an error, so a template and its test cannot drift
 * apart. Returns 0 on success. */
int sp_write_netlist(const char *tmpl_path, const SpSubst *s, const char *out);

/* ngspice from OS_NGSPICE (set by meson; empty when not found) or from PATH;
 * NULL if there is none. */
const char *sp_find_ngspice(void);

/* Run "ngspice -b NETLIST" in @p dir with stdout and stderr to @p log;
 * returns its exit status (-1 if it could not run). */
int sp_run(const char *ngspice, const char *dir, const char *netlist, const char *log);

/* Print the end of ngspice's log to stderr. */
void sp_print_log_tail(const char *path);

/* Read a wrdata table (wr_singlescale, wr_vecnames): one header line, then
 * rows of @p cols numbers. Returns the rows read, row after row, in a malloc'd
 * array (NULL on error or when there are none); *rows receives their number. */
double *sp_read_table(const char *path, size_t cols, size_t *rows);

/* Make a scratch directory under TMPDIR (or /tmp) named after @p tag. */
int sp_mkdtemp(char *dir, size_t len, const char *tag);

/* Remove @p files (names inside @p dir) and @p dir, unless OS_SPICE_KEEP=1 or
 * @p keep; then say where they were kept. */
void sp_cleanup(const char *dir, const char *const *files, size_t n, int keep, const char *name);

#endif
