/*
 * api_render.c — renders an ss_analysis as JSON: the spectrum with its
 * intervals, power sums, covariance, flags with their numbers, feasible
 * ranges, the naive reading, per-run candidates with their degenerate
 * groups, and the fit diagnostics.  Owns nothing beyond the document it
 * returns.
 */
#include "api_render.h"

#include <math.h>

#include "cli_json.h"

static json_t *rnd_real(double x) {
    return isfinite(x) ? json_real(x) : json_null();
}

static json_t *rnd_reals(const double *x, size_t n) {
    json_t *arr = json_array();
    for (size_t i = 0; arr && i < n; i++)
        json_array_append_new(arr, rnd_real(x[i]));
    return arr;
}

static json_t *rnd_value_se(double v, double se) {
    return json_pack("{s:o,s:o}", "value", rnd_real(v), "stderr", rnd_real(se));
}

static json_t *rnd_flags(const ss_analysis *a) {
    json_t *arr = json_array();
    for (size_t i = 0; arr && i < a->flag_count; i++) {
        const ss_flag *f = &a->flags[i];
        json_t *o = json_pack("{s:s,s:s}", "code", ss_flag_name(f->code),
                              "message", f->message);
        if (o == NULL)
            continue;
        json_object_set_new(o, "run",
                            f->run >= 0 ? json_integer(f->run) : json_null());
        for (unsigned k = 0; k < f->number_count; k++)
            json_object_set_new(o, f->numbers[k].name,
                                rnd_real(f->numbers[k].value));
        json_array_append_new(arr, o);
    }
    return arr;
}

static json_t *rnd_run(const ss_run_result *r, unsigned d) {
    json_t *cands = json_array(), *groups = json_array();
    for (size_t k = 0; cands && k < r->candidate_count; k++) {
        const ss_candidate *c = &r->candidates[k];
        json_array_append_new(
            cands,
            json_pack("{s:o,s:I,s:o,s:o,s:o,s:o}", "diagram",
                      cli_json_diagram(c->rows, d), "content",
                      (json_int_t)c->content, "energy", rnd_real(c->energy),
                      "z", rnd_real(c->z), "probability",
                      rnd_real(c->probability), "spectrum_estimate",
                      rnd_reals(c->spectrum_estimate, d)));
    }
    for (unsigned g = 1; groups && g <= r->degenerate_group_count; g++) {
        json_t *grp = json_array();
        for (size_t k = 0; grp && k < r->candidate_count; k++)
            if (r->candidates[k].degenerate_group == g)
                json_array_append_new(
                    grp, cli_json_diagram(r->candidates[k].rows, d));
        json_array_append_new(groups, grp);
    }
    return json_pack("{s:i,s:I,s:o,s:o,s:o,s:I,s:o,s:o}", "atoms",
                     (int)r->atoms, "shots", (json_int_t)r->shots,
                     "mean_energy", rnd_real(r->mean_energy), "energy_variance",
                     rnd_real(r->energy_variance), "window_sd",
                     rnd_real(r->window_sd), "candidates_in_window",
                     (json_int_t)r->window_count, "candidates", cands,
                     "degenerate_groups", groups);
}

static json_t *rnd_diagnostics(const ss_analysis *a) {
    unsigned d = a->levels;
    json_t *o = json_pack(
        "{s:o,s:i,s:o,s:o}", "chi2", rnd_real(a->diagnostics.chi2), "dof",
        a->diagnostics.dof, "p_value", rnd_real(a->diagnostics.p_value),
        "distance_se", rnd_real(a->diagnostics.distance_se));
    if (o == NULL)
        return NULL;
    if (a->method == SS_METHOD_LIKELIHOOD) {
        json_object_set_new(o, "log_likelihood",
                            rnd_real(a->diagnostics.log_likelihood));
        json_object_set_new(o, "iterations",
                            json_integer(a->diagnostics.iterations));
        json_object_set_new(o, "fisher_rank",
                            json_integer(a->diagnostics.fisher_rank));
        json_object_set_new(o, "fisher_condition",
                            rnd_real(a->diagnostics.fisher_condition));
        json_object_set_new(o, "cramer_rao_stderr",
                            rnd_reals(a->diagnostics.cramer_rao_stderr, d));
    }
    if (a->diagnostics.bootstrap_replicates > 0)
        json_object_set_new(
            o, "bootstrap",
            json_pack("{s:i,s:o,s:o}", "replicates",
                      (int)a->diagnostics.bootstrap_replicates, "stderr",
                      rnd_reals(a->diagnostics.bootstrap_stderr, d),
                      "p2_stderr",
                      rnd_real(a->diagnostics.bootstrap_p2_stderr)));
    return o;
}

