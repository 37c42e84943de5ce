/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

#include "plot.h"

#include "atomic.h"
#include "cli.h"

#include <cairo-svg.h>
#include <cairo.h>
#include <fontconfig/fontconfig.h>

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

/* Canvas and plot area, in points (SVG) or pixels (PNG). */
#define WIDTH 900.0
#define HEIGHT 560.0
#define LEFT 90.0
#define RIGHT 30.0
#define TOP 50.0
#define BOTTOM 64.0
#define FONT 13.0

/* One axis: limits, scale, screen span. */
typedef struct {
    double lo, hi;
    int log;
    double s0, s1; /* screen coordinates of lo and hi */
} Axis;

static double axis_map(const Axis *a, double v)
{
    const double t = a->log ? (log10(v) - log10(a->lo)) / (log10(a->hi) - log10(a->lo))
                            : (v - a->lo) / (a->hi - a->lo);
    return a->s0 + t * (a->s1 - a->s0);
}

static int usable(const Axis *a, double v)
{
    return isfinite(v) && (!a->log || v > 0.0);
}

/* Limits from the data where the spec leaves them NAN: a linear axis padded by
 * 5 %, a log axis widened to whole decades. */
static void axis_limits(Axis *a, double lo, double hi, const CliPlotSeries *s, size_t ns, int use_x)
{
    double dmin = (double)INFINITY, dmax = -(double)INFINITY;
    for (size_t i = 0; i < ns; ++i) {
        for (size_t k = 0; k < s[i].n; ++k) {
            const double v = use_x ? s[i].x[k] : s[i].y[k];
            if (usable(a, v)) {
                dmin = fmin(dmin, v);
                dmax = fmax(dmax, v);
            }
        }
    }
    if (!isfinite(dmin)) {
        dmin = a->log ? 0.1 : 0.0;
        dmax = a->log ? 10.0 : 1.0;
    }
    if (a->log) {
        a->lo = isnan(lo) ? pow(10.0, floor(log10(dmin))) : lo;
        a->hi = isnan(hi) ? pow(10.0, ceil(log10(dmax))) : hi;
        if (a->hi <= a->lo) {
            a->hi = a->lo * 10.0;
        }
    } else {
        const double pad = 0.05 * (dmax - dmin > 0.0 ? dmax - dmin : fabs(dmax) + 1.0);
        a->lo = isnan(lo) ? dmin - pad : lo;
        a->hi = isnan(hi) ? dmax + pad : hi;
        if (a->hi <= a->lo) {
            a->hi = a->lo + 1.0;
        }
    }
}

/* Tick step 1, 2 or 5 x 10^k giving about six ticks. */
static double nice_step(double span)
{
    const double raw = span / 6.0;
    const double mag = pow(10.0, floor(log10(raw)));
    const double r = raw / mag;
    return mag * (r < 1.5 ? 1.0 : r < 3.5 ? 2.0 : r < 7.5 ? 5.0 : 10.0);
}

static void text_at(cairo_t *cr, const char *s, double x, double y, double ax, double ay)
{
    cairo_text_extents_t e;
    cairo_text_extents(cr, s, &e);
    cairo_move_to(cr, x - ax * e.width - e.x_bearing, y - ay * e.height - e.y_bearing);
    cairo_show_text(cr, s);
}

static void format_tick(char *buf, size_t len, double v, double step)
{
    if (fabs(v) < 1e-9 * step) {
        v = 0.0;
    }
    snprintf(buf, len, "%.6g", v);
}

/* Grid, ticks and labels of one axis; @p horizontal is the x axis. */
static void draw_axis(cairo_t *cr, const Axis *a, const Axis *other, int horizontal)
{
    char buf[32];
    const double o0 = other->s0, o1 = other->s1;
    double ticks[256];
    int major[256];
    int n = 0;
    if (a->log) {
        const int d0 = (int)floor(log10(a->lo) + 1e-9), d1 = (int)ceil(log10(a->hi) - 1e-9);
        const int decades = d1 - d0;
        for (int d = d0; d <= d1 && n < 240; ++d) {
            for (int m = 1; m <= 9; ++m) {
                const double v = m * pow(10.0, d);
                if (v >= a->lo * (1 - 1e-9) && v <= a->hi * (1 + 1e-9)) {
                    ticks[n] = v;
                    major[n++] = m == 1 || (decades <= 2 && (m == 2 || m == 5));
                }
            }
        }
    } else {
        const double step = nice_step(a->hi - a->lo);
        for (double v = ceil(a->lo / step) * step; v <= a->hi + 1e-9 * step && n < 240; v += step) {
            ticks[n] = v;
            major[n++] = 1;
        }
    }
    for (int i = 0; i < n; ++i) {
        const double p = axis_map(a, ticks[i]);
        cairo_set_source_rgb(cr, major[i] ? 0.82 : 0.92, major[i] ? 0.82 : 0.92,
                             major[i] ? 0.82 : 0.92);
        cairo_set_line_width(cr, 1.0);
        if (horizontal) {
            cairo_move_to(cr, p, o0);
            cairo_line_to(cr, p, o1);
        } else {
            cairo_move_to(cr, o0, p);
            cairo_line_to(cr, o1, p);
        }
        cairo_stroke(cr);
        if (!major[i]) {
            continue;
        }
        cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
        format_tick(buf, sizeof(buf), ticks[i], a->log ? ticks[i] : nice_step(a->hi - a->lo));
        if (horizontal) {
            text_at(cr, buf, p, o0 + 8.0, 0.5, 0.0);
        } else {
            text_at(cr, buf, o0 - 8.0, p, 1.0, 0.5);
        }
    }
}

