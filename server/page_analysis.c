/*
 * page_analysis.c — the page of one analysis (GET /analyses/{id}): who and
 * when, the inputs (levels, calibration by name and version or inline, the
 * runs), the spectrum as a table of statistical estimates with their
 * intervals, the flags in plain sentences, the figures inline, and for a
 * reprocessed analysis its revisions.  Renders from plain values (page.h);
 * owns nothing beyond the text it returns.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "page.h"

/* Decimals of the numbers in the spectrum table (stated on the page). */
#define PA_DECIMALS 4

static void pa_row(page_text *t, const char *key, const char *value) {
    page_text_add(t, "<tr><th scope=\"row\">");
    page_text_escaped(t, key);
    page_text_add(t, "</th><td>");
    page_text_escaped(t, value);
    page_text_add(t, "</td></tr>\n");
}

/* "box-trap-A, version 2 (valid from ...)" and the like. */
static void pa_calibration_name(const svg_analysis *a, char *out, size_t cap) {
    if (strcmp(a->cal_source, "ref") == 0)
        snprintf(out, cap, "%s, version %u%s%s%s", a->cal_name, a->cal_version,
                 a->cal_valid_from[0] ? " (valid from " : "", a->cal_valid_from,
                 a->cal_valid_from[0] ? ")" : "");
    else if (strcmp(a->cal_source, "request") == 0)
        snprintf(out, cap, "inline (numbers given with the request)");
    else if (strcmp(a->cal_source, "default") == 0)
        snprintf(out, cap,
                 "default: none given, energies in units of the "
                 "exchange coupling J");
    else if (a->cal_name[0])
        snprintf(out, cap, "%s (version not recorded)", a->cal_name);
    else
        snprintf(out, cap, "not recorded with this result");
}

static void pa_inputs(page_text *t, const page_analysis_view *v) {
    const svg_analysis *a = v->a;
    char buf[400], s1[48], s2[48], s3[48], s4[48], s5[48];
    const char *u = a->cal.unit;
    page_text_add(t, "<section id=\"inputs\"><h2>Inputs</h2>\n"
                     "<table class=\"kv\">\n");
    snprintf(buf, sizeof buf, "%u", a->levels);
    pa_row(t, "Spin levels d", buf);
    pa_calibration_name(a, buf, sizeof buf);
    pa_row(t, "Calibration", buf);
    snprintf(buf, sizeof buf,
             "offset E\xe2\x82\x80 %s %s, pair shift V %s %s, exchange J %s "
             "%s, detection noise \xcf\x83 %s %s",
             page_fmt_sig(a->cal.offset, 6, s1), u,
             page_fmt_sig(a->cal.pair_shift, 6, s2), u,
             page_fmt_sig(a->cal.exchange, 6, s3), u,
             page_fmt_sig(a->cal.noise_sd, 6, s4), u);
    if (a->cal.coupling_spread > 0.0) {
        size_t used = strlen(buf);
        snprintf(buf + used, sizeof buf - used, ", coupling spread %s",
                 page_fmt_sig(a->cal.coupling_spread, 4, s5));
    }
    pa_row(t, "Calibration values", buf);
    pa_row(t, "Shots taken", a->measured_at[0] ? a->measured_at : "not given");
    snprintf(buf, sizeof buf, "%s%s%s", a->method[0] ? a->method : "n/a",
             a->estimate[0] ? ", point estimate: " : "", a->estimate);
    pa_row(t, "Method", buf);
    snprintf(buf, sizeof buf, "%s %%",
             page_fmt_sig(100.0 * a->confidence, 4, s1));
    pa_row(t, "Confidence level", buf);
    page_text_add(t, "</table>\n<table id=\"runs-table\">\n<caption>Runs "
                     "(energies in ");
    page_text_escaped(t, u[0] ? u : "units of J");
    page_text_add(t, ")</caption>\n<thead><tr><th>Run</th>"
                     "<th class=\"num\">Atoms n</th>"
                     "<th class=\"num\">Shots</th><th>Readings</th>"
                     "<th class=\"num\">Mean energy</th>"
                     "<th class=\"num\">Energy variance</th></tr></thead>\n"
                     "<tbody>\n");
    for (size_t r = 0; r < a->run_count; r++) {
        const svg_run *run = &a->runs[r];
        page_text_printf(
            t,
            "<tr><td>%zu</td><td class=\"num\">%u</td>"
            "<td class=\"num\">%zu</td><td>%s</td><td class=\"num\">%s</td>"
            "<td class=\"num\">%s</td></tr>\n",
            r + 1, run->atoms, run->shots,
            run->energy_count ? "per-shot" : "summary",
            page_fmt_sig(run->mean_energy, 6, s1),
            page_fmt_sig(run->energy_variance, 6, s2));
    }
    page_text_add(t, "</tbody></table></section>\n");
}

