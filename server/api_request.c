/*
 * api_request.c — strict decoding of an analysis request document into the
 * core's ss_analysis_request (see api_request.h for the format).
 *
 * Owns the run and energy arrays it allocates for the request; the core
 * validates the values themselves (ranges, finiteness, limits) and names the
 * same field paths, so this file checks only shape and types.  A calibration
 * by reference is only recorded here (name, pinned version, measured_at);
 * api_calibration.c resolves it against the store.
 */
#include "api_request.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "calibration_file.h"
#include "cli_json.h"
#include "store.h"

static int req_key_known(const char *key, const char *const *known) {
    for (size_t k = 0; known[k] != NULL; k++)
        if (strcmp(key, known[k]) == 0)
            return 1;
    return 0;
}

/* Every key of obj must be in known (NULL-terminated). */
static ss_status req_check_keys(const json_t *obj, const char *prefix,
                                const char *const *known, ss_error *err) {
    const char *key;
    json_t *value;
    json_object_foreach((json_t *)obj, key, value) {
        (void)value;
        if (!req_key_known(key, known)) {
            char field[96];
            snprintf(field, sizeof field, "%s%s%.60s", prefix,
                     prefix[0] ? "." : "", key);
            return ss_error_set(err, SS_EINVAL, field, "unknown field '%.60s'",
                                key);
        }
    }
    return SS_OK;
}

/* A number; missing is fine unless required. 1 when present. */
static int req_number(const json_t *obj, const char *key, const char *field,
                      int required, double *out, ss_error *err) {
    json_t *v = json_object_get(obj, key);
    if (v == NULL) {
        if (required)
            ss_error_set(err, SS_EINVAL, field, "missing required field");
        return 0;
    }
    if (!json_is_number(v)) {
        ss_error_set(err, SS_EINVAL, field, "must be a number, not %s",
                     cli_json_type_name(v));
        return 0;
    }
    *out = json_number_value(v);
    return 1;
}

/* A non-negative integer below limit (exact: no fraction). */
static int req_count(const json_t *obj, const char *key, const char *field,
                     int required, double limit, unsigned long long *out,
                     ss_error *err) {
    double x = 0;
    if (!req_number(obj, key, field, required, &x, err))
        return 0;
    /* the range first: casting a double beyond the integer type is
     * undefined behaviour (C17 6.3.1.4) */
    if (!(x >= 0) || x > limit || x != (double)(unsigned long long)x) {
        ss_error_set(err, SS_EINVAL, field,
                     "must be a whole number from 0 to %.0f, got %.17g", limit,
                     x);
        return 0;
    }
    *out = (unsigned long long)x;
    return 1;
}

static ss_status req_run(const json_t *run, size_t i, api_request *out,
                         size_t *energy_used, ss_error *err) {
    static const char *const known[] = {
        "atoms", "shots", "mean_energy", "energy_variance", "energies", NULL};
    char prefix[32], field[96];
    snprintf(prefix, sizeof prefix, "runs[%zu]", i);
    if (!json_is_object(run))
        return ss_error_set(err, SS_EINVAL, prefix,
                            "each run must be an object, not %s",
                            cli_json_type_name(run));
    ss_status st = req_check_keys(run, prefix, known, err);
    if (st != SS_OK)
        return st;
    ss_run *r = &out->runs[i];
    unsigned long long u = 0;
    snprintf(field, sizeof field, "%s.atoms", prefix);
    if (!req_count(run, "atoms", field, 1, 4294967295.0, &u, err))
        return err->code;
    r->atoms = (unsigned)u;
    json_t *energies = json_object_get(run, "energies");
    if (energies != NULL) {
        snprintf(field, sizeof field, "%s.energies", prefix);
        if (!json_is_array(energies))
            return ss_error_set(err, SS_EINVAL, field,
                                "must be an array of numbers, not %s",
                                cli_json_type_name(energies));
        const char *summary[] = {"shots", "mean_energy", "energy_variance"};
        for (size_t k = 0; k < 3; k++)
            if (json_object_get(run, summary[k]) != NULL) {
                snprintf(field, sizeof field, "%s.%s", prefix, summary[k]);
                return ss_error_set(err, SS_EINVAL, field,
                                    "a run gives either per-shot energies "
                                    "or shots, mean_energy and "
                                    "energy_variance, not both");
            }
        size_t n = json_array_size(energies);
        r->energies = out->energies + *energy_used;
        r->energy_count = n;
        for (size_t k = 0; k < n; k++) {
            json_t *v = json_array_get(energies, k);
            if (!json_is_number(v)) {
                snprintf(field, sizeof field, "%s.energies[%zu]", prefix, k);
                return ss_error_set(err, SS_EINVAL, field,
                                    "must be a number, not %s",
                                    cli_json_type_name(v));
            }
            out->energies[*energy_used + k] = json_number_value(v);
        }
        *energy_used += n;
        return SS_OK;
    }
    snprintf(field, sizeof field, "%s.shots", prefix);
    if (!req_count(run, "shots", field, 1, 1e15, &u, err))
        return err->code;
    r->shots = (size_t)u;
    snprintf(field, sizeof field, "%s.mean_energy", prefix);
    if (!req_number(run, "mean_energy", field, 1, &r->mean_energy, err))
        return err->code;
    snprintf(field, sizeof field, "%s.energy_variance", prefix);
    if (!req_number(run, "energy_variance", field, 1, &r->energy_variance, err))
        return err->code;
    return SS_OK;
}

