/*
 * svg_readings.c — figure 1, the energy readings against the model: one
 * panel per atom number.  Per-shot readings are binned into a histogram;
 * summary runs are drawn as their mean ± standard error (and ± one
 * standard deviation of the readings, thinner).  Over them, the model's law
 * at the estimated spectrum: a stick at each energy level E(λ) =
 * E0 + V·C(n,2) + J·c(λ) with the probability of its diagrams, and the
 * same law broadened by the detection noise, Σ P_k N(E; E_k, σ²).
 *
 * One vertical unit serves data and model: probability per level spacing
 * |J| (a density times |J|).  A stick of probability P has height P; a
 * histogram bar holding a fraction f of the shots in a bin k spacings wide
 * has height f / k; the broadened law is its density times |J|.  Bins are
 * centred on the level lattice E0 + V·C(n,2) + J·m, so without noise every
 * reading falls in the middle of the bin of its own stick.  Owns nothing.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "svg_figures.h"
#include "svg_plot.h"

#define RD_LEFT 78.0
#define RD_RIGHT 24.0
#define RD_LEGEND_ROW 16.0 /* one row of the legend at the top */
#define RD_PANEL 250.0     /* height of one panel */
#define RD_PLOT 170.0      /* height of its plot area */

typedef struct {
    double lo, hi;  /* energy range drawn */
    double spacing; /* |J| */
    double width;   /* bin width = k·spacing */
    unsigned k;     /* spacings per bin (odd) */
    double ref;     /* E at content 0: the lattice origin */
    long m0;        /* index of the first bin */
    size_t nbins;
    double *height; /* per bin, probability per spacing */
    size_t shots;   /* per-shot readings pooled */
    size_t summary; /* summary runs */
    double top;     /* largest height of anything drawn */
} rd_panel;

/* Standard normal density; sqrt(2π) to 17 digits. */
static double rd_phi(double z) {
    return exp(-0.5 * z * z) / 2.5066282746310002;
}

/* The energy range of one panel: the law's bulk (the 0.05 %..99.95 % span
 * of a full law, every mark of a partial one) widened by 3σ, joined with
 * the readings. */
static int rd_range(const svg_analysis *a, const svg_law *law, rd_panel *p) {
    double lo = INFINITY, hi = -INFINITY, sigma = a->cal.noise_sd;
    if (law->kind == SVG_LAW_FULL) {
        double cum = 0.0;
        for (size_t k = 0; k < law->count; k++) {
            double before = cum;
            cum += law->probability[k];
            if (cum >= 5e-4 && before <= 1.0 - 5e-4) {
                lo = fmin(lo, law->energy[k]);
                hi = fmax(hi, law->energy[k]);
            }
        }
        lo -= 3.0 * sigma;
        hi += 3.0 * sigma;
    } else
        for (size_t k = 0; k < law->count; k++) {
            lo = fmin(lo, law->energy[k] - fmax(3.0 * sigma, p->spacing));
            hi = fmax(hi, law->energy[k] + fmax(3.0 * sigma, p->spacing));
        }
    for (size_t r = 0; r < a->run_count; r++) {
        const svg_run *run = &a->runs[r];
        if (run->atoms != law->atoms)
            continue;
        for (size_t s = 0; s < run->energy_count; s++)
            if (isfinite(run->energies[s])) {
                lo = fmin(lo, run->energies[s]);
                hi = fmax(hi, run->energies[s]);
            }
        if (run->energy_count == 0 && isfinite(run->mean_energy)) {
            double sd = sqrt(fmax(run->energy_variance, 0.0));
            double se = run->shots ? sd / sqrt((double)run->shots) : 0.0;
            double half = fmax(2.0 * sd, 3.0 * se);
            if (!isfinite(half))
                half = p->spacing;
            lo = fmin(lo, run->mean_energy - half);
            hi = fmax(hi, run->mean_energy + half);
        }
    }
    if (!isfinite(lo) || !isfinite(hi))
        return 0;
    double pad = 0.04 * (hi - lo) + 0.5 * p->spacing;
    p->lo = lo - pad;
    p->hi = hi + pad;
    return 1;
}

