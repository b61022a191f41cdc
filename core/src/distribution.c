/*
 * distribution.c — the exact Schur–Weyl distribution P_n(λ|p) = f^λ s_λ(p).
 *
 * s_λ is evaluated without a single subtraction, by the branching rule over
 * Gelfand–Tsetlin patterns (Macdonald, Symmetric Functions, I (5.11)):
 *     s_ν(x_1..x_m) = Σ_{μ ≺ ν} s_μ(x_1..x_{m−1}) · x_m^{|ν|−|μ|},
 * run for all partitions at once as in Demmel & Koev (Math. Comp. 75, 2006)
 * and Chan–Drensky–Edelman–Kan–Koev ("On computing Schur functions and
 * series thereof"): the sum over horizontal strips is done one row at a time,
 *     u(ν,k) = u(ν,k+1) + x_m · u(ν − e_k, k)   when ν_k > ν_{k+1},
 * in place, in the rank order of internal.h.  Two facts keep it small:
 *  - s_ν(x_1..x_m) with m non-zero rows equals (x_1⋯x_m)^{ν_m} times s of ν
 *    with ν_m removed from every row, so level m stores only partitions with
 *    at most m−1 rows (size <= n) and the table of one level is a prefix of
 *    the next: one array, grown level by level;
 *  - zero eigenvalues drop out (only the rank r of ρ matters for s).
 * Values are kept in long double with x = p/p_max <= 1, so nothing
 * overflows and the relevant entries stay far above the underflow threshold
 * (checked up front: n·ln(r·p_max) <= SS__RANGE_LIMIT, because f^λ <= r^n).
 * f^λ enters in logs at the end.  Only sums and products of non-negative
 * numbers occur, so the relative error of every entry is a small multiple of
 * n·d·2^-64, whether eigenvalues are equal, zero or nearly equal.
 *
 * Owns the ss_distribution allocations and its temporary table.
 */
#include "internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* ln of the factor between the largest and the smallest relevant Schur value
 * that long double (min normal e^-11355) still represents with margin. */
#define SS__RANGE_LIMIT 10000.0

typedef struct {
    long a[SS_LEVELS_MAX + 1]; /* difference coordinates, a[1..M] */
    long b[SS_LEVELS_MAX + 1]; /* b[i] = budget left for rows <= i */
    unsigned rows;             /* M */
} ss__odometer;

/* First run: all outer coordinates zero. */
static void ss__odometer_start(ss__odometer *o, unsigned rows, long atoms) {
    memset(o, 0, sizeof *o);
    o->rows = rows;
    for (unsigned i = 0; i <= rows; i++)
        o->b[i] = atoms;
}

/* Advances the outer coordinates a[2..M] in rank order (a[M] most
 * significant); a[1] is the run and is left 0.  Returns 0 at the end. */
static int ss__odometer_next(ss__odometer *o) {
    for (unsigned i = 2; i <= o->rows; i++) {
        if ((long)i * (o->a[i] + 1) <= o->b[i]) {
            o->a[i]++;
            o->b[i - 1] = o->b[i] - (long)i * o->a[i];
            for (unsigned j = i - 1; j >= 2; j--) {
                o->a[j] = 0;
                o->b[j - 1] = o->b[j];
            }
            return 1;
        }
    }
    return 0;
}

/* The step in both precisions: double where the span of relevant values
 * fits (fast, vectorisable), long double elsewhere. */
#define SS__DP_REAL double
#define SS__DP_LOG log
#define SS__DP_NAME ss__schur_add_variable_d
#define SS__DP_FILL ss__probabilities_d
#include "distribution_dp.h"
#undef SS__DP_REAL
#undef SS__DP_LOG
#undef SS__DP_NAME
#undef SS__DP_FILL
#define SS__DP_REAL long double
#define SS__DP_LOG logl
#define SS__DP_NAME ss__schur_add_variable_ld
#define SS__DP_FILL ss__probabilities_ld
#include "distribution_dp.h"
#undef SS__DP_REAL
#undef SS__DP_LOG
#undef SS__DP_NAME
#undef SS__DP_FILL

