/*
 * entry_analysis_body.c — the body of the analysis_body fuzz target: the
 * bytes of a POST /v1/analyses body, parsed as the daemon parses it
 * (http_server.c: json_loadb with JSON_REJECT_DUPLICATES) and decoded by
 * api_request_from_json, and also through api_request_parse_text, the
 * path of `swapspec analyze` (which reads integers as reals).
 *
 * Checks: the two paths agree (same status and error record, the same
 * decoded request, compared field by field) wherever the daemon's parse
 * succeeds; a failure has a status of the table for its stage and names a
 * field that resolves in the document (every segment but the last exists;
 * an unknown field exists itself); a decoded request keeps its promises
 * (1..SS_RUNS_MAX runs, label and measured_at as given and in form, a
 * calibration reference with a valid name).  An inline or default request
 * is then run through ss_analysis_run under the fuzz budget, with the
 * calibration resolved as analysis_execute resolves it, and its outcome is
 * checked with fuzz_check_failure / fuzz_check_analysis.  Requests with more
 * than FZ_READINGS_RUN per-shot readings or more than 200 bootstrap
 * replicates are only decoded (the service's own budget bounds them).
 */
#include "fuzz_entry.h"

#include <jansson.h>
#include <stdlib.h>
#include <string.h>

#include "analysis_exec.h"
#include "api_request.h"
#include "http.h"
#include "store.h"

#define FZ_READINGS_RUN 5000

static int fz_same_calibration(const ss_calibration *a,
                               const ss_calibration *b) {
    return a->offset == b->offset && a->pair_shift == b->pair_shift &&
           a->exchange == b->exchange && a->noise_sd == b->noise_sd &&
           a->coupling_spread == b->coupling_spread &&
           strcmp(a->unit, b->unit) == 0;
}

static int fz_same_run(const ss_run *a, const ss_run *b) {
    if (a->atoms != b->atoms || (a->energies == NULL) != (b->energies == NULL))
        return 0;
    if (a->energies == NULL)
        return a->shots == b->shots && a->mean_energy == b->mean_energy &&
               a->energy_variance == b->energy_variance;
    if (a->energy_count != b->energy_count)
        return 0;
    for (size_t k = 0; k < a->energy_count; k++)
        if (a->energies[k] != b->energies[k])
            return 0;
    return 1;
}

/* The daemon's and the command line's decodings of the same text. */
static int fz_same_request(const api_request *a, const api_request *b) {
    const ss_analysis_request *x = &a->req, *y = &b->req;
    if (x->levels != y->levels || x->run_count != y->run_count ||
        x->method != y->method || x->confidence != y->confidence ||
        x->bootstrap != y->bootstrap || x->seed != y->seed ||
        x->window != y->window ||
        !fz_same_calibration(&x->calibration, &y->calibration))
        return 0;
    for (size_t r = 0; r < x->run_count; r++)
        if (!fz_same_run(&x->runs[r], &y->runs[r]))
            return 0;
    return strcmp(a->label, b->label) == 0 &&
           strcmp(a->cal_ref, b->cal_ref) == 0 &&
           a->cal_ref_version == b->cal_ref_version &&
           a->cal_inline == b->cal_inline &&
           strcmp(a->measured_at, b->measured_at) == 0;
}

/* What a decoded request promises about itself and the document. */
static int fz_check_decoded(const json_t *root, const api_request *r,
                            fuzz_verdict *v) {
    if (r->req.run_count < 1 || r->req.run_count > SS_RUNS_MAX ||
        r->req.runs != r->runs)
        return fuzz_fail(v, "decoded %zu runs", r->req.run_count);
    if (memchr(r->label, '\0', sizeof r->label) == NULL ||
        memchr(r->measured_at, '\0', sizeof r->measured_at) == NULL ||
        memchr(r->cal_ref, '\0', sizeof r->cal_ref) == NULL)
        return fuzz_fail(v, "decoded text not NUL-terminated");
    const json_t *label = json_object_get(root, "label");
    if (strcmp(r->label, label ? json_string_value(label) : "") != 0)
        return fuzz_fail(v, "label decoded as '%s'", r->label);
    int has_time = json_object_get(root, "measured_at") != NULL;
    if (has_time != (r->measured_at[0] != '\0') ||
        (has_time && !store_time_canonical(r->measured_at)))
        return fuzz_fail(v, "measured_at decoded as '%s'", r->measured_at);
    if (r->cal_ref[0] != '\0' &&
        (!store_calibration_name_valid(r->cal_ref) || r->cal_inline))
        return fuzz_fail(v, "calibration ref decoded as '%s' (inline %d)",
                         r->cal_ref, r->cal_inline);
    return 0;
}