/* Bins and histogram heights; 0 when out of memory or the range is
 * absurdly wide. */
static int rd_histogram(const svg_analysis *a, const svg_law *law,
                        rd_panel *p) {
    double span = (p->hi - p->lo) / p->spacing;
    if (!(span < 1e9))
        return 0; /* wider than a billion levels: nothing sensible to bin */
    unsigned k = 1;
    if (span > SVG_READINGS_BINS_MAX)
        k = (unsigned)ceil(span / SVG_READINGS_BINS_MAX);
    if (k % 2 == 0)
        k++; /* bin edges between lattice points, never on one */
    p->k = k;
    p->width = k * p->spacing;
    p->ref = ss_calibration_energy(&a->cal, law->atoms, 0);
    /* readings nowhere near the lattice (a wild calibration): bin from the
     * left edge instead, so that the bin indices stay small */
    if (!isfinite(p->ref) || fabs(p->lo - p->ref) / p->width > 1e9)
        p->ref = p->lo;
    p->m0 = (long)floor((p->lo - p->ref) / p->width + 0.5);
    long m1 = (long)floor((p->hi - p->ref) / p->width + 0.5);
    p->nbins = (size_t)(m1 - p->m0 + 1);
    p->height = calloc(p->nbins, sizeof *p->height);
    if (p->height == NULL)
        return 0;
    for (size_t r = 0; r < a->run_count; r++) {
        const svg_run *run = &a->runs[r];
        if (run->atoms != law->atoms)
            continue;
        if (run->energy_count == 0)
            p->summary++;
        for (size_t s = 0; s < run->energy_count; s++) {
            double e = run->energies[s];
            long m = (long)floor((e - p->ref) / p->width + 0.5);
            if (!isfinite(e) || m < p->m0 || m - p->m0 >= (long)p->nbins)
                continue;
            p->height[m - p->m0] += 1.0;
            p->shots++;
        }
    }
    for (size_t b = 0; b < p->nbins; b++) {
        if (p->shots)
            p->height[b] /= (double)p->shots * k;
        p->top = fmax(p->top, p->height[b]);
    }
    return 1;
}

/* The broadened law at x: density times the spacing. */
static double rd_broadened(const svg_law *law, double sigma, double spacing,
                           double x) {
    /* the energies are sorted: start at the first within 8σ */
    size_t lo = 0, hi = law->count;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (law->energy[mid] < x - 8.0 * sigma)
            lo = mid + 1;
        else
            hi = mid;
    }
    double f = 0.0;
    for (size_t k = lo; k < law->count && law->energy[k] <= x + 8.0 * sigma;
         k++)
        f += law->probability[k] * rd_phi((x - law->energy[k]) / sigma);
    return f * spacing / sigma;
}

static int rd_curve_drawn(const svg_analysis *a, const svg_law *law,
                          double spacing) {
    return law->kind == SVG_LAW_FULL && a->cal.noise_sd >= 0.5 * spacing &&
           law->count > 0;
}

