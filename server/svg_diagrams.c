/*
 * svg_diagrams.c — figure 3, the candidate Young diagrams of each run:
 * the diagrams whose energy lies within the run's window around its mean
 * reading, drawn as boxes in the English convention (row i from the top
 * holds λ_i boxes, rows left-aligned, the longest on top), each with its
 * probability P_n(λ | estimate) as a bar (SVG_DIAGRAMS_BAR_FULL px for
 * probability 1), its energy and z.  Candidates that share one energy (a
 * degenerate group: equal content sums) are placed side by side inside one
 * dashed frame, because no energy reading can tell them apart.  Owns
 * nothing.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "svg_figures.h"
#include "svg_plot.h"

#define DG_LEFT 20.0
#define DG_CELL_W 122.0
#define DG_LEGEND 50.0
#define DG_HEADER 26.0
#define DG_TEXT 86.0 /* room under the boxes: name, P, E, z, bar, note */
#define DG_BOX_MAX 14.0
#define DG_BOXES_W 100.0 /* widest drawing of a diagram */
#define DG_BOXES_H 84.0  /* tallest drawing of a diagram */

static unsigned dg_nrows(const svg_candidate *c) {
    unsigned n = 0;
    while (n < SS_LEVELS_MAX && c->rows[n] != 0)
        n++;
    return n;
}

/* Box size for the run: every candidate fits DG_BOXES_W x DG_BOXES_H. */
static double dg_box(const svg_run *run) {
    double s = DG_BOX_MAX;
    for (size_t k = 0; k < run->candidate_count; k++) {
        const svg_candidate *c = &run->candidates[k];
        if (c->rows[0] > 0)
            s = fmin(s, DG_BOXES_W / c->rows[0]);
        unsigned nr = dg_nrows(c);
        if (nr > 0)
            s = fmin(s, DG_BOXES_H / nr);
    }
    return s;
}

static unsigned dg_max_rows(const svg_run *run) {
    unsigned m = 1;
    for (size_t k = 0; k < run->candidate_count; k++) {
        unsigned nr = dg_nrows(&run->candidates[k]);
        m = nr > m ? nr : m;
    }
    return m;
}

static size_t dg_per_line(void) {
    return (size_t)((SVG_FIGURE_WIDTH - 2.0 * DG_LEFT) / DG_CELL_W);
}

static double dg_cell_h(const svg_run *run) {
    return 10.0 + dg_box(run) * dg_max_rows(run) + DG_TEXT;
}

/* The drawing order: candidates as listed, each degenerate group gathered
 * at the place of its first member.  order needs candidate_count slots. */
static void dg_order(const svg_run *run, size_t *order) {
    size_t n = 0;
    for (size_t k = 0; k < run->candidate_count; k++) {
        unsigned g = run->candidates[k].group;
        if (g == 0) {
            order[n++] = k;
            continue;
        }
        int first = 1;
        for (size_t j = 0; j < k && first; j++)
            first = run->candidates[j].group != g;
        if (!first)
            continue;
        for (size_t j = k; j < run->candidate_count; j++)
            if (run->candidates[j].group == g)
                order[n++] = j;
    }
}

