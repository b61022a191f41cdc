/*
 * entry_common.c — what the fuzz bodies share: the table of targets, the
 * small work budget, the verdict, and the two checkers every body applies
 * to the outcome of a core or parser call (fuzz_check_failure for an error,
 * fuzz_check_analysis for an analysis result).
 *
 * The analysis invariants are the contract of swapspec.h, checked on every
 * result: a spectrum is finite, within [0, 1], descending and sums to 1
 * within SS_SPECTRUM_SUM_TOL (1e-9, the tolerance the header states for a
 * spectrum); each interval holds its value and lies within [0, 1] (an
 * eigenvalue of a density matrix does); candidates are valid Young diagrams
 * of the run's atoms whose content matches their rows; flags carry a code
 * from the table; the rendered result text (api_render.h) parses back as
 * one JSON object without duplicate keys.  Owns nothing.
 */
#include "fuzz_entry.h"

#include <float.h>
#include <jansson.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "api_render.h"
#include "http.h"

const fuzz_target fuzz_targets[] = {
    {"analysis_body", fuzz_analysis_body_one},
    {"compute_body", fuzz_compute_body_one},
    {"query_path", fuzz_query_path_one},
    {"inversion", fuzz_inversion_one},
};
const size_t fuzz_target_count = sizeof fuzz_targets / sizeof fuzz_targets[0];

const char *const fuzz_request_fields[] = {
    "levels",    "calibration", "measured_at", "runs",  "method", "confidence",
    "bootstrap", "seed",        "window",      "label", NULL};

ss_budget fuzz_budget(void) {
    /* a few thousand diagrams, a Schur table of a few MB and 1e7 units of
     * iterative work (swapspec.h: a unit is about 2.3 ns, so some 25 ms):
     * every input runs in milliseconds even under the sanitizers */
    ss_budget b = {4000u, 200000u, 10000000u, 0};
    return b;
}

int fuzz_fail(fuzz_verdict *v, const char *fmt, ...) {
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(v->message, sizeof v->message, fmt, ap);
    va_end(ap);
    return 1;
}

int fuzz_lenient(const char *tag) {
    const char *list = getenv("FUZZ_LENIENT");
    size_t n = strlen(tag);
    for (const char *p = list; p != NULL && *p != '\0';) {
        size_t len = strcspn(p, ",");
        if (len == n && strncmp(p, tag, n) == 0)
            return 1;
        p += len + (p[len] == ',');
    }
    return 0;
}

static int fuzz_terminated(const char *s, size_t cap) {
    return memchr(s, '\0', cap) != NULL;
}

int fuzz_check_failure(ss_status st, const ss_error *err, const char *where,
                       fuzz_verdict *v) {
    if (st <= SS_OK || st >= SS_STATUS_COUNT)
        return fuzz_fail(v, "%s: status %d is not a failure of the table",
                         where, (int)st);
    if (err->code != st)
        return fuzz_fail(v, "%s: returned %s but the error record says %s",
                         where, ss_status_name(st), ss_status_name(err->code));
    if (!fuzz_terminated(err->field, sizeof err->field) ||
        !fuzz_terminated(err->message, sizeof err->message))
        return fuzz_fail(v, "%s: error record not NUL-terminated", where);
    if (err->message[0] == '\0')
        return fuzz_fail(v, "%s: %s without a message", where,
                         ss_status_name(st));
    if (st == SS_EINTERNAL && !fuzz_lenient("internal"))
        return fuzz_fail(v,
                         "%s: internal error (HTTP 500) on client input: "
                         "field '%s': %s",
                         where, err->field, err->message);
    /* a value or a limit at fault must be named (swapspec.h: "field is a
     * JSON-pointer-like path ... or "" when no field applies"); the empty
     * key is the one name a path cannot hold */
    if ((st == SS_EINVAL || st == SS_EBUDGET) && err->field[0] == '\0' &&
        strstr(err->message, "unknown field ''") == NULL)
        return fuzz_fail(v, "%s: %s names no field: %s", where,
                         ss_status_name(st), err->message);
    return 0;
}

