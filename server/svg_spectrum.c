/*
 * svg_spectrum.c — figure 2, the spectrum: one slot per eigenvalue,
 * largest first.  In each slot the estimate (circle) with its interval at
 * the result's confidence (a bar with caps), the feasible range where the
 * readings leave the spectrum underdetermined (a light band: every
 * spectrum in it fits the measured power sums), and the naive λ/n of the
 * diagram nearest each run's mean (diamond) beside it.  Also the
 * svg_subscript helper the figures share.  Owns nothing.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "svg_figures.h"
#include "svg_plot.h"

#define SP_LEFT 78.0
#define SP_RIGHT 24.0
#define SP_TOP 92.0
#define SP_PLOT 220.0
#define SP_HEIGHT 370.0

const char *svg_subscript(unsigned i, char out[48]) {
    char digits[16];
    int n = snprintf(digits, sizeof digits, "%u", i);
    size_t used = 0;
    for (int k = 0; k < n && used + 4 <= 48; k++) {
        /* U+2080 + digit: E2 82 80..89 */
        out[used++] = (char)0xe2;
        out[used++] = (char)0x82;
        out[used++] = (char)(0x80 + (digits[k] - '0'));
    }
    out[used] = '\0';
    return out;
}

void svg_spectrum_write(page_text *t, const svg_analysis *a, int standalone) {
    unsigned d = a->levels;
    char desc[1200], words[200], s1[48], s2[48], s3[48], s4[48];
    double conf = isfinite(a->confidence) ? 100.0 * a->confidence : 95.0;
    int used = snprintf(
        desc, sizeof desc,
        "The estimated spectrum of d = %u levels, largest eigenvalue first: "
        "each estimate (a statistical estimate from finite shots) with its "
        "interval at %s %% confidence (%s)%s%s.",
        d, page_fmt_sig(conf, 3, s1),
        a->interval[0] ? a->interval : "interval kind not recorded",
        a->has_feasible ? ", the feasible range of each eigenvalue (the data "
                          "are underdetermined)"
                        : "",
        a->has_naive ? ", and the naive reading λ/n beside it" : "");
    for (unsigned i = 0;
         a->has_spectrum && i < d && used > 0 && (size_t)used < sizeof desc;
         i++)
        used += snprintf(desc + used, sizeof desc - (size_t)used,
                         " p%u = %s [%s, %s].", i + 1,
                         page_fmt_fixed(a->values[i], 4, s1),
                         page_fmt_fixed(a->lower[i], 4, s2),
                         page_fmt_fixed(a->upper[i], 4, s3));
    svg_begin(t, SVG_FIGURE_WIDTH, SP_HEIGHT, "fig-spectrum",
              "Estimated spectrum with intervals", a->label, desc, standalone);

    svg_legend_item(t, SP_LEFT, 16.0, 'o', SVG_BLUE,
                    a->estimate[0] ? a->estimate : "estimate");
    snprintf(words, sizeof words, "interval at %s %% confidence (%s)",
             page_fmt_sig(conf, 3, s1),
             a->interval[0] ? a->interval : "kind not recorded");
    svg_legend_item(t, SP_LEFT, 34.0, 'l', SVG_BLACK, words);
    if (a->has_feasible)
        svg_legend_item(t, SP_LEFT, 52.0, 'b', SVG_SKY_BLUE,
                        "feasible range: underdetermined, every value here "
                        "fits the readings");
    if (a->has_naive)
        svg_legend_item(t, SP_LEFT, a->has_feasible ? 70.0 : 52.0, 'v',
                        SVG_VERMILLION,
                        "naive \xce\xbb/n (diagram nearest each run's mean)");
    if (!a->has_spectrum && !a->has_naive) {
        svg_text(t, SP_LEFT, SP_TOP + 40.0, "start", "panel-note",
                 "no spectrum: this analysis lists candidate diagrams only");
        svg_end(t);
        return;
    }

    double hi = 0.0;
    for (unsigned i = 0; i < d; i++) {
        double cand[5] = {a->has_spectrum ? a->values[i] : 0.0,
                          a->has_spectrum ? a->upper[i] : 0.0,
                          a->has_feasible ? a->feasible_upper[i] : 0.0,
                          a->has_naive ? a->naive[i] : 0.0, 0.0};
        for (int k = 0; k < 5; k++)
            if (isfinite(cand[k]))
                hi = fmax(hi, cand[k]);
    }
    double top = fmin(1.0, svg_nice_top(1.04 * hi, 5));
    if (top < hi)
        top = hi;
    double bottom = SP_TOP + SP_PLOT;
    double right = SVG_FIGURE_WIDTH - SP_RIGHT;
    svg_scale ys = {0.0, top, bottom, SP_TOP};
    double ticks[16], step;
    size_t nt = svg_ticks(0.0, top, 5, ticks, 16, &step);
    svg_axis_y(t, &ys, SP_LEFT, right, ticks, nt, step,
               "eigenvalue (a probability, no unit)");
    page_text_printf(t,
                     "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                     "stroke=\"" SVG_BLACK "\"/>\n",
                     page_fmt_coord(SP_LEFT, s1), page_fmt_coord(right, s2),
                     page_fmt_coord(bottom, s3), s3);
    double slot = (right - SP_LEFT) / d;
    double half = fmin(0.3 * slot, 40.0);
    for (unsigned i = 0; i < d; i++) {
        double xc = SP_LEFT + ((double)i + 0.5) * slot;
        double xe = a->has_naive ? xc - 0.12 * slot : xc;
        char sub[48];
        snprintf(words, sizeof words, "p%s", svg_subscript(i + 1, sub));
        page_text_printf(t,
                         "<g class=\"category\" transform=\"translate(%s,%s)\">"
                         "<line y2=\"5\" stroke=\"" SVG_BLACK "\"/>"
                         "<text y=\"18\" text-anchor=\"middle\">%s</text>"
                         "</g>\n",
                         page_fmt_coord(xc, s1), page_fmt_coord(bottom, s2),
                         words);
        if (a->has_feasible && isfinite(a->feasible_lower[i]) &&
            isfinite(a->feasible_upper[i])) {
            double y1 = svg_map(&ys, fmax(a->feasible_upper[i], 0.0));
            double y0 = svg_map(&ys, fmax(a->feasible_lower[i], 0.0));
            page_text_printf(t,
                             "<rect class=\"feasible\" x=\"%s\" y=\"%s\" "
                             "width=\"%s\" height=\"%s\" fill=\"" SVG_SKY_BLUE
                             "\" fill-opacity=\"0.45\"/>\n",
                             page_fmt_coord(xc - half, s1),
                             page_fmt_coord(y1, s2),
                             page_fmt_coord(2.0 * half, s3),
                             page_fmt_coord(fmax(y0 - y1, 1.0), s4));
        }
        if (a->has_spectrum && isfinite(a->lower[i]) && isfinite(a->upper[i])) {
            double yl = svg_map(&ys, fmax(a->lower[i], 0.0));
            double yu = svg_map(&ys, fmin(a->upper[i], top));
            page_fmt_coord(xe, s1);
            page_text_printf(t,
                             "<line class=\"interval\" x1=\"%s\" x2=\"%s\" "
                             "y1=\"%s\" y2=\"%s\" stroke=\"" SVG_BLACK
                             "\" stroke-width=\"1.5\"/>\n",
                             s1, s1, page_fmt_coord(yl, s2),
                             page_fmt_coord(yu, s3));
            for (int end = 0; end < 2; end++) {
                page_fmt_coord(end ? yu : yl, s4);
                page_text_printf(t,
                                 "<line class=\"interval-cap\" x1=\"%s\" "
                                 "x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                                 "stroke=\"" SVG_BLACK
                                 "\" stroke-width=\"1.5\"/>\n",
                                 page_fmt_coord(xe - 6.0, s2),
                                 page_fmt_coord(xe + 6.0, s3), s4, s4);
            }
        }
        if (a->has_spectrum && isfinite(a->values[i]))
            svg_marker(t, xe, svg_map(&ys, a->values[i]), 'o', 9.0, SVG_BLUE,
                       "estimate");
        if (a->has_naive && isfinite(a->naive[i]))
            svg_marker(t, xc + 0.12 * slot, svg_map(&ys, a->naive[i]), 'v',
                       11.0, SVG_VERMILLION, "naive");
    }
    svg_text(t, 0.5 * (SP_LEFT + right), bottom + 38.0, "middle", "axis-label",
             "eigenvalue, largest first");
    svg_end(t);
}
