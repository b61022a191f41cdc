/*
 * request.c — analysis requests: defaults, method and flag names, strict
 * validation (every error names its field path, e.g.
 * "runs[2].energy_variance", and says why), and conversion of each run to
 * content units (ss__run_stats).  Owns no memory beyond what it returns.
 */
#include "internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const char *const ss__method_names[] = {"auto", "moments", "likelihood",
                                               "diagrams"};

const char *ss_method_name(ss_method m) {
    if ((unsigned)m > SS_METHOD_DIAGRAMS)
        return "unknown";
    return ss__method_names[m];
}

ss_status ss_method_parse(const char *name, ss_method *out) {
    for (unsigned i = 0; name && i <= SS_METHOD_DIAGRAMS; i++)
        if (strcmp(name, ss__method_names[i]) == 0) {
            *out = (ss_method)i;
            return SS_OK;
        }
    return SS_EINVAL;
}

static const char *const ss__interval_names[] = {
    "delta-method", "bootstrap-percentile", "confidence-region",
    "profile-likelihood"};

const char *ss_interval_name(ss_interval_kind k) {
    if ((unsigned)k > SS_INTERVAL_PROFILE)
        return "unknown";
    return ss__interval_names[k];
}

static const char *const ss__flag_names[] = {
#define SS_X_FLAGNAME(e, name) name,
    SS_FLAG_MAP(SS_X_FLAGNAME)
#undef SS_X_FLAGNAME
};

const char *ss_flag_name(ss_flag_code code) {
    if ((unsigned)code >= SS_FLAG_COUNT)
        return "unknown";
    return ss__flag_names[code];
}

ss_analysis_request ss_analysis_request_default(void) {
    ss_analysis_request r;
    memset(&r, 0, sizeof r);
    r.calibration = ss_calibration_default();
    r.method = SS_METHOD_AUTO;
    r.confidence = 0.95;
    r.seed = 1;
    r.window = 3.0;
    r.budget = ss_budget_default();
    return r;
}

/* The field path of run i is formatted only when there is an error. */
#define SS__RUN_FAIL(code, name, ...)                                          \
    do {                                                                       \
        snprintf(field, sizeof field, "runs[%zu].%s", i, name);                \
        return ss_error_set(err, code, field, __VA_ARGS__);                    \
    } while (0)

static ss_status ss__validate_run(const ss_analysis_request *req, size_t i,
                                  ss_error *err) {
    const ss_run *r = &req->runs[i];
    char field[64];
    if (r->atoms < 2 || r->atoms > SS_ATOMS_MAX)
        SS__RUN_FAIL(SS_EINVAL, "atoms",
                     "atoms must be an integer from 2 to %d (one atom has no "
                     "pair to interact), got %u",
                     SS_ATOMS_MAX, r->atoms);
    uint64_t count = ss_diagram_count(r->atoms, req->levels);
    uint64_t max_diagrams = ss__budget_or_default(&req->budget).max_diagrams;
    if (count > max_diagrams)
        SS__RUN_FAIL(SS_EBUDGET, "atoms",
                     "%u atoms with %u levels have %llu Young diagrams; the "
                     "work budget max_diagrams allows %llu",
                     r->atoms, req->levels, (unsigned long long)count,
                     (unsigned long long)max_diagrams);
    if (r->energies != NULL) {
        if (r->energy_count < 2)
            SS__RUN_FAIL(SS_EINVAL, "energies",
                         "a per-shot run needs at least 2 readings, got %zu",
                         r->energy_count);
        if (r->energy_count > SS_SHOTS_MAX)
            SS__RUN_FAIL(SS_EINVAL, "energies",
                         "at most %d readings per run, got %zu", SS_SHOTS_MAX,
                         r->energy_count);
        for (size_t k = 0; k < r->energy_count; k++)
            if (!isfinite(r->energies[k])) {
                snprintf(field, sizeof field, "runs[%zu].energies[%zu]", i, k);
                return ss_error_set(err, SS_EINVAL, field,
                                    "readings must be finite numbers");
            }
        return SS_OK;
    }
    if (r->shots < 2)
        SS__RUN_FAIL(SS_EINVAL, "shots",
                     "a summary run needs at least 2 shots for a variance, "
                     "got %zu",
                     r->shots);
    if (r->shots > SS_SHOTS_MAX)
        SS__RUN_FAIL(SS_EINVAL, "shots", "at most %d shots per run, got %zu",
                     SS_SHOTS_MAX, r->shots);
    if (!isfinite(r->mean_energy))
        SS__RUN_FAIL(SS_EINVAL, "mean_energy", "must be a finite number");
    if (!isfinite(r->energy_variance))
        SS__RUN_FAIL(SS_EINVAL, "energy_variance", "must be a finite number");
    if (r->energy_variance < 0)
        SS__RUN_FAIL(SS_EINVAL, "energy_variance",
                     "a variance cannot be negative, got %.17g",
                     r->energy_variance);
    return SS_OK;
}
#undef SS__RUN_FAIL

/* Readings beyond any physical value by more than SS__SCALE_FACTOR (the
 * content sum of n atoms lies in [−C(n,2), C(n,2)], its variance below
 * C(n,2)²) are refused: they come from wrong units or a wrong calibration,
 * and the numbers they would feed the fits (1e300) overflow there. */
#define SS__SCALE_FACTOR 1e6