static void pa_spectrum(page_text *t, const svg_analysis *a) {
    char s1[48], s2[48], sub[48];
    page_text_add(t, "<section id=\"spectrum\"><h2>Spectrum</h2>\n");
    if (!a->has_spectrum) {
        page_text_add(t, "<p class=\"note\">This analysis has no spectrum "
                         "estimate: it lists candidate diagrams only.</p>\n");
    } else {
        page_text_printf(
            t,
            "<p class=\"note\" id=\"estimate-note\">The spectrum is a "
            "<strong>statistical estimate</strong> from a finite number of "
            "shots, not an exact value: each eigenvalue has a standard error "
            "and an interval at the <strong>%s %% confidence level</strong> "
            "(",
            page_fmt_sig(100.0 * a->confidence, 4, s1));
        page_text_escaped(t, a->interval[0] ? a->interval : "kind not given");
        page_text_printf(
            t,
            "). Numbers are rounded to %d decimals; \xe2\x80\x9cn/a"
            "\xe2\x80\x9d marks a quantity the data do not "
            "determine.</p>\n",
            PA_DECIMALS);
    }
    if (!a->has_spectrum && !a->has_naive) {
        page_text_add(t, "</section>\n");
        return;
    }
    page_text_add(t, "<table id=\"spectrum-table\">\n<caption>Eigenvalues of "
                     "the single-atom state, largest first</caption>\n"
                     "<thead><tr><th>Eigenvalue</th>");
    if (a->has_spectrum)
        page_text_add(t, "<th class=\"num\">Estimate</th>"
                         "<th class=\"num\">Standard error</th>"
                         "<th class=\"num\">Lower</th>"
                         "<th class=\"num\">Upper</th>");
    if (a->has_feasible)
        page_text_add(t, "<th class=\"num\">Feasible from</th>"
                         "<th class=\"num\">Feasible to</th>");
    if (a->has_naive)
        page_text_add(t, "<th class=\"num\">Naive \xce\xbb/n</th>");
    page_text_add(t, "</tr></thead>\n<tbody>\n");
    for (unsigned i = 0; i < a->levels; i++) {
        page_text_printf(t, "<tr><th scope=\"row\">p%s</th>",
                         svg_subscript(i + 1, sub));
        const double *cols[7];
        int n = 0;
        if (a->has_spectrum) {
            cols[n++] = &a->values[i];
            cols[n++] = &a->stderr_[i];
            cols[n++] = &a->lower[i];
            cols[n++] = &a->upper[i];
        }
        if (a->has_feasible) {
            cols[n++] = &a->feasible_lower[i];
            cols[n++] = &a->feasible_upper[i];
        }
        if (a->has_naive)
            cols[n++] = &a->naive[i];
        for (int c = 0; c < n; c++)
            page_text_printf(t, "<td class=\"num\">%s</td>",
                             page_fmt_fixed(*cols[c], PA_DECIMALS, s1));
        page_text_add(t, "</tr>\n");
    }
    page_text_add(t, "</tbody></table>\n");
    if (isfinite(a->purity))
        page_text_printf(t,
                         "<p id=\"purity\">Purity P\xe2\x82\x82 = tr "
                         "\xcf\x81\xc2\xb2 = %s \xc2\xb1 %s (standard "
                         "error).</p>\n",
                         page_fmt_fixed(a->purity, PA_DECIMALS, s1),
                         page_fmt_fixed(a->purity_stderr, PA_DECIMALS, s2));
    page_text_add(t, "</section>\n");
}

