/*
 * svg_model.c — reads a stored request and result into an svg_analysis and
 * computes the predicted law of the readings per atom number with the
 * core (ss_distribution_compute, ss_levels_alloc, ss_calibration_energy),
 * under a work budget shared by the whole page.  Owns the arrays of the
 * values it fills, released by svg_analysis_release and svg_laws_free.
 */
#include "svg_model.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A number member, NaN when missing, null or not a number. */
static double mdl_num(const json_t *obj, const char *key) {
    const json_t *v = json_object_get(obj, key);
    return json_is_number(v) ? json_number_value(v) : nan("");
}

static void mdl_str(const json_t *obj, const char *key, char *out, size_t cap) {
    const char *s = json_string_value(json_object_get(obj, key));
    snprintf(out, cap, "%s", s ? s : "");
}

/* An array of exactly d numbers (null entries read as NaN): 1, else 0. */
static int mdl_vector(const json_t *arr, unsigned d, double *out) {
    if (!json_is_array(arr) || json_array_size(arr) != d)
        return 0;
    for (unsigned i = 0; i < d; i++) {
        const json_t *v = json_array_get(arr, i);
        if (!json_is_number(v) && !json_is_null(v))
            return 0;
        out[i] = json_is_number(v) ? json_number_value(v) : nan("");
    }
    return 1;
}

/* A diagram [r1, r2, ...] (at most d positive rows) zero-padded: 1, else 0.
 */
static int mdl_diagram(const json_t *arr, unsigned d, uint32_t *rows) {
    memset(rows, 0, sizeof(uint32_t) * SS_LEVELS_MAX);
    if (!json_is_array(arr) || json_array_size(arr) > d)
        return 0;
    for (size_t i = 0; i < json_array_size(arr); i++) {
        json_int_t r = json_integer_value(json_array_get(arr, i));
        if (r <= 0 || r > SS_ATOMS_MAX)
            return 0;
        rows[i] = (uint32_t)r;
    }
    return 1;
}

/* The calibration members of obj (a result's echo or an inline request
 * calibration): 1 when exchange is there. */
static int mdl_calibration(const json_t *obj, ss_calibration *cal) {
    if (!json_is_object(obj) ||
        !json_is_number(json_object_get(obj, "exchange")))
        return 0;
    *cal = ss_calibration_default();
    cal->exchange = mdl_num(obj, "exchange");
    double v = mdl_num(obj, "offset");
    cal->offset = isfinite(v) ? v : 0.0;
    v = mdl_num(obj, "pair_shift");
    cal->pair_shift = isfinite(v) ? v : 0.0;
    v = mdl_num(obj, "noise_sd");
    cal->noise_sd = isfinite(v) && v >= 0.0 ? v : 0.0;
    v = mdl_num(obj, "coupling_spread");
    cal->coupling_spread = isfinite(v) && v >= 0.0 ? v : 0.0;
    mdl_str(obj, "unit", cal->unit, sizeof cal->unit);
    return 1;
}

