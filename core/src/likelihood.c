/*
 * likelihood.c — maximum likelihood over the ordered simplex from per-shot
 * energies.
 *
 * Each shot of run r has likelihood Σ_c P_n(c|p)·N(E; E(c), σ²), where
 * P_n(c|p) sums the exact Schur–Weyl law over the diagrams of content c.
 * With σ = 0 every reading is matched to a content (tolerance
 * SS__MATCH_TOL in content units) and the run reduces to counts per content.
 * The kernel φ_σ(E_s − E(c)) does not depend on p, so it is tabulated once
 * per run (levels within 12σ of each reading).  Summary runs, when mixed in,
 * contribute the Gaussian term of their (mean, variance) observations with
 * the covariance of the moment fit (a composite likelihood).
 *
 * p is parametrised as p = Σ_k α_k (1/k,…,1/k,0,…,0), α = softmax(z), so
 * every trial point is an ordered spectrum; GSL's nmsimplex2 minimises −log L
 * from the moment estimate.  The observed information (a central-difference
 * Hessian in p_1..p_{d−1}, p_d = 1 − Σ) gives the covariance; the expected
 * (Fisher) information gives the Cramér–Rao bound, its rank and condition.
 *
 * Owns the ss__lik state: one distribution per distinct atom number, the
 * content grouping, and the per-run kernels; freed by ss__lik_release.
 */
#include "internal.h"

#include <gsl/gsl_eigen.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multimin.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define SS__MATCH_TOL 1e-6
/* −log L where the likelihood vanishes: large but finite, because GSL's
 * minimisers raise an error (and would call the abort handler) on
 * non-finite values. */
#define SS__NLL_ZERO 1e300
#define SS__PI 3.14159265358979323846
#define SS__KERNEL_SIGMAS 12.0
#define SS__KERNEL_MAX ((size_t)64 * 1024 * 1024) /* doubles in all kernels */

typedef struct {
    const ss__run_stats *stats;
    const ss_run *run;
    size_t dist_index;  /* into lik->dists */
    double *level_prob; /* P(c|p) per level of that atom number */
    /* σ = 0: counts per level; σ > 0: dense kernel shots × levels */
    double *counts;
    double *kernel;
    double N, n;
} ss__lik_run;

typedef struct {
    unsigned d;
    double sigma; /* noise sd in energy units */
    const ss_calibration *cal;
    size_t R;
    ss__lik_run *runs;
    size_t ndist;
    ss_distribution *dists[SS_RUNS_MAX];
    ss_levels *levels[SS_RUNS_MAX];
    size_t *level_of; /* per dist: diagram -> level, concatenated */
    size_t level_of_off[SS_RUNS_MAX + 1];
    ss_error *err;
    int failed;
    uint64_t work, work_max; /* see ss_budget.max_work */
    uint64_t work_per_eval;
    double deadline; /* ss_budget_deadline, 0 = none */
    int over;        /* 1: work_max passed, 2: the deadline; evaluations
                        stop */
} ss__lik;

static void ss__lik_release(ss__lik *L) {
    for (size_t i = 0; i < L->ndist; i++) {
        ss_distribution_free(L->dists[i]);
        ss_levels_free(L->levels[i]);
    }
    for (size_t r = 0; L->runs && r < L->R; r++) {
        free(L->runs[r].level_prob);
        free(L->runs[r].counts);
        free(L->runs[r].kernel);
    }
    free(L->runs);
    free(L->level_of);
}