static ss_status ss__range_check(unsigned atoms, unsigned rank, double pmax,
                                 ss_error *err) {
    double spread = (double)atoms * log((double)rank * pmax);
    if (spread > SS__RANGE_LIMIT)
        return ss_error_set(err, SS_ERANGE, "atoms",
                            "n·ln(r·p_max) = %.4g exceeds %.0f: the "
                            "probabilities of %u atoms span more than extended "
                            "precision holds",
                            spread, SS__RANGE_LIMIT, atoms);
    return SS_OK;
}

/* Fills the distributions ds[0..count) (one spectrum q of rank `rank`, each
 * with its own diagram set) from ONE Schur table built for the largest atom
 * number among them: the table of size <= n_max holds every partition of
 * size <= n for each smaller n too (internal.h). */
static ss_status ss__fill_many(ss_distribution *const *ds, size_t count,
                               const double *q, unsigned rank, ss_error *err) {
    unsigned n = 0, levels = ds[0]->diagrams->levels;
    for (size_t k = 0; k < count; k++)
        if (ds[k]->diagrams->atoms > n)
            n = ds[k]->diagrams->atoms;
    unsigned M = rank - 1;
    ss__rank_table rt = {0, 0, NULL};
    void *table = NULL, *epow = NULL, *lfact = NULL, *llog = NULL;
    ss_status st = SS_ENOMEM;
    if (ss__rank_table_init(&rt, M, n) != SS_OK)
        goto done;
    uint64_t cells = ss__rank_cum(&rt, M, (long)n);
    /* double suffices when the relevant values (>= 1e-12·(r·p_max)^-n, see
     * ss__range_check) stay 1e20 above double's smallest normal and the
     * largest (<= dim <= (n+1)^(r(r−1)/2)) below 1e300 */
    int fast = (double)n * log((double)rank * q[0]) < 600.0 &&
               0.5 * rank * (rank - 1.0) * log10(n + 1.0) < 300.0;
    size_t cell = fast ? sizeof(double) : sizeof(long double);
    table = malloc((size_t)cells * cell);
    epow = malloc(((size_t)n + 1) * cell);
    lfact = malloc(((size_t)n + levels + 1) * sizeof(long double));
    llog = malloc(((size_t)n + levels + 1) * sizeof(long double));
    if (table == NULL || epow == NULL || lfact == NULL || llog == NULL)
        goto done;
    double *td = table;
    long double *tl = table;

    long double x[SS_LEVELS_MAX] = {0};
    for (unsigned i = 0; i < rank; i++)
        x[i] = (long double)q[i] / (long double)q[0];
    /* one variable: only the empty partition is stored */
    if (fast)
        td[0] = 1.0;
    else
        tl[0] = 1.0L;
    long double e = x[0];
    for (unsigned m = 2; m <= rank; m++) {
        if (fast)
            ss__schur_add_variable_d(td, &rt, m - 1, (double)e,
                                     (double)x[m - 1], epow);
        else
            ss__schur_add_variable_ld(tl, &rt, m - 1, e, x[m - 1], epow);
        e *= x[m - 1];
    }
    /* e = x_1⋯x_r now */

    /* log k! as a running sum of log k: positive terms, absolute error below
     * k·eps·log k! (under 1e-12 relative in P for the sizes each precision
     * is used for) */
    long double log_e = logl(e);
    long double *lf = lfact, *ll = llog;
    lf[0] = ll[0] = 0.0L;
    for (size_t k = 1; k <= (size_t)n + levels; k++) {
        ll[k] = fast ? (long double)log((double)k) : logl((long double)k);
        lf[k] = lf[k - 1] + ll[k];
    }
    for (size_t k = 0; k < count; k++) {
        ss_distribution *d = ds[k];
        const ss_diagram_set *set = d->diagrams;
        long double log_scale =
            (long double)set->atoms * logl((long double)q[0]);
        long double total = 0.0L, mean = 0.0L;
        if (fast)
            ss__probabilities_d(d, td, &rt, rank, lf, ll, log_scale, log_e,
                                &total, &mean);
        else
            ss__probabilities_ld(d, tl, &rt, rank, lf, ll, log_scale, log_e,
                                 &total, &mean);
        long double var = 0.0L;
        for (size_t i = 0; i < set->count; i++) {
            long double dc = (long double)set->content[i] - mean;
            var += (long double)d->probability[i] * dc * dc;
        }
        d->total = (double)total;
        d->mean_content = (double)mean;
        d->content_variance = (double)var;
    }
    st = SS_OK;
done:
    if (st != SS_OK)
        ss_error_set(err, st, "", NULL);
    ss__rank_table_release(&rt);
    free(table);
    free(epow);
    free(lfact);
    free(llog);
    return st;
}