static void dg_cell(page_text *t, const svg_analysis *a, const svg_run *run,
                    const svg_candidate *c, double x, double y, double box) {
    char s1[48], s2[48], s3[48], s4[48], name[128], line[160];
    unsigned nr = dg_nrows(c);
    double bx = x + 8.0, by = y + 6.0;
    if (box >= 6.0) {
        for (unsigned r = 0; r < nr; r++)
            for (uint32_t col = 0; col < c->rows[r]; col++)
                page_text_printf(
                    t,
                    "<rect class=\"box\" x=\"%s\" y=\"%s\" width=\"%s\" "
                    "height=\"%s\" fill=\"#FFFFFF\" stroke=\"" SVG_BLACK
                    "\"/>\n",
                    page_fmt_coord(bx + col * box, s1),
                    page_fmt_coord(by + r * box, s2), page_fmt_coord(box, s3),
                    s3);
    } else /* too many boxes to draw one by one: each row as a bar */
        for (unsigned r = 0; r < nr; r++)
            page_text_printf(t,
                             "<rect class=\"box-row\" x=\"%s\" y=\"%s\" "
                             "width=\"%s\" height=\"%s\" fill=\"#555555\"/>\n",
                             page_fmt_coord(bx, s1),
                             page_fmt_coord(by + r * box, s2),
                             page_fmt_coord(c->rows[r] * box, s3),
                             page_fmt_coord(fmax(box - 0.5, 0.5), s4));
    double ty = by + box * dg_max_rows(run) + 14.0;
    svg_diagram_name(c->rows, a->levels, name, sizeof name);
    svg_text(t, bx, ty, "start", "diagram-name", name);
    snprintf(line, sizeof line, "P = %s",
             page_fmt_fixed(c->probability, 4, s1));
    svg_text(t, bx, ty + 14.0, "start", "diagram-probability", line);
    snprintf(line, sizeof line, "E = %s %s", page_fmt_sig(c->energy, 4, s1),
             a->cal.unit);
    svg_text(t, bx, ty + 28.0, "start", "diagram-energy", line);
    snprintf(line, sizeof line, "z = %s", page_fmt_fixed(c->z, 2, s2));
    svg_text(t, bx, ty + 42.0, "start", "diagram-z", line);
    double yb = ty + 48.0;
    page_text_printf(t,
                     "<rect class=\"prob-frame\" x=\"%s\" y=\"%s\" "
                     "width=\"%s\" height=\"7\" fill=\"none\" "
                     "stroke=\"" SVG_FRAME "\" stroke-width=\"0.5\"/>\n",
                     page_fmt_coord(bx, s1), page_fmt_coord(yb, s2),
                     page_fmt_coord(SVG_DIAGRAMS_BAR_FULL, s3));
    if (isfinite(c->probability) && c->probability > 0.0)
        page_text_printf(
            t,
            "<rect class=\"prob-bar\" x=\"%s\" y=\"%s\" "
            "width=\"%s\" height=\"7\" fill=\"" SVG_BLUE "\"/>\n",
            s1, s2,
            page_fmt_coord(fmin(c->probability, 1.0) * SVG_DIAGRAMS_BAR_FULL,
                           s3));
}

/* Places the cells of a run in drawing order: cell i goes to column col[i]
 * of line line[i].  A degenerate group that does not fit in what is left of
 * a line starts the next one (when it fits in a line at all), so that its
 * members stay side by side.  Returns the number of lines. */
static size_t dg_layout(const svg_run *run, const size_t *order, size_t *col,
                        size_t *line) {
    size_t per = dg_per_line(), c = 0, l = 0, n = run->candidate_count;
    for (size_t i = 0; i < n; i++) {
        unsigned g = run->candidates[order[i]].group;
        if (g != 0 && c > 0 && run->candidates[order[i - 1]].group != g) {
            size_t size = 0;
            while (i + size < n && run->candidates[order[i + size]].group == g)
                size++;
            if (c + size > per && size <= per) {
                c = 0;
                l++;
            }
        }
        if (c == per) {
            c = 0;
            l++;
        }
        col[i] = c++;
        line[i] = l;
    }
    return n ? l + 1 : 0;
}

/* Order and layout of a run (three arrays of candidate_count in one
 * allocation); NULL when out of memory. */
static size_t *dg_plan(const svg_run *run, size_t *lines) {
    size_t n = run->candidate_count ? run->candidate_count : 1;
    size_t *plan = malloc(3 * n * sizeof *plan);
    if (plan == NULL)
        return NULL;
    dg_order(run, plan);
    *lines = dg_layout(run, plan, plan + n, plan + 2 * n);
    return plan;
}

static double dg_run_height(const svg_run *run) {
    size_t lines = 0;
    size_t *plan = dg_plan(run, &lines);
    free(plan);
    return run->candidate_count
               ? DG_HEADER + (double)lines * dg_cell_h(run) + 8.0
               : DG_HEADER + 10.0;
}

