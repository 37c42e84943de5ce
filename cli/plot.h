/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Line plots with cairo: linear or logarithmic axes with ticks, grid, labels
 * and units, a legend, marked points and one horizontal reference line, drawn
 * to PNG or SVG (chosen by the file name) and written atomically. */

#ifndef CLI_PLOT_H
#define CLI_PLOT_H

#include <stddef.h>

/** One curve. */
typedef struct {
    const double *x,
        *y; /**< n points; non-finite or (on a log axis) non-positive ones break the line */
    size_t n;
    double rgb[3];     /**< colour, 0..1 */
    int dashed;        /**< 1: dashed line */
    int markers;       /**< 1: a dot at each point */
    const char *label; /**< legend text, or NULL */
} CliPlotSeries;

/** A labelled point (e.g. the clip onset). */
typedef struct {
    double x, y;
    const char *label;
} CliPlotMark;

/** Axes and annotations. Limits left NAN are taken from the data. */
typedef struct {
    const char *title;
    const char *xlabel, *ylabel; /**< with units, e.g. "Load power (W)" */
    int xlog, ylog;
    double xmin, xmax, ymin, ymax;
    double hline;            /**< y of a dotted reference line, or NAN */
    const char *hline_label; /**< its text */
} CliPlotSpec;

/** An empty spec: linear axes, automatic limits, no reference line. */
void cli_plot_spec_init(CliPlotSpec *spec);

/** 0 if @p path ends in .png or .svg, else -1 with a message naming it. */
int cli_plot_check_path(const char *path, char *err, size_t len);

/** Draw and write the plot. Returns 0, or -1 with a message naming @p path. */
int cli_plot_write(const char *path, const CliPlotSpec *spec, const CliPlotSeries *series,
                   size_t n_series, const CliPlotMark *marks, size_t n_marks, char *err,
                   size_t len);

/** Release the font caches of cairo and fontconfig at exit, so that a leak
 *  checker sees only the tool's own memory. Call once, after the last plot. */
void cli_plot_cleanup(void);

#endif
