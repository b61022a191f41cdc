/*
 * svg_plot.h — the drawing kit the figures (svg_readings.c, svg_spectrum.c,
 * svg_diagrams.c, svg_revisions.c) share: the SVG document frame with its
 * <title> and <desc> (WAI-ARIA role img, labelled by both), linear scales,
 * "nice" axis ticks and their labels, axes with units, and the palette.
 *
 * Every figure is plain SVG 1.1 markup with presentation attributes only:
 * no script, no style sheet, no external reference (fonts are the
 * reader's generic sans-serif), so it renders the same inline in a page,
 * as an <img>, or opened on its own, and a Content-Security-Policy that
 * forbids inline styles does not touch it.
 *
 * Tick marks are written as <g class="tick-x|tick-y"
 * transform="translate(..)"> holding the mark and its label, so that a test
 * can read the scale back from the figure itself.
 */
#ifndef SWAPSPEC_SVG_PLOT_H
#define SWAPSPEC_SVG_PLOT_H

#include <stddef.h>

#include "page_text.h"

/* The Okabe–Ito palette: eight colours that readers with the common forms
 * of colour-vision deficiency can tell apart (M. Okabe and K. Ito, "Color
 * Universal Design (CUD): how to make figures and presentations that are
 * friendly to colorblind people", J*Fly, 2008; hex values [from memory]).
 * Figures never tell things apart by colour alone: markers also differ in
 * shape or dash, and each figure has a legend in words. */
#define SVG_BLACK "#000000"
#define SVG_ORANGE "#E69F00"
#define SVG_SKY_BLUE "#56B4E9"
#define SVG_BLUISH_GREEN "#009E73"
#define SVG_YELLOW "#F0E442"
#define SVG_BLUE "#0072B2"
#define SVG_VERMILLION "#D55E00"
#define SVG_REDDISH_PURPLE "#CC79A7"
/* Greys for frames and grid lines (not data). */
#define SVG_GRID "#D9D9D9"
#define SVG_FRAME "#7F7F7F"

/* A linear map from data [d0, d1] to drawing coordinates [r0, r1]. */
typedef struct {
    double d0, d1, r0, r1;
} svg_scale;

double svg_map(const svg_scale *s, double v);

/* Ticks at the multiples of a "nice" step (1, 2 or 5 times a power of
 * ten) within [lo, hi], about `target` of them: writes at most cap values
 * to ticks, returns how many, and the step to *step.  lo < hi required
 * (otherwise one tick at lo). */
size_t svg_ticks(double lo, double hi, unsigned target, double *ticks,
                 size_t cap, double *step);
/* The smallest multiple of a nice step that is >= x (x > 0): the top of an
 * axis starting at 0 with about `target` ticks. */
double svg_nice_top(double x, unsigned target);
/* A tick label with as many decimals as the step needs ("0.25", "-40",
 * "1.5e+06" for large magnitudes).  out needs 48 bytes. */
const char *svg_tick_label(double v, double step, char out[48]);

/* Opens the document: the XML declaration and the namespace when
 * standalone (a file of its own) — inline in HTML the same markup without
 * the declaration — width and height in px, a viewBox, role="img", and
 * <title> (title, then " — " and the escaped label when label is not
 * empty) and <desc> (desc, escaped).  id prefixes every id in the figure
 * so that several figures can share one page. */
void svg_begin(page_text *t, double width, double height, const char *id,
               const char *title, const char *label, const char *desc,
               int standalone);
void svg_end(page_text *t);

/* An x axis along y = at, from x->r0 to x->r1, with ticks and the label
 * under it; a y axis along x = at with ticks, light grid lines across to
 * grid_to (no grid when grid_to == at) and the label turned upright. */
void svg_axis_x(page_text *t, const svg_scale *x, double at,
                const double *ticks, size_t n, double step, const char *label);
void svg_axis_y(page_text *t, const svg_scale *y, double at, double grid_to,
                const double *ticks, size_t n, double step, const char *label);

/* Text at (x, y), escaped; anchor "start", "middle" or "end". */
void svg_text(page_text *t, double x, double y, const char *anchor,
              const char *cls, const char *text);

/* A legend row: a swatch (kind 'b' bar, 'l' line, 'd' dashed line, 'o'
 * circle, 's' square, '^' triangle, 'v' diamond) and its words. */
void svg_legend_item(page_text *t, double x, double y, char kind,
                     const char *colour, const char *words);
/* A marker of the same kinds ('o', 's', '^', 'v') centred at (x, y). */
void svg_marker(page_text *t, double x, double y, char kind, double size,
                const char *colour, const char *cls);

#endif /* SWAPSPEC_SVG_PLOT_H */
