/*
 * handlers_calibrations.c — named, versioned calibrations over HTTP:
 * PUT /v1/calibrations/{name} (admin) stores a new version and answers 201
 * with its document and Location /v1/calibrations/{name}?version=N;
 * GET /v1/calibrations/{name} (read) gives the latest version, or
 * ?version=N that one; GET /v1/calibrations (read) lists the names.
 *
 * The version document is the PUT body's fields plus what the store adds:
 *   {"name", "version", "created_at", "valid_from", "note", "offset",
 *    "pair_shift", "exchange", "noise_sd", "coupling_spread", "unit"}
 * The numbers are checked exactly as an inline calibration is
 * (calibration_file.c, then the core's ss_calibration_validate), but the
 * errors point at the body's own fields ("/exchange", not
 * "/calibration/exchange").  Versions are never changed or deleted.
 * Owns nothing beyond the request.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "calibration_file.h"
#include "cli_json.h"
#include "http.h"

/* The body's keys: the calibration's own, then the version's. */
static const char *const cal_number_keys[] = {
    "offset", "pair_shift", "exchange", "noise_sd", "coupling_spread", "unit",
};
#define CAL_NUMBER_KEYS (sizeof cal_number_keys / sizeof cal_number_keys[0])

static json_t *calh_doc(const store_calibration *k, ss_error *err) {
    json_t *doc = json_object();
    if (doc == NULL) {
        ss_error_set(err, SS_ENOMEM, "", NULL);
        return NULL;
    }
    cli_json_put_string(doc, "name", k->name, err);
    cli_json_put_int(doc, "version", k->version, err);
    cli_json_put_string(doc, "created_at", k->created_at, err);
    cli_json_put_string(doc, "valid_from", k->valid_from, err);
    cli_json_put_string(doc, "note", k->note, err);
    cli_json_put_real(doc, "offset", k->cal.offset, err);
    cli_json_put_real(doc, "pair_shift", k->cal.pair_shift, err);
    cli_json_put_real(doc, "exchange", k->cal.exchange, err);
    cli_json_put_real(doc, "noise_sd", k->cal.noise_sd, err);
    cli_json_put_real(doc, "coupling_spread", k->cal.coupling_spread, err);
    cli_json_put_string(doc, "unit", k->cal.unit, err);
    if (err->code != SS_OK) {
        json_decref(doc);
        return NULL;
    }
    return doc;
}

/* The calibration numbers of the body, checked as an inline calibration;
 * errors name the body's field. */
static ss_status calh_numbers(const json_t *body, ss_calibration *out,
                              ss_error *err) {
    json_t *numbers = json_object();
    if (numbers == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t k = 0; k < CAL_NUMBER_KEYS; k++) {
        json_t *v = json_object_get(body, cal_number_keys[k]);
        if (v != NULL)
            json_object_set(numbers, cal_number_keys[k], v);
    }
    ss_error inner;
    ss_error_clear(&inner);
    ss_status st =
        cli_calibration_from_object(numbers, "the calibration", out, &inner);
    json_decref(numbers);
    if (st == SS_OK)
        return SS_OK;
    const char *field = inner.field;
    if (strncmp(field, "calibration.", 12) == 0)
        field += 12;
    return ss_error_set(err, st, field, "%s", inner.message);
}

