/*
 * svg_plot.c — the shared drawing kit of svg_plot.h: document frame,
 * scales, ticks, axes, legend rows and markers.  Writes into the caller's
 * page_text; owns nothing.
 */
#include "svg_plot.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

double svg_map(const svg_scale *s, double v) {
    double span = s->d1 - s->d0;
    if (span == 0.0)
        return 0.5 * (s->r0 + s->r1);
    return s->r0 + (v - s->d0) * (s->r1 - s->r0) / span;
}

/* 1, 2 or 5 times a power of ten, near raw (> 0). */
static double svg_nice_step(double raw) {
    double mag = pow(10.0, floor(log10(raw)));
    double r = raw / mag;
    double f = r < 1.5 ? 1.0 : r < 3.0 ? 2.0 : r < 7.0 ? 5.0 : 10.0;
    return f * mag;
}

size_t svg_ticks(double lo, double hi, unsigned target, double *ticks,
                 size_t cap, double *step) {
    if (cap == 0)
        return 0;
    if (!(hi > lo) || !isfinite(lo) || !isfinite(hi) || target == 0) {
        ticks[0] = lo;
        *step = 1.0;
        return 1;
    }
    double s = svg_nice_step((hi - lo) / target);
    double first = ceil(lo / s - 1e-9);
    size_t n = 0;
    for (double k = first; n < cap; k += 1.0) {
        double v = k * s;
        if (v > hi + 1e-9 * s)
            break;
        ticks[n++] = fabs(v) < 1e-9 * s ? 0.0 : v;
    }
    *step = s;
    return n;
}

double svg_nice_top(double x, unsigned target) {
    if (!(x > 0.0) || !isfinite(x))
        return 1.0;
    double s = svg_nice_step(x / (target ? target : 1));
    return ceil(x / s - 1e-9) * s;
}

const char *svg_tick_label(double v, double step, char out[48]) {
    if (fabs(v) >= 1e6 || (v != 0.0 && fabs(v) < 1e-4))
        return page_fmt_sig(v, 3, out);
    int decimals = 0;
    if (step > 0.0 && step < 1.0)
        decimals = (int)ceil(-log10(step) - 1e-9);
    return page_fmt_fixed(v, decimals, out);
}