static void draw_series(cairo_t *cr, const Axis *ax, const Axis *ay, const CliPlotSeries *s)
{
    cairo_set_source_rgb(cr, s->rgb[0], s->rgb[1], s->rgb[2]);
    cairo_set_line_width(cr, 2.0);
    const double dash[] = {7.0, 4.0};
    cairo_set_dash(cr, dash, s->dashed ? 2 : 0, 0.0);
    int pen = 0;
    for (size_t k = 0; k < s->n; ++k) {
        if (!usable(ax, s->x[k]) || !usable(ay, s->y[k])) {
            pen = 0;
            continue;
        }
        const double px = axis_map(ax, s->x[k]), py = axis_map(ay, s->y[k]);
        if (pen) {
            cairo_line_to(cr, px, py);
        } else {
            cairo_move_to(cr, px, py);
        }
        pen = 1;
    }
    cairo_stroke(cr);
    cairo_set_dash(cr, dash, 0, 0.0);
    if (s->markers) {
        for (size_t k = 0; k < s->n; ++k) {
            if (usable(ax, s->x[k]) && usable(ay, s->y[k])) {
                cairo_arc(cr, axis_map(ax, s->x[k]), axis_map(ay, s->y[k]), 2.5, 0.0, 2.0 * M_PI);
                cairo_fill(cr);
            }
        }
    }
}

static void draw_legend(cairo_t *cr, const CliPlotSeries *s, size_t ns)
{
    double y = TOP + 18.0;
    const double dash[] = {7.0, 4.0};
    for (size_t i = 0; i < ns; ++i) {
        if (s[i].label == NULL) {
            continue;
        }
        cairo_set_source_rgb(cr, s[i].rgb[0], s[i].rgb[1], s[i].rgb[2]);
        cairo_set_line_width(cr, 2.0);
        cairo_set_dash(cr, dash, s[i].dashed ? 2 : 0, 0.0);
        cairo_move_to(cr, LEFT + 14.0, y);
        cairo_line_to(cr, LEFT + 44.0, y);
        cairo_stroke(cr);
        cairo_set_dash(cr, dash, 0, 0.0);
        cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
        text_at(cr, s[i].label, LEFT + 52.0, y, 0.0, 0.5);
        y += 20.0;
    }
}

