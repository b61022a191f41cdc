/*
 * inversion_util.h — small static inline helpers shared by the inversion
 * tests (tests/test_inversion.c, tests/test_coverage.c): seeded generators
 * and samplers, simulated runs (per-shot energies from ss_sampler_shot, and
 * the summary mean and K−1 variance of such a run), "exact" summary runs
 * whose mean and variance equal the closed forms of domain.md §2, a checked
 * call of ss_analysis_run, and look-ups of flags and flag numbers by their
 * stable names.  Built on testutil.h; owns nothing beyond what each helper
 * returns (the caller frees it).
 */
#ifndef SWAPSPEC_INVERSION_UTIL_H
#define SWAPSPEC_INVERSION_UTIL_H

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "swapspec.h"
#include "testutil.h"

/* A Mersenne-twister stream (gsl_rng_mt19937) at a fixed seed. */
static inline gsl_rng *iv_rng(unsigned long seed) {
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    cr_assert(r != NULL, "gsl_rng_alloc failed");
    gsl_rng_set(r, seed);
    return r;
}

/* K simulated shots of n atoms under cal (ss_sampler_shot) into e[0..K-1]. */
static inline void iv_shots(ss_sampler *s, gsl_rng *rng, unsigned n,
                            const ss_calibration *cal, size_t K, double *e) {
    uint32_t rows[SS_LEVELS_MAX];
    for (size_t k = 0; k < K; k++) {
        ss_error err;
        ss_error_clear(&err);
        ss_status st = ss_sampler_shot(s, rng, n, cal, rows, &e[k], &err);
        cr_assert(st == SS_OK, "ss_sampler_shot(n=%u): %s (%s)", n,
                  ss_status_name(st), err.message);
    }
}

/* A summary run (shots, mean, variance with the K−1 denominator) from K
 * per-shot energies; the energies themselves are not attached. */
static inline ss_run iv_summary_of(unsigned n, const double *e, size_t K) {
    long double s = 0.0L, ss = 0.0L;
    for (size_t k = 0; k < K; k++)
        s += e[k];
    long double mean = s / (long double)K;
    for (size_t k = 0; k < K; k++)
        ss += (e[k] - mean) * (e[k] - mean);
    ss_run r;
    memset(&r, 0, sizeof r);
    r.atoms = n;
    r.shots = K;
    r.mean_energy = (double)mean;
    r.energy_variance = (double)(ss / (long double)(K - 1));
    return r;
}

/* A per-shot run pointing at e (the caller keeps e alive). */
static inline ss_run iv_per_shot(unsigned n, const double *e, size_t K) {
    ss_run r;
    memset(&r, 0, sizeof r);
    r.atoms = n;
    r.energies = e;
    r.energy_count = K;
    return r;
}

/* Var[c] transcribed separately from domain.md §2 (statistics-sources.md
 * §3.3, exact):  C(n,2)·[1 + 2(n−2)·P3 + C(n−2,2)·P2²] − C(n,2)²·P2². */
static inline double iv_content_variance(unsigned n, double p2, double p3) {
    double N = tu_pairs(n), M = tu_pairs(n - 2u);
    return N * (1.0 + 2.0 * ((double)n - 2.0) * p3 + M * p2 * p2) -
           N * N * p2 * p2;
}

/* A summary run whose mean and variance are the exact expectations of the
 * readout under cal for spectrum p (domain.md §2: E[c] = C(n,2)·P2 and the
 * closed-form Var[c] via ss_content_variance; energy = E0 + V·C(n,2) + J·c,
 * noise adds σ² to the variance).  With the K−1 denominator the expected
 * sample variance equals the variance, so these are noise-free "infinite
 * data" values reported with K shots. */