static ss_status ss__fill(ss_distribution *d, const double *q, unsigned rank,
                          ss_error *err) {
    return ss__fill_many(&d, 1, q, rank, err);
}

/* Validates (levels, atoms, p) and the work budget for the largest atom
 * number; fills q (normalised, descending) and the rank. */
static ss_status ss__distribution_check(unsigned atoms, unsigned levels,
                                        const double *p, size_t len,
                                        const ss_budget *b, double *q,
                                        unsigned *rank_out, ss_error *err) {
    if (levels < SS_LEVELS_MIN || levels > SS_LEVELS_MAX)
        return ss_error_set(err, SS_EINVAL, "levels",
                            "levels must be an integer from %d to %d, got %u",
                            SS_LEVELS_MIN, SS_LEVELS_MAX, levels);
    if (atoms < 1 || atoms > SS_ATOMS_MAX)
        return ss_error_set(err, SS_EINVAL, "atoms",
                            "atoms must be an integer from 1 to %d, got %u",
                            SS_ATOMS_MAX, atoms);
    ss_status st = ss_spectrum_validate(p, len, levels, q, err);
    if (st != SS_OK)
        return st;
    unsigned rank = 0;
    while (rank < levels && q[rank] > 0.0)
        rank++;
    uint64_t cells = ss_diagram_table_cells(atoms, rank);
    if (cells > b->max_table_cells)
        return ss_error_set(err, SS_EBUDGET, "max_table_cells",
                            "%u atoms with %u non-zero eigenvalues need a "
                            "Schur table of %llu cells; the work budget "
                            "max_table_cells allows %llu",
                            atoms, rank, (unsigned long long)cells,
                            (unsigned long long)b->max_table_cells);
    *rank_out = rank;
    return ss__range_check(atoms, rank, q[0], err);
}