static int fuzz_check_spectrum(const ss_analysis *a, fuzz_verdict *v) {
    unsigned d = a->levels;
    long double sum = 0;
    for (unsigned i = 0; i < d; i++) {
        double x = a->values[i];
        if (!isfinite(x) || x < 0.0 || x > 1.0)
            return fuzz_fail(v, "spectrum value %u is %.17g (not in [0,1])", i,
                             x);
        /* FUZZ_LENIENT=order: forgive up to 4 ulp out of order */
        if (i > 0 && x > a->values[i - 1] &&
            !(fuzz_lenient("order") &&
              x <= a->values[i - 1] + 4 * DBL_EPSILON * a->values[i - 1]))
            return fuzz_fail(v, "spectrum not descending at %u: %.17g > %.17g",
                             i, x, a->values[i - 1]);
        sum += (long double)x;
    }
    if (fabsl(sum - 1.0L) > (long double)SS_SPECTRUM_SUM_TOL)
        return fuzz_fail(v, "spectrum sums to 1 %+.3Lg", sum - 1.0L);
    /* FUZZ_LENIENT=region: skip the intervals of a confidence region */
    if (a->interval == SS_INTERVAL_REGION && fuzz_lenient("region"))
        return 0;
    for (unsigned i = 0; i < d; i++) {
        double lo = a->lower[i], hi = a->upper[i], x = a->values[i];
        if (!(lo <= x && x <= hi))
            return fuzz_fail(v,
                             "interval %u (%s) [%.17g, %.17g] does not hold "
                             "the value %.17g",
                             i, ss_interval_name(a->interval), lo, hi, x);
        if (!(lo >= 0.0 && hi <= 1.0))
            return fuzz_fail(v, "interval %u (%s) [%.17g, %.17g] leaves [0,1]",
                             i, ss_interval_name(a->interval), lo, hi);
    }
    return 0;
}

static int fuzz_check_runs(const ss_analysis_request *req, const ss_analysis *a,
                           fuzz_verdict *v) {
    if (a->run_count != req->run_count || a->runs == NULL)
        return fuzz_fail(v, "%zu run results for %zu runs", a->run_count,
                         req->run_count);
    for (size_t r = 0; r < a->run_count; r++) {
        const ss_run_result *rr = &a->runs[r];
        if (rr->atoms != req->runs[r].atoms)
            return fuzz_fail(v, "run %zu: %u atoms, the request says %u", r,
                             rr->atoms, req->runs[r].atoms);
        /* with nothing in the window the list holds the diagrams of the
         * nearest energy instead (candidates.c), all of one content */
        int nearest = rr->window_count == 0 && rr->candidate_count > 0;
        for (size_t k = 1; nearest && k < rr->candidate_count; k++)
            nearest = rr->candidates[k].content == rr->candidates[0].content;
        if (rr->candidate_count > SS_CANDIDATES_MAX ||
            (rr->candidate_count > rr->window_count && !nearest) ||
            (rr->candidate_count > 0 && rr->candidates == NULL))
            return fuzz_fail(v, "run %zu: %zu candidates of %zu in window", r,
                             rr->candidate_count, rr->window_count);
        for (size_t k = 0; k < rr->candidate_count; k++) {
            const ss_candidate *c = &rr->candidates[k];
            if (!ss_diagram_is_valid(c->rows, a->levels, rr->atoms))
                return fuzz_fail(v,
                                 "run %zu candidate %zu: not a diagram of "
                                 "%u atoms",
                                 r, k, rr->atoms);
            if (c->content != ss_diagram_content(c->rows, a->levels))
                return fuzz_fail(v,
                                 "run %zu candidate %zu: content %lld does "
                                 "not match its rows",
                                 r, k, (long long)c->content);
            /* swapspec.h: a distribution table sums to 1 ± 1e-12, so
             * one entry may pass 1 by as much */
            if (!isnan(c->probability) &&
                !(c->probability >= 0.0 && c->probability <= 1.0 + 1e-12))
                return fuzz_fail(v, "run %zu candidate %zu: probability %.17g",
                                 r, k, c->probability);
            if (c->degenerate_group > rr->degenerate_group_count)
                return fuzz_fail(v, "run %zu candidate %zu: group %u of %u", r,
                                 k, c->degenerate_group,
                                 rr->degenerate_group_count);
        }
    }
    return 0;
}

/* The value of the flag's number called name, or NaN. */
static double fuzz_flag_number(const ss_flag *f, const char *name) {
    for (unsigned i = 0; i < f->number_count && i < SS_FLAG_NUMBERS_MAX; i++)
        if (strcmp(f->numbers[i].name, name) == 0)
            return f->numbers[i].value;
    return (double)NAN;
}