/* Everything but the numbers: name, known keys, valid_from and note. */
static ss_status calh_version_fields(http_ctx *ctx, store_calibration *k,
                                     ss_error *err) {
    const char *key;
    json_t *value;
    json_object_foreach(ctx->json, key, value) {
        int known = strcmp(key, "valid_from") == 0 || strcmp(key, "note") == 0;
        for (size_t i = 0; !known && i < CAL_NUMBER_KEYS; i++)
            known = strcmp(key, cal_number_keys[i]) == 0;
        if (!known)
            return ss_error_set(err, SS_EINVAL, key,
                                "unknown field '%.60s' (known: offset, "
                                "pair_shift, exchange, noise_sd, "
                                "coupling_spread, unit, valid_from, note)",
                                key);
    }
    json_t *from = json_object_get(ctx->json, "valid_from");
    if (from != NULL &&
        (!json_is_string(from) ||
         store_time_normalize(json_string_value(from), k->valid_from) != 0))
        return ss_error_set(err, SS_EINVAL, "valid_from",
                            "valid_from must be an RFC 3339 date-time such "
                            "as 2026-12-02T03:50:12Z");
    json_t *note = json_object_get(ctx->json, "note");
    if (note != NULL) {
        if (!json_is_string(note))
            return ss_error_set(err, SS_EINVAL, "note",
                                "note must be a string, not %s",
                                cli_json_type_name(note));
        if (json_string_length(note) > STORE_CALIBRATION_NOTE_MAX ||
            memchr(json_string_value(note), '\0', json_string_length(note)))
            return ss_error_set(err, SS_EINVAL, "note",
                                "note may have at most %d bytes (and no NUL "
                                "character), got %zu",
                                STORE_CALIBRATION_NOTE_MAX,
                                json_string_length(note));
        memcpy(k->note, json_string_value(note), json_string_length(note) + 1);
    }
    return SS_OK;
}

ss_status handle_calibrations_put(http_ctx *ctx, ss_error *err) {
    if (!store_calibration_name_valid(ctx->id))
        return store_calibration_name_error(ctx->id, "name", err);
    if (!json_is_object(ctx->json))
        return ss_error_set(err, SS_EMALFORMED, "",
                            "the body must be a JSON object");
    store_calibration k;
    memset(&k, 0, sizeof k);
    snprintf(k.name, sizeof k.name, "%.64s", ctx->id); /* checked above */
    store_time_now(k.created_at);
    memcpy(k.valid_from, k.created_at, sizeof k.valid_from);
    ss_status st = calh_version_fields(ctx, &k, err);
    if (st == SS_OK)
        st = calh_numbers(ctx->json, &k.cal, err);
    store_conn *c = NULL;
    if (st == SS_OK && (c = http_store_conn(ctx->app, err)) == NULL)
        st = err->code;
    if (st == SS_OK)
        st = store_calibration_put(c, &k, err);
    if (st != SS_OK)
        return st;
    ctx->doc = calh_doc(&k, err);
    if (ctx->doc == NULL)
        return err->code;
    ctx->status = 201;
    snprintf(ctx->location, sizeof ctx->location,
             "/v1/calibrations/%s?version=%u", k.name, k.version);
    return SS_OK;
}

ss_status handle_calibrations_get(http_ctx *ctx, ss_error *err) {
    unsigned version = 0;
    ss_status st = http_query_count(ctx, "version", &version, err);
    if (st != SS_OK)
        return st;
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_calibration k;
    st = store_calibration_get(c, ctx->id, version, &k, err);
    if (st != SS_OK)
        return st;
    ctx->doc = calh_doc(&k, err);
    return ctx->doc ? SS_OK : err->code;
}

ss_status handle_calibrations_list(http_ctx *ctx, ss_error *err) {
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_calibration_entry *items = NULL;
    size_t n = 0;
    ss_status st = store_calibration_list(c, &items, &n, err);
    if (st != SS_OK)
        return st;
    json_t *list = json_array();
    for (size_t i = 0; list != NULL && i < n && err->code == SS_OK; i++) {
        json_t *e = json_object();
        if (e == NULL) {
            ss_error_set(err, SS_ENOMEM, "", NULL);
            break;
        }
        cli_json_put_string(e, "name", items[i].name, err);
        cli_json_put_int(e, "latest_version", items[i].latest_version, err);
        cli_json_put_int(e, "count", items[i].count, err);
        cli_json_put_string(e, "valid_from", items[i].valid_from, err);
        cli_json_put_string(e, "created_at", items[i].created_at, err);
        cli_json_append(list, e, err);
    }
    free(items);
    if (list == NULL && err->code == SS_OK)
        ss_error_set(err, SS_ENOMEM, "", NULL);
    if (err->code != SS_OK) {
        json_decref(list);
        return err->code;
    }
    ctx->doc = json_pack("{s:o}", "items", list);
    return ctx->doc ? SS_OK : ss_error_set(err, SS_ENOMEM, "", NULL);
}
