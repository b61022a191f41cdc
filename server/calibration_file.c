/*
 * calibration_file.c — strict loading of a calibration JSON file.
 *
 * Owns the mapping from the file's keys to an ss_calibration.  Parsing
 * rejects duplicate keys (jansson's JSON_REJECT_DUPLICATES), every key is
 * checked against the known set and its type, missing numbers are errors
 * (a silent default for, say, the exchange coupling would shift every
 * energy), and the result goes through the core's ss_calibration_validate.
 * Every error names the offending key as "calibration.<key>".
 */
#include "calibration_file.h"
#include "cli_json.h"

#include <jansson.h>
#include <stdio.h>
#include <string.h>

#define CAL_FIELD "calibration"

/* jansson reports a duplicate as `duplicate object key near '"name"'`;
 * recover the name for the field, or leave key empty. */
static void cal_duplicate_key(const char *text, char *key, size_t cap) {
    const char *open = strstr(text, "near '\"");
    key[0] = '\0';
    if (open == NULL)
        return;
    open += strlen("near '\"");
    const char *close = strstr(open, "\"'");
    if (close == NULL || (size_t)(close - open) >= cap)
        return;
    memcpy(key, open, (size_t)(close - open));
    key[close - open] = '\0';
}

static ss_status cal_load_error(const char *path, const json_error_t *jerr,
                                ss_error *err) {
    char field[sizeof err->field];
    char key[64];
    switch (json_error_code(jerr)) {
    case json_error_cannot_open_file:
        return ss_error_set(err, SS_ENOTFOUND, CAL_FIELD,
                            "cannot read calibration file '%s': %s", path,
                            jerr->text);
    case json_error_duplicate_key:
        cal_duplicate_key(jerr->text, key, sizeof key);
        snprintf(field, sizeof field, "%s%s%s", CAL_FIELD, key[0] ? "." : "",
                 key);
        return ss_error_set(err, SS_EMALFORMED, field,
                            "calibration file '%s' gives the key '%s' more "
                            "than once (line %d)",
                            path, key, jerr->line);
    default:
        return ss_error_set(err, SS_EMALFORMED, CAL_FIELD,
                            "calibration file '%s' is not valid JSON: %s "
                            "(line %d, column %d)",
                            path, jerr->text, jerr->line, jerr->column);
    }
}

/* Copies the checked fields of obj into *cal. */
static ss_status cal_read_object(const char *path, const json_t *obj,
                                 ss_calibration *cal, ss_error *err) {
    const char *const names[] = {"offset", "pair_shift", "exchange", "noise_sd",
                                 "coupling_spread"};
    double *const slots[] = {&cal->offset, &cal->pair_shift, &cal->exchange,
                             &cal->noise_sd, &cal->coupling_spread};
    const size_t count = sizeof names / sizeof names[0];
    const size_t required = 4; /* coupling_spread is optional */
    char field[sizeof err->field];
    const char *key;
    json_t *value;
    json_object_foreach((json_t *)obj, key, value) {
        snprintf(field, sizeof field, CAL_FIELD ".%s", key);
        size_t k = 0;
        while (k < count && strcmp(key, names[k]) != 0)
            k++;
        if (k < count && !json_is_number(value))
            return ss_error_set(err, SS_EINVAL, field,
                                "%s: %s must be a number, not %s", path, key,
                                cli_json_type_name(value));
        if (k < count) {
            *slots[k] = json_number_value(value);
            continue;
        }
        if (strcmp(key, "unit") != 0)
            return ss_error_set(err, SS_EINVAL, field,
                                "%s has an unknown key '%s' (known: offset, "
                                "pair_shift, exchange, noise_sd, "
                                "coupling_spread, unit)",
                                path, key);
        if (!json_is_string(value))
            return ss_error_set(err, SS_EINVAL, field,
                                "%s: unit must be a string, not %s", path,
                                cli_json_type_name(value));
        if (json_string_length(value) >= sizeof cal->unit)
            return ss_error_set(err, SS_EINVAL, field,
                                "%s: unit may have at most %zu bytes", path,
                                sizeof cal->unit - 1);
        memcpy(cal->unit, json_string_value(value),
               json_string_length(value) + 1);
    }
    for (size_t k = 0; k < required; k++) {
        if (json_object_get(obj, names[k]) == NULL) {
            snprintf(field, sizeof field, CAL_FIELD ".%s", names[k]);
            return ss_error_set(err, SS_EINVAL, field, "%s is missing '%s'",
                                path, names[k]);
        }
    }
    return SS_OK;
}

ss_status cli_calibration_from_object(const json_t *obj, const char *where,
                                      ss_calibration *out, ss_error *err) {
    ss_calibration cal = ss_calibration_default();
    ss_status st = SS_OK;
    if (!json_is_object(obj))
        st = ss_error_set(err, SS_EINVAL, CAL_FIELD,
                          "%s: the calibration must be a JSON object, not %s",
                          where, cli_json_type_name(obj));
    else
        st = cal_read_object(where, obj, &cal, err);
    if (st != SS_OK)
        return st;
    ss_error inner;
    ss_error_clear(&inner);
    if (ss_calibration_validate(&cal, &inner) != SS_OK) {
        char field[sizeof err->field];
        if (strncmp(inner.field, CAL_FIELD, strlen(CAL_FIELD)) == 0)
            snprintf(field, sizeof field, "%s", inner.field);
        else
            snprintf(field, sizeof field, CAL_FIELD ".%.80s", inner.field);
        return ss_error_set(err, inner.code, field, "%s: %s", where,
                            inner.message);
    }
    *out = cal;
    return SS_OK;
}

ss_status cli_calibration_load(const char *path, ss_calibration *out,
                               ss_error *err) {
    if (path == NULL) {
        *out = ss_calibration_default();
        return SS_OK;
    }
    json_error_t jerr;
    json_t *root = json_load_file(
        path, JSON_REJECT_DUPLICATES | JSON_DECODE_INT_AS_REAL, &jerr);
    if (root == NULL)
        return cal_load_error(path, &jerr, err);
    char where[160];
    snprintf(where, sizeof where, "calibration file '%.120s'", path);
    ss_status st;
    if (!json_is_object(root))
        st = ss_error_set(err, SS_EMALFORMED, CAL_FIELD,
                          "%s must hold a JSON object, not %s", where,
                          cli_json_type_name(root));
    else
        st = cli_calibration_from_object(root, where, out, err);
    json_decref(root);
    return st;
}

ss_status cli_calibration_resolve(const json_t *inline_obj, const char *path,
                                  ss_calibration *out, const char **source,
                                  ss_error *err) {
    if (inline_obj != NULL) {
        *source = "request";
        return cli_calibration_from_object(inline_obj, "request", out, err);
    }
    *source = path ? path : "default";
    return cli_calibration_load(path, out, err);
}