static void rd_panel_draw(page_text *t, const svg_analysis *a,
                          const svg_law *law, double y0) {
    char title[200], unit_label[96], ylabel[96], s1[48], s2[48], s3[48], s4[48];
    const char *unit = a->cal.unit[0] ? a->cal.unit : "units of J";
    rd_panel p;
    memset(&p, 0, sizeof p);
    p.spacing = fabs(a->cal.exchange);
    if (!(p.spacing > 0.0) || !isfinite(p.spacing))
        p.spacing = 1.0;
    double sigma = a->cal.noise_sd;
    size_t shots_total = 0;
    for (size_t r = 0; r < a->run_count; r++)
        if (a->runs[r].atoms == law->atoms)
            shots_total += a->runs[r].shots;
    int ok = rd_range(a, law, &p) && rd_histogram(a, law, &p);
    snprintf(title, sizeof title, "n = %u atoms \xe2\x80\x94 %zu shots%s",
             law->atoms, shots_total,
             p.shots && p.summary ? " (per-shot and summary runs)"
             : p.shots            ? " (per-shot readings)"
                                  : " (summary runs)");
    svg_text(t, RD_LEFT, y0 + 16.0, "start", "panel-title", title);
    if (law->note[0])
        svg_text(t, RD_LEFT, y0 + 31.0, "start", "panel-note", law->note);
    if (!ok) {
        svg_text(t, RD_LEFT, y0 + 60.0, "start", "panel-note",
                 "nothing to draw: no finite reading or level");
        free(p.height);
        return;
    }
    int heights = law->kind != SVG_LAW_MARKS;
    for (size_t k = 0; heights && k < law->count; k++)
        p.top = fmax(p.top, law->probability[k]);
    int curve = rd_curve_drawn(a, law, p.spacing);
    enum { CURVE_POINTS_MAX = 1200 };
    size_t npts = 0;
    double cx[CURVE_POINTS_MAX], cy[CURVE_POINTS_MAX];
    if (curve) {
        double want = ceil((p.hi - p.lo) / (0.25 * sigma));
        npts = want < 200.0              ? 200
               : want > CURVE_POINTS_MAX ? CURVE_POINTS_MAX
                                         : (size_t)want;
        for (size_t j = 0; j < npts; j++) {
            cx[j] = p.lo + (p.hi - p.lo) * (double)j / (double)(npts - 1);
            cy[j] = rd_broadened(law, sigma, p.spacing, cx[j]);
            p.top = fmax(p.top, cy[j]);
        }
    }
    double top = p.top > 0.0 ? svg_nice_top(1.08 * p.top, 5) : 1.0;
    double plot_top = y0 + 40.0, plot_bottom = plot_top + RD_PLOT;
    svg_scale xs = {p.lo, p.hi, RD_LEFT, SVG_FIGURE_WIDTH - RD_RIGHT};
    svg_scale ys = {0.0, top, plot_bottom, plot_top};
    double ticks[16], step;
    size_t nt = svg_ticks(0.0, top, 5, ticks, 16, &step);
    snprintf(ylabel, sizeof ylabel, "probability per |J| = %s %s",
             page_fmt_sig(p.spacing, 4, s1), unit);
    svg_axis_y(t, &ys, RD_LEFT, SVG_FIGURE_WIDTH - RD_RIGHT, ticks, nt, step,
               ylabel);

    /* histogram */
    for (size_t b = 0; b < p.nbins; b++) {
        if (p.height[b] <= 0.0)
            continue;
        double centre = p.ref + (double)(p.m0 + (long)b) * p.width;
        double x0 = fmax(svg_map(&xs, centre - 0.5 * p.width), xs.r0);
        double x1 = fmin(svg_map(&xs, centre + 0.5 * p.width), xs.r1);
        double yt = svg_map(&ys, p.height[b]);
        page_text_printf(t,
                         "<rect class=\"hist-bar\" x=\"%s\" y=\"%s\" "
                         "width=\"%s\" height=\"%s\" fill=\"" SVG_SKY_BLUE
                         "\" stroke=\"#FFFFFF\" stroke-width=\"0.5\"/>\n",
                         page_fmt_coord(x0, s1), page_fmt_coord(yt, s2),
                         page_fmt_coord(x1 - x0, s3),
                         page_fmt_coord(plot_bottom - yt, s4));
    }
    /* the broadened law */
    if (curve) {
        page_text_add(t, "<polyline class=\"model-curve\" fill=\"none\" "
                         "stroke=\"" SVG_VERMILLION "\" stroke-width=\"1.5\" "
                         "points=\"");
        for (size_t j = 0; j < npts; j++)
            page_text_printf(t, "%s%s,%s", j ? " " : "",
                             page_fmt_coord(svg_map(&xs, cx[j]), s1),
                             page_fmt_coord(svg_map(&ys, cy[j]), s2));
        page_text_add(t, "\"/>\n");
    }
    /* sticks: one per energy level (marks without heights span the plot) */
    for (size_t k = 0; k < law->count; k++) {
        double e = law->energy[k];
        if (e < p.lo || e > p.hi)
            continue;
        double h = heights ? law->probability[k] : top;
        if (heights && h < 1e-3 * top)
            continue; /* under a third of a pixel */
        page_text_printf(t,
                         "<line class=\"stick\" x1=\"%s\" x2=\"%s\" "
                         "y1=\"%s\" y2=\"%s\" stroke=\"" SVG_BLUE
                         "\" stroke-width=\"2\"%s/>\n",
                         page_fmt_coord(svg_map(&xs, e), s1), s1,
                         page_fmt_coord(plot_bottom, s2),
                         page_fmt_coord(svg_map(&ys, h), s3),
                         heights ? "" : " stroke-dasharray=\"2 3\"");
    }
    /* the model mean */
    if (isfinite(law->mean_energy) && law->mean_energy >= p.lo &&
        law->mean_energy <= p.hi)
        page_text_printf(
            t,
            "<line class=\"model-mean\" x1=\"%s\" x2=\"%s\" "
            "y1=\"%s\" y2=\"%s\" stroke=\"" SVG_ORANGE "\" stroke-width=\"2\" "
            "stroke-dasharray=\"6 4\"/>\n",
            page_fmt_coord(svg_map(&xs, law->mean_energy), s1), s1,
            page_fmt_coord(plot_bottom, s2), page_fmt_coord(plot_top, s3));
    /* summary runs: mean ± SE (thick), ± SD (thin), stacked from the top */
    size_t shown = 0;
    for (size_t r = 0; r < a->run_count; r++) {
        const svg_run *run = &a->runs[r];
        if (run->atoms != law->atoms || run->energy_count > 0 ||
            !isfinite(run->mean_energy))
            continue;
        double sd = sqrt(fmax(run->energy_variance, 0.0));
        double se = run->shots ? sd / sqrt((double)run->shots) : nan("");
        double y = plot_top + 10.0 + 14.0 * (double)(shown++ % 10);
        page_fmt_coord(y, s2);
        if (isfinite(sd))
            page_text_printf(
                t,
                "<line class=\"summary-sd\" x1=\"%s\" x2=\"%s\" y1=\"%s\" "
                "y2=\"%s\" stroke=\"" SVG_BLACK "\" stroke-width=\"1\"/>\n",
                page_fmt_coord(fmax(svg_map(&xs, run->mean_energy - sd), xs.r0),
                               s1),
                page_fmt_coord(fmin(svg_map(&xs, run->mean_energy + sd), xs.r1),
                               s3),
                s2, s2);
        if (isfinite(se))
            page_text_printf(
                t,
                "<line class=\"summary-se\" x1=\"%s\" x2=\"%s\" y1=\"%s\" "
                "y2=\"%s\" stroke=\"" SVG_BLACK "\" stroke-width=\"4\"/>\n",
                page_fmt_coord(svg_map(&xs, run->mean_energy - se), s1),
                page_fmt_coord(svg_map(&xs, run->mean_energy + se), s3), s2,
                s2);
        svg_marker(t, svg_map(&xs, run->mean_energy), y, 'o', 8.0, SVG_BLACK,
                   "summary-mean");
    }
    double xt[16], xstep;
    size_t nx = svg_ticks(p.lo, p.hi, 8, xt, 16, &xstep);
    snprintf(unit_label, sizeof unit_label, "energy reading (%s)", unit);
    svg_axis_x(t, &xs, plot_bottom, xt, nx, xstep, unit_label);
    free(p.height);
}