static ss_status req_runs(const json_t *runs, api_request *out, ss_error *err) {
    if (runs == NULL)
        return ss_error_set(err, SS_EINVAL, "runs", "missing required field");
    if (!json_is_array(runs))
        return ss_error_set(err, SS_EINVAL, "runs",
                            "must be an array of runs, not %s",
                            cli_json_type_name(runs));
    size_t n = json_array_size(runs), total = 0;
    if (n == 0)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at least one run is needed");
    if (n > SS_RUNS_MAX)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at most %d runs per request, got %zu", SS_RUNS_MAX,
                            n);
    for (size_t i = 0; i < n; i++) {
        json_t *e = json_object_get(json_array_get(runs, i), "energies");
        if (json_is_array(e))
            total += json_array_size(e);
    }
    if (total > (size_t)SS_SHOTS_MAX * 10)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at most %d per-shot readings per request, got "
                            "%zu",
                            SS_SHOTS_MAX * 10, total);
    out->runs = calloc(n, sizeof *out->runs);
    out->energies = malloc((total ? total : 1) * sizeof *out->energies);
    if (out->runs == NULL || out->energies == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "no memory for the runs");
    size_t used = 0;
    for (size_t i = 0; i < n; i++) {
        ss_status st = req_run(json_array_get(runs, i), i, out, &used, err);
        if (st != SS_OK)
            return st;
    }
    out->req.runs = out->runs;
    out->req.run_count = n;
    return SS_OK;
}

static ss_status req_options(const json_t *root, api_request *out,
                             ss_error *err) {
    ss_analysis_request *q = &out->req;
    unsigned long long u = 0;
    json_t *m = json_object_get(root, "method");
    if (m != NULL &&
        (!json_is_string(m) ||
         ss_method_parse(json_string_value(m), &q->method) != SS_OK))
        return ss_error_set(err, SS_EINVAL, "method",
                            "must be one of \"auto\", \"moments\", "
                            "\"likelihood\", \"diagrams\"");
    double x = 0;
    if (req_number(root, "confidence", "confidence", 0, &x, err))
        q->confidence = x;
    if (err->code == SS_OK && req_number(root, "window", "window", 0, &x, err))
        q->window = x;
    if (err->code == SS_OK &&
        req_count(root, "bootstrap", "bootstrap", 0, 4294967295.0, &u, err))
        q->bootstrap = (unsigned)u;
    if (err->code == SS_OK &&
        req_count(root, "seed", "seed", 0, 18446744073709549568.0, &u, err))
        q->seed = u;
    if (err->code != SS_OK)
        return err->code;
    json_t *label = json_object_get(root, "label");
    if (label != NULL) {
        if (!json_is_string(label))
            return ss_error_set(err, SS_EINVAL, "label",
                                "must be a string, not %s",
                                cli_json_type_name(label));
        if (json_string_length(label) >= sizeof out->label)
            return ss_error_set(err, SS_EINVAL, "label",
                                "may have at most %zu bytes",
                                sizeof out->label - 1);
        memcpy(out->label, json_string_value(label),
               json_string_length(label) + 1);
    }
    return SS_OK;
}