/* One run: header, then the cells line by line; returns the height used. */
static double dg_run(page_text *t, const svg_analysis *a, size_t index,
                     double y0) {
    const svg_run *run = &a->runs[index];
    char head[300], s1[48], s2[48], s3[48], s4[48];
    snprintf(head, sizeof head,
             "Run %zu: n = %u atoms, mean reading %s %s \xe2\x80\x94 %zu "
             "diagram(s) in the window of \xc2\xb1%s %s, %zu shown",
             index + 1, run->atoms, page_fmt_sig(run->mean_energy, 5, s1),
             a->cal.unit, run->window_count,
             page_fmt_sig(run->window_sd, 3, s2), a->cal.unit,
             run->candidate_count);
    svg_text(t, DG_LEFT, y0 + 17.0, "start", "run-title", head);
    if (run->candidate_count == 0)
        return DG_HEADER + 10.0;
    size_t lines = 0, n = run->candidate_count;
    size_t *plan = dg_plan(run, &lines);
    if (plan == NULL) {
        t->failed = 1;
        return DG_HEADER;
    }
    const size_t *order = plan, *col = plan + n, *line = plan + 2 * n;
    double box = dg_box(run), cell_h = dg_cell_h(run);
    for (size_t i = 0; i < n; i++) {
        double x = DG_LEFT + (double)col[i] * DG_CELL_W;
        double y = y0 + DG_HEADER + (double)line[i] * cell_h;
        dg_cell(t, a, run, &run->candidates[order[i]], x, y, box);
    }
    /* one frame per line segment of each degenerate group */
    for (size_t i = 0; i < n;) {
        unsigned g = run->candidates[order[i]].group;
        size_t j = i + 1;
        while (g != 0 && j < n && line[j] == line[i] &&
               run->candidates[order[j]].group == g)
            j++;
        if (g != 0) {
            double x = DG_LEFT + (double)col[i] * DG_CELL_W + 2.0;
            double y = y0 + DG_HEADER + (double)line[i] * cell_h;
            double w = (double)(j - i) * DG_CELL_W - 4.0;
            page_text_printf(t,
                             "<rect class=\"degenerate-group\" x=\"%s\" "
                             "y=\"%s\" width=\"%s\" height=\"%s\" "
                             "fill=\"none\" stroke=\"" SVG_REDDISH_PURPLE
                             "\" stroke-width=\"2.5\" "
                             "stroke-dasharray=\"7 4\"/>\n",
                             page_fmt_coord(x, s1), page_fmt_coord(y, s2),
                             page_fmt_coord(w, s3),
                             page_fmt_coord(cell_h - 4.0, s4));
            svg_text(t, x + 6.0, y + cell_h - 10.0, "start", "group-note",
                     j - i > 1 ? "same energy: cannot be told apart"
                               : "same energy");
        }
        i = j;
    }
    free(plan);
    return DG_HEADER + (double)lines * cell_h + 8.0;
}

void svg_diagrams_write(page_text *t, const svg_analysis *a, int standalone) {
    size_t runs = a->run_count < SVG_DIAGRAMS_RUNS_MAX ? a->run_count
                                                       : SVG_DIAGRAMS_RUNS_MAX;
    double height = DG_LEGEND + 10.0;
    unsigned groups = 0;
    for (size_t r = 0; r < runs; r++) {
        height += dg_run_height(&a->runs[r]);
        groups += a->runs[r].group_count;
    }
    if (a->run_count > runs)
        height += 20.0;
    char desc[600];
    snprintf(desc, sizeof desc,
             "The candidate Young diagrams of %zu run%s (rows left-aligned, "
             "longest on top), each with its probability at the estimate as "
             "a bar (a full bar is probability 1), its energy and z. %u "
             "group%s of diagrams share%s an energy and %s framed together: "
             "no energy reading can tell them apart.",
             runs, runs == 1 ? "" : "s", groups, groups == 1 ? "" : "s",
             groups == 1 ? "s" : "", groups == 1 ? "is" : "are");
    svg_begin(t, SVG_FIGURE_WIDTH, height, "fig-diagrams",
              "Candidate Young diagrams", a->label, desc, standalone);
    page_text_add(t, "<rect x=\"20\" y=\"9\" width=\"22\" height=\"14\" "
                     "fill=\"none\" stroke=\"" SVG_REDDISH_PURPLE
                     "\" stroke-width=\"2.5\" stroke-dasharray=\"7 4\"/>\n");
    svg_text(t, 50.0, 20.0, "start", "legend",
             "degenerate group: equal content sums, so equal energies");
    svg_legend_item(t, 20.0, 38.0, 'b', SVG_BLUE,
                    "probability at the estimate (the frame is probability 1)");
    double y = DG_LEGEND;
    for (size_t r = 0; r < runs; r++)
        y += dg_run(t, a, r, y);
    if (a->run_count > runs) {
        char note[120];
        snprintf(note, sizeof note, "%zu more run%s not drawn (at most %d)",
                 a->run_count - runs, a->run_count - runs == 1 ? "" : "s",
                 SVG_DIAGRAMS_RUNS_MAX);
        svg_text(t, DG_LEFT, y + 12.0, "start", "panel-note", note);
    }
    svg_end(t);
}