json_t *api_render_analysis(const ss_analysis *a, const ss_calibration *cal,
                            ss_error *err) {
    unsigned d = a->levels;
    json_t *doc = json_pack("{s:i,s:s,s:o}", "levels", (int)d, "method",
                            ss_method_name(a->method), "confidence",
                            rnd_real(a->confidence));
    if (doc == NULL) {
        ss_error_set(err, SS_ENOMEM, "", "no memory for the result");
        return NULL;
    }
    if (a->has_spectrum) {
        json_object_set_new(
            doc, "spectrum",
            json_pack("{s:s,s:o,s:o,s:o,s:o,s:s}", "interval",
                      ss_interval_name(a->interval), "values",
                      rnd_reals(a->values, d), "stderr",
                      rnd_reals(a->stderr_, d), "lower", rnd_reals(a->lower, d),
                      "upper", rnd_reals(a->upper, d), "estimate",
                      a->spectrum_is_max_entropy          ? "maximum-entropy"
                      : a->method == SS_METHOD_LIKELIHOOD ? "maximum-likelihood"
                                                          : "moments"));
        json_object_set_new(doc, "purity", rnd_value_se(a->p2, a->p2_stderr));
        json_object_set_new(
            doc, "power_sums",
            json_pack("{s:o,s:o,s:o}", "p2", rnd_value_se(a->p2, a->p2_stderr),
                      "p3",
                      a->p3_determined ? rnd_value_se(a->p3, a->p3_stderr)
                                       : json_null(),
                      "p2_p3_covariance",
                      a->p3_determined ? rnd_real(a->p2_p3_covariance)
                                       : json_null()));
        json_t *cov = json_array();
        for (unsigned i = 0; cov && i < d; i++)
            json_array_append_new(cov, rnd_reals(a->covariance + i * d, d));
        json_object_set_new(doc, "covariance", cov);
    }
    if (a->has_feasible_ranges) {
        json_t *fr = json_array();
        for (unsigned i = 0; fr && i < d; i++)
            json_array_append_new(
                fr, json_pack("[o,o]", rnd_real(a->feasible_lower[i]),
                              rnd_real(a->feasible_upper[i])));
        json_object_set_new(doc, "feasible_ranges", fr);
    }
    if (a->has_naive)
        json_object_set_new(doc, "naive",
                            json_pack("{s:o,s:s}", "spectrum",
                                      rnd_reals(a->naive, d), "reading",
                                      "λ/n of the diagram whose energy is "
                                      "nearest each run's mean, "
                                      "shot-weighted over runs"));
    json_object_set_new(doc, "flags", rnd_flags(a));
    json_t *runs = json_array();
    for (size_t r = 0; runs && r < a->run_count; r++)
        json_array_append_new(runs, rnd_run(&a->runs[r], d));
    json_object_set_new(doc, "runs", runs);
    json_object_set_new(doc, "diagnostics", rnd_diagnostics(a));
    json_object_set_new(doc, "unit", json_string(cal->unit));
    json_object_set_new(
        doc, "note",
        json_string("The spectrum is a statistical estimate from finite "
                    "shots: values with standard errors and intervals at the "
                    "stated confidence; candidate probabilities are model "
                    "values at the estimate."));
    return doc;
}
