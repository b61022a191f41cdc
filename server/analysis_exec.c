/*
 * analysis_exec.c — resolving the calibration of an analysis request and
 * running it to a result document (see analysis_exec.h).  The document is
 * written as text (api_render_analysis_text, json_text.h), the
 * calibration member written last through its callback, so the service
 * never builds a tree for a result.  Owns nothing beyond the text it returns.
 */
#include "analysis_exec.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "api_render.h"
#include "json_text.h"

void analysis_calibration_from_stored(const store_calibration *k,
                                      analysis_calibration *out) {
    memset(out, 0, sizeof *out);
    out->cal = k->cal;
    out->source = "ref";
    snprintf(out->name, sizeof out->name, "%s", k->name);
    out->version = k->version;
    snprintf(out->valid_from, sizeof out->valid_from, "%s", k->valid_from);
}

/* A store error about a reference, restated as an error of the request's
 * field (422): the client named something that is not there. */
static ss_status exec_ref_error(const api_request *req, const ss_error *inner,
                                ss_error *err) {
    if (inner->code != SS_ENOTFOUND)
        return ss_error_set(err, inner->code, inner->field, "%s",
                            inner->message);
    if (strcmp(inner->field, "version") == 0)
        return ss_error_set(err, SS_EINVAL, "calibration.version", "%s",
                            inner->message);
    if (strcmp(inner->field, "at") == 0)
        return ss_error_set(err, SS_EINVAL, "calibration.ref",
                            "%s; give measured_at, or pin a version with "
                            "calibration.version",
                            inner->message);
    return ss_error_set(err, SS_EINVAL, "calibration.ref",
                        "no calibration named '%s' is stored (PUT "
                        "/v1/calibrations/%s creates it)",
                        req->cal_ref, req->cal_ref);
}

ss_status analysis_calibration_resolve(store_conn *c, const api_request *req,
                                       const char *fallback_at,
                                       analysis_calibration *out,
                                       ss_error *err) {
    memset(out, 0, sizeof *out);
    if (req->cal_ref[0] == '\0') {
        out->cal = req->req.calibration;
        out->source = req->cal_inline ? "request" : "default";
        return SS_OK;
    }
    if (c == NULL)
        return ss_error_set(err, SS_EINVAL, "calibration.ref",
                            "the calibration '%s' is given by reference, "
                            "which needs the store: run the analysis through "
                            "the service, or give --data FILE.db",
                            req->cal_ref);
    store_calibration k;
    ss_error inner;
    ss_error_clear(&inner);
    const char *at = req->measured_at[0] ? req->measured_at : fallback_at;
    ss_status st =
        req->cal_ref_version
            ? store_calibration_get(c, req->cal_ref, req->cal_ref_version, &k,
                                    &inner)
            : store_calibration_valid_at(c, req->cal_ref, at, &k, &inner);
    if (st != SS_OK)
        return exec_ref_error(req, &inner, err);
    analysis_calibration_from_stored(&k, out);
    return SS_OK;
}

/* The "calibration" member of a result: {offset, pair_shift, exchange,
 * noise_sd, coupling_spread (when not 0), unit, source, and for a stored
 * version name, version, valid_from}. */
static void exec_calibration(jt_writer *w, const void *ctx) {
    const analysis_calibration *cal = ctx;
    jt_key(w, "calibration");
    jt_object_begin(w);
    jt_key(w, "offset");
    jt_number(w, cal->cal.offset);
    jt_key(w, "pair_shift");
    jt_number(w, cal->cal.pair_shift);
    jt_key(w, "exchange");
    jt_number(w, cal->cal.exchange);
    jt_key(w, "noise_sd");
    jt_number(w, cal->cal.noise_sd);
    if (cal->cal.coupling_spread != 0.0) {
        jt_key(w, "coupling_spread");
        jt_number(w, cal->cal.coupling_spread);
    }
    jt_key(w, "unit");
    jt_string(w, cal->cal.unit);
    jt_key(w, "source");
    jt_string(w, cal->source);
    if (strcmp(cal->source, "ref") == 0) {
        jt_key(w, "name");
        jt_string(w, cal->name);
        jt_key(w, "version");
        jt_integer(w, cal->version);
        jt_key(w, "valid_from");
        jt_string(w, cal->valid_from);
    }
    jt_object_end(w);
}

ss_status analysis_execute_text(const api_request *req,
                                const analysis_calibration *cal,
                                const ss_budget *budget, char **text,
                                size_t *len, char method[16], ss_error *err) {
    ss_analysis_request run = req->req;
    run.calibration = cal->cal;
    if (budget != NULL)
        run.budget = *budget;
    ss_analysis *a = NULL;
    ss_status st = ss_analysis_run(&run, &a, err);
    if (st != SS_OK)
        return st;
    char *body = api_render_analysis_text(a, &run.calibration, req->label,
                                          exec_calibration, cal, len, err);
    if (body != NULL)
        snprintf(method, 16, "%s", ss_method_name(a->method));
    ss_analysis_free(a);
    if (body == NULL)
        return err->code;
    *text = body;
    return SS_OK;
}

ss_status analysis_execute(const api_request *req,
                           const analysis_calibration *cal,
                           const ss_budget *budget, json_t **doc,
                           char method[16], ss_error *err) {
    char *text = NULL;
    size_t len = 0;
    ss_status st =
        analysis_execute_text(req, cal, budget, &text, &len, method, err);
    if (st != SS_OK)
        return st;
    json_error_t jerr;
    json_t *parsed = json_loadb(text, len, 0, &jerr);
    free(text);
    if (parsed == NULL)
        return ss_error_set(err, SS_EINTERNAL, "",
                            "the rendered result does not parse: %s",
                            jerr.text);
    *doc = parsed;
    return SS_OK;
}