static void draw(cairo_t *cr, const CliPlotSpec *spec, const CliPlotSeries *s, size_t ns,
                 const CliPlotMark *marks, size_t nm)
{
    Axis ax = {0.0, 1.0, spec->xlog, LEFT, WIDTH - RIGHT};
    Axis ay = {0.0, 1.0, spec->ylog, HEIGHT - BOTTOM, TOP};
    axis_limits(&ax, spec->xmin, spec->xmax, s, ns, 1);
    axis_limits(&ay, spec->ymin, spec->ymax, s, ns, 0);

    cairo_set_source_rgb(cr, 1.0, 1.0, 1.0);
    cairo_paint(cr);
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, FONT);
    draw_axis(cr, &ax, &ay, 1);
    draw_axis(cr, &ay, &ax, 0);

    cairo_save(cr);
    cairo_rectangle(cr, LEFT, TOP, WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM);
    cairo_clip(cr);
    if (usable(&ay, spec->hline) && spec->hline >= ay.lo && spec->hline <= ay.hi) {
        const double y = axis_map(&ay, spec->hline);
        const double dots[] = {2.0, 3.0};
        cairo_set_source_rgb(cr, 0.45, 0.45, 0.45);
        cairo_set_line_width(cr, 1.2);
        cairo_set_dash(cr, dots, 2, 0.0);
        cairo_move_to(cr, LEFT, y);
        cairo_line_to(cr, WIDTH - RIGHT, y);
        cairo_stroke(cr);
        cairo_set_dash(cr, dots, 0, 0.0);
        if (spec->hline_label) {
            text_at(cr, spec->hline_label, WIDTH - RIGHT - 6.0, y - 4.0, 1.0, 1.0);
        }
    }
    for (size_t i = 0; i < ns; ++i) {
        draw_series(cr, &ax, &ay, &s[i]);
    }
    for (size_t i = 0; i < nm; ++i) {
        if (!usable(&ax, marks[i].x) || !usable(&ay, marks[i].y)) {
            continue;
        }
        const double px = axis_map(&ax, marks[i].x), py = axis_map(&ay, marks[i].y);
        cairo_set_source_rgb(cr, 0.8, 0.1, 0.1);
        cairo_arc(cr, px, py, 5.0, 0.0, 2.0 * M_PI);
        cairo_set_line_width(cr, 2.0);
        cairo_stroke(cr);
        if (marks[i].label) {
            text_at(cr, marks[i].label, px - 8.0, py - 8.0, 1.0, 1.0);
        }
    }
    cairo_restore(cr);

    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    cairo_set_line_width(cr, 1.0);
    cairo_rectangle(cr, LEFT, TOP, WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM);
    cairo_stroke(cr);
    draw_legend(cr, s, ns);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    if (spec->xlabel) {
        text_at(cr, spec->xlabel, 0.5 * (LEFT + WIDTH - RIGHT), HEIGHT - 10.0, 0.5, 1.0);
    }
    if (spec->ylabel) {
        cairo_save(cr);
        cairo_translate(cr, 18.0, 0.5 * (TOP + HEIGHT - BOTTOM));
        cairo_rotate(cr, -M_PI / 2.0);
        text_at(cr, spec->ylabel, 0.0, 0.0, 0.5, 0.5);
        cairo_restore(cr);
    }
    if (spec->title) {
        cairo_set_font_size(cr, FONT + 3.0);
        text_at(cr, spec->title, 0.5 * WIDTH, 0.5 * TOP, 0.5, 0.5);
    }
}

void cli_plot_spec_init(CliPlotSpec *spec)
{
    memset(spec, 0, sizeof(*spec));
    spec->xmin = spec->xmax = spec->ymin = spec->ymax = (double)NAN;
    spec->hline = (double)NAN;
}

int cli_plot_check_path(const char *path, char *err, size_t len)
{
    char ext[8];
    cli_path_ext(path, ext, sizeof(ext));
    if (strcmp(ext, "png") != 0 && strcmp(ext, "svg") != 0) {
        cli_err(err, len, "%s: plots are written as .png or .svg; name the file so", path);
        return -1;
    }
    return 0;
}

static cairo_status_t write_fd(void *closure, const unsigned char *data, unsigned int length)
{
    const int fd = *(const int *)closure;
    while (length > 0) {
        const ssize_t w = write(fd, data, length);
        if (w < 0 && errno == EINTR) {
            continue;
        }
        if (w <= 0) {
            return CAIRO_STATUS_WRITE_ERROR;
        }
        data += w;
        length -= (unsigned int)w;
    }
    return CAIRO_STATUS_SUCCESS;
}

int cli_plot_write(const char *path, const CliPlotSpec *spec, const CliPlotSeries *series,
                   size_t n_series, const CliPlotMark *marks, size_t n_marks, char *err, size_t len)
{
    if (cli_plot_check_path(path, err, len) != 0) {
        return -1;
    }
    char ext[8];
    cli_path_ext(path, ext, sizeof(ext));
    const int svg = strcmp(ext, "svg") == 0;
    CliAtomic a;
    if (cli_atomic_open(&a, path, err, len) != 0) {
        return -1;
    }
    cairo_surface_t *surface =
        svg ? cairo_svg_surface_create_for_stream(write_fd, &a.fd, WIDTH, HEIGHT)
            : cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)WIDTH, (int)HEIGHT);
    cairo_t *cr = cairo_create(surface);
    draw(cr, spec, series, n_series, marks, n_marks);
    cairo_status_t st = cairo_status(cr);
    cairo_destroy(cr);
    if (st == CAIRO_STATUS_SUCCESS) {
        if (svg) {
            cairo_surface_finish(surface);
            st = cairo_surface_status(surface);
        } else {
            st = cairo_surface_write_to_png_stream(surface, write_fd, &a.fd);
        }
    }
    cairo_surface_destroy(surface);
    if (st != CAIRO_STATUS_SUCCESS) {
        cli_err(err, len, "%s: cannot write: %s", path, cairo_status_to_string(st));
        cli_atomic_abort(&a);
        return -1;
    }
    return cli_atomic_commit(&a, err, len);
}

void cli_plot_cleanup(void)
{
    cairo_debug_reset_static_data();
    FcFini();
}