/* A distribution with its diagram set and arrays, values not yet filled. */
static ss_status ss__distribution_shell(unsigned atoms, unsigned levels,
                                        const double *q, const ss_budget *b,
                                        ss_distribution **out, ss_error *err) {
    ss_distribution *d = calloc(1, sizeof *d);
    if (d == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    ss_status st = ss_diagram_set_alloc(atoms, levels, b, &d->diagrams, err);
    if (st != SS_OK) {
        free(d);
        return st;
    }
    size_t count = d->diagrams->count;
    d->probability = malloc(count * sizeof *d->probability);
    d->log_probability = malloc(count * sizeof *d->log_probability);
    if (d->probability == NULL || d->log_probability == NULL) {
        ss_distribution_free(d);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    memcpy(d->spectrum, q, levels * sizeof *q);
    *out = d;
    return SS_OK;
}

ss_status ss__distribution_compute_many(const unsigned *atoms, size_t count,
                                        unsigned levels, const double *p,
                                        const ss_budget *budget,
                                        ss_distribution **outs, ss_error *err) {
    if (count == 0)
        return SS_OK;
    unsigned nmax = 0;
    for (size_t k = 0; k < count; k++)
        nmax = atoms[k] > nmax ? atoms[k] : nmax;
    for (size_t k = 0; k < count; k++)
        if (atoms[k] < 1)
            nmax = 0; /* let the check name the bad value */
    ss_budget b = ss__budget_or_default(budget);
    double q[SS_LEVELS_MAX];
    unsigned rank = 0;
    ss_status st =
        ss__distribution_check(nmax, levels, p, levels, &b, q, &rank, err);
    if (st != SS_OK)
        return st;
    ss_distribution **ds = calloc(count, sizeof *ds);
    if (ds == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t k = 0; k < count && st == SS_OK; k++)
        st = ss__distribution_shell(atoms[k], levels, q, &b, &ds[k], err);
    if (st == SS_OK)
        st = ss__fill_many(ds, count, q, rank, err);
    for (size_t k = 0; k < count; k++) {
        if (st == SS_OK)
            outs[k] = ds[k];
        else
            ss_distribution_free(ds[k]);
    }
    free(ds);
    return st;
}

ss_status ss_distribution_compute(unsigned atoms, unsigned levels,
                                  const double *p, size_t len,
                                  const ss_budget *budget,
                                  ss_distribution **out, ss_error *err) {
    double q[SS_LEVELS_MAX];
    ss_budget b = ss__budget_or_default(budget);
    unsigned rank = 0;
    ss_status st =
        ss__distribution_check(atoms, levels, p, len, &b, q, &rank, err);
    if (st != SS_OK)
        return st;
    ss_distribution *d = NULL;
    st = ss__distribution_shell(atoms, levels, q, &b, &d, err);
    if (st == SS_OK)
        st = ss__fill(d, q, rank, err);
    if (st != SS_OK) {
        ss_distribution_free(d);
        return st;
    }
    *out = d;
    return SS_OK;
}

ss_status ss__distribution_update(ss_distribution *d, const double *p,
                                  ss_error *err) {
    unsigned levels = d->diagrams->levels;
    double q[SS_LEVELS_MAX];
    ss_status st = ss_spectrum_validate(p, levels, levels, q, err);
    if (st != SS_OK)
        return st;
    unsigned rank = 0;
    while (rank < levels && q[rank] > 0.0)
        rank++;
    st = ss__range_check(d->diagrams->atoms, rank, q[0], err);
    if (st != SS_OK)
        return st;
    memcpy(d->spectrum, q, levels * sizeof *q);
    return ss__fill(d, q, rank, err);
}

void ss_distribution_free(ss_distribution *dist) {
    if (dist == NULL)
        return;
    ss_diagram_set_free(dist->diagrams);
    free(dist->probability);
    free(dist->log_probability);
    free(dist);
}

typedef struct {
    double prob;
    size_t index;
} ss__ranked;

static int ss__cmp_ranked(const void *pa, const void *pb) {
    const ss__ranked *a = pa, *b = pb;
    if (a->prob != b->prob)
        return a->prob < b->prob ? 1 : -1;
    return (a->index > b->index) - (a->index < b->index);
}

size_t *ss_distribution_order_by_probability(const ss_distribution *dist) {
    size_t n = dist->diagrams->count;
    ss__ranked *tmp = malloc(n * sizeof *tmp);
    size_t *order = malloc(n * sizeof *order);
    if (tmp == NULL || order == NULL) {
        free(tmp);
        free(order);
        return NULL;
    }
    for (size_t i = 0; i < n; i++) {
        tmp[i].prob = dist->probability[i];
        tmp[i].index = i;
    }
    qsort(tmp, n, sizeof *tmp, ss__cmp_ranked);
    for (size_t i = 0; i < n; i++)
        order[i] = tmp[i].index;
    free(tmp);
    return order;
}