static ss_status ss__validate_scale(const ss_analysis_request *req, size_t i,
                                    ss_error *err) {
    const ss_run *r = &req->runs[i];
    const ss_calibration *cal = &req->calibration;
    double n = r->atoms, pairs = fmax(0.5 * n * (n - 1.0), 1.0);
    double limit = SS__SCALE_FACTOR * pairs;
    char field[64];
    if (r->energies != NULL) {
        for (size_t k = 0; k < r->energy_count; k++) {
            double c = ss_calibration_content(cal, r->atoms, r->energies[k]);
            if (!(fabs(c) <= limit)) {
                snprintf(field, sizeof field, "runs[%zu].energies[%zu]", i, k);
                return ss_error_set(
                    err, SS_EINVAL, field,
                    "the reading %.6g is content %.3g under the calibration, "
                    "beyond any physical value (|c| <= C(n,2) = %.0f) by "
                    "more than a factor %.0e: check the units and the "
                    "calibration",
                    r->energies[k], c, pairs, SS__SCALE_FACTOR);
            }
        }
        return SS_OK;
    }
    double c = ss_calibration_content(cal, r->atoms, r->mean_energy);
    double v = r->energy_variance / (cal->exchange * cal->exchange);
    if (!(fabs(c) <= limit)) {
        snprintf(field, sizeof field, "runs[%zu].mean_energy", i);
        return ss_error_set(err, SS_EINVAL, field,
                            "the mean energy %.6g is content %.3g under the "
                            "calibration, beyond any physical value (|c| <= "
                            "C(n,2) = %.0f) by more than a factor %.0e: check "
                            "the units and the calibration",
                            r->mean_energy, c, pairs, SS__SCALE_FACTOR);
    }
    if (!(v <= limit * limit)) {
        snprintf(field, sizeof field, "runs[%zu].energy_variance", i);
        return ss_error_set(err, SS_EINVAL, field,
                            "the energy variance %.6g is %.3g in content "
                            "units², beyond any physical value (<= C(n,2)² = "
                            "%.0f) by more than a factor %.0e²: check the "
                            "units and the calibration",
                            r->energy_variance, v, pairs * pairs,
                            SS__SCALE_FACTOR);
    }
    return SS_OK;
}

ss_status ss__request_validate(const ss_analysis_request *req, ss_error *err) {
    if (req == NULL)
        return ss_error_set(err, SS_EINVAL, "", "no request");
    if (req->levels < SS_LEVELS_MIN || req->levels > SS_LEVELS_MAX)
        return ss_error_set(err, SS_EINVAL, "levels",
                            "levels must be an integer from %d to %d, got %u",
                            SS_LEVELS_MIN, SS_LEVELS_MAX, req->levels);
    ss_status st = ss_calibration_validate(&req->calibration, err);
    if (st != SS_OK)
        return st;
    if ((unsigned)req->method > SS_METHOD_DIAGRAMS)
        return ss_error_set(err, SS_EINVAL, "method",
                            "method must be auto, moments, likelihood or "
                            "diagrams");
    if (!(req->confidence > 0.0 && req->confidence < 1.0))
        return ss_error_set(err, SS_EINVAL, "confidence",
                            "confidence must lie strictly between 0 and 1, "
                            "got %.17g",
                            req->confidence);
    if (!(req->window > 0.0) || !isfinite(req->window))
        return ss_error_set(err, SS_EINVAL, "window",
                            "window must be a positive number of standard "
                            "deviations");
    if (req->runs == NULL || req->run_count == 0)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at least one run is needed");
    if (req->run_count > SS_RUNS_MAX)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at most %d runs per request, got %zu", SS_RUNS_MAX,
                            req->run_count);
    double total = 0;
    for (size_t i = 0; i < req->run_count; i++) {
        st = ss__validate_run(req, i, err);
        if (st == SS_OK)
            st = ss__validate_scale(req, i, err);
        if (st != SS_OK)
            return st;
        const ss_run *r = &req->runs[i];
        total += (double)(r->energies ? r->energy_count : r->shots);
    }
    if (total > (double)SS_SHOTS_MAX * 10)
        return ss_error_set(err, SS_EINVAL, "runs",
                            "at most %d shots per request, got %.0f",
                            SS_SHOTS_MAX * 10, total);
    if (req->bootstrap > SS_BOOTSTRAP_MAX)
        return ss_error_set(err, SS_EINVAL, "bootstrap",
                            "at most %d bootstrap replicates, got %u",
                            SS_BOOTSTRAP_MAX, req->bootstrap);
    /* the work of the tables and the bootstrap: ss__analysis_cost */
    return SS_OK;
}

void ss__run_stats_fill(const ss_analysis_request *req, ss__run_stats *rs) {
    const ss_calibration *cal = &req->calibration;
    double J = cal->exchange;
    for (size_t i = 0; i < req->run_count; i++) {
        const ss_run *r = &req->runs[i];
        ss__run_stats *s = &rs[i];
        memset(s, 0, sizeof *s);
        s->atoms = r->atoms;
        s->tau2 = (cal->noise_sd / J) * (cal->noise_sd / J);
        if (r->energies) {
            size_t K = r->energy_count;
            long double sum = 0, c2 = 0, c3 = 0, c4 = 0;
            for (size_t k = 0; k < K; k++)
                sum += r->energies[k];
            long double mean = sum / K;
            for (size_t k = 0; k < K; k++) {
                long double dv = r->energies[k] - mean;
                c2 += dv * dv;
                c3 += dv * dv * dv;
                c4 += dv * dv * dv * dv;
            }
            s->per_shot = 1;
            s->shots = K;
            s->mean_energy = (double)mean;
            s->energy_variance = (double)(c2 / (K - 1));
            s->m3 = (double)(c3 / K) / (J * J * J);
            s->m4 = (double)(c4 / K) / (J * J * J * J);
        } else {
            s->shots = r->shots;
            s->mean_energy = r->mean_energy;
            s->energy_variance = r->energy_variance;
        }
        s->y1 = ss_calibration_content(cal, r->atoms, s->mean_energy);
        s->s2 = s->energy_variance / (J * J);
        s->y2 = s->s2 - s->tau2;
    }
}