static ss_status mdl_run(const json_t *src, const json_t *req_run, unsigned d,
                         svg_run *r, ss_error *err) {
    json_int_t atoms = json_integer_value(json_object_get(src, "atoms"));
    r->atoms = atoms > 0 && atoms <= SS_ATOMS_MAX ? (unsigned)atoms : 0;
    json_int_t shots = json_integer_value(json_object_get(src, "shots"));
    r->shots = shots > 0 ? (size_t)shots : 0;
    r->mean_energy = mdl_num(src, "mean_energy");
    r->energy_variance = mdl_num(src, "energy_variance");
    r->window_sd = mdl_num(src, "window_sd");
    json_int_t in_window =
        json_integer_value(json_object_get(src, "candidates_in_window"));
    r->window_count = in_window > 0 ? (size_t)in_window : 0;

    const json_t *energies = json_object_get(req_run, "energies");
    if (json_is_array(energies) && json_array_size(energies) > 0 &&
        json_integer_value(json_object_get(req_run, "atoms")) == atoms) {
        size_t n = json_array_size(energies);
        r->energies = malloc(n * sizeof *r->energies);
        if (r->energies == NULL)
            return ss_error_set(err, SS_ENOMEM, "", NULL);
        for (size_t k = 0; k < n; k++) {
            const json_t *e = json_array_get(energies, k);
            if (json_is_number(e))
                r->energies[r->energy_count++] = json_number_value(e);
        }
    }

    const json_t *cands = json_object_get(src, "candidates");
    size_t nc = json_is_array(cands) ? json_array_size(cands) : 0;
    if (nc > 0) {
        r->candidates = calloc(nc, sizeof *r->candidates);
        if (r->candidates == NULL)
            return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    for (size_t k = 0; k < nc; k++) {
        const json_t *c = json_array_get(cands, k);
        svg_candidate *out = &r->candidates[r->candidate_count];
        if (!mdl_diagram(json_object_get(c, "diagram"), d, out->rows))
            continue;
        out->content =
            (int64_t)json_integer_value(json_object_get(c, "content"));
        out->energy = mdl_num(c, "energy");
        out->z = mdl_num(c, "z");
        out->probability = mdl_num(c, "probability");
        r->candidate_count++;
    }
    /* degenerate_groups: [[diagram, diagram], ...]; group g (from 1) marks
     * the candidates whose diagram it lists */
    const json_t *groups = json_object_get(src, "degenerate_groups");
    size_t ng = json_is_array(groups) ? json_array_size(groups) : 0;
    for (size_t g = 0; g < ng; g++) {
        const json_t *members = json_array_get(groups, g);
        int used = 0;
        for (size_t m = 0; m < json_array_size(members); m++) {
            uint32_t rows[SS_LEVELS_MAX];
            if (!mdl_diagram(json_array_get(members, m), d, rows))
                continue;
            for (size_t k = 0; k < r->candidate_count; k++)
                if (memcmp(rows, r->candidates[k].rows, sizeof rows) == 0 &&
                    r->candidates[k].group == 0) {
                    r->candidates[k].group = r->group_count + 1;
                    used = 1;
                }
        }
        if (used)
            r->group_count++;
    }
    return SS_OK;
}

ss_status svg_analysis_from_json(const json_t *request, const json_t *result,
                                 svg_analysis *out, ss_error *err) {
    memset(out, 0, sizeof *out);
    json_int_t d = json_integer_value(json_object_get(result, "levels"));
    if (!json_is_object(result) || d < SS_LEVELS_MIN || d > SS_LEVELS_MAX)
        return ss_error_set(err, SS_EINTERNAL, "result",
                            "the stored result has no valid levels");
    unsigned levels = (unsigned)d;
    out->levels = levels;
    mdl_str(result, "method", out->method, sizeof out->method);
    out->confidence = mdl_num(result, "confidence");

    const json_t *sp = json_object_get(result, "spectrum");
    if (json_is_object(sp) &&
        mdl_vector(json_object_get(sp, "values"), levels, out->values)) {
        out->has_spectrum = 1;
        mdl_str(sp, "interval", out->interval, sizeof out->interval);
        mdl_str(sp, "estimate", out->estimate, sizeof out->estimate);
        if (!mdl_vector(json_object_get(sp, "stderr"), levels, out->stderr_) ||
            !mdl_vector(json_object_get(sp, "lower"), levels, out->lower) ||
            !mdl_vector(json_object_get(sp, "upper"), levels, out->upper))
            for (unsigned i = 0; i < levels; i++)
                out->stderr_[i] = out->lower[i] = out->upper[i] = nan("");
    }
    const json_t *purity = json_object_get(result, "purity");
    out->purity = mdl_num(purity, "value");
    out->purity_stderr = mdl_num(purity, "stderr");

    const json_t *fr = json_object_get(result, "feasible_ranges");
    if (json_is_array(fr) && json_array_size(fr) == levels) {
        out->has_feasible = 1;
        for (unsigned i = 0; i < levels; i++) {
            double pair[2];
            if (!mdl_vector(json_array_get(fr, i), 2, pair)) {
                out->has_feasible = 0;
                break;
            }
            out->feasible_lower[i] = pair[0];
            out->feasible_upper[i] = pair[1];
        }
    }
    out->has_naive = mdl_vector(
        json_object_get(json_object_get(result, "naive"), "spectrum"), levels,
        out->naive);

    /* the calibration used: the result's echo, else the request's inline
     * numbers, else the default (energies in units of J) */
    const json_t *cal = json_object_get(result, "calibration");
    if (mdl_calibration(cal, &out->cal)) {
        mdl_str(cal, "source", out->cal_source, sizeof out->cal_source);
        mdl_str(cal, "name", out->cal_name, sizeof out->cal_name);
        json_int_t v = json_integer_value(json_object_get(cal, "version"));
        out->cal_version = v > 0 && v < 1000000000 ? (unsigned)v : 0;
        mdl_str(cal, "valid_from", out->cal_valid_from,
                sizeof out->cal_valid_from);
    } else if (mdl_calibration(json_object_get(request, "calibration"),
                               &out->cal)) {
        snprintf(out->cal_source, sizeof out->cal_source, "request");
    } else {
        out->cal = ss_calibration_default();
        const json_t *ref =
            json_object_get(json_object_get(request, "calibration"), "ref");
        if (json_is_string(ref))
            mdl_str(json_object_get(request, "calibration"), "ref",
                    out->cal_name, sizeof out->cal_name);
    }
    if (out->cal.unit[0] == '\0')
        mdl_str(result, "unit", out->cal.unit, sizeof out->cal.unit);
    mdl_str(request, "measured_at", out->measured_at, sizeof out->measured_at);

    const json_t *flags = json_object_get(result, "flags");
    size_t nf = json_is_array(flags) ? json_array_size(flags) : 0;
    if (nf > 0 && (out->flags = calloc(nf, sizeof *out->flags)) == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t k = 0; k < nf; k++) {
        const json_t *f = json_array_get(flags, k);
        svg_flag *o = &out->flags[out->flag_count++];
        mdl_str(f, "code", o->code, sizeof o->code);
        mdl_str(f, "message", o->message, sizeof o->message);
        const json_t *run = json_object_get(f, "run");
        o->run = json_is_integer(run) && json_integer_value(run) >= 0 &&
                         json_integer_value(run) < 1000000
                     ? (int)json_integer_value(run)
                     : -1;
    }

    const json_t *runs = json_object_get(result, "runs");
    const json_t *req_runs = json_object_get(request, "runs");
    size_t nr = json_is_array(runs) ? json_array_size(runs) : 0;
    if (nr > 0 && (out->runs = calloc(nr, sizeof *out->runs)) == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    /* the core keeps the request's run order (result run k is request run
     * k); the per-shot readings are taken only when the counts agree */
    int paired = json_is_array(req_runs) && json_array_size(req_runs) == nr;
    for (size_t k = 0; k < nr; k++) {
        out->run_count++;
        ss_status st = mdl_run(json_array_get(runs, k),
                               paired ? json_array_get(req_runs, k) : NULL,
                               levels, &out->runs[k], err);
        if (st != SS_OK)
            return st;
    }
    return SS_OK;
}

void svg_analysis_release(svg_analysis *a) {
    if (a == NULL)
        return;
    for (size_t k = 0; k < a->run_count; k++) {
        free(a->runs[k].energies);
        free(a->runs[k].candidates);
    }
    free(a->runs);
    free(a->flags);
    memset(a, 0, sizeof *a);
}

void svg_diagram_name(const uint32_t *rows, unsigned levels, char *out,
                      size_t cap) {
    size_t used = 0;
    if (cap == 0)
        return;
    out[0] = '\0';
    for (unsigned i = 0; i < levels && rows[i] != 0; i++) {
        int n =
            snprintf(out + used, cap - used, "%s%u", i ? "," : "(", rows[i]);
        if (n < 0 || (size_t)n >= cap - used)
            return;
        used += (size_t)n;
    }
    if (used + 1 < cap) {
        out[used++] = ')';
        out[used] = '\0';
    }
}

/* ------------------------------------------------------------------------ */
/* Predicted laws                                                            */

typedef struct {
    double energy, probability;
} mdl_point;

static int mdl_point_cmp(const void *a, const void *b) {
    double x = ((const mdl_point *)a)->energy;
    double y = ((const mdl_point *)b)->energy;
    return (x > y) - (x < y);
}

/* Moves points (sorted here) into law. */
static ss_status mdl_law_take(svg_law *law, mdl_point *pts, size_t n,
                              ss_error *err) {
    qsort(pts, n, sizeof *pts, mdl_point_cmp);
    law->energy = malloc((n ? n : 1) * sizeof(double));
    law->probability = malloc((n ? n : 1) * sizeof(double));
    if (law->energy == NULL || law->probability == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t k = 0; k < n; k++) {
        law->energy[k] = pts[k].energy;
        law->probability[k] = pts[k].probability;
    }
    law->count = n;
    return SS_OK;
}

/* The exact law from the core, grouped by content. */
static ss_status mdl_law_full(const svg_analysis *a, unsigned atoms,
                              const ss_budget *budget, svg_law *law,
                              ss_error *inner, ss_error *err) {
    ss_distribution *dist = NULL;
    ss_levels *lv = NULL;
    ss_status st = ss_distribution_compute(atoms, a->levels, a->values,
                                           a->levels, budget, &dist, inner);
    if (st == SS_OK)
        st = ss_levels_alloc(dist->diagrams, dist->probability, &lv, inner);
    if (st != SS_OK) {
        ss_distribution_free(dist);
        return st;
    }
    mdl_point *pts = malloc((lv->count ? lv->count : 1) * sizeof *pts);
    if (pts == NULL)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t g = 0; pts != NULL && g < lv->count; g++) {
        pts[g].energy = ss_calibration_energy(&a->cal, atoms, lv->content[g]);
        pts[g].probability = lv->probability[g];
    }
    if (pts != NULL)
        st = mdl_law_take(law, pts, lv->count, err);
    law->kind = SVG_LAW_FULL;
    free(pts);
    ss_levels_free(lv);
    ss_distribution_free(dist);
    return st;
}

/* The candidates of every run of `atoms` atoms, distinct diagrams, summed
 * per energy. */
static ss_status mdl_law_candidates(const svg_analysis *a, unsigned atoms,
                                    svg_law *law, ss_error *err) {
    size_t cap = 0;
    for (size_t r = 0; r < a->run_count; r++)
        if (a->runs[r].atoms == atoms)
            cap += a->runs[r].candidate_count;
    mdl_point *pts = malloc((cap ? cap : 1) * sizeof *pts);
    const svg_candidate **seen = malloc((cap ? cap : 1) * sizeof *seen);
    if (pts == NULL || seen == NULL) {
        free(pts);
        free(seen);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    size_t n = 0, nseen = 0;
    int heights = a->has_spectrum;
    for (size_t r = 0; r < a->run_count; r++) {
        if (a->runs[r].atoms != atoms)
            continue;
        for (size_t k = 0; k < a->runs[r].candidate_count; k++) {
            const svg_candidate *c = &a->runs[r].candidates[k];
            int dup = 0;
            for (size_t s = 0; s < nseen && !dup; s++)
                dup = memcmp(seen[s]->rows, c->rows, sizeof c->rows) == 0;
            if (dup || !isfinite(c->energy))
                continue;
            seen[nseen++] = c;
            if (!isfinite(c->probability))
                heights = 0;
            size_t at = 0;
            while (at < n && pts[at].energy != c->energy)
                at++;
            if (at == n) {
                pts[n].energy = c->energy;
                pts[n++].probability = 0.0;
            }
            pts[at].probability += c->probability;
        }
    }
    for (size_t k = 0; !heights && k < n; k++)
        pts[k].probability = nan("");
    law->kind = heights ? SVG_LAW_CANDIDATES : SVG_LAW_MARKS;
    ss_status st = mdl_law_take(law, pts, n, err);
    free(pts);
    free(seen);
    return st;
}

static int mdl_unsigned_cmp(const void *a, const void *b) {
    unsigned x = *(const unsigned *)a, y = *(const unsigned *)b;
    return (x > y) - (x < y);
}

ss_status svg_laws_compute(const svg_analysis *a, const ss_budget *budget,
                           size_t max_laws, svg_law **out, size_t *count,
                           size_t *total, ss_error *err) {
    *out = NULL;
    *count = *total = 0;
    unsigned *atoms = malloc((a->run_count ? a->run_count : 1) * sizeof *atoms);
    if (atoms == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    size_t n = 0;
    for (size_t r = 0; r < a->run_count; r++)
        if (a->runs[r].atoms > 0)
            atoms[n++] = a->runs[r].atoms;
    qsort(atoms, n, sizeof *atoms, mdl_unsigned_cmp);
    size_t distinct = 0;
    for (size_t k = 0; k < n; k++)
        if (distinct == 0 || atoms[distinct - 1] != atoms[k])
            atoms[distinct++] = atoms[k];
    *total = distinct;
    size_t m = distinct < max_laws ? distinct : max_laws;
    svg_law *laws = calloc(m ? m : 1, sizeof *laws);
    if (laws == NULL) {
        free(atoms);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    ss_budget left = budget ? *budget : ss_budget_default();
    double p2 = 0.0;
    for (unsigned i = 0; i < a->levels; i++)
        p2 += a->values[i] * a->values[i];
    ss_status st = SS_OK;
    size_t done = 0;
    for (; done < m && st == SS_OK; done++) {
        svg_law *law = &laws[done];
        unsigned nat = atoms[done];
        law->atoms = nat;
        law->mean_energy = nan("");
        if (a->has_spectrum) {
            double pairs = 0.5 * (double)nat * (double)(nat - 1);
            law->mean_energy = a->cal.offset + a->cal.pair_shift * pairs +
                               a->cal.exchange * ss_content_mean(nat, p2);
        }
        if (!a->has_spectrum) {
            snprintf(law->note, sizeof law->note,
                     "no spectrum estimate: the candidates' energies are "
                     "marked without heights");
            st = mdl_law_candidates(a, nat, law, err);
            continue;
        }
        uint64_t diagrams = ss_diagram_count(nat, a->levels);
        uint64_t cells = ss_diagram_table_cells(nat, a->levels);
        ss_error inner;
        ss_error_clear(&inner);
        ss_status got = SS_EBUDGET;
        if (diagrams <= left.max_diagrams && cells <= left.max_table_cells)
            got = mdl_law_full(a, nat, &left, law, &inner, err);
        if (got == SS_OK) {
            left.max_diagrams -= diagrams;
            left.max_table_cells -= cells;
            continue;
        }
        if (got == SS_ENOMEM && err->code == SS_ENOMEM) {
            st = got;
            continue;
        }
        if (inner.code == SS_OK || inner.code == SS_EBUDGET)
            snprintf(law->note, sizeof law->note,
                     "the full law of %u atoms (%llu diagrams) is over the "
                     "work budget of this page: only the candidates are drawn",
                     nat, (unsigned long long)diagrams);
        else
            snprintf(law->note, sizeof law->note,
                     "the full law could not be computed (%.120s): only the "
                     "candidates are drawn",
                     inner.message);
        free(law->energy);
        free(law->probability);
        law->energy = law->probability = NULL;
        law->count = 0;
        st = mdl_law_candidates(a, nat, law, err);
    }
    free(atoms);
    if (st != SS_OK) {
        svg_laws_free(laws, m);
        return st;
    }
    *out = laws;
    *count = m;
    return SS_OK;
}

void svg_laws_free(svg_law *laws, size_t count) {
    if (laws == NULL)
        return;
    for (size_t k = 0; k < count; k++) {
        free(laws[k].energy);
        free(laws[k].probability);
    }
    free(laws);
}