/* outside-physical-region: the Mahalanobis distance d_M of (P2, P3) to the
 * region bounds each coordinate's standardised gap (Cauchy–Schwarz:
 * |e1·(θ − x)| <= sqrt(Σ11)·d_M), and every physical P2 lies in [1/d, 1]
 * (domain notes §2), so distance_se >= dist(P2, [1/d, 1]) / P2's standard
 * error, whatever minimiser found the nearest point (its value can only be
 * above the true minimum).  Relative slack 1e-6 for rounding. */
static int fuzz_check_outside(const ss_analysis *a, const ss_flag *f,
                              fuzz_verdict *v) {
    double dist = fuzz_flag_number(f, "distance_se");
    double p2 = fuzz_flag_number(f, "p2"),
           se = fuzz_flag_number(f, "p2_stderr");
    if (!isfinite(dist) || dist < 0)
        return fuzz_fail(v, "outside-physical-region with distance_se %.17g",
                         dist);
    if (!isfinite(p2) || !isfinite(se) || !(se > 0))
        return 0;
    double lo = 1.0 / a->levels;
    double gap = p2 < lo ? lo - p2 : p2 > 1.0 ? p2 - 1.0 : 0.0;
    double bound = gap / se;
    if (dist < bound * (1.0 - 1e-6) - 1e-9)
        return fuzz_fail(v,
                         "outside-physical-region: P2 = %.17g (se %.3g) is "
                         "%.6g standard errors outside [1/%u, 1], but "
                         "distance_se is %.17g",
                         p2, se, bound, a->levels, dist);
    return 0;
}

static int fuzz_check_flags(const ss_analysis *a, fuzz_verdict *v) {
    if (a->flag_count > 0 && a->flags == NULL)
        return fuzz_fail(v, "%zu flags but no array", a->flag_count);
    for (size_t k = 0; k < a->flag_count; k++) {
        const ss_flag *f = &a->flags[k];
        if ((unsigned)f->code >= SS_FLAG_COUNT)
            return fuzz_fail(v, "flag %zu: code %d", k, (int)f->code);
        if (f->run < -1 || (f->run >= 0 && (size_t)f->run >= a->run_count))
            return fuzz_fail(v, "flag %zu (%s): run %d of %zu", k,
                             ss_flag_name(f->code), f->run, a->run_count);
        if (!fuzz_terminated(f->message, sizeof f->message) ||
            f->message[0] == '\0' || f->number_count > SS_FLAG_NUMBERS_MAX)
            return fuzz_fail(v, "flag %zu (%s): bad message or %u numbers", k,
                             ss_flag_name(f->code), f->number_count);
        for (unsigned i = 0; i < f->number_count; i++)
            if (!fuzz_terminated(f->numbers[i].name,
                                 sizeof f->numbers[i].name) ||
                f->numbers[i].name[0] == '\0')
                return fuzz_fail(v, "flag %zu (%s): number %u has no name", k,
                                 ss_flag_name(f->code), i);
        if (f->code == SS_FLAG_OUTSIDE_PHYSICAL && fuzz_check_outside(a, f, v))
            return 1;
    }
    return 0;
}

static int fuzz_check_render(const ss_analysis_request *req,
                             const ss_analysis *a, fuzz_verdict *v) {
    ss_error err;
    ss_error_clear(&err);
    size_t len = 0;
    char *text = api_render_analysis_text(a, &req->calibration, "fuzz", NULL,
                                          NULL, &len, &err);
    if (text == NULL)
        return err.code == SS_ENOMEM ? 0
                                     : fuzz_fail(v, "rendering failed: %s: %s",
                                                 err.field, err.message);
    int bad = 0;
    json_error_t jerr;
    json_t *doc = NULL;
    if (strlen(text) != len)
        bad = fuzz_fail(v, "rendered text has %zu bytes, said %zu",
                        strlen(text), len);
    else if ((doc = json_loadb(text, len, JSON_REJECT_DUPLICATES, &jerr)) ==
             NULL)
        bad = fuzz_fail(v, "rendered text is not JSON: %s at %d: %.200s",
                        jerr.text, jerr.position, text);
    else if (!json_is_object(doc))
        bad = fuzz_fail(v, "rendered text is not an object");
    json_decref(doc);
    free(text);
    return bad;
}

