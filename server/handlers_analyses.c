/*
 * handlers_analyses.c — POST /v1/analyses (run the inversion, store request
 * and result, answer 201 with a Location; Idempotency-Key makes retries
 * safe), GET /v1/analyses/{id} (the latest revision, or ?revision=N),
 * GET /v1/analyses/{id}/revisions (all of them, oldest first), and
 * GET /v1/analyses (filters and keyset pagination, newest first).  The
 * analysis itself runs through analysis_exec.c (calibration inline, default
 * or by reference to a stored version), exactly as `swapspec analyze` and
 * the reprocessing runner do.  Owns nothing beyond the request.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis_exec.h"
#include "api_request.h"
#include "http.h"

#ifndef SWAPSPEC_VERSION
#define SWAPSPEC_VERSION "unknown"
#endif

/* The record document as text, assembled from the stored JSON texts
 * without parsing and printing them again: id, created_at, label,
 * software_version (of the revision shown), revision, revision_count, for a
 * later revision revised_at and job_id, then request and result. */
static ss_status analysis_record_text(http_ctx *ctx, const store_record *r,
                                      const store_revision_info *info,
                                      ss_error *err) {
    json_t *head = json_pack(
        "{s:s,s:s,s:s,s:s,s:I,s:I}", "id", r->id, "created_at", r->created_at,
        "label", r->label, "software_version", info->software_version,
        "revision", (json_int_t)info->revision, "revision_count",
        (json_int_t)info->revision_count);
    if (head != NULL && info->revision > 1) {
        json_object_set_new(head, "revised_at", json_string(info->created_at));
        json_object_set_new(head, "job_id", json_string(info->job_id));
    }
    char *prefix = head ? json_dumps(head, JSON_COMPACT) : NULL;
    json_decref(head);
    if (prefix == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    size_t plen = strlen(prefix); /* "{...}" */
    size_t cap = plen + strlen(r->request_json) + strlen(r->result_json) + 32;
    char *text = malloc(cap);
    if (text == NULL) {
        free(prefix);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    prefix[plen - 1] = '\0'; /* drop the closing brace */
    int n = snprintf(text, cap, "%s,\"request\":%s,\"result\":%s}", prefix,
                     r->request_json, r->result_json);
    free(prefix);
    ctx->text = text;
    ctx->text_len = (size_t)n;
    ctx->content_type = "application/json";
    return SS_OK;
}

/* Revision `revision` (0 = latest) of analysis id as the record text. */
static ss_status analysis_send(http_ctx *ctx, store_conn *c, const char *id,
                               unsigned revision, ss_error *err) {
    store_record rec;
    memset(&rec, 0, sizeof rec);
    store_revision_info info;
    ss_status st = store_get_revision(c, id, revision, &rec, &info, err);
    if (st == SS_OK)
        st = analysis_record_text(ctx, &rec, &info, err);
    store_record_release(&rec);
    return st;
}

/* The replay of an Idempotency-Key: the record as that request stored it
 * (revision 1). */
static ss_status analysis_replay(http_ctx *ctx, store_conn *c, const char *id,
                                 ss_error *err) {
    ss_status st = analysis_send(ctx, c, id, 1, err);
    if (st == SS_OK) {
        ctx->status = 200;
        ctx->replayed = 1;
        snprintf(ctx->location, sizeof ctx->location, "/v1/analyses/%s", id);
    }
    return st;
}

/* The Idempotency-Key header: a structured-field string (quotes stripped)
 * of 1..128 visible ASCII characters.  0 when absent; −1 when malformed. */
static int analysis_idem_key(http_ctx *ctx, char *key, size_t cap) {
    const char *raw = http_header(ctx, "Idempotency-Key");
    if (raw == NULL)
        return 0;
    size_t n = strlen(raw);
    if (n >= 2 && raw[0] == '"' && raw[n - 1] == '"') {
        raw++;
        n -= 2;
    }
    if (n == 0 || n > STORE_IDEMPOTENCY_KEY_MAX || n >= cap)
        return -1;
    for (size_t i = 0; i < n; i++)
        if (raw[i] < 0x21 || raw[i] > 0x7e || raw[i] == '"')
            return -1;
    memcpy(key, raw, n);
    key[n] = '\0';
    return 1;
}

/* A new analysis between its computation and the answer: the record on
 * its way through the group commit while the connection is suspended. */
typedef struct {
    committer_item item;
    store_record rec;
    http_ctx *ctx;
    int has_key; /* key and fp are set; the in-flight key is held */
    char key[STORE_IDEMPOTENCY_KEY_MAX + 1];
    char fp[65];
} analysis_pending;

static void analysis_pending_free(void *state) {
    analysis_pending *p = state;
    if (p->has_key)
        http_inflight_release(p->ctx->app, p->key);
    free(p->rec.request_json);
    free(p->rec.result_json);
    free(p);
}

/* The writer's callback (on its thread): the commit is over. */
static void analysis_committed(committer_item *item, void *arg) {
    (void)item;
    analysis_pending *p = arg;
    http_resume(p->ctx);
}

/* After the commit (on the worker thread): 201 with the record, or the
 * commit's failure; a key stored meanwhile by another process is answered
 * as the replay it is. */
static ss_status analysis_finish(http_ctx *ctx, void *state, ss_error *err) {
    analysis_pending *p = state;
    ss_status st = p->item.put.status;
    if (st == SS_OK) {
        store_revision_info first;
        memset(&first, 0, sizeof first);
        first.revision = first.revision_count = 1;
        memcpy(first.software_version, p->rec.software_version,
               sizeof first.software_version);
        st = analysis_record_text(ctx, &p->rec, &first, err);
        ctx->status = 201;
        snprintf(ctx->location, sizeof ctx->location, "/v1/analyses/%s",
                 p->rec.id);
        return st;
    }
    *err = p->item.put.error;
    if (st != SS_ECONFLICT || !p->has_key ||
        strcmp(err->field, "idempotency_key") != 0)
        return st;
    ss_error_clear(err);
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    int found = 0;
    char stored_fp[65], stored_id[32];
    st = store_idempotency_find(c, p->key, stored_fp, stored_id, &found, err);
    if (st == SS_OK && found && strcmp(stored_fp, p->fp) == 0)
        return analysis_replay(ctx, c, stored_id, err);
    if (st == SS_OK)
        st = ss_error_set(err, SS_EIDEMPOTENCY, "Idempotency-Key",
                          "this Idempotency-Key was used with a different "
                          "request body");
    return st;
}

/* Runs a new analysis and hands its record to the group commit; the answer
 * follows in analysis_finish.  The creation time is taken first: a
 * calibration by reference without measured_at resolves to the version
 * valid at that time.  With a key, the in-flight key is held on entry and
 * passes to the pending state (released by analysis_pending_free). */
static ss_status analysis_compute(http_ctx *ctx, const char *key,
                                  const char *fingerprint, ss_error *err) {
    analysis_pending *p = calloc(1, sizeof *p);
    if (p == NULL) {
        if (key != NULL)
            http_inflight_release(ctx->app, key);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    p->ctx = ctx;
    if (key != NULL) {
        p->has_key = 1;
        snprintf(p->key, sizeof p->key, "%s", key);
        snprintf(p->fp, sizeof p->fp, "%s", fingerprint);
    }
    store_record *rec = &p->rec;
    api_request req;
    ss_status st = api_request_from_json(ctx->json, &req, err);
    if (st != SS_OK) {
        analysis_pending_free(p);
        return st;
    }
    store_time_now(rec->created_at);
    store_conn *c = NULL;
    if (req.cal_ref[0] && (c = http_store_conn(ctx->app, err)) == NULL)
        st = err->code;
    analysis_calibration cal;
    if (st == SS_OK)
        st = analysis_calibration_resolve(c, &req, rec->created_at, &cal, err);
    size_t result_len = 0;
    if (st == SS_OK)
        st = analysis_execute_text(
            &req, &cal, &http_app_settings(ctx->app)->budget, &rec->result_json,
            &result_len, rec->method, err);
    if (st == SS_OK)
        st = store_id_generate(rec->id, err);
    if (st == SS_OK) {
        snprintf(rec->label, sizeof rec->label, "%s", req.label);
        rec->levels = req.req.levels;
        snprintf(rec->software_version, sizeof rec->software_version, "%s",
                 SWAPSPEC_VERSION);
        if (strcmp(cal.source, "ref") == 0) {
            snprintf(rec->calibration_name, sizeof rec->calibration_name, "%s",
                     cal.name);
            rec->calibration_version = cal.version;
        }
        snprintf(rec->measured_at, sizeof rec->measured_at, "%s",
                 req.measured_at);
        /* the request as received (already checked to be one JSON object
         * without duplicate keys); the result rendered once as text, and
         * the response assembled from the same texts that are stored */
        rec->request_json = strndup(ctx->body, ctx->body_len);
        if (rec->request_json == NULL)
            st = ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    api_request_release(&req);
    if (st != SS_OK) {
        analysis_pending_free(p);
        return st;
    }
    /* group commit: the connection waits suspended, the worker thread goes
     * on; analysis_committed resumes it once the record is durable */
    p->item.put.rec = rec;
    p->item.put.idem_key = p->has_key ? p->key : NULL;
    p->item.put.fingerprint = p->has_key ? p->fp : NULL;
    http_defer(ctx, analysis_finish, p, analysis_pending_free);
    committer_submit(http_app_committer(ctx->app), &p->item, analysis_committed,
                     p);
    return SS_OK;
}

ss_status handle_analyses_create(http_ctx *ctx, ss_error *err) {
    char key[STORE_IDEMPOTENCY_KEY_MAX + 1], fp[65];
    int has_key = analysis_idem_key(ctx, key, sizeof key);
    if (has_key < 0)
        return ss_error_set(err, SS_EMALFORMED, "Idempotency-Key",
                            "the Idempotency-Key header must be 1 to %u "
                            "visible ASCII characters (optionally quoted)",
                            STORE_IDEMPOTENCY_KEY_MAX);
    if (!has_key)
        return analysis_compute(ctx, NULL, NULL, err);
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    auth_sha256_hex(ctx->body, ctx->body_len, fp);
    if (!http_inflight_take(ctx->app, key))
        return ss_error_set(err, SS_ECONFLICT, "Idempotency-Key",
                            "a request with this Idempotency-Key is still "
                            "being processed; retry when it has finished");
    int found = 0;
    char stored_fp[65], stored_id[32];
    ss_status st =
        store_idempotency_find(c, key, stored_fp, stored_id, &found, err);
    if (st == SS_OK && !found) /* the key passes to the pending analysis */
        return analysis_compute(ctx, key, fp, err);
    if (st == SS_OK && strcmp(stored_fp, fp) != 0)
        st = ss_error_set(err, SS_EIDEMPOTENCY, "Idempotency-Key",
                          "this Idempotency-Key was first used with a "
                          "different request body; use a new key for a new "
                          "request");
    else if (st == SS_OK)
        st = analysis_replay(ctx, c, stored_id, err);
    http_inflight_release(ctx->app, key);
    return st;
}

ss_status handle_analyses_get(http_ctx *ctx, ss_error *err) {
    unsigned revision = 0;
    ss_status st = http_query_count(ctx, "revision", &revision, err);
    if (st != SS_OK)
        return st;
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    return analysis_send(ctx, c, ctx->id, revision, err);
}

/* GET /v1/analyses/{id}/revisions: every revision, oldest first, each with
 * its metadata and result text spliced in unparsed. */
typedef struct {
    char *text;
    size_t len, cap;
    int failed;
} analysis_buf;

static void analysis_buf_add(analysis_buf *b, const char *s, size_t n) {
    if (b->failed)
        return;
    if (b->len + n + 1 > b->cap) {
        size_t cap = (b->len + n + 1) * 2;
        char *grown = realloc(b->text, cap);
        if (grown == NULL) {
            b->failed = 1;
            return;
        }
        b->text = grown;
        b->cap = cap;
    }
    memcpy(b->text + b->len, s, n);
    b->len += n;
    b->text[b->len] = '\0';
}

static ss_status analysis_revision_item(void *arg,
                                        const store_revision_info *info,
                                        const char *result_json,
                                        ss_error *err) {
    analysis_buf *b = arg;
    json_t *head = json_pack(
        "{s:I,s:s,s:s,s:s,s:o,s:o}", "revision", (json_int_t)info->revision,
        "created_at", info->created_at, "software_version",
        info->software_version, "method", info->method, "calibration",
        info->calibration_name[0]
            ? json_pack("{s:s,s:I}", "name", info->calibration_name, "version",
                        (json_int_t)info->calibration_version)
            : json_null(),
        "job_id", info->job_id[0] ? json_string(info->job_id) : json_null());
    char *prefix = head ? json_dumps(head, JSON_COMPACT) : NULL;
    json_decref(head);
    if (prefix == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    if (info->revision > 1)
        analysis_buf_add(b, ",", 1);
    analysis_buf_add(b, prefix, strlen(prefix) - 1); /* without the '}' */
    analysis_buf_add(b, ",\"result\":", 10);
    analysis_buf_add(b, result_json, strlen(result_json));
    analysis_buf_add(b, "}", 1);
    free(prefix);
    return b->failed ? ss_error_set(err, SS_ENOMEM, "", NULL) : SS_OK;
}

ss_status handle_analyses_revisions(http_ctx *ctx, ss_error *err) {
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    analysis_buf b = {NULL, 0, 0, 0};
    char head[96];
    int n = snprintf(head, sizeof head, "{\"id\":\"%s\",\"revisions\":[",
                     store_id_valid(ctx->id) ? ctx->id : "");
    analysis_buf_add(&b, head, (size_t)n);
    ss_status st =
        store_revisions_foreach(c, ctx->id, analysis_revision_item, &b, err);
    analysis_buf_add(&b, "]}", 2);
    if (st == SS_OK && b.failed)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    if (st != SS_OK) {
        free(b.text);
        return st;
    }
    ctx->text = b.text;
    ctx->text_len = b.len;
    ctx->content_type = "application/json";
    return SS_OK;
}

/* A list item: id, created_at, label, levels, method, the spectrum values
 * (null without a spectrum) and the flag codes. */
static json_t *analysis_list_item(const store_record *r) {
    json_error_t jerr;
    json_t *result =
        r->result_json ? json_loads(r->result_json, 0, &jerr) : NULL;
    json_t *values =
        json_object_get(json_object_get(result, "spectrum"), "values");
    json_t *codes = json_array();
    json_t *flag;
    size_t i;
    json_array_foreach(json_object_get(result, "flags"), i, flag)
        json_array_append(codes, json_object_get(flag, "code"));
    json_t *item = json_pack(
        "{s:s,s:s,s:s,s:i,s:s,s:O,s:o}", "id", r->id, "created_at",
        r->created_at, "label", r->label, "levels", (int)r->levels, "method",
        r->method, "values", values ? values : json_null(), "flags", codes);
    json_decref(result);
    return item;
}

ss_status handle_analyses_list(http_ctx *ctx, ss_error *err) {
    store_query q = {http_query(ctx, "label"), http_query(ctx, "since"),
                     http_query(ctx, "until"), 50, http_query(ctx, "cursor")};
    const char *limit = http_query(ctx, "limit");
    if (limit != NULL && http_parse_count(limit, "limit", STORE_LIST_LIMIT_MAX,
                                          &q.limit, err) != SS_OK)
        return err->code;
    if (q.label != NULL && strlen(q.label) >= sizeof((store_record *)0)->label)
        return ss_error_set(err, SS_EINVAL, "label", "label is too long");
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_page page;
    memset(&page, 0, sizeof page);
    ss_status st = store_list(c, &q, &page, err);
    if (st != SS_OK)
        return st;
    json_t *items = json_array();
    for (size_t k = 0; items && k < page.count; k++)
        json_array_append_new(items, analysis_list_item(&page.items[k]));
    ctx->doc = json_pack(
        "{s:o,s:o}", "items", items ? items : json_array(), "next_cursor",
        page.next_cursor[0] ? json_string(page.next_cursor) : json_null());
    store_page_release(&page);
    return ctx->doc ? SS_OK : ss_error_set(err, SS_ENOMEM, "", NULL);
}
