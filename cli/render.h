/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* outstage render: an audio file through one stage instance per channel,
 * written atomically in the input's format, with the meters of every channel. */

#ifndef CLI_RENDER_H
#define CLI_RENDER_H

#include <stddef.h>
#include <stdint.h>

#include "settings.h"

/** What to render. */
typedef struct {
    const char *in_path;     /**< any file libsndfile reads */
    const char *out_path;    /**< never the input; its container from its name (audio_write.h) */
    const char *report_path; /**< JSON report, or NULL */
    CliSettings settings;
    /** 1 (the default): the output aligned with the input and as long (the
     *  latency dropped at the start, the tail rendered by flushing it at the
     *  end); 0: the plugin's own stream (latency included, as long) */
    int compensate;
    int progress; /**< 1: a progress bar when stderr is a terminal and the file is long */
} CliRenderJob;

/** The meters of one channel over the whole file, and its output level. */
typedef struct {
    double peak_current; /**< largest |load current|, A */
    double peak_load_v;  /**< largest |load voltage| at the circuit's own steps, V */
    double limiting;     /**< share of the time in current limit, % (time-weighted) */
    double load_power;   /**< mean power into the load, W */
    double dissipation;  /**< mean power in the output transistors, W (push-pull) */
    double out_peak;     /**< largest |output sample| (1.0 = 0 dBFS) */
    uint64_t clipped;    /**< output samples beyond 0 dBFS (clipped in an integer format) */
} CliChannelStats;

/** What a render did. */
typedef struct {
    int channels;
    int rate;               /**< Hz */
    uint64_t frames;        /**< frames written */
    uint64_t read_frames;   /**< frames the input held */
    uint64_t header_frames; /**< frames the input's header announced */
    double output_volts;    /**< load volts an output sample of 1.0 stands for */
    uint32_t latency;       /**< frames */
    int format;             /**< libsndfile format of the output */
    char format_name[160];  /**< its name, e.g. "WAV (Microsoft), 32 bit float" */
    CliChannelStats *ch;    /**< one per channel */
} CliRenderResult;

/**
 * Render @p job. Returns 0, or -1 with a one-line message naming the file at
 * fault; on failure no output (or report) file is created or changed. Polls
 * cli_interrupted. Free @p res with cli_render_result_free() either way.
 */
int cli_render(const CliRenderJob *job, CliRenderResult *res, char *err, size_t len);

/** Refuse an output or report that is the input, or two outputs that are one
 *  file by whatever path, symbolic or hard link (cli.h). Returns 0, or -1 with
 *  a message. cli_render() checks it too; callers check first to tell a
 *  usage error from a failed run. */
int cli_render_check_paths(const CliRenderJob *job, char *err, size_t len);

/** Free what cli_render() allocated in @p res. */
void cli_render_result_free(CliRenderResult *res);

/**
 * Check that @p path is a readable file libsndfile can decode (without keeping
 * it open). Returns 0, or -1 with a message naming @p path.
 */
int cli_check_input(const char *path, char *err, size_t len);

#endif
