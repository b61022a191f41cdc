/*
 * cli_json.c — JSON building and printing for the command line.
 *
 * Owns the conversion of numbers, diagrams and calibrations into jansson
 * values, the single-line printing of finished documents on stdout, and the
 * error object printed on stderr.  The exit code is derived from the
 * status table in swapspec.h (its HTTP column), so no command keeps its own
 * mapping from errors to exit codes.
 */
#include "cli_json.h"

#include <math.h>
#include <string.h>

void cli_json_put(json_t *obj, const char *key, json_t *value, ss_error *err) {
    if (err->code != SS_OK) {
        json_decref(value);
        return;
    }
    if (value == NULL || json_object_set_new(obj, key, value) != 0)
        ss_error_set(err, SS_ENOMEM, key, "no memory to render '%s'", key);
}

void cli_json_put_real(json_t *obj, const char *key, double x, ss_error *err) {
    if (err->code != SS_OK)
        return;
    if (!isfinite(x)) {
        ss_error_set(err, SS_ERANGE, key,
                     "the computed value of %s is not a finite number", key);
        return;
    }
    cli_json_put(obj, key, json_real(x), err);
}

void cli_json_put_int(json_t *obj, const char *key, int64_t x, ss_error *err) {
    if (err->code != SS_OK)
        return;
    cli_json_put(obj, key, json_integer((json_int_t)x), err);
}

void cli_json_put_string(json_t *obj, const char *key, const char *s,
                         ss_error *err) {
    if (err->code != SS_OK)
        return;
    json_t *value = json_string(s);
    if (value == NULL) {
        ss_error_set(err, SS_EMALFORMED, key, "%s is not valid UTF-8", key);
        return;
    }
    cli_json_put(obj, key, value, err);
}

void cli_json_append(json_t *arr, json_t *value, ss_error *err) {
    if (err->code != SS_OK) {
        json_decref(value);
        return;
    }
    if (value == NULL || json_array_append_new(arr, value) != 0)
        ss_error_set(err, SS_ENOMEM, "", "no memory to render a list");
}

void cli_json_append_real(json_t *arr, double x, const char *field,
                          ss_error *err) {
    if (err->code != SS_OK)
        return;
    if (!isfinite(x)) {
        ss_error_set(err, SS_ERANGE, field,
                     "a computed value of %s is not a finite number", field);
        return;
    }
    cli_json_append(arr, json_real(x), err);
}

json_t *cli_json_diagram(const uint32_t *rows, unsigned levels) {
    json_t *arr = json_array();
    if (arr == NULL)
        return NULL;
    for (unsigned i = 0; i < levels && rows[i] != 0; i++) {
        if (json_array_append_new(arr, json_integer(rows[i])) != 0) {
            json_decref(arr);
            return NULL;
        }
    }
    return arr;
}

json_t *cli_json_reals(const double *x, size_t n, const char *field,
                       ss_error *err) {
    json_t *arr = json_array();
    if (arr == NULL) {
        ss_error_set(err, SS_ENOMEM, field, "no memory to render %s", field);
        return NULL;
    }
    for (size_t k = 0; k < n; k++)
        cli_json_append_real(arr, x[k], field, err);
    if (err->code != SS_OK) {
        json_decref(arr);
        return NULL;
    }
    return arr;
}

json_t *cli_json_calibration(const ss_calibration *cal, const char *source,
                             ss_error *err) {
    json_t *obj = json_object();
    if (obj == NULL) {
        ss_error_set(err, SS_ENOMEM, "calibration", "no memory");
        return NULL;
    }
    cli_json_put_real(obj, "offset", cal->offset, err);
    cli_json_put_real(obj, "pair_shift", cal->pair_shift, err);
    cli_json_put_real(obj, "exchange", cal->exchange, err);
    cli_json_put_real(obj, "noise_sd", cal->noise_sd, err);
    if (cal->coupling_spread != 0.0)
        cli_json_put_real(obj, "coupling_spread", cal->coupling_spread, err);
    cli_json_put_string(obj, "unit", cal->unit, err);
    cli_json_put_string(obj, "source", source, err);
    if (err->code != SS_OK) {
        json_decref(obj);
        return NULL;
    }
    return obj;
}

ss_status cli_json_emit(const json_t *doc, FILE *out, ss_error *err) {
    if (json_dumpf(doc, out, JSON_REAL_PRECISION(CLI_JSON_DIGITS)) != 0 ||
        fputc('\n', out) == EOF || fflush(out) != 0 || ferror(out))
        return ss_error_set(err, SS_EINTERNAL, "",
                            "could not write the result to standard output");
    return SS_OK;
}

/* A JSON string for text that may hold invalid UTF-8 (a message can quote
 * a user's bytes or be cut inside a character): bytes outside ASCII are
 * replaced by '?' when the text is not valid as it stands. */
static json_t *cli_json_text(const char *text) {
    json_t *s = json_string(text);
    if (s != NULL)
        return s;
    char safe[512];
    size_t k = 0;
    for (; text[k] != '\0' && k + 1 < sizeof safe; k++)
        safe[k] = ((unsigned char)text[k] < 0x80) ? text[k] : '?';
    safe[k] = '\0';
    return json_string(safe);
}

int cli_json_report_error(const ss_error *err, FILE *out) {
    ss_status code = err->code == SS_OK ? SS_EINTERNAL : err->code;
    json_t *obj = json_object();
    if (obj != NULL) {
        json_object_set_new(obj, "error", cli_json_text(err->message));
        json_object_set_new(obj, "field", cli_json_text(err->field));
        json_object_set_new(obj, "code", json_string(ss_status_name(code)));
    }
    if (obj == NULL || json_object_size(obj) != 3 || json_dumpf(obj, out, 0))
        fprintf(out, "{\"error\": \"out of memory while reporting an error\", "
                     "\"field\": \"\", \"code\": \"out-of-memory\"}");
    fputc('\n', out);
    fflush(out);
    json_decref(obj);
    return cli_exit_code(code);
}

int cli_exit_code(ss_status code) {
    if (code == SS_OK)
        return 0;
    return ss_status_http(code) >= 500 ? 1 : 2;
}

const char *cli_json_type_name(const json_t *v) {
    if (v == NULL)
        return "nothing";
    switch (json_typeof(v)) {
    case JSON_OBJECT:
        return "an object";
    case JSON_ARRAY:
        return "an array";
    case JSON_STRING:
        return "a string";
    case JSON_INTEGER:
    case JSON_REAL:
        return "a number";
    case JSON_TRUE:
    case JSON_FALSE:
        return "a boolean";
    case JSON_NULL:
        return "null";
    }
    return "an unknown value";
}

ss_status cli_json_finish(json_t *doc, json_t **doc_out, ss_error *err) {
    if (err->code != SS_OK) {
        json_decref(doc);
        return err->code;
    }
    *doc_out = doc;
    return SS_OK;
}
