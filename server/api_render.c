/*
 * api_render.c — renders an ss_analysis as JSON text: the spectrum with its
 * intervals, power sums, covariance, flags with their numbers, feasible
 * ranges, the naive reading, per-run candidates with their degenerate
 * groups, and the fit diagnostics.  Owns nothing beyond the text it
 * returns.
 */
#include "api_render.h"

#include <math.h>
#include <stdlib.h>

static void rnd_value_se(jt_writer *w, const char *key, double v, double se) {
    jt_key(w, key);
    jt_object_begin(w);
    jt_key(w, "value");
    jt_number(w, v);
    jt_key(w, "stderr");
    jt_number(w, se);
    jt_object_end(w);
}

/* A Young diagram as its non-zero row lengths. */
static void rnd_diagram(jt_writer *w, const uint32_t *rows, unsigned d) {
    jt_array_begin(w);
    for (unsigned i = 0; i < d && rows[i] != 0; i++)
        jt_integer(w, rows[i]);
    jt_array_end(w);
}

static void rnd_spectrum(jt_writer *w, const ss_analysis *a) {
    unsigned d = a->levels;
    jt_key(w, "spectrum");
    jt_object_begin(w);
    jt_key(w, "interval");
    jt_string(w, ss_interval_name(a->interval));
    jt_key(w, "values");
    jt_numbers(w, a->values, d);
    jt_key(w, "stderr");
    jt_numbers(w, a->stderr_, d);
    jt_key(w, "lower");
    jt_numbers(w, a->lower, d);
    jt_key(w, "upper");
    jt_numbers(w, a->upper, d);
    jt_key(w, "estimate");
    jt_string(w, a->spectrum_is_max_entropy          ? "maximum-entropy"
                 : a->method == SS_METHOD_LIKELIHOOD ? "maximum-likelihood"
                                                     : "moments");
    jt_object_end(w);
    rnd_value_se(w, "purity", a->p2, a->p2_stderr);
    jt_key(w, "power_sums");
    jt_object_begin(w);
    rnd_value_se(w, "p2", a->p2, a->p2_stderr);
    if (a->p3_determined)
        rnd_value_se(w, "p3", a->p3, a->p3_stderr);
    else {
        jt_key(w, "p3");
        jt_null(w);
    }
    jt_key(w, "p2_p3_covariance");
    jt_number(w, a->p3_determined ? a->p2_p3_covariance : nan(""));
    jt_object_end(w);
    jt_key(w, "covariance");
    jt_array_begin(w);
    for (unsigned i = 0; i < d; i++)
        jt_numbers(w, a->covariance + i * d, d);
    jt_array_end(w);
}

static void rnd_flags(jt_writer *w, const ss_analysis *a) {
    jt_key(w, "flags");
    jt_array_begin(w);
    for (size_t i = 0; i < a->flag_count; i++) {
        const ss_flag *f = &a->flags[i];
        jt_object_begin(w);
        jt_key(w, "code");
        jt_string(w, ss_flag_name(f->code));
        jt_key(w, "message");
        jt_string(w, f->message);
        jt_key(w, "run");
        if (f->run >= 0)
            jt_integer(w, f->run);
        else
            jt_null(w);
        for (unsigned k = 0; k < f->number_count; k++) {
            jt_key(w, f->numbers[k].name);
            jt_number(w, f->numbers[k].value);
        }
        jt_object_end(w);
    }
    jt_array_end(w);
}

static void rnd_run(jt_writer *w, const ss_run_result *r, unsigned d) {
    jt_object_begin(w);
    jt_key(w, "atoms");
    jt_integer(w, r->atoms);
    jt_key(w, "shots");
    jt_integer(w, (int64_t)r->shots);
    jt_key(w, "mean_energy");
    jt_number(w, r->mean_energy);
    jt_key(w, "energy_variance");
    jt_number(w, r->energy_variance);
    jt_key(w, "window_sd");
    jt_number(w, r->window_sd);
    jt_key(w, "candidates_in_window");
    jt_integer(w, (int64_t)r->window_count);
    jt_key(w, "candidates");
    jt_array_begin(w);
    for (size_t k = 0; k < r->candidate_count; k++) {
        const ss_candidate *c = &r->candidates[k];
        jt_object_begin(w);
        jt_key(w, "diagram");
        rnd_diagram(w, c->rows, d);
        jt_key(w, "content");
        jt_integer(w, c->content);
        jt_key(w, "energy");
        jt_number(w, c->energy);
        jt_key(w, "z");
        jt_number(w, c->z);
        jt_key(w, "probability");
        jt_number(w, c->probability);
        jt_key(w, "spectrum_estimate");
        jt_numbers(w, c->spectrum_estimate, d);
        jt_object_end(w);
    }
    jt_array_end(w);
    jt_key(w, "degenerate_groups");
    jt_array_begin(w);
    for (unsigned g = 1; g <= r->degenerate_group_count; g++) {
        jt_array_begin(w);
        for (size_t k = 0; k < r->candidate_count; k++)
            if (r->candidates[k].degenerate_group == g)
                rnd_diagram(w, r->candidates[k].rows, d);
        jt_array_end(w);
    }
    jt_array_end(w);
    jt_object_end(w);
}