int fuzz_check_analysis(const ss_analysis_request *req, const ss_analysis *a,
                        fuzz_verdict *v) {
    if (a == NULL)
        return fuzz_fail(v, "SS_OK without a result");
    if (a->levels != req->levels)
        return fuzz_fail(v, "result has %u levels, request %u", a->levels,
                         req->levels);
    if (a->method == SS_METHOD_AUTO || (unsigned)a->method > SS_METHOD_DIAGRAMS)
        return fuzz_fail(v, "method used is %d", (int)a->method);
    if (req->method != SS_METHOD_AUTO && a->method != req->method)
        return fuzz_fail(v, "asked for %s, got %s", ss_method_name(req->method),
                         ss_method_name(a->method));
    if (a->has_spectrum && fuzz_check_spectrum(a, v))
        return 1;
    if (fuzz_check_runs(req, a, v) || fuzz_check_flags(a, v))
        return 1;
    return fuzz_check_render(req, a, v);
}

/* 1 when field (an error path) resolves in doc: every segment of its JSON
 * pointer (http_field_pointer, the one the problem document shows) but the
 * last exists, and the last too when must_exist. */
int fuzz_field_resolves(const json_t *doc, const char *field, int must_exist) {
    char ptr[512]; /* roomy: every '~' and '/' doubles */
    http_field_pointer(field, ptr, sizeof ptr);
    const json_t *node = doc;
    const char *s = ptr;
    while (*s == '/') {
        char seg[128];
        size_t n = 0;
        for (s++; *s && *s != '/' && n + 1 < sizeof seg; s++) {
            if (*s == '~' && (s[1] == '0' || s[1] == '1')) {
                seg[n++] = s[1] == '0' ? '~' : '/';
                s++;
            } else {
                seg[n++] = *s;
            }
        }
        seg[n] = '\0';
        const json_t *child = NULL;
        if (json_is_object(node)) {
            child = json_object_get(node, seg);
        } else if (json_is_array(node)) {
            char *end = NULL;
            unsigned long i = strtoul(seg, &end, 10);
            if (seg[0] >= '0' && seg[0] <= '9' && *end == '\0')
                child = json_array_get(node, i);
        }
        if (child == NULL)
            return *s == '\0' && !must_exist;
        node = child;
    }
    return 1;
}

/* 1 when some key of doc (at any depth up to 64) cannot be written as a
 * segment of an error path: empty, or holding '.', '[' or ']' (the path's
 * separators), or longer than the 60 bytes an error quotes. */
static int fuzz_odd_key(const json_t *doc, int depth) {
    const char *key;
    json_t *value;
    size_t i;
    if (depth > 64)
        return 1;
    if (json_is_array(doc)) {
        json_array_foreach(doc, i,
                           value) if (fuzz_odd_key(value, depth + 1)) return 1;
        return 0;
    }
    if (!json_is_object(doc))
        return 0;
    json_object_foreach((json_t *)doc, key, value) {
        if (key[0] == '\0' || strpbrk(key, ".[]") != NULL || strlen(key) > 60 ||
            fuzz_odd_key(value, depth + 1))
            return 1;
    }
    return 0;
}

int fuzz_check_field(const json_t *doc, const ss_error *err, const char *where,
                     fuzz_verdict *v) {
    if (fuzz_odd_key(doc, 0))
        return 0;
    int unknown = strstr(err->message, "unknown field") != NULL ||
                  strstr(err->message, "unknown key") != NULL;
    if (!fuzz_field_resolves(doc, err->field, unknown))
        return fuzz_fail(v,
                         "%s: the error names '%s', not in the document "
                         "(%s)",
                         where, err->field, err->message);
    return 0;
}

int fuzz_field_among(const char *field, const char *const *names) {
    static const char *const budget[] = {"max_diagrams", "max_table_cells",
                                         "max_work", "max_seconds", NULL};
    size_t n = strcspn(field, ".[");
    if (field[0] == '\0' || fuzz_lenient("names"))
        return 1;
    for (const char *const *list = names; list != NULL;
         list = list == budget ? NULL : budget)
        for (size_t i = 0; list[i] != NULL; i++)
            if (strlen(list[i]) == n && strncmp(field, list[i], n) == 0)
                return 1;
    return 0;
}