/* Probabilities per content level for every distinct atom number at p. */
static int ss__lik_update(ss__lik *L, const double *p) {
    if (L->over || L->work_max - L->work < L->work_per_eval) {
        L->over = L->over ? L->over : 1; /* cheap from here on */
        return 0;
    }
    if (ss_budget_expired(L->deadline)) {
        L->over = 2;
        return 0;
    }
    L->work += L->work_per_eval;
    for (size_t i = 0; i < L->ndist; i++) {
        ss_error e;
        ss_error_clear(&e);
        if (ss__distribution_update(L->dists[i], p, &e) != SS_OK)
            return 0;
    }
    for (size_t r = 0; r < L->R; r++) {
        ss__lik_run *lr = &L->runs[r];
        if (lr->level_prob == NULL)
            continue;
        size_t di = lr->dist_index;
        const ss_levels *lv = L->levels[di];
        const double *prob = L->dists[di]->probability;
        for (size_t l = 0; l < lv->count; l++) {
            long double acc = 0;
            for (size_t m = lv->first[l]; m < lv->first[l + 1]; m++)
                acc += prob[lv->members[m]];
            lr->level_prob[l] = (double)acc;
        }
    }
    return 1;
}

static double ss__lik_neglog(ss__lik *L, const double *p) {
    if (!ss__lik_update(L, p))
        return SS__NLL_ZERO;
    long double nll = 0;
    double P2 = ss_spectrum_power_sum(p, L->d, 2);
    double P3 = ss_spectrum_power_sum(p, L->d, 3);
    for (size_t r = 0; r < L->R; r++) {
        const ss__lik_run *lr = &L->runs[r];
        if (lr->level_prob == NULL) { /* summary run: Gaussian term */
            const ss__run_stats *s = lr->stats;
            double n = lr->n, N = lr->N;
            double f1 = N * P2;
            double f2 = N - N * (2 * n - 3) * P2 * P2 + 2 * (n - 2) * N * P3;
            double r1 = s->y1 - f1, r2 = s->y2 - f2;
            double det = s->cov[0] * s->cov[2] - s->cov[1] * s->cov[1];
            if (det <= 0)
                det = s->cov[0] * s->cov[2];
            nll += 0.5 *
                   (r1 * r1 * s->cov[2] - 2 * r1 * r2 * s->cov[1] +
                    r2 * r2 * s->cov[0]) /
                   det;
            continue;
        }
        size_t nl = L->levels[lr->dist_index]->count;
        if (lr->counts) {
            for (size_t l = 0; l < nl; l++)
                if (lr->counts[l] > 0) {
                    if (lr->level_prob[l] <= 0)
                        return SS__NLL_ZERO;
                    nll -= lr->counts[l] * log(lr->level_prob[l]);
                }
        } else {
            size_t K = lr->run->energy_count;
            for (size_t s = 0; s < K; s++) {
                const double *k = lr->kernel + s * nl;
                long double acc = 0;
                for (size_t l = 0; l < nl; l++)
                    acc += k[l] * lr->level_prob[l];
                if (acc <= 0)
                    return SS__NLL_ZERO;
                nll -= logl(acc);
            }
        }
    }
    return (double)nll;
}