static inline ss_run iv_exact_run(unsigned n, size_t K, const double *p,
                                  unsigned d, const ss_calibration *cal) {
    double p2 = ss_spectrum_power_sum(p, d, 2);
    double p3 = ss_spectrum_power_sum(p, d, 3);
    ss_run r;
    memset(&r, 0, sizeof r);
    r.atoms = n;
    r.shots = K;
    r.mean_energy = cal->offset + cal->pair_shift * tu_pairs(n) +
                    cal->exchange * tu_pairs(n) * p2;
    r.energy_variance =
        cal->exchange * cal->exchange * ss_content_variance(n, p2, p3) +
        cal->noise_sd * cal->noise_sd;
    return r;
}

/* A request with the defaults, `d` levels and the given runs. */
static inline ss_analysis_request iv_request(unsigned d, const ss_run *runs,
                                             size_t count, ss_method method) {
    ss_analysis_request req = ss_analysis_request_default();
    req.levels = d;
    req.runs = runs;
    req.run_count = count;
    req.method = method;
    return req;
}

/* ss_analysis_run that must succeed; `what` names the case in messages. */
static inline ss_analysis *iv_analyse(const ss_analysis_request *req,
                                      const char *what) {
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *a = NULL;
    ss_status st = ss_analysis_run(req, &a, &err);
    cr_assert(st == SS_OK && a != NULL,
              "%s: ss_analysis_run: expected ok, got %s (field \"%s\": %s)",
              what, ss_status_name(st), err.field, err.message);
    return a;
}

/* The first flag named `name` (compared through ss_flag_name, so the name
 * table is exercised too) concerning `run`; run == -2 matches any run.
 * NULL when there is none. */
static inline const ss_flag *iv_flag(const ss_analysis *a, const char *name,
                                     int run) {
    for (size_t i = 0; i < a->flag_count; i++) {
        const ss_flag *f = &a->flags[i];
        if (strcmp(ss_flag_name(f->code), name) == 0 &&
            (run == -2 || f->run == run))
            return f;
    }
    return NULL;
}

/* 1 and *out set when the flag carries a number called `name`. */
static inline int iv_flag_number(const ss_flag *f, const char *name,
                                 double *out) {
    for (unsigned i = 0; i < f->number_count && i < SS_FLAG_NUMBERS_MAX; i++)
        if (strcmp(f->numbers[i].name, name) == 0) {
            *out = f->numbers[i].value;
            return 1;
        }
    return 0;
}

/* All flag names of an analysis in one string, for failure messages. */
static inline const char *iv_flag_list(const ss_analysis *a, char *buf,
                                       size_t size) {
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < a->flag_count && used + 1 < size; i++) {
        int w = snprintf(buf + used, size - used, "%s%s(run %d)", i ? ", " : "",
                         ss_flag_name(a->flags[i].code), a->flags[i].run);
        if (w < 0)
            break;
        used += (size_t)w;
    }
    return buf;
}

/* Shannon entropy −Σ p ln p (0 ln 0 = 0). */
static inline double iv_entropy(const double *p, unsigned d) {
    double h = 0.0;
    for (unsigned i = 0; i < d; i++)
        if (p[i] > 0.0)
            h -= p[i] * log(p[i]);
    return h;
}

/* A point of the simplex (uniform, testutil's tu_random_simplex), sorted in
 * decreasing order. */
static inline void iv_random_spectrum(gsl_rng *rng, unsigned d, double *p) {
    double q[SS_LEVELS_MAX];
    tu_random_simplex(rng, d, q);
    tu_sort_desc(q, d, p);
}

/* The law of the content (noise-free readout) at spectrum p: the
 * Schur–Weyl probabilities summed over diagrams of equal content (domain.md
 * §3 "Likelihood"), as ss_levels (contents increasing).  Free with
 * ss_levels_free. */
static inline ss_levels *iv_content_law(unsigned n, unsigned d,
                                        const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    ss_levels *lv = NULL;
    ss_error err;
    ss_error_clear(&err);
    ss_status st =
        ss_levels_alloc(dist->diagrams, dist->probability, &lv, &err);
    cr_assert(st == SS_OK && lv != NULL, "ss_levels_alloc: %s", err.message);
    ss_distribution_free(dist);
    return lv;
}