void svg_begin(page_text *t, double width, double height, const char *id,
               const char *title, const char *label, const char *desc,
               int standalone) {
    char w[48], h[48];
    page_fmt_coord(width, w);
    page_fmt_coord(height, h);
    if (standalone)
        page_text_add(t, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    page_text_printf(t,
                     "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%s\" "
                     "height=\"%s\" viewBox=\"0 0 %s %s\" role=\"img\" id=\"",
                     w, h, w, h);
    page_text_escaped(t, id);
    page_text_add(t, "\" aria-labelledby=\"");
    page_text_escaped(t, id);
    page_text_add(t, "-title ");
    page_text_escaped(t, id);
    page_text_add(t, "-desc\" font-family=\"sans-serif\" font-size=\"12\" "
                     "class=\"figure\">\n<title id=\"");
    page_text_escaped(t, id);
    page_text_add(t, "-title\">");
    page_text_escaped(t, title);
    if (label != NULL && label[0] != '\0') {
        page_text_add(t, " \xe2\x80\x94 "); /* em dash */
        page_text_escaped(t, label);
    }
    page_text_add(t, "</title>\n<desc id=\"");
    page_text_escaped(t, id);
    page_text_add(t, "-desc\">");
    page_text_escaped(t, desc);
    page_text_printf(t,
                     "</desc>\n<rect width=\"%s\" height=\"%s\" "
                     "fill=\"#FFFFFF\"/>\n",
                     w, h);
}

void svg_end(page_text *t) { page_text_add(t, "</svg>\n"); }

void svg_text(page_text *t, double x, double y, const char *anchor,
              const char *cls, const char *text) {
    char xs[48], ys[48];
    page_text_printf(t, "<text x=\"%s\" y=\"%s\" text-anchor=\"%s\"",
                     page_fmt_coord(x, xs), page_fmt_coord(y, ys), anchor);
    if (cls != NULL && cls[0] != '\0')
        page_text_printf(t, " class=\"%s\"", cls);
    page_text_add(t, ">");
    page_text_escaped(t, text);
    page_text_add(t, "</text>\n");
}

void svg_axis_x(page_text *t, const svg_scale *x, double at,
                const double *ticks, size_t n, double step, const char *label) {
    char a[48], b[48], c[48], lab[48];
    page_text_printf(t,
                     "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                     "stroke=\"" SVG_BLACK "\"/>\n",
                     page_fmt_coord(x->r0, a), page_fmt_coord(x->r1, b),
                     page_fmt_coord(at, c), c);
    for (size_t i = 0; i < n; i++) {
        page_text_printf(t,
                         "<g class=\"tick-x\" transform=\"translate(%s,%s)\">"
                         "<line y2=\"5\" stroke=\"" SVG_BLACK "\"/>"
                         "<text y=\"17\" text-anchor=\"middle\">%s</text>"
                         "</g>\n",
                         page_fmt_coord(svg_map(x, ticks[i]), a), c,
                         svg_tick_label(ticks[i], step, lab));
    }
    svg_text(t, 0.5 * (x->r0 + x->r1), at + 34.0, "middle", "axis-label",
             label);
}

void svg_axis_y(page_text *t, const svg_scale *y, double at, double grid_to,
                const double *ticks, size_t n, double step, const char *label) {
    char a[48], b[48], c[48], g[48], lab[48];
    page_fmt_coord(at, c);
    page_fmt_coord(grid_to, g);
    for (size_t i = 0; i < n && grid_to != at; i++)
        page_text_printf(t,
                         "<line class=\"grid\" x1=\"%s\" x2=\"%s\" y1=\"%s\" "
                         "y2=\"%s\" stroke=\"" SVG_GRID "\"/>\n",
                         c, g, page_fmt_coord(svg_map(y, ticks[i]), a), a);
    page_text_printf(t,
                     "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                     "stroke=\"" SVG_BLACK "\"/>\n",
                     c, c, page_fmt_coord(y->r0, a), page_fmt_coord(y->r1, b));
    for (size_t i = 0; i < n; i++)
        page_text_printf(t,
                         "<g class=\"tick-y\" transform=\"translate(%s,%s)\">"
                         "<line x2=\"-5\" stroke=\"" SVG_BLACK "\"/>"
                         "<text x=\"-8\" dy=\"0.32em\" "
                         "text-anchor=\"end\">%s</text></g>\n",
                         c, page_fmt_coord(svg_map(y, ticks[i]), a),
                         svg_tick_label(ticks[i], step, lab));
    double mid = 0.5 * (y->r0 + y->r1);
    page_text_printf(t,
                     "<text class=\"axis-label\" text-anchor=\"middle\" "
                     "transform=\"translate(%s,%s) rotate(-90)\">",
                     page_fmt_coord(at - 46.0, a), page_fmt_coord(mid, b));
    page_text_escaped(t, label);
    page_text_add(t, "</text>\n");
}

void svg_marker(page_text *t, double x, double y, char kind, double size,
                const char *colour, const char *cls) {
    char a[48], b[48], c[48], d[48], e[48], f[48];
    double r = 0.5 * size;
    const char *k = cls ? cls : "marker";
    switch (kind) {
    case 's':
        page_text_printf(t,
                         "<rect class=\"%s\" x=\"%s\" y=\"%s\" width=\"%s\" "
                         "height=\"%s\" fill=\"%s\"/>\n",
                         k, page_fmt_coord(x - r, a), page_fmt_coord(y - r, b),
                         page_fmt_coord(size, c), c, colour);
        break;
    case '^':
        page_text_printf(t,
                         "<polygon class=\"%s\" points=\"%s,%s %s,%s %s,%s\" "
                         "fill=\"%s\"/>\n",
                         k, page_fmt_coord(x, a), page_fmt_coord(y - r, b),
                         page_fmt_coord(x + r, c), page_fmt_coord(y + r, d),
                         page_fmt_coord(x - r, e), d, colour);
        break;
    case 'v':
        page_text_printf(
            t,
            "<polygon class=\"%s\" points=\"%s,%s %s,%s %s,%s %s,%s\" "
            "fill=\"%s\"/>\n",
            k, page_fmt_coord(x, a), page_fmt_coord(y - r, b),
            page_fmt_coord(x + r, c), page_fmt_coord(y, d), a,
            page_fmt_coord(y + r, e), page_fmt_coord(x - r, f), d, colour);
        break;
    default:
        page_text_printf(t,
                         "<circle class=\"%s\" cx=\"%s\" cy=\"%s\" r=\"%s\" "
                         "fill=\"%s\"/>\n",
                         k, page_fmt_coord(x, a), page_fmt_coord(y, b),
                         page_fmt_coord(r, c), colour);
    }
}

void svg_legend_item(page_text *t, double x, double y, char kind,
                     const char *colour, const char *words) {
    char a[48], b[48], c[48];
    switch (kind) {
    case 'b':
        page_text_printf(t,
                         "<rect x=\"%s\" y=\"%s\" width=\"14\" height=\"10\" "
                         "fill=\"%s\"/>\n",
                         page_fmt_coord(x, a), page_fmt_coord(y - 5.0, b),
                         colour);
        break;
    case 'l':
    case 'd':
        page_text_printf(t,
                         "<line x1=\"%s\" x2=\"%s\" y1=\"%s\" y2=\"%s\" "
                         "stroke=\"%s\" stroke-width=\"2\"%s/>\n",
                         page_fmt_coord(x, a), page_fmt_coord(x + 14.0, b),
                         page_fmt_coord(y, c), c, colour,
                         kind == 'd' ? " stroke-dasharray=\"4 3\"" : "");
        break;
    default:
        svg_marker(t, x + 7.0, y, kind, 9.0, colour, "legend-marker");
    }
    svg_text(t, x + 20.0, y + 4.0, "start", "legend", words);
}
