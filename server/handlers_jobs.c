/*
 * handlers_jobs.c — reprocessing over HTTP: POST /v1/reprocessing (admin)
 * creates a job and answers 202 with its document and Location
 * /v1/jobs/{id}; GET /v1/jobs/{id} (read) reports its progress.
 *
 * The body {"calibration": NAME, "version"?: N, "since"?, "until"?,
 * "label"?} selects the analyses whose calibration was given by reference
 * to NAME (created at or after since, before until, with exactly that
 * label); they are snapshotted into the job's items when the job is
 * created, and the daemon's runner thread (reprocess_runner.c) works them.
 * Without a version each analysis gets the version valid at its measured
 * time.  The job document is reprocess_doc.c's.  Owns nothing beyond the
 * request.
 */
#include <stdio.h>
#include <string.h>

#include "cli_json.h"
#include "http.h"
#include "reprocess_runner.h"

/* A date-time field of the body into the record form ("" when absent). */
static ss_status jobh_time(const json_t *body, const char *key, char out[32],
                           ss_error *err) {
    json_t *v = json_object_get(body, key);
    out[0] = '\0';
    if (v != NULL && (!json_is_string(v) ||
                      store_time_normalize(json_string_value(v), out) != 0))
        return ss_error_set(err, SS_EINVAL, key,
                            "%s must be an RFC 3339 date-time such as "
                            "2026-12-02T03:50:12Z",
                            key);
    return SS_OK;
}

static ss_status jobh_params(const json_t *body, store_job_params *p,
                             ss_error *err) {
    static const char *const known[] = {"calibration", "version", "since",
                                        "until", "label"};
    const char *key;
    json_t *value;
    json_object_foreach((json_t *)body, key, value) {
        int ok = 0;
        for (size_t i = 0; !ok && i < sizeof known / sizeof known[0]; i++)
            ok = strcmp(key, known[i]) == 0;
        if (!ok)
            return ss_error_set(err, SS_EINVAL, key,
                                "unknown field '%.60s' (known: calibration, "
                                "version, since, until, label)",
                                key);
    }
    memset(p, 0, sizeof *p);
    json_t *cal = json_object_get(body, "calibration");
    if (cal == NULL)
        return ss_error_set(err, SS_EINVAL, "calibration",
                            "missing required field: the name of the "
                            "calibration whose analyses are re-run");
    if (!json_is_string(cal) ||
        !store_calibration_name_valid(json_string_value(cal)))
        return store_calibration_name_error(json_string_value(cal),
                                            "calibration", err);
    snprintf(p->calibration, sizeof p->calibration, "%s",
             json_string_value(cal));
    json_t *v = json_object_get(body, "version");
    if (v != NULL) {
        json_int_t n = json_is_integer(v) ? json_integer_value(v) : 0;
        if (n < 1 || n > 2147483647)
            return ss_error_set(err, SS_EINVAL, "version",
                                "version must be a whole number from 1 to "
                                "2147483647");
        p->version = (unsigned)n;
    }
    ss_status st = jobh_time(body, "since", p->since, err);
    if (st == SS_OK)
        st = jobh_time(body, "until", p->until, err);
    if (st != SS_OK)
        return st;
    json_t *label = json_object_get(body, "label");
    if (label != NULL) {
        if (!json_is_string(label) ||
            json_string_length(label) >= sizeof p->label)
            return ss_error_set(err, SS_EINVAL, "label",
                                "label must be a string of at most %zu bytes",
                                sizeof p->label - 1);
        memcpy(p->label, json_string_value(label),
               json_string_length(label) + 1);
        p->has_label = 1;
    }
    return SS_OK;
}

ss_status handle_reprocessing_create(http_ctx *ctx, ss_error *err) {
    if (!json_is_object(ctx->json))
        return ss_error_set(err, SS_EMALFORMED, "",
                            "the body must be a JSON object");
    store_job_params p;
    ss_status st = jobh_params(ctx->json, &p, err);
    if (st != SS_OK)
        return st;
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_job job;
    st = store_job_create(c, &p, "http", NULL, &job, err);
    if (st != SS_OK)
        return st;
    reprocess_runner_wake(http_app_runner(ctx->app));
    ctx->doc = reprocess_job_doc(c, &job, err);
    if (ctx->doc == NULL)
        return err->code;
    ctx->status = 202;
    snprintf(ctx->location, sizeof ctx->location, "/v1/jobs/%s", job.id);
    return SS_OK;
}

ss_status handle_jobs_get(http_ctx *ctx, ss_error *err) {
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_job job;
    ss_status st = store_job_get(c, ctx->id, &job, err);
    if (st != SS_OK)
        return st;
    ctx->doc = reprocess_job_doc(c, &job, err);
    return ctx->doc ? SS_OK : err->code;
}