static ss_status ss__lik_init(ss__lik *L, unsigned d, const ss_calibration *cal,
                              const ss__run_stats *rs, const ss_run *runs,
                              size_t R, const ss_budget *budget,
                              const double *p0, ss_error *err) {
    memset(L, 0, sizeof *L);
    L->d = d;
    L->work_max = ss__budget_or_default(budget).max_work;
    L->deadline = ss_budget_deadline(budget);
    L->cal = cal;
    L->sigma = cal->noise_sd;
    L->R = R;
    L->err = err;
    L->runs = calloc(R, sizeof *L->runs);
    if (L->runs == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    size_t kernel_total = 0;
    for (size_t r = 0; r < R; r++) {
        ss__lik_run *lr = &L->runs[r];
        lr->stats = &rs[r];
        lr->run = &runs[r];
        lr->n = rs[r].atoms;
        lr->N = 0.5 * lr->n * (lr->n - 1);
        if (!rs[r].per_shot)
            continue;
        size_t di = 0;
        while (di < L->ndist && L->dists[di]->diagrams->atoms != rs[r].atoms)
            di++;
        if (di == L->ndist) {
            ss_status st = ss_distribution_compute(rs[r].atoms, d, p0, d,
                                                   budget, &L->dists[di], err);
            if (st == SS_OK)
                st = ss_levels_alloc(L->dists[di]->diagrams, NULL,
                                     &L->levels[di], err);
            L->ndist++;
            if (st != SS_OK)
                return st;
        }
        lr->dist_index = di;
        const ss_levels *lv = L->levels[di];
        size_t nl = lv->count, K = runs[r].energy_count;
        lr->level_prob = calloc(nl, sizeof *lr->level_prob);
        if (lr->level_prob == NULL)
            return ss_error_set(err, SS_ENOMEM, "", NULL);
        double spacing = fabs(cal->exchange);
        if (L->sigma <= 0.05 * spacing) {
            /* discrete matching: each reading must sit on a content */
            lr->counts = calloc(nl, sizeof *lr->counts);
            if (lr->counts == NULL)
                return ss_error_set(err, SS_ENOMEM, "", NULL);
            for (size_t s = 0; s < K; s++) {
                double c = ss_calibration_content(cal, rs[r].atoms,
                                                  runs[r].energies[s]);
                double ci = nearbyint(c);
                size_t lo = 0, hi = nl;
                while (lo < hi) { /* contents are increasing */
                    size_t mid = (lo + hi) / 2;
                    if ((double)lv->content[mid] < ci)
                        lo = mid + 1;
                    else
                        hi = mid;
                }
                double tol = SS__MATCH_TOL * fmax(1.0, fabs(c));
                double tol_sigma = 6.0 * L->sigma / spacing;
                if (lo == nl || (double)lv->content[lo] != ci ||
                    fabs(c - ci) > fmax(tol, tol_sigma)) {
                    char field[64];
                    snprintf(field, sizeof field, "runs[%zu].energies[%zu]", r,
                             s);
                    return ss_error_set(
                        err, SS_EINVAL, field,
                        "energy %.10g matches no Young diagram of %u atoms "
                        "with %u levels (it is content %.6g under the "
                        "calibration; contents are integers, tolerance %.1g)",
                        runs[r].energies[s], rs[r].atoms, d, c,
                        fmax(tol, tol_sigma));
                }
                lr->counts[lo] += 1.0;
            }
        } else {
            kernel_total += K * nl;
            if (kernel_total > SS__KERNEL_MAX)
                return ss_error_set(err, SS_EBUDGET, "runs",
                                    "per-shot likelihood tables would hold "
                                    "more than %zu values",
                                    SS__KERNEL_MAX);
            lr->kernel = calloc(K * nl, sizeof *lr->kernel);
            if (lr->kernel == NULL)
                return ss_error_set(err, SS_ENOMEM, "", NULL);
            double norm = 1.0 / (L->sigma * sqrt(2.0 * SS__PI));
            for (size_t s = 0; s < K; s++) {
                double nearest = HUGE_VAL;
                for (size_t l = 0; l < nl; l++) {
                    double e =
                        ss_calibration_energy(cal, rs[r].atoms, lv->content[l]);
                    double u = (runs[r].energies[s] - e) / L->sigma;
                    nearest = fmin(nearest, fabs(u));
                    if (fabs(u) <= SS__KERNEL_SIGMAS)
                        lr->kernel[s * nl + l] = norm * exp(-0.5 * u * u);
                }
                if (!(nearest <= SS__KERNEL_SIGMAS)) {
                    char field[64];
                    snprintf(field, sizeof field, "runs[%zu].energies[%zu]", r,
                             s);
                    return ss_error_set(
                        err, SS_EINVAL, field,
                        "energy %.10g is %.3g noise standard deviations "
                        "(noise_sd %.4g) from the energy of every Young "
                        "diagram of %u atoms with %u levels: no diagram can "
                        "have produced it (check the calibration)",
                        runs[r].energies[s], nearest, L->sigma, rs[r].atoms, d);
                }
            }
        }
    }
    /* the cost of one evaluation, in ss_budget.max_work units: the
     * branching recursion sweeps the table once per row it adds, ranking
     * each cell in O(d) (cells·d²), and the probabilities visit every
     * diagram's d rows */
    uint64_t per = 1;
    for (size_t i = 0; i < L->ndist; i++) {
        uint64_t cells =
            ss_diagram_table_cells(L->dists[i]->diagrams->atoms, d);
        uint64_t dd = (uint64_t)d * d;
        uint64_t sweep = cells > UINT64_MAX / dd ? UINT64_MAX : cells * dd;
        per = ss__sat_add(per, ss__sat_add(sweep, L->dists[i]->diagrams->count *
                                                      (uint64_t)d));
    }
    for (size_t r = 0; r < R; r++)
        if (L->runs[r].kernel != NULL)
            per = ss__sat_add(per, (uint64_t)runs[r].energy_count *
                                       L->levels[L->runs[r].dist_index]->count);
    L->work_per_eval = per;
    return SS_OK;
}

static double ss__lik_objective(const gsl_vector *v, void *params) {
    ss__lik *L = params;
    double z[SS_LEVELS_MAX], p[SS_LEVELS_MAX];
    for (unsigned k = 0; k + 1 < L->d; k++)
        z[k] = gsl_vector_get(v, k);
    ss__simplex_from_z(L->d, z, p);
    return ss__lik_neglog(L, p);
}

/* −log L at free coordinates x (p_d = 1 − Σx), or HUGE_VAL off the simplex */
static double ss__lik_at_x(ss__lik *L, const double *x) {
    double p[SS_LEVELS_MAX], last = 1.0;
    for (unsigned i = 0; i + 1 < L->d; i++) {
        p[i] = x[i];
        last -= x[i];
        if (x[i] < 0)
            return HUGE_VAL;
    }
    if (last < -1e-15)
        return HUGE_VAL;
    p[L->d - 1] = fmax(last, 0.0);
    return ss__lik_neglog(L, p);
}

/* Inverts the symmetric m×m matrix a in place; 0 if singular. */
static int ss__sym_invert(double *a, size_t m) {
    gsl_matrix_view A = gsl_matrix_view_array(a, m, m);
    gsl_permutation *perm = gsl_permutation_alloc(m);
    gsl_matrix *inv = gsl_matrix_alloc(m, m);
    int ok = perm && inv;
    int sign = 0;
    if (ok)
        ok = gsl_linalg_LU_decomp(&A.matrix, perm, &sign) == GSL_SUCCESS &&
             fabs(gsl_linalg_LU_det(&A.matrix, sign)) > 0 &&
             gsl_linalg_LU_invert(&A.matrix, perm, inv) == GSL_SUCCESS;
    if (ok)
        for (size_t i = 0; i < m * m; i++)
            a[i] = inv->data[i / m * inv->tda + i % m];
    gsl_permutation_free(perm);
    gsl_matrix_free(inv);
    return ok;
}

/* Full d×d covariance of p from the (d−1)×(d−1) covariance of x. */
static void ss__expand_cov(unsigned d, const double *cx, double *cov) {
    size_t m = d - 1;
    for (size_t i = 0; i < d; i++)
        for (size_t j = 0; j < d; j++) {
            double v = 0;
            if (i < m && j < m)
                v = cx[i * m + j];
            else if (i < m || j < m) {
                size_t k = i < m ? i : j;
                for (size_t l = 0; l < m; l++)
                    v -= cx[k * m + l];
            } else {
                for (size_t l = 0; l < m * m; l++)
                    v += cx[l];
            }
            cov[i * d + j] = v;
        }
}

/* Expected Fisher information in x coordinates. */
static void ss__lik_fisher(ss__lik *L, const double *p, double h,
                           double *fisher) {
    unsigned d = L->d;
    size_t m = d - 1;
    memset(fisher, 0, m * m * sizeof *fisher);
    for (size_t r = 0; r < L->R; r++) {
        ss__lik_run *lr = &L->runs[r];
        if (lr->level_prob == NULL)
            continue;
        size_t nl = L->levels[lr->dist_index]->count;
        double *P0 = malloc(nl * sizeof *P0);
        double *dP = malloc(m * nl * sizeof *dP);
        if (P0 == NULL || dP == NULL) {
            free(P0);
            free(dP);
            continue;
        }
        ss__lik_update(L, p);
        memcpy(P0, lr->level_prob, nl * sizeof *P0);
        for (size_t j = 0; j < m; j++) {
            double pp[SS_LEVELS_MAX], pm[SS_LEVELS_MAX];
            memcpy(pp, p, d * sizeof *p);
            memcpy(pm, p, d * sizeof *p);
            pp[j] += h;
            pp[d - 1] -= h;
            pm[j] -= h;
            pm[d - 1] += h;
            ss__lik_update(L, pp);
            for (size_t l = 0; l < nl; l++)
                dP[j * nl + l] = lr->level_prob[l];
            ss__lik_update(L, pm);
            for (size_t l = 0; l < nl; l++)
                dP[j * nl + l] = (dP[j * nl + l] - lr->level_prob[l]) / (2 * h);
        }
        double K = (double)lr->run->energy_count;
        const ss_levels *lv = L->levels[lr->dist_index];
        if (lr->counts) {
            for (size_t l = 0; l < nl; l++)
                if (P0[l] > 0)
                    for (size_t a = 0; a < m; a++)
                        for (size_t b = 0; b < m; b++)
                            fisher[a * m + b] +=
                                K * dP[a * nl + l] * dP[b * nl + l] / P0[l];
        } else {
            /* ∫ ∂f ∂fᵀ / f dE on a grid, f = Σ_l P_l φ_σ(E − E_l) */
            double sg = L->sigma;
            double e0 =
                ss_calibration_energy(L->cal, lr->stats->atoms, lv->content[0]);
            double e1 = ss_calibration_energy(L->cal, lr->stats->atoms,
                                              lv->content[nl - 1]);
            double lo = fmin(e0, e1) - 10 * sg, hi = fmax(e0, e1) + 10 * sg;
            double step = sg / 8.0;
            size_t npts = (size_t)((hi - lo) / step) + 1;
            if (npts > 400000) {
                npts = 400000;
                step = (hi - lo) / (double)(npts - 1);
            }
            double norm = 1.0 / (sg * sqrt(2.0 * SS__PI));
            for (size_t g = 0; g < npts; g++) {
                double E = lo + step * (double)g, f = 0;
                double df[SS_LEVELS_MAX] = {0};
                for (size_t l = 0; l < nl; l++) {
                    double u =
                        (E - ss_calibration_energy(L->cal, lr->stats->atoms,
                                                   lv->content[l])) /
                        sg;
                    if (fabs(u) > SS__KERNEL_SIGMAS)
                        continue;
                    double k = norm * exp(-0.5 * u * u);
                    f += P0[l] * k;
                    for (size_t a = 0; a < m; a++)
                        df[a] += dP[a * nl + l] * k;
                }
                if (f <= 1e-300)
                    continue;
                for (size_t a = 0; a < m; a++)
                    for (size_t b = 0; b < m; b++)
                        fisher[a * m + b] += K * df[a] * df[b] / f * step;
            }
        }
        free(P0);
        free(dP);
    }
    ss__lik_update(L, p);
}

/* The profile-likelihood interval of each ordered eigenvalue: the range of
 * p_i over {p : 2(ℓ_max − ℓ(p)) <= z²} (Wilks; one degree of freedom per
 * eigenvalue), each end found by Nelder–Mead on ±p_i plus an exact penalty
 * for leaving that set, started at the maximum. */
typedef struct {
    ss__lik *L;
    unsigned index;
    double sign, nll_best, limit;
} ss__profile_ctx;

/* Coordinates x = (p_1..p_{d−1}), p_d = 1 − Σx, unordered (the likelihood
 * is symmetric); 0 when x leaves the simplex. */
static int ss__profile_point(unsigned d, const gsl_vector *v, double *p) {
    double last = 1.0;
    for (unsigned k = 0; k + 1 < d; k++) {
        p[k] = gsl_vector_get(v, k);
        last -= p[k];
        if (p[k] < 0)
            return 0;
    }
    p[d - 1] = last;
    if (last < 0)
        return 0;
    qsort(p, d, sizeof *p, ss__cmp_double_desc);
    return 1;
}

static double ss__profile_objective(const gsl_vector *v, void *params) {
    const ss__profile_ctx *c = params;
    double p[SS_LEVELS_MAX];
    if (!ss__profile_point(c->L->d, v, p))
        return 100.0;
    double excess = 2.0 * (ss__lik_neglog(c->L, p) - c->nll_best) - c->limit;
    return c->sign * p[c->index] + (excess > 0 ? 10.0 + excess : 0.0);
}

static int ss__lik_profile(ss__lik *L, gsl_multimin_fminimizer *mz,
                           gsl_vector *x, gsl_vector *step, const double *p0,
                           double nll_best, double zc, double *lo, double *hi) {
    unsigned d = L->d;
    size_t m = d - 1;
    ss__profile_ctx c = {L, 0, 1.0, nll_best, zc * zc};
    gsl_multimin_function f = {ss__profile_objective, m, &c};
    for (unsigned i = 0; i < d; i++) {
        lo[i] = hi[i] = p0[i];
        for (int s = -1; s <= 1; s += 2) {
            c.index = i;
            c.sign = s;
            /* start at the maximum, nudged into the simplex's interior */
            for (size_t k = 0; k < m; k++)
                gsl_vector_set(x, k, 0.98 * p0[k] + 0.02 / d);
            gsl_vector_set_all(step, 0.02);
            if (gsl_multimin_fminimizer_set(mz, &f, x, step) != GSL_SUCCESS)
                return 0;
            for (int it = 0; it < 3000; it++) {
                if (gsl_multimin_fminimizer_iterate(mz) != GSL_SUCCESS)
                    break;
                if (gsl_multimin_test_size(gsl_multimin_fminimizer_size(mz),
                                           1e-7) == GSL_SUCCESS)
                    break;
            }
            double p[SS_LEVELS_MAX];
            if (!ss__profile_point(d, mz->x, p) ||
                2.0 * (ss__lik_neglog(L, p) - nll_best) > c.limit + 1e-6)
                continue; /* not admissible: keep the other end */
            if (s > 0)
                lo[i] = fmin(lo[i], p[i]);
            else
                hi[i] = fmax(hi[i], p[i]);
        }
    }
    return 1;
}

ss_status ss__likelihood_fit(unsigned d, const ss_calibration *cal,
                             const ss__run_stats *rs, const ss_run *runs,
                             size_t R, const ss_budget *budget,
                             const double *p_start, double profile_z,
                             ss__lik_result *out, ss_error *err) {
    ss__lik L;
    ss_status st = ss__lik_init(&L, d, cal, rs, runs, R, budget, p_start, err);
    gsl_multimin_fminimizer *mz = NULL;
    gsl_vector *x = NULL, *step = NULL;
    if (st != SS_OK)
        goto done;
    size_t m = d - 1;
    gsl_multimin_function f = {ss__lik_objective, m, &L};
    mz = gsl_multimin_fminimizer_alloc(gsl_multimin_fminimizer_nmsimplex2, m);
    x = gsl_vector_alloc(m);
    step = gsl_vector_alloc(m);
    if (mz == NULL || x == NULL || step == NULL) {
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
        goto done;
    }
    double z[SS_LEVELS_MAX], best_p[SS_LEVELS_MAX], start[SS_LEVELS_MAX];
    double best = HUGE_VAL;
    unsigned iters = 0;
    /* starts: the moment estimate nudged off ties (a symmetric likelihood
     * is flat across a tie), a linear spectrum, and their midpoint; each is
     * run and then restarted once at its optimum */
    double lin[SS_LEVELS_MAX], norm = 0.5 * d * (d + 1.0);
    for (unsigned i = 0; i < d; i++)
        lin[i] = (double)(d - i) / norm;
    memcpy(best_p, p_start, d * sizeof *best_p);
    for (int s0 = 0; s0 < 3; s0++) {
        double mix = s0 == 0 ? 0.9 : (s0 == 1 ? 0.0 : 0.5);
        for (unsigned i = 0; i < d; i++)
            start[i] = mix * p_start[i] + (1 - mix) * lin[i];
        for (int pass = 0; pass < 2; pass++) {
            ss__z_from_simplex(d, start, z);
            for (size_t k = 0; k < m; k++)
                gsl_vector_set(x, k, z[k]);
            gsl_vector_set_all(step, pass == 0 ? 0.5 : 0.05);
            if (gsl_multimin_fminimizer_set(mz, &f, x, step) != GSL_SUCCESS)
                continue; /* the objective is not finite there */
            for (int it = 0; it < 3000; it++, iters++) {
                if (gsl_multimin_fminimizer_iterate(mz) != GSL_SUCCESS)
                    break;
                if (gsl_multimin_test_size(gsl_multimin_fminimizer_size(mz),
                                           1e-8) == GSL_SUCCESS)
                    break;
            }
            for (size_t k = 0; k < m; k++)
                z[k] = gsl_vector_get(mz->x, k);
            ss__simplex_from_z(d, z, start);
            double val = gsl_multimin_fminimizer_minimum(mz);
            if (val < best) {
                best = val;
                memcpy(best_p, start, d * sizeof *best_p);
            }
        }
    }
    if (!(best < SS__NLL_ZERO) && !L.over) {
        st = ss_error_set(err, SS_EINVAL, "runs",
                          "no spectrum tried gives these readings a non-zero "
                          "likelihood: the runs contradict one another or "
                          "the calibration (try method moments to see where)");
        goto done;
    }
    if (L.over)
        goto over;
    memset(out, 0, sizeof *out);
    memcpy(out->p, best_p, d * sizeof *best_p);
    out->neg_log_likelihood = best;
    out->iterations = iters;

    /* observed information: Hessian of −log L in x = (p_1..p_{d−1}) */
    double pmin = best_p[d - 1];
    double h = fmin(1e-4, 0.25 * pmin);
    out->boundary = pmin < 1e-7;
    if (out->boundary)
        h = 1e-5;
    double hess[SS_LEVELS_MAX * SS_LEVELS_MAX];
    double x0[SS_LEVELS_MAX] = {0};
    for (size_t i = 0; i < m; i++)
        x0[i] = best_p[i];
    double f0 = ss__lik_at_x(&L, x0);
    for (size_t i = 0; i < m; i++)
        for (size_t j = i; j < m; j++) {
            double xa[SS_LEVELS_MAX], v[4];
            int sg[4][2] = {{1, 1}, {1, -1}, {-1, 1}, {-1, -1}};
            if (i == j) {
                memcpy(xa, x0, m * sizeof *xa);
                xa[i] = x0[i] + h;
                double fp = ss__lik_at_x(&L, xa);
                xa[i] = x0[i] - h;
                double fm = ss__lik_at_x(&L, xa);
                hess[i * m + i] = (fp - 2 * f0 + fm) / (h * h);
                continue;
            }
            for (int k = 0; k < 4; k++) {
                memcpy(xa, x0, m * sizeof *xa);
                xa[i] += sg[k][0] * h;
                xa[j] += sg[k][1] * h;
                v[k] = ss__lik_at_x(&L, xa);
            }
            hess[i * m + j] = hess[j * m + i] =
                (v[0] - v[1] - v[2] + v[3]) / (4 * h * h);
        }
    int hess_ok = 1;
    for (size_t i = 0; i < m * m; i++)
        hess_ok &= isfinite(hess[i]) && fabs(hess[i]) < 1e200;
    out->covariance_ok = hess_ok && ss__sym_invert(hess, m);
    if (out->covariance_ok)
        ss__expand_cov(d, hess, out->covariance);

    /* expected information: Cramér–Rao bound, rank and condition */
    double fisher[SS_LEVELS_MAX * SS_LEVELS_MAX];
    double hf = out->boundary ? 1e-6 : fmin(1e-5, 0.25 * pmin);
    ss__lik_fisher(&L, best_p, hf, fisher);
    gsl_matrix_view F = gsl_matrix_view_array(fisher, m, m);
    gsl_matrix *Fc = gsl_matrix_alloc(m, m);
    gsl_vector *ev = gsl_vector_alloc(m);
    gsl_eigen_symm_workspace *w = gsl_eigen_symm_alloc(m);
    int fisher_ok = 1;
    for (size_t i = 0; i < m * m; i++)
        fisher_ok &= isfinite(fisher[i]);
    if (Fc && ev && w && fisher_ok) {
        gsl_matrix_memcpy(Fc, &F.matrix);
        gsl_eigen_symm(Fc, ev, w);
        double emax = gsl_vector_max(ev), emin = gsl_vector_min(ev);
        int rank = 0;
        for (size_t i = 0; i < m; i++)
            rank += gsl_vector_get(ev, i) > 1e-10 * fmax(emax, 1e-300);
        out->fisher_rank = rank;
        out->fisher_condition = emin > 0 ? emax / emin : HUGE_VAL;
    }
    gsl_matrix_free(Fc);
    gsl_vector_free(ev);
    gsl_eigen_symm_free(w);
    if (fisher_ok && ss__sym_invert(fisher, m)) {
        double crb[SS_LEVELS_MAX * SS_LEVELS_MAX];
        ss__expand_cov(d, fisher, crb);
        for (unsigned i = 0; i < d; i++)
            out->crb_stderr[i] = sqrt(fmax(crb[i * d + i], 0.0));
        out->crb_ok = 1;
    }
    /* near ties the Wald interval misleads: profile likelihood there */
    double min_gap = HUGE_VAL;
    for (unsigned i = 0; i + 1 < d; i++)
        min_gap = fmin(min_gap, best_p[i] - best_p[i + 1]);
    if (profile_z > 0 &&
        (min_gap < 1e-4 || out->fisher_rank < (int)m || !out->covariance_ok))
        out->profile_ok =
            ss__lik_profile(&L, mz, x, step, best_p, best, profile_z,
                            out->profile_lower, out->profile_upper);
over:
    if (st == SS_OK && L.over == 2)
        st = ss_error_set(err, SS_EDEADLINE, "max_seconds",
                          "the likelihood fit did not finish within %.3g s "
                          "(the request deadline): use method moments, fewer "
                          "levels or fewer atoms",
                          budget->max_seconds);
    if (st == SS_OK && L.over)
        st = ss_error_set(err, SS_EBUDGET, "max_work",
                          "the likelihood fit needed more than %llu work "
                          "units (table sweeps and shots × levels per "
                          "evaluation, %llu each): use method moments, fewer "
                          "levels or fewer atoms",
                          (unsigned long long)L.work_max,
                          (unsigned long long)L.work_per_eval);
done:
    gsl_multimin_fminimizer_free(mz);
    gsl_vector_free(x);
    gsl_vector_free(step);
    ss__lik_release(&L);
    return st;
}