static void pa_flags(page_text *t, const svg_analysis *a) {
    page_text_add(t, "<section id=\"flags\"><h2>Flags</h2>\n");
    if (a->flag_count == 0)
        page_text_add(t, "<p>No flags: the analysis found nothing that the "
                         "readings cannot decide.</p>\n");
    for (size_t k = 0; k < a->flag_count; k++) {
        const svg_flag *f = &a->flags[k];
        const page_flag_text *txt = page_flag_text_find(f->code);
        page_text_add(t, "<div class=\"flag\" data-code=\"");
        page_text_escaped(t, f->code);
        page_text_add(t, "\"><h3>");
        page_text_escaped(t, txt ? txt->title : "Flag");
        page_text_add(t, " <span class=\"codes\">(");
        page_text_escaped(t, f->code);
        page_text_add(t, ")</span></h3>\n");
        if (txt != NULL) {
            page_text_add(t, "<p>");
            page_text_escaped(t, txt->meaning);
            page_text_add(t, "</p>\n<p><strong>What to do:</strong> ");
            page_text_escaped(t, txt->action);
            page_text_add(t, "</p>\n");
        }
        page_text_add(t, "<p class=\"detail\">");
        if (f->run >= 0 && (size_t)f->run < a->run_count)
            page_text_printf(t, "Run %d (%u atoms): ", f->run + 1,
                             a->runs[f->run].atoms);
        page_text_escaped(t, f->message);
        page_text_add(t, "</p></div>\n");
    }
    page_text_add(t, "</section>\n");
}

static void pa_figure_link(page_text *t, const page_analysis_view *v,
                           const char *name) {
    page_text_add(t, " <a href=\"../v1/analyses/");
    page_text_urlencoded(t, v->id);
    page_text_printf(t, "/figures/%s.svg", name);
    if (v->revision != v->revision_count)
        page_text_printf(t, "?revision=%u", v->revision);
    page_text_add(t, "\">SVG file</a></figcaption></figure>\n");
}

static void pa_figures(page_text *t, const page_analysis_view *v) {
    const svg_analysis *a = v->a;
    page_text_add(t, "<section id=\"figures\"><h2>Figures</h2>\n"
                     "<figure id=\"figure-readings\">\n");
    svg_readings_write(t, a, v->laws, v->law_count, v->law_total, 0);
    page_text_add(t, "<figcaption><strong>Figure 1.</strong> Energy readings "
                     "against the model at the estimate, one panel per atom "
                     "number: the measured readings (histogram, or mean "
                     "\xc2\xb1 standard error for summary runs), a stick at "
                     "each energy level with its probability, and that law "
                     "broadened by the detection noise.");
    pa_figure_link(t, v, "readings");
    page_text_add(t, "<figure id=\"figure-spectrum\">\n");
    svg_spectrum_write(t, a, 0);
    page_text_add(t, "<figcaption><strong>Figure 2.</strong> The spectrum: "
                     "each eigenvalue with its interval");
    if (a->has_feasible)
        page_text_add(t, ", the feasible range (underdetermined)");
    page_text_add(t, " and the naive \xce\xbb/n beside it.");
    pa_figure_link(t, v, "spectrum");
    page_text_add(t, "<figure id=\"figure-diagrams\">\n");
    svg_diagrams_write(t, a, 0);
    page_text_add(t, "<figcaption><strong>Figure 3.</strong> Candidate Young "
                     "diagrams of each run with their probabilities; "
                     "diagrams with the same energy are framed together.");
    pa_figure_link(t, v, "diagrams");
    page_text_add(t, "</section>\n");
}

