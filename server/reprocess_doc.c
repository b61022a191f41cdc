/*
 * reprocess_doc.c — the JSON document of a reprocessing job (see
 * reprocess_runner.h), shared by GET /v1/jobs/{id}, POST /v1/reprocessing
 * and the summary `swapspec reprocess` prints.  Owns nothing beyond the
 * document it returns.
 */
#include <string.h>

#include "cli_json.h"
#include "reprocess_runner.h"

static json_t *rd_time(const char *t) {
    return t[0] ? json_string(t) : json_null();
}

typedef struct {
    json_t *list;
    ss_error *err;
} rd_errors;

static void rd_error(void *ctx, const char *analysis_id, const char *detail) {
    rd_errors *e = ctx;
    json_t *item = json_object();
    if (item == NULL) {
        ss_error_set(e->err, SS_ENOMEM, "", NULL);
        return;
    }
    cli_json_put_string(item, "analysis_id", analysis_id, e->err);
    cli_json_put_string(item, "detail", detail, e->err);
    cli_json_append(e->list, item, e->err);
}

json_t *reprocess_job_doc(store_conn *c, const store_job *job, ss_error *err) {
    json_t *doc = json_object(), *params = json_object(),
           *errors = json_array();
    if (doc == NULL || params == NULL || errors == NULL) {
        json_decref(doc);
        json_decref(params);
        json_decref(errors);
        ss_error_set(err, SS_ENOMEM, "", NULL);
        return NULL;
    }
    const store_job_params *p = &job->params;
    cli_json_put_string(params, "calibration", p->calibration, err);
    if (p->version)
        cli_json_put_int(params, "version", p->version, err);
    if (p->since[0])
        cli_json_put_string(params, "since", p->since, err);
    if (p->until[0])
        cli_json_put_string(params, "until", p->until, err);
    if (p->has_label)
        cli_json_put_string(params, "label", p->label, err);
    cli_json_put_string(doc, "id", job->id, err);
    cli_json_put_string(doc, "state", job->state, err);
    cli_json_put_string(doc, "origin", job->origin, err);
    cli_json_put_string(doc, "created_at", job->created_at, err);
    cli_json_put(doc, "parameters", params, err);
    cli_json_put_int(doc, "total", (int64_t)job->total, err);
    cli_json_put_int(doc, "done",
                     (int64_t)(job->revised + job->unchanged + job->failed),
                     err);
    cli_json_put_int(doc, "revised", (int64_t)job->revised, err);
    cli_json_put_int(doc, "unchanged", (int64_t)job->unchanged, err);
    cli_json_put_int(doc, "failed", (int64_t)job->failed, err);
    cli_json_put(doc, "started_at", rd_time(job->started_at), err);
    cli_json_put(doc, "finished_at", rd_time(job->finished_at), err);
    rd_errors e = {errors, err};
    if (err->code == SS_OK && job->failed > 0)
        store_job_errors(c, job->id, REPROCESS_ERRORS_MAX, rd_error, &e, err);
    cli_json_put(doc, "errors", errors, err);
    if (err->code != SS_OK) {
        json_decref(doc);
        return NULL;
    }
    return doc;
}