static void rnd_diagnostics(jt_writer *w, const ss_analysis *a) {
    unsigned d = a->levels;
    jt_key(w, "diagnostics");
    jt_object_begin(w);
    jt_key(w, "chi2");
    jt_number(w, a->diagnostics.chi2);
    jt_key(w, "dof");
    jt_integer(w, a->diagnostics.dof);
    jt_key(w, "p_value");
    jt_number(w, a->diagnostics.p_value);
    jt_key(w, "distance_se");
    jt_number(w, a->diagnostics.distance_se);
    if (a->method == SS_METHOD_LIKELIHOOD) {
        jt_key(w, "log_likelihood");
        jt_number(w, a->diagnostics.log_likelihood);
        jt_key(w, "iterations");
        jt_integer(w, a->diagnostics.iterations);
        jt_key(w, "fisher_rank");
        jt_integer(w, a->diagnostics.fisher_rank);
        jt_key(w, "fisher_condition");
        jt_number(w, a->diagnostics.fisher_condition);
        jt_key(w, "cramer_rao_stderr");
        jt_numbers(w, a->diagnostics.cramer_rao_stderr, d);
    }
    if (a->diagnostics.bootstrap_replicates > 0) {
        jt_key(w, "bootstrap");
        jt_object_begin(w);
        jt_key(w, "replicates");
        jt_integer(w, (int64_t)a->diagnostics.bootstrap_replicates);
        jt_key(w, "stderr");
        jt_numbers(w, a->diagnostics.bootstrap_stderr, d);
        jt_key(w, "p2_stderr");
        jt_number(w, a->diagnostics.bootstrap_p2_stderr);
        jt_object_end(w);
    }
    jt_object_end(w);
}

char *api_render_analysis_text(const ss_analysis *a, const ss_calibration *cal,
                               const char *label, api_render_more more,
                               const void *more_ctx, size_t *len,
                               ss_error *err) {
    unsigned d = a->levels;
    jt_writer w;
    jt_init(&w, 4096 + 2048 * a->run_count);
    jt_object_begin(&w);
    jt_key(&w, "levels");
    jt_integer(&w, d);
    jt_key(&w, "method");
    jt_string(&w, ss_method_name(a->method));
    jt_key(&w, "confidence");
    jt_number(&w, a->confidence);
    if (a->has_spectrum)
        rnd_spectrum(&w, a);
    if (a->has_feasible_ranges) {
        jt_key(&w, "feasible_ranges");
        jt_array_begin(&w);
        for (unsigned i = 0; i < d; i++) {
            jt_array_begin(&w);
            jt_number(&w, a->feasible_lower[i]);
            jt_number(&w, a->feasible_upper[i]);
            jt_array_end(&w);
        }
        jt_array_end(&w);
    }
    if (a->has_naive) {
        jt_key(&w, "naive");
        jt_object_begin(&w);
        jt_key(&w, "spectrum");
        jt_numbers(&w, a->naive, d);
        jt_key(&w, "reading");
        jt_string(&w, "λ/n of the diagram whose energy is nearest each run's "
                      "mean, shot-weighted over runs");
        jt_object_end(&w);
    }
    rnd_flags(&w, a);
    jt_key(&w, "runs");
    jt_array_begin(&w);
    for (size_t r = 0; r < a->run_count; r++)
        rnd_run(&w, &a->runs[r], d);
    jt_array_end(&w);
    rnd_diagnostics(&w, a);
    jt_key(&w, "unit");
    jt_string(&w, cal->unit);
    jt_key(&w, "note");
    jt_string(&w, "The spectrum is a statistical estimate from finite shots: "
                  "values with standard errors and intervals at the stated "
                  "confidence; candidate probabilities are model values at "
                  "the estimate.");
    if (label != NULL && label[0] != '\0') {
        jt_key(&w, "label");
        jt_string(&w, label);
    }
    if (more != NULL)
        more(&w, more_ctx);
    jt_object_end(&w);
    char *text = jt_finish(&w, len);
    if (text == NULL)
        ss_error_set(err, SS_ENOMEM, "", "no memory for the result");
    return text;
}
