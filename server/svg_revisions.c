/*
 * svg_revisions.c — figure 4, the revisions of a reprocessed analysis side
 * by side: for each eigenvalue (largest first) one estimate per revision
 * with its interval, oldest on the left, each revision in its own colour
 * and marker shape, and a legend naming the calibration version each
 * revision was computed with.  Owns nothing.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "svg_figures.h"
#include "svg_plot.h"

#define RV_LEFT 78.0
#define RV_RIGHT 24.0
#define RV_PLOT 220.0

static const char *const rv_colours[] = {
    SVG_BLUE,   SVG_VERMILLION, SVG_BLUISH_GREEN, SVG_REDDISH_PURPLE,
    SVG_ORANGE, SVG_SKY_BLUE,   SVG_BLACK,        SVG_YELLOW};
static const char rv_shapes[] = {'o', 's', '^', 'v'};

void svg_revisions_write(page_text *t, const svg_revision *revs, size_t n,
                         const char *label, int standalone) {
    char desc[1400], words[240], s1[48], s2[48], s3[48];
    size_t first = n > SVG_REVISIONS_MAX ? n - SVG_REVISIONS_MAX : 0;
    size_t m = n - first;
    unsigned d = 0;
    for (size_t k = first; k < n; k++)
        d = revs[k].levels > d ? revs[k].levels : d;
    int used = snprintf(desc, sizeof desc,
                        "The spectrum of each of %zu revision(s) of this "
                        "analysis side by side, with its interval and the "
                        "calibration it was computed with.",
                        n);
    for (size_t k = first; k < n && used > 0 && (size_t)used < sizeof desc; k++)
        used += snprintf(desc + used, sizeof desc - (size_t)used,
                         " Revision %u: calibration %s%s.", revs[k].revision,
                         revs[k].calibration,
                         revs[k].has_spectrum ? "" : ", no spectrum");
    size_t legend_rows = m;
    double top = 22.0 + 18.0 * (double)legend_rows + 14.0;
    double height = top + RV_PLOT + 60.0;
    svg_begin(t, SVG_FIGURE_WIDTH, height, "fig-revisions",
              "Revisions side by side", label, desc, standalone);
    for (size_t k = first; k < n; k++) {
        size_t i = k - first;
        snprintf(words, sizeof words,
                 "revision %u: calibration %s (computed %s)", revs[k].revision,
                 revs[k].calibration, revs[k].created_at);
        svg_legend_item(t, RV_LEFT, 16.0 + 18.0 * (double)i,
                        rv_shapes[i % sizeof rv_shapes], rv_colours[i % 8],
                        words);
    }
    if (d == 0) {
        svg_text(t, RV_LEFT, top + 30.0, "start", "panel-note",
                 "no revision to draw");
        svg_end(t);
        return;
    }
    double hi = 0.0;
    for (size_t k = first; k < n; k++)
        for (unsigned i = 0; revs[k].has_spectrum && i < revs[k].levels; i++) {
            if (isfinite(revs[k].upper[i]))
                hi = fmax(hi, revs[k].upper[i]);
            if (isfinite(revs[k].values[i]))
                hi = fmax(hi, revs[k].values[i]);
        }
    double ymax = fmax(fmin(1.0, svg_nice_top(1.04 * hi, 5)), hi);
    double bottom = top + RV_PLOT, right = SVG_FIGURE_WIDTH - RV_RIGHT;
    svg_scale ys = {0.0, ymax > 0.0 ? ymax : 1.0, bottom, top};
    double ticks[16], step;
    size_t nt = svg_ticks(0.0, ys.d1, 5, ticks, 16, &step);
    svg_axis_y(t, &ys, RV_LEFT, right, ticks, nt, step,
               "eigenvalue (a probability, no unit)");
    page_text_printf(t,
                     "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                     "stroke=\"" SVG_BLACK "\"/>\n",
                     page_fmt_coord(RV_LEFT, s1), page_fmt_coord(right, s2),
                     page_fmt_coord(bottom, s3), s3);
    double slot = (right - RV_LEFT) / d;
    for (unsigned i = 0; i < d; i++) {
        double left = RV_LEFT + (double)i * slot;
        char sub[48];
        snprintf(words, sizeof words, "p%s", svg_subscript(i + 1, sub));
        page_text_printf(t,
                         "<g class=\"category\" transform=\"translate(%s,%s)\">"
                         "<line y2=\"5\" stroke=\"" SVG_BLACK "\"/>"
                         "<text y=\"18\" text-anchor=\"middle\">%s</text>"
                         "</g>\n",
                         page_fmt_coord(left + 0.5 * slot, s1),
                         page_fmt_coord(bottom, s2), words);
        if (i > 0)
            page_text_printf(t,
                             "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                             "stroke=\"" SVG_GRID "\"/>\n",
                             page_fmt_coord(left, s1), s1,
                             page_fmt_coord(top, s2),
                             page_fmt_coord(bottom, s3));
        for (size_t k = first; k < n; k++) {
            const svg_revision *r = &revs[k];
            size_t j = k - first;
            if (!r->has_spectrum || i >= r->levels)
                continue;
            double x = left + slot * ((double)j + 1.0) / ((double)m + 1.0);
            if (isfinite(r->lower[i]) && isfinite(r->upper[i])) {
                page_fmt_coord(x, s1);
                page_text_printf(
                    t,
                    "<line class=\"interval\" x1=\"%s\" "
                    "x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                    "stroke=\"%s\" stroke-width=\"1.5\"/>\n",
                    s1, s1,
                    page_fmt_coord(svg_map(&ys, fmax(r->lower[i], 0.0)), s2),
                    page_fmt_coord(svg_map(&ys, fmin(r->upper[i], ys.d1)), s3),
                    rv_colours[j % 8]);
            }
            if (isfinite(r->values[i]))
                svg_marker(t, x, svg_map(&ys, r->values[i]),
                           rv_shapes[j % sizeof rv_shapes], 9.0,
                           rv_colours[j % 8], "estimate");
        }
    }
    svg_text(t, 0.5 * (RV_LEFT + right), bottom + 38.0, "middle", "axis-label",
             "eigenvalue, largest first; within each, revisions oldest first");
    svg_end(t);
}