/* Cramér–Rao standard deviations of the d eigenvalues from K noise-free
 * readings at spectrum p (descending, distinct entries more than 1e-4
 * apart), computed separately from the core: expected Fisher information in
 * x = (p_1 .. p_{d−1}), p_d = 1 − Σx,
 *     F_ab = K · Σ_c ∂_a P(c) · ∂_b P(c) / P(c),
 * derivatives by central differences of step 1e-5 (truncation O(h²)),
 * inverted with GSL's LU; the covariance is expanded to p_d.  Returns 0 when
 * F is singular. */
static inline int iv_crb_at(unsigned n, unsigned d, const double *p, double K,
                            double *sd) {
    const double h = 1e-5;
    size_t m = d - 1;
    ss_levels *l0 = iv_content_law(n, d, p);
    size_t L = l0->count;
    double *dP = malloc(m * L * sizeof *dP);
    cr_assert(dP != NULL);
    for (size_t a = 0; a < m; a++) {
        double pp[SS_LEVELS_MAX], pm[SS_LEVELS_MAX];
        memcpy(pp, p, d * sizeof *p);
        memcpy(pm, p, d * sizeof *p);
        pp[a] += h;
        pp[d - 1] -= h;
        pm[a] -= h;
        pm[d - 1] += h;
        ss_levels *lp = iv_content_law(n, d, pp);
        ss_levels *lm = iv_content_law(n, d, pm);
        cr_assert(lp->count == L && lm->count == L);
        for (size_t l = 0; l < L; l++)
            dP[a * L + l] = (lp->probability[l] - lm->probability[l]) / (2 * h);
        ss_levels_free(lp);
        ss_levels_free(lm);
    }
    gsl_matrix *F = gsl_matrix_calloc(m, m), *C = gsl_matrix_alloc(m, m);
    gsl_permutation *perm = gsl_permutation_alloc(m);
    cr_assert(F && C && perm);
    for (size_t l = 0; l < L; l++)
        if (l0->probability[l] > 0)
            for (size_t a = 0; a < m; a++)
                for (size_t b = 0; b < m; b++)
                    *gsl_matrix_ptr(F, a, b) +=
                        K * dP[a * L + l] * dP[b * L + l] / l0->probability[l];
    int sign = 0, ok = gsl_linalg_LU_decomp(F, perm, &sign) == GSL_SUCCESS &&
                       gsl_linalg_LU_det(F, sign) != 0.0 &&
                       gsl_linalg_LU_invert(F, perm, C) == GSL_SUCCESS;
    if (ok) {
        double last = 0.0;
        for (size_t a = 0; a < m; a++) {
            sd[a] = sqrt(gsl_matrix_get(C, a, a));
            for (size_t b = 0; b < m; b++)
                last += gsl_matrix_get(C, a, b); /* var(−Σx) */
        }
        sd[m] = sqrt(last);
    }
    gsl_matrix_free(F);
    gsl_matrix_free(C);
    gsl_permutation_free(perm);
    free(dP);
    ss_levels_free(l0);
    return ok;
}

/* Per-shot readings "at the expectation": K noise-free energies (default
 * calibration, energy = content) whose counts per content are K·P(c)
 * rounded (the remainder goes to the most probable content).  Returns a
 * malloc'ed array of *count readings. */
static inline double *iv_expected_readings(unsigned n, unsigned d,
                                           const double *p, size_t K,
                                           size_t *count) {
    ss_levels *lv = iv_content_law(n, d, p);
    double *e = malloc(K * sizeof *e);
    cr_assert(e != NULL);
    size_t used = 0, top = 0;
    for (size_t l = 0; l < lv->count; l++) {
        if (lv->probability[l] > lv->probability[top])
            top = l;
        size_t c = (size_t)nearbyint((double)K * lv->probability[l]);
        for (size_t k = 0; k < c && used < K; k++)
            e[used++] = (double)lv->content[l];
    }
    while (used < K)
        e[used++] = (double)lv->content[top];
    *count = used;
    ss_levels_free(lv);
    return e;
}

#endif /* SWAPSPEC_INVERSION_UTIL_H */