/* Runs an inline or default request as analysis_execute does, with the
 * fuzz budget. */
static int fz_execute(const json_t *root, const api_request *r,
                      fuzz_verdict *v) {
    size_t readings = 0;
    for (size_t k = 0; k < r->req.run_count; k++)
        readings += r->runs[k].energies ? r->runs[k].energy_count : 0;
    if (r->cal_ref[0] != '\0' || readings > FZ_READINGS_RUN ||
        r->req.bootstrap > 200)
        return 0;
    ss_error err;
    ss_error_clear(&err);
    analysis_calibration cal;
    if (analysis_calibration_resolve(NULL, r, "2026-12-02T03:50:12.000Z", &cal,
                                     &err) != SS_OK)
        return fuzz_fail(v, "an inline calibration did not resolve: %s",
                         err.message);
    ss_analysis_request run = r->req;
    run.calibration = cal.cal;
    run.budget = fuzz_budget();
    ss_analysis *a = NULL;
    ss_status st = ss_analysis_run(&run, &a, &err);
    if (st == SS_OK) {
        int bad = fuzz_check_analysis(&run, a, v);
        ss_analysis_free(a);
        return bad;
    }
    if (fuzz_check_failure(st, &err, "ss_analysis_run", v))
        return 1;
    if (st != SS_EINVAL && st != SS_EBUDGET && st != SS_ERANGE &&
        st != SS_ENOMEM && !(st == SS_EINTERNAL && fuzz_lenient("internal")))
        return fuzz_fail(v, "ss_analysis_run returned %s", ss_status_name(st));
    if (!fuzz_field_among(err.field, fuzz_request_fields))
        return fuzz_fail(v,
                         "the error names '%s', not a member of the "
                         "request: %s",
                         err.field, err.message);
    return fuzz_check_field(root, &err, "ss_analysis_run", v);
}

int fuzz_analysis_body_one(const uint8_t *data, size_t size, fuzz_verdict *v) {
    const char *text = (const char *)data;
    api_request cli;
    ss_error cerr;
    ss_error_clear(&cerr);
    ss_status cst = api_request_parse_text(text, size, &cli, &cerr);
    json_error_t jerr;
    json_t *root = json_loadb(text, size, JSON_REJECT_DUPLICATES, &jerr);
    int bad = 0;
    if (root == NULL) { /* the daemon answers 400 before decoding */
        if (cst == SS_OK)
            api_request_release(&cli);
        if (cst != SS_OK && fuzz_check_failure(cst, &cerr, "CLI parse", v))
            return 1;
        /* only an integer beyond 64 bits reads (as a real) on the command
         * line and fails in the daemon; any other text fails in both */
        if (json_error_code(&jerr) == json_error_numeric_overflow ||
            cst == SS_EMALFORMED)
            return 0;
        return fuzz_fail(v, "not JSON for the daemon (%s), %s for the CLI: %s",
                         jerr.text, ss_status_name(cst), cerr.message);
    }
    api_request req;
    ss_error err;
    ss_error_clear(&err);
    ss_status st = api_request_from_json(root, &req, &err);
    if (st != cst || strcmp(err.field, cerr.field) != 0 ||
        strcmp(err.message, cerr.message) != 0) {
        bad = fuzz_fail(v,
                        "daemon and command line disagree: %s '%s' (%s) vs "
                        "%s '%s' (%s)",
                        ss_status_name(st), err.field, err.message,
                        ss_status_name(cst), cerr.field, cerr.message);
    } else if (st == SS_OK) {
        if (!fz_same_request(&req, &cli))
            bad = fuzz_fail(v, "daemon and command line decode the request "
                               "differently");
        if (!bad)
            bad = fz_check_decoded(root, &req, v);
        if (!bad)
            bad = fz_execute(root, &req, v);
    } else if (fuzz_check_failure(st, &err, "api_request_from_json", v)) {
        bad = 1;
    } else if (st != SS_EINVAL && st != SS_ENOMEM &&
               !(st == SS_EMALFORMED && !json_is_object(root))) {
        bad = fuzz_fail(v, "api_request_from_json returned %s: %s",
                        ss_status_name(st), err.message);
    } else if (req.runs != NULL || req.energies != NULL) {
        bad = fuzz_fail(v, "a failed decode left arrays behind");
    } else {
        bad = fuzz_check_field(root, &err, "api_request_from_json", v);
    }
    if (st == SS_OK)
        api_request_release(&req);
    if (cst == SS_OK)
        api_request_release(&cli);
    json_decref(root);
    return bad;
}