/* "calibration": inline numbers, or {"ref": NAME, "version"?: N}. */
static ss_status req_calibration(const json_t *cal, api_request *out,
                                 ss_error *err) {
    if (cal == NULL)
        return SS_OK;
    json_t *ref = json_object_get(cal, "ref");
    if (!json_is_object(cal) || ref == NULL) {
        out->cal_inline = 1;
        return cli_calibration_from_object(cal, "request",
                                           &out->req.calibration, err);
    }
    const char *key;
    json_t *value;
    json_object_foreach((json_t *)cal, key, value) {
        (void)value;
        if (strcmp(key, "ref") != 0 && strcmp(key, "version") != 0) {
            char field[96];
            snprintf(field, sizeof field, "calibration.%.60s", key);
            return ss_error_set(err, SS_EINVAL, field,
                                "unknown field '%.60s': a calibration by "
                                "reference has only ref and version (give "
                                "the numbers inline instead)",
                                key);
        }
    }
    if (!json_is_string(ref) ||
        !store_calibration_name_valid(json_string_value(ref)))
        return store_calibration_name_error(json_string_value(ref),
                                            "calibration.ref", err);
    unsigned long long v = 0;
    if (json_object_get(cal, "version") != NULL &&
        (!req_count(cal, "version", "calibration.version", 1, 2147483647.0, &v,
                    err) ||
         v == 0))
        return ss_error_set(err, SS_EINVAL, "calibration.version",
                            "version must be a whole number from 1 to "
                            "2147483647");
    snprintf(out->cal_ref, sizeof out->cal_ref, "%s", json_string_value(ref));
    out->cal_ref_version = (unsigned)v;
    return SS_OK;
}

static ss_status req_measured_at(const json_t *v, api_request *out,
                                 ss_error *err) {
    if (v == NULL)
        return SS_OK;
    if (!json_is_string(v) ||
        store_time_normalize(json_string_value(v), out->measured_at) != 0)
        return ss_error_set(err, SS_EINVAL, "measured_at",
                            "measured_at must be an RFC 3339 date-time such "
                            "as 2026-12-02T03:50:12Z");
    return SS_OK;
}

ss_status api_request_from_json(const json_t *root, api_request *out,
                                ss_error *err) {
    static const char *const known[] = {
        "levels", "calibration", "measured_at", "runs",
        "method", "confidence",  "bootstrap",   "seed",
        "window", "label",       NULL};
    memset(out, 0, sizeof *out);
    out->req = ss_analysis_request_default();
    ss_status st;
    if (!json_is_object(root)) {
        st = ss_error_set(err, SS_EMALFORMED, "",
                          "the request must be a JSON object, not %s",
                          cli_json_type_name(root));
        goto fail;
    }
    st = req_check_keys(root, "", known, err);
    if (st != SS_OK)
        goto fail;
    unsigned long long levels = 0;
    if (!req_count(root, "levels", "levels", 1, 4294967295.0, &levels, err)) {
        st = err->code;
        goto fail;
    }
    out->req.levels = (unsigned)levels;
    st = req_calibration(json_object_get(root, "calibration"), out, err);
    if (st == SS_OK)
        st = req_measured_at(json_object_get(root, "measured_at"), out, err);
    if (st != SS_OK)
        goto fail;
    st = req_runs(json_object_get(root, "runs"), out, err);
    if (st == SS_OK)
        st = req_options(root, out, err);
    if (st == SS_OK)
        return SS_OK;
fail:
    api_request_release(out);
    return st;
}

ss_status api_request_parse_text(const char *text, size_t len, api_request *out,
                                 ss_error *err) {
    json_error_t jerr;
    json_t *root = json_loadb(
        text, len, JSON_REJECT_DUPLICATES | JSON_DECODE_INT_AS_REAL, &jerr);
    if (root == NULL) {
        memset(out, 0, sizeof *out);
        return ss_error_set(err, SS_EMALFORMED, "",
                            "the request is not valid JSON: %s (line %d, "
                            "column %d)",
                            jerr.text, jerr.line, jerr.column);
    }
    ss_status st = api_request_from_json(root, out, err);
    json_decref(root);
    return st;
}

void api_request_release(api_request *r) {
    if (r == NULL)
        return;
    free(r->runs);
    free(r->energies);
    r->runs = NULL;
    r->energies = NULL;
    r->req.runs = NULL;
}