static void pa_revisions(page_text *t, const page_analysis_view *v) {
    char s1[48];
    page_text_add(t, "<section id=\"revisions\"><h2>Revisions</h2>\n");
    page_text_printf(t,
                     "<p>This analysis was reprocessed: it has %zu "
                     "revisions. Each keeps the result computed with the "
                     "calibration version named below; nothing is "
                     "overwritten.</p>\n<table id=\"revisions-table\">\n"
                     "<thead><tr><th>Revision</th><th>Computed (UTC)</th>"
                     "<th>Calibration</th><th>Spectrum</th><th>Flags</th>"
                     "</tr></thead>\n<tbody>\n",
                     v->rev_count);
    for (size_t k = 0; k < v->rev_count; k++) {
        const svg_revision *r = &v->revs[k];
        page_text_printf(t,
                         "<tr><td><a href=\"?revision=%u\">%u</a>%s</td><td>",
                         r->revision, r->revision,
                         r->revision == v->revision ? " (shown)" : "");
        page_text_escaped(t, r->created_at);
        page_text_add(t, "</td><td>");
        page_text_escaped(t, r->calibration);
        page_text_add(t, "</td><td>");
        for (unsigned i = 0; r->has_spectrum && i < r->levels; i++)
            page_text_printf(t, "%s%s", i ? ", " : "",
                             page_fmt_fixed(r->values[i], PA_DECIMALS, s1));
        if (!r->has_spectrum)
            page_text_add(t, "none");
        page_text_add(t, "</td><td>");
        page_text_escaped(t, r->flags[0] ? r->flags : "none");
        page_text_add(t, "</td></tr>\n");
    }
    page_text_add(t, "</tbody></table>\n<figure id=\"figure-revisions\">\n");
    svg_revisions_write(t, v->revs, v->rev_count, v->a->label, 0);
    page_text_add(t, "<figcaption><strong>Figure 4.</strong> The spectrum of "
                     "each revision side by side, with the calibration "
                     "version it was computed with.");
    pa_figure_link(t, v, "revisions");
    page_text_add(t, "</section>\n");
}

char *page_analysis_render(const page_analysis_view *v, size_t *len) {
    page_text t;
    page_text_init(&t, 64 * 1024);
    const char *label = v->label && v->label[0] ? v->label : v->id;
    char title[200];
    snprintf(title, sizeof title, "Analysis %s", label);
    page_html_begin(&t, title, "../", v->csp);
    page_text_add(&t, "<h1>");
    page_text_escaped(&t, label);
    page_text_add(&t, "</h1>\n<p class=\"meta\">Analysis <code>");
    page_text_escaped(&t, v->id);
    page_text_add(&t, "</code>, stored ");
    page_text_escaped(&t, v->created_at);
    page_text_printf(&t, "; revision %u of %u", v->revision, v->revision_count);
    if (v->revised_at && v->revised_at[0]) {
        page_text_add(&t, " (computed ");
        page_text_escaped(&t, v->revised_at);
        page_text_add(&t, ")");
    }
    page_text_add(&t, "; swapspec ");
    page_text_escaped(&t, v->software_version);
    page_text_add(&t, ". <a href=\"../v1/analyses/");
    page_text_urlencoded(&t, v->id);
    page_text_add(&t, "\">JSON</a></p>\n");
    pa_inputs(&t, v);
    pa_spectrum(&t, v->a);
    pa_flags(&t, v->a);
    pa_figures(&t, v);
    if (v->rev_count > 1)
        pa_revisions(&t, v);
    page_html_end(&t);
    return page_text_finish(&t, len);
}