void svg_readings_write(page_text *t, const svg_analysis *a,
                        const svg_law *laws, size_t count, size_t total,
                        int standalone) {
    char desc[900], words[160], s1[48], s2[48];
    const char *unit = a->cal.unit[0] ? a->cal.unit : "units of J";
    size_t shots = 0, per_shot = 0;
    for (size_t r = 0; r < a->run_count; r++) {
        shots += a->runs[r].shots;
        per_shot += a->runs[r].energy_count;
    }
    char kinds[80];
    if (per_shot == 0)
        snprintf(kinds, sizeof kinds, "summaries: mean and spread");
    else if (per_shot == shots)
        snprintf(kinds, sizeof kinds, "per-shot readings, binned");
    else
        snprintf(kinds, sizeof kinds, "%zu of them per-shot readings, binned",
                 per_shot);
    int used = snprintf(
        desc, sizeof desc,
        "Energy readings of %zu shots in %zu run%s (%s) against the model's "
        "law at the estimated spectrum, one panel per atom number: a stick "
        "at each energy level with its probability%s. Vertical unit: "
        "probability per level spacing |J| = %s %s. Detection noise sd %s "
        "%s.",
        shots, a->run_count, a->run_count == 1 ? "" : "s", kinds,
        a->has_spectrum ? ", and the same law broadened by the detection noise "
                          "where the noise is at least half a level spacing"
                        : " (no spectrum estimate: candidate energies only)",
        page_fmt_sig(fabs(a->cal.exchange), 4, s1), unit,
        page_fmt_sig(a->cal.noise_sd, 4, s2), unit);
    if (total > count && used > 0 && (size_t)used < sizeof desc)
        snprintf(desc + used, sizeof desc - (size_t)used,
                 " Only the first %zu of %zu atom numbers are drawn.", count,
                 total);
    /* legend: one column, one row for each kind of mark the panels use */
    int any_hist = 0, any_summary = 0, any_curve = 0, any_mean = 0;
    for (size_t r = 0; r < a->run_count; r++) {
        any_hist |= a->runs[r].energy_count > 0;
        any_summary |= a->runs[r].energy_count == 0;
    }
    for (size_t k = 0; k < count; k++) {
        any_curve |= rd_curve_drawn(a, &laws[k], fabs(a->cal.exchange));
        any_mean |= isfinite(laws[k].mean_energy);
    }
    int rows = 1 + any_hist + any_summary + any_curve + any_mean;
    double legend = RD_LEGEND_ROW * rows + 12.0;
    double height = legend + RD_PANEL * (double)(count ? count : 1) +
                    (total > count ? 20.0 : 0.0);
    svg_begin(t, SVG_FIGURE_WIDTH, height, "fig-readings",
              "Energy readings against the model", a->label, desc, standalone);
    double ly = 14.0;
    if (any_hist) {
        svg_legend_item(t, RD_LEFT, ly, 'b', SVG_SKY_BLUE,
                        "measured readings (histogram of per-shot energies)");
        ly += RD_LEGEND_ROW;
    }
    if (any_summary) {
        svg_legend_item(t, RD_LEFT, ly, 'o', SVG_BLACK,
                        "summary run: mean \xc2\xb1 standard error (thick "
                        "bar), \xc2\xb1 one sd of the readings (thin)");
        ly += RD_LEGEND_ROW;
    }
    svg_legend_item(t, RD_LEFT, ly, 'l', SVG_BLUE,
                    a->has_spectrum
                        ? "model at the estimate: probability of each energy "
                          "level"
                        : "energies of the candidate diagrams (no estimate)");
    ly += RD_LEGEND_ROW;
    if (any_curve) {
        snprintf(words, sizeof words,
                 "model broadened by the detection noise (sd %s %s)",
                 page_fmt_sig(a->cal.noise_sd, 3, s1), unit);
        svg_legend_item(t, RD_LEFT, ly, 'l', SVG_VERMILLION, words);
        ly += RD_LEGEND_ROW;
    }
    if (any_mean)
        svg_legend_item(t, RD_LEFT, ly, 'd', SVG_ORANGE, "model mean energy");
    if (count == 0)
        svg_text(t, RD_LEFT, legend + 30.0, "start", "panel-note",
                 "no run to draw");
    for (size_t k = 0; k < count; k++)
        rd_panel_draw(t, a, &laws[k], legend + RD_PANEL * (double)k);
    if (total > count) {
        snprintf(words, sizeof words,
                 "%zu more atom number(s) not drawn (at most %d panels)",
                 total - count, SVG_READINGS_PANELS_MAX);
        svg_text(t, RD_LEFT, height - 8.0, "start", "panel-note", words);
    }
    svg_end(t);
}
