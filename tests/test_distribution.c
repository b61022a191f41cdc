/*
 * test_distribution.c — Criterion tests for the Schur–Weyl distribution
 * module of the core: ss_distribution_compute (exact small tables, closed
 * forms, rank-deficient and nearly degenerate spectra, table moments, large
 * deviation and O'Donnell–Wright bounds, bad input and work budget),
 * ss_distribution_order_by_probability, and the moment closed forms
 * ss_content_mean / ss_content_variance on whole tables.
 * Each numerical check names its outside source and tolerance beside it.
 */
#include <float.h>
#include <gsl/gsl_rng.h>

#include "testutil.h"

TestSuite(distribution, .init = tu_quiet_gsl);

/* Structural invariants every table must satisfy (header contract):
 * shape of the diagram set, P >= 0, log P consistent with P (1e-11 relative;
 * -inf or below the double range where the stored P is 0), spectrum stored
 * sorted, total = Σ P (1e-13) and within 1e-10 of 1, mean_content and
 * content_variance equal to the table sums recomputed here (1e-12 / 1e-10
 * relative). */
static void check_invariants(const ss_distribution *dist, unsigned n,
                             unsigned d, const double *p) {
    const ss_diagram_set *set = dist->diagrams;
    cr_assert(set != NULL && set->atoms == n && set->levels == d,
              "table (%u,%u): bad diagram set", n, d);
    cr_assert((uint64_t)set->count == ss_diagram_count(n, d),
              "table (%u,%u): %zu diagrams, ss_diagram_count says %" PRIu64, n,
              d, set->count, ss_diagram_count(n, d));
    double sorted[SS_LEVELS_MAX];
    tu_sort_desc(p, d, sorted);
    for (unsigned i = 0; i < d; ++i)
        cr_assert(dist->spectrum[i] == sorted[i],
                  "table (%u,%u): spectrum[%u] = %.17g, expected %.17g", n, d,
                  i, dist->spectrum[i], sorted[i]);
    double sum = 0.0, mean = 0.0;
    for (size_t i = 0; i < set->count; ++i) {
        double pr = dist->probability[i], lp = dist->log_probability[i];
        cr_assert(pr >= 0.0 && pr <= 1.0 + 1e-12,
                  "table (%u,%u): P[%zu] = %.17g", n, d, i, pr);
        if (pr ==
            0.0) /* exact zero, or a positive value below the double range */
            cr_assert((isinf(lp) && lp < 0) || lp < log(DBL_TRUE_MIN) + 1.0,
                      "table (%u,%u): P[%zu] = 0 but log P = %.17g", n, d, i,
                      lp);
        else
            cr_assert(isfinite(lp),
                      "table (%u,%u): P[%zu] = %.17g but log P = %.17g", n, d,
                      i, pr, lp);
        if (pr > 1e-300)
            cr_assert(tu_rel_err(exp(lp), pr) <= 1e-11,
                      "table (%u,%u): exp(log P[%zu]) = %.17g, P = %.17g", n, d,
                      i, exp(lp), pr);
        sum += pr;
        mean += pr * (double)set->content[i];
    }
    double var = 0.0;
    for (size_t i = 0; i < set->count; ++i) {
        double dc = (double)set->content[i] - mean;
        var += dist->probability[i] * dc * dc;
    }
    cr_assert(fabs(dist->total - sum) <= 1e-13,
              "table (%u,%u): total %.17g, Σ P = %.17g", n, d, dist->total,
              sum);
    cr_assert(fabs(dist->total - 1.0) <= 1e-10,
              "table (%u,%u): total %.17g not within 1e-10 of 1", n, d,
              dist->total);
    cr_assert(tu_close(dist->mean_content, mean, 1e-12),
              "table (%u,%u): mean_content %.17g, Σ P·c = %.17g", n, d,
              dist->mean_content, mean);
    cr_assert(tu_close(dist->content_variance, var, 1e-10),
              "table (%u,%u): content_variance %.17g, Σ P·(c−mean)² = %.17g", n,
              d, dist->content_variance, var);
}

static double prob_of(const ss_distribution *dist, const uint32_t *rows) {
    size_t i = tu_find_diagram(dist->diagrams, rows);
    cr_assert(i < dist->diagrams->count, "diagram not found in table");
    return dist->probability[i];
}

/* Exact P_n from statistics-sources.md §6 "Exact P_n" (recomputed there with
 * exact rationals).  Relative error <= 1e-12. */
Test(distribution, exact_small_tables) {
    static const struct {
        unsigned n, d;
        double p[3];
        uint32_t rows[5][3];
        double want[5];
        size_t count;
    } cases[] = {
        {3, 2, {0.5, 0.5, 0}, {{3, 0, 0}, {2, 1, 0}}, {0.5, 0.5}, 2},
        {3,
         3,
         {1.0 / 3, 1.0 / 3, 1.0 / 3},
         {{3, 0, 0}, {2, 1, 0}, {1, 1, 1}},
         {10.0 / 27, 16.0 / 27, 1.0 / 27},
         3},
        {4,
         3,
         {1.0 / 3, 1.0 / 3, 1.0 / 3},
         {{4, 0, 0}, {3, 1, 0}, {2, 2, 0}, {2, 1, 1}},
         {5.0 / 27, 5.0 / 9, 4.0 / 27, 1.0 / 9},
         4},
        {3,
         3,
         {0.5, 1.0 / 3, 1.0 / 6},
         {{3, 0, 0}, {2, 1, 0}, {1, 1, 1}},
         {5.0 / 12, 5.0 / 9, 1.0 / 36},
         3},
    };
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        unsigned n = cases[t].n, d = cases[t].d;
        ss_distribution *dist = tu_distribution(n, d, cases[t].p);
        check_invariants(dist, n, d, cases[t].p);
        cr_assert(dist->diagrams->count == cases[t].count,
                  "case %zu: %zu diagrams, expected %zu", t,
                  dist->diagrams->count, cases[t].count);
        for (size_t k = 0; k < cases[t].count; ++k) {
            double got = prob_of(dist, cases[t].rows[k]);
            cr_expect(tu_rel_err(got, cases[t].want[k]) <= 1e-12,
                      "case %zu, λ=(%u,%u,%u): expected %.17g, got %.17g", t,
                      cases[t].rows[k][0], cases[t].rows[k][1],
                      cases[t].rows[k][2], cases[t].want[k], got);
        }
        ss_distribution_free(dist);
    }
}

/* Uniform p: P_n(λ) = f^λ·dim_d(λ)/d^n (hook-content formula, Stanley EC2
 * Cor. 7.21.4; statistics-sources.md §3.5), reference evaluated here in long
 * double from the hook length and Weyl product formulas.  Relative error
 * <= 1e-9 for every λ with P >= 1e-12. */
Test(distribution, uniform_matches_hook_content) {
    static const unsigned cases[][2] = {{10, 2}, {25, 2}, {12, 3},  {60, 3},
                                        {40, 4}, {30, 6}, {20, 10}, {18, 16}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        unsigned n = cases[t][0], d = cases[t][1];
        double p[SS_LEVELS_MAX];
        tu_fill_uniform(p, d);
        ss_distribution *dist = tu_distribution(n, d, p);
        check_invariants(dist, n, d, p);
        const ss_diagram_set *set = dist->diagrams;
        for (size_t i = 0; i < set->count; ++i) {
            const uint32_t *r = set->rows + i * d;
            long double lw = tu_log_tableaux(r, d) + tu_log_dimension(r, d, d) -
                             (long double)n * logl((long double)d);
            double want = (double)expl(lw);
            if (want < 1e-12)
                continue;
            double got = dist->probability[i];
            cr_expect(tu_rel_err(got, want) <= 1e-9,
                      "uniform (n=%u,d=%u), diagram %zu (%u,%u,...): expected "
                      "%.17g, got %.17g "
                      "(rel %.3g)",
                      n, d, i, r[0], r[1], want, got, tu_rel_err(got, want));
        }
        ss_distribution_free(dist);
    }
}

/* Pure state: s_λ(1,0,…,0) = 1 for λ = (n) and 0 otherwise (a one-letter
 * alphabet fills only one row; Stanley EC2 Def. 7.10.1).  Exact. */
Test(distribution, pure_state) {
    static const unsigned cases[][2] = {{10, 3}, {30, 4}, {1, 2}, {7, 16}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        unsigned n = cases[t][0], d = cases[t][1];
        double p[SS_LEVELS_MAX] = {0};
        p[d - 1] = 1.0; /* unsorted on purpose: the core sorts */
        ss_distribution *dist = tu_distribution(n, d, p);
        check_invariants(dist, n, d, p);
        for (size_t i = 0; i < dist->diagrams->count; ++i) {
            const uint32_t *r = dist->diagrams->rows + i * d;
            double want = r[0] == n ? 1.0 : 0.0;
            cr_expect(dist->probability[i] == want,
                      "pure (n=%u,d=%u), diagram (%u,%u,...): expected exactly "
                      "%g, got %.17g",
                      n, d, r[0], r[1], want, dist->probability[i]);
            /* log 1 = 0 up to rounding (1e-15); true zeros are -inf (header) */
            cr_expect(want == 1.0 ? fabs(dist->log_probability[i]) <= 1e-15
                                  : (isinf(dist->log_probability[i]) &&
                                     dist->log_probability[i] < 0),
                      "pure (n=%u,d=%u), diagram (%u,%u,...): log P = %.17g", n,
                      d, r[0], r[1], dist->log_probability[i]);
        }
        cr_expect(
            dist->mean_content == tu_pairs(n) && dist->content_variance == 0.0,
            "pure (n=%u,d=%u): mean %.17g (expected %g), variance %.17g "
            "(expected 0)",
            n, d, dist->mean_content, tu_pairs(n), dist->content_variance);
        ss_distribution_free(dist);
    }
}

/* Rank 2 in d = 4: s_λ(x,y,0,0) = s_λ(x,y) (stability of Schur polynomials,
 * Stanley EC2 §7.10 [from memory]) and 0 for more than 2 rows.  Zero mass is
 * exact; the d = 2 comparison is to 1e-10 relative (two code paths). */
Test(distribution, rank_two_in_four_levels) {
    const unsigned n = 20;
    const double p4[4] = {0.7, 0.0, 0.3, 0.0}, p2[2] = {0.7, 0.3};
    ss_distribution *d4 = tu_distribution(n, 4, p4);
    ss_distribution *d2 = tu_distribution(n, 2, p2);
    check_invariants(d4, n, 4, p4);
    check_invariants(d2, n, 2, p2);
    for (size_t i = 0; i < d4->diagrams->count; ++i) {
        const uint32_t *r = d4->diagrams->rows + i * 4;
        if (r[2] > 0) {
            cr_expect(d4->probability[i] == 0.0,
                      "rank 2: λ=(%u,%u,%u,%u) has P = %.17g, expected 0", r[0],
                      r[1], r[2], r[3], d4->probability[i]);
            cr_expect(
                isinf(d4->log_probability[i]) && d4->log_probability[i] < 0,
                "rank 2: λ=(%u,%u,%u,%u) has log P = %.17g, expected -inf",
                r[0], r[1], r[2], r[3], d4->log_probability[i]);
            continue;
        }
        double want =
            prob_of(d2, r); /* first two rows of a zero-padded diagram */
        cr_expect(tu_rel_err(d4->probability[i], want) <= 1e-10,
                  "rank 2: λ=(%u,%u): d=4 gives %.17g, d=2 gives %.17g", r[0],
                  r[1], d4->probability[i], want);
    }
    ss_distribution_free(d4);
    ss_distribution_free(d2);
}

/* Nearly equal eigenvalues, where the bialternant formula is a 0/0 form
 * (domain.md §4; statistics-sources.md §4).  Reference: f^λ from the hook
 * formula times s_λ evaluated subtraction-free in long double (testutil.h:
 * explicit two-letter sum for d = 2, one branching step over it for d = 3).
 * Relative error <= 1e-9 on every λ (the header promises this everywhere). */
static void check_against_subtraction_free(unsigned n, unsigned d,
                                           const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    check_invariants(dist, n, d, p);
    double s[3];
    tu_sort_desc(p, d, s);
    const ss_diagram_set *set = dist->diagrams;
    for (size_t i = 0; i < set->count; ++i) {
        const uint32_t *r = set->rows + i * d;
        long double f = expl(tu_log_tableaux(r, d));
        long double schur = d == 2 ? tu_schur2(r[0], r[1], s[0], s[1])
                                   : tu_schur3(r, s[0], s[1], s[2]);
        double want = (double)(f * schur);
        cr_expect(tu_rel_err(dist->probability[i], want) <= 1e-9,
                  "p=(%.17g,%.17g,...) n=%u, λ=(%u,%u,%u): expected %.17g, got "
                  "%.17g (rel %.3g)",
                  p[0], p[1], n, r[0], r[1], d == 3 ? r[2] : 0u, want,
                  dist->probability[i], tu_rel_err(dist->probability[i], want));
    }
    ss_distribution_free(dist);
}

Test(distribution, nearly_equal_eigenvalues_two_levels) {
    const double a[2] = {0.5 + 1e-12, 0.5 - 1e-12};
    const double b[2] = {0.5 + 1e-9, 0.5 - 1e-9};
    const double c[2] = {0.5, 0.5};
    const double e[2] = {0.9, 0.1};
    check_against_subtraction_free(50, 2, a);
    check_against_subtraction_free(17, 2, a);
    check_against_subtraction_free(50, 2, b);
    check_against_subtraction_free(60, 2, c);
    check_against_subtraction_free(40, 2, e);
}

Test(distribution, nearly_equal_eigenvalues_three_levels) {
    const double third = 1.0 / 3.0;
    const double a[3] = {third + 1e-9, third, third - 1e-9};
    const double b[3] = {third + 1e-9, third + 1e-9, third - 2e-9};
    const double c[3] = {0.5 + 1e-12, 0.5 - 1e-12, 0.0};
    const double e[3] = {0.6, 0.3, 0.1};
    check_against_subtraction_free(30, 3, a);
    check_against_subtraction_free(30, 3, b);
    check_against_subtraction_free(21, 3, c);
    check_against_subtraction_free(24, 3, e);
}

/* Table moments against the closed forms of domain.md §2 /
 * statistics-sources.md §3.3 (exact identities): 1e-9 relative. */
static void check_moments(unsigned n, unsigned d, const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    check_invariants(dist, n, d, p);
    double p2 = 0.0, p3 = 0.0;
    for (unsigned i = 0; i < d; ++i) {
        p2 += p[i] * p[i];
        p3 += p[i] * p[i] * p[i];
    }
    double m = ss_content_mean(n, p2), v = ss_content_variance(n, p2, p3);
    cr_expect(tu_rel_err(dist->mean_content, m) <= 1e-9,
              "(n=%u,d=%u): table mean %.17g, closed form %.17g", n, d,
              dist->mean_content, m);
    cr_expect(tu_rel_err(dist->content_variance, v) <= 1e-9,
              "(n=%u,d=%u): table variance %.17g, closed form %.17g", n, d,
              dist->content_variance, v);
    ss_distribution_free(dist);
}

Test(distribution, moments_match_closed_forms) {
    const double a[3] = {0.6, 0.3, 0.1};
    const double b[2] = {0.8, 0.2};
    const double c[4] = {0.4, 0.3, 0.2, 0.1};
    const double e[3] = {0.5, 0.5, 0.0};
    check_moments(24, 3, a);
    check_moments(10, 2, b);
    check_moments(3, 3, a);
    check_moments(30, 4, c);
    check_moments(12, 3, e);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 20240611UL);
    for (unsigned d = 2; d <= 6; ++d) {
        double p[SS_LEVELS_MAX];
        tu_random_simplex(rng, d, p);
        check_moments(18, d, p);
    }
    gsl_rng_free(rng);
}

/* The issue's numbers for p = (0.6,0.3,0.1), n = 24 (domain.md §3 gives
 * E[c] = 126.96; Var = 611.064 by the closed form of §2 worked by hand:
 * 276·[1 + 44·0.244 + 231·0.46²] − 276²·0.46²).  1e-9 relative. */
Test(distribution, issue_example_moments) {
    const double p[3] = {0.6, 0.3, 0.1};
    ss_distribution *dist = tu_distribution(24, 3, p);
    cr_expect(tu_rel_err(dist->mean_content, 126.96) <= 1e-9,
              "mean_content: expected 126.96, got %.17g", dist->mean_content);
    cr_expect(tu_rel_err(dist->content_variance, 611.064) <= 1e-9,
              "content_variance: expected 611.064, got %.17g",
              dist->content_variance);
    cr_expect(tu_rel_err(ss_content_mean(24, 0.46), 126.96) <= 1e-12,
              "ss_content_mean(24, 0.46): expected 126.96, got %.17g",
              ss_content_mean(24, 0.46));
    cr_expect(
        tu_rel_err(ss_content_variance(24, 0.46, 0.244), 611.064) <= 1e-12,
        "ss_content_variance(24, 0.46, 0.244): expected 611.064, got %.17g",
        ss_content_variance(24, 0.46, 0.244));
    ss_distribution_free(dist);
}

/* Empirical Young diagram bias, domain.md §3: p = (0.6,0.3,0.1), n = 24
 * (61 diagrams): E[λ/n] ≈ (0.648, 0.280, 0.072), quoted to 3 digits, so the
 * tolerance is 1e-3 absolute per component. */
Test(distribution, empirical_young_diagram_bias) {
    const double p[3] = {0.6, 0.3, 0.1};
    const double want[3] = {0.648, 0.280, 0.072};
    ss_distribution *dist = tu_distribution(24, 3, p);
    cr_assert(dist->diagrams->count == 61,
              "(24,3): expected 61 diagrams, got %zu", dist->diagrams->count);
    double e[3] = {0, 0, 0};
    for (size_t i = 0; i < dist->diagrams->count; ++i)
        for (unsigned k = 0; k < 3; ++k)
            e[k] += dist->probability[i] *
                    (double)dist->diagrams->rows[i * 3 + k] / 24.0;
    for (unsigned k = 0; k < 3; ++k)
        cr_expect(fabs(e[k] - want[k]) <= 1e-3,
                  "E[λ_%u/n]: expected %.3f ± 1e-3, got %.6f", k + 1, want[k],
                  e[k]);
    ss_distribution_free(dist);
}

/* Large deviation type bound P_n(λ) <= (n+1)^{d(d−1)/2}·exp(−n·D(λ/n‖p))
 * (Christandl & Mitchison, CMP 261 (2006), Thm 1; statistics-sources.md
 * §1.2): a hard assertion on every λ, compared in logs with an absolute slack
 * of 1e-9 for rounding (equality is reached at n = 1, p = (½,½)). */
static void check_type_bound(unsigned n, unsigned d, const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    const double *s = dist->spectrum;
    const ss_diagram_set *set = dist->diagrams;
    double prefactor = 0.5 * (double)(d * (d - 1)) * log((double)n + 1.0);
    for (size_t i = 0; i < set->count; ++i) {
        const uint32_t *r = set->rows + i * d;
        double kl = 0.0;
        for (unsigned k = 0; k < d && r[k] > 0; ++k) {
            double x = (double)r[k] / (double)n;
            kl += s[k] > 0.0 ? x * log(x / s[k]) : HUGE_VAL;
        }
        double bound = prefactor - (double)n * kl;
        if (isinf(bound)) {
            cr_expect(dist->probability[i] == 0.0,
                      "type bound (n=%u,d=%u): λ=(%u,%u,...) needs a zero "
                      "eigenvalue but P = %.17g",
                      n, d, r[0], r[1], dist->probability[i]);
            continue;
        }
        cr_expect(dist->log_probability[i] <= bound + 1e-9,
                  "type bound (n=%u,d=%u): λ=(%u,%u,...) log P = %.17g > log "
                  "bound %.17g",
                  n, d, r[0], r[1], dist->log_probability[i], bound);
    }
    ss_distribution_free(dist);
}

Test(distribution, christandl_mitchison_type_bound) {
    const double a[3] = {0.6, 0.3, 0.1}, b[2] = {0.7, 0.3},
                 c[4] = {0.4, 0.3, 0.2, 0.1};
    const double half[2] = {0.5, 0.5}, pure[3] = {1.0, 0.0, 0.0},
                 rank2[4] = {0.5, 0.5, 0, 0};
    double u[3];
    tu_fill_uniform(u, 3);
    check_type_bound(30, 3, a);
    check_type_bound(40, 2, b);
    check_type_bound(20, 4, c);
    check_type_bound(25, 3, u);
    check_type_bound(1, 2, half);
    check_type_bound(10, 3, pure);
    check_type_bound(12, 4, rank2);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 77UL);
    double p[5];
    tu_random_simplex(rng, 5, p);
    check_type_bound(16, 5, p);
    gsl_rng_free(rng);
}

/* O'Donnell & Wright (STOC 2016, arXiv:1508.01907; statistics-sources.md
 * §2.1 [M]): E‖λ/n − p‖₂² <= d/n, evaluated exactly from the table (slack
 * 1e-12 for rounding).  Greene's theorem consequence (statistics-sources.md
 * §3.7): E[λ1+…+λk] >= n·(p1+…+pk) for every k (slack 1e-9·n). */
static void check_ow_and_greene(unsigned n, unsigned d, const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    const double *s = dist->spectrum;
    const ss_diagram_set *set = dist->diagrams;
    double msq = 0.0, partial[SS_LEVELS_MAX] = {0};
    for (size_t i = 0; i < set->count; ++i) {
        const uint32_t *r = set->rows + i * d;
        double sq = 0.0, cum = 0.0;
        for (unsigned k = 0; k < d; ++k) {
            double dx = (double)r[k] / (double)n - s[k];
            sq += dx * dx;
            cum += (double)r[k];
            partial[k] += dist->probability[i] * cum;
        }
        msq += dist->probability[i] * sq;
    }
    cr_expect(msq <= (double)d / (double)n + 1e-12,
              "O'Donnell–Wright (n=%u,d=%u): E‖λ/n − p‖² = %.17g > d/n = %.17g",
              n, d, msq, (double)d / (double)n);
    double cum_p = 0.0;
    for (unsigned k = 0; k < d; ++k) {
        cum_p += s[k];
        cr_expect(partial[k] >= (double)n * cum_p - 1e-9 * (double)n,
                  "Greene (n=%u,d=%u): E[λ1+…+λ%u] = %.17g < n·Σp = %.17g", n,
                  d, k + 1, partial[k], (double)n * cum_p);
    }
    ss_distribution_free(dist);
}

Test(distribution, odonnell_wright_and_greene_bounds) {
    const double a[3] = {0.6, 0.3, 0.1}, half[2] = {0.5, 0.5},
                 b[3] = {0.5, 0.3, 0.2};
    double u[4];
    tu_fill_uniform(u, 4);
    check_ow_and_greene(24, 3, a);
    check_ow_and_greene(50, 2, half);
    check_ow_and_greene(40, 4, u);
    check_ow_and_greene(100, 3, b);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 4242UL);
    double p[5];
    tu_random_simplex(rng, 5, p);
    check_ow_and_greene(30, 5, p);
    gsl_rng_free(rng);
}

/* Growth chain (statistics-sources.md §3.8; Pieri rule, Stanley EC2 Thm
 * 7.15.7 [M]): with Σp = 1, Σ_i s_{λ+e_i}(p) = s_λ(p), i.e.
 * Σ_i P_{n+1}(λ+e_i)/f^{λ+e_i} = P_n(λ)/f^λ, f from the hook formula here.
 * Subtraction-free on both sides: 1e-9 relative. */
static void check_growth(unsigned n, unsigned d, const double *p) {
    ss_distribution *a = tu_distribution(n, d, p);
    ss_distribution *b = tu_distribution(n + 1, d, p);
    for (size_t i = 0; i < a->diagrams->count; ++i) {
        const uint32_t *r = a->diagrams->rows + i * d;
        double lhs = 0.0;
        for (unsigned k = 0; k < d; ++k) {
            if (k > 0 && r[k - 1] == r[k])
                continue;
            uint32_t up[SS_LEVELS_MAX];
            memcpy(up, r, d * sizeof(uint32_t));
            up[k] += 1;
            lhs += prob_of(b, up) / (double)expl(tu_log_tableaux(up, d));
        }
        double rhs = a->probability[i] / (double)expl(tu_log_tableaux(r, d));
        cr_expect(tu_rel_err(lhs, rhs) <= 1e-9,
                  "growth chain (n=%u,d=%u), λ=(%u,%u,...): Σ s_{λ+e_i} = "
                  "%.17g, s_λ = %.17g",
                  n, d, r[0], r[1], lhs, rhs);
    }
    ss_distribution_free(a);
    ss_distribution_free(b);
}

Test(distribution, growth_chain_identity) {
    const double a[3] = {0.6, 0.3, 0.1}, c[4] = {0.4, 0.3, 0.2, 0.1};
    double u[3];
    tu_fill_uniform(u, 3);
    check_growth(20, 3, a);
    check_growth(15, 4, c);
    check_growth(12, 3, u);
}

/* ss_distribution_order_by_probability: a permutation, probabilities
 * non-increasing, ties in table order (header). */
static void check_order(unsigned n, unsigned d, const double *p) {
    ss_distribution *dist = tu_distribution(n, d, p);
    size_t count = dist->diagrams->count;
    size_t *ord = ss_distribution_order_by_probability(dist);
    cr_assert(ord != NULL, "order_by_probability returned NULL");
    unsigned char *seen = calloc(count, 1);
    cr_assert(seen != NULL);
    for (size_t i = 0; i < count; ++i) {
        cr_assert(ord[i] < count && !seen[ord[i]],
                  "order: entry %zu (%zu) repeated or out of range", i, ord[i]);
        seen[ord[i]] = 1;
        if (i > 0) {
            double hi = dist->probability[ord[i - 1]],
                   lo = dist->probability[ord[i]];
            cr_assert(hi >= lo,
                      "order (n=%u,d=%u): position %zu has P %.17g after %.17g",
                      n, d, i, lo, hi);
            if (hi == lo)
                cr_assert(ord[i] > ord[i - 1],
                          "order: tie at %zu not in table order", i);
        }
    }
    free(seen);
    free(ord);
    ss_distribution_free(dist);
}

Test(distribution, order_by_probability_sorts) {
    const double a[3] = {0.6, 0.3, 0.1}, pure[3] = {1, 0, 0};
    double u[2], u3[3];
    tu_fill_uniform(u, 2);
    tu_fill_uniform(u3, 3);
    check_order(24, 3, a);
    check_order(15, 2, u);    /* f·(λ1−λ2+1) repeats: ties */
    check_order(10, 3, pure); /* many exact zeros: ties */
    check_order(9, 3, u3);
}

/* Bad spectra: each SS_EINVAL names a field starting with "spectrum" and
 * nothing is written to *out (header).  The sum check is |Σp − 1| <=
 * SS_SPECTRUM_SUM_TOL = 1e-9 and the message must state the amount (1e-6). */
Test(distribution, rejects_bad_spectra) {
    static const struct {
        double p[4];
        size_t len;
        const char *what;
    } cases[] = {
        {{0.6, 0.5, -0.1, 0}, 3, "negative entry"},
        {{NAN, 0.5, 0.5, 0}, 3, "NaN entry"},
        {{INFINITY, 0.0, 0.0, 0}, 3, "infinite entry"},
        {{0.5, 0.5, 0, 0}, 2, "length 2 for 3 levels"},
        {{0.5, 0.3, 0.2, 0.0}, 4, "length 4 for 3 levels"},
        {{0.5, 0.3, 0.2 + 1e-6, 0}, 3, "sum off by 1e-6"},
    };
    ss_distribution sentinel;
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        ss_error err;
        ss_error_clear(&err);
        ss_distribution *out = &sentinel;
        ss_status st = ss_distribution_compute(5, 3, cases[t].p, cases[t].len,
                                               NULL, &out, &err);
        tu_expect_error(st, &err, SS_EINVAL, NULL, cases[t].what);
        cr_expect(tu_starts_with(err.field, "spectrum"),
                  "%s: err.field should start with \"spectrum\", got \"%s\"",
                  cases[t].what, err.field);
        cr_expect(out == &sentinel, "%s: *out written on failure",
                  cases[t].what);
    }
    /* the amount the sum is off must appear in the message */
    ss_error err;
    ss_error_clear(&err);
    ss_distribution *out = &sentinel;
    const double off[3] = {0.5, 0.3, 0.2 + 1e-6};
    (void)ss_distribution_compute(5, 3, off, 3, NULL, &out, &err);
    cr_expect(tu_message_mentions(err.message, 1e-6),
              "sum off by 1e-6: message does not state the amount: \"%s\"",
              err.message);
    /* just inside the tolerance is accepted (|Σp − 1| = 5e-10 <= 1e-9) */
    const double inside[3] = {0.5, 0.3, 0.2 + 5e-10};
    ss_error_clear(&err);
    ss_status st = ss_distribution_compute(5, 3, inside, 3, NULL, &out, &err);
    cr_expect(st == SS_OK, "sum off by 5e-10: expected ok, got %s (%s)",
              ss_status_name(st), err.message);
    if (st == SS_OK)
        ss_distribution_free(out);
}

Test(distribution, rejects_bad_sizes) {
    double p[SS_LEVELS_MAX + 1];
    tu_fill_uniform(p, SS_LEVELS_MAX + 1);
    ss_distribution sentinel;
    ss_distribution *out = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_distribution_compute(5, 1, p, 1, NULL, &out, &err);
    tu_expect_error(st, &err, SS_EINVAL, "levels", "levels 1");
    ss_error_clear(&err);
    st = ss_distribution_compute(5, SS_LEVELS_MAX + 1, p, SS_LEVELS_MAX + 1,
                                 NULL, &out, &err);
    tu_expect_error(st, &err, SS_EINVAL, "levels", "levels 17");
    ss_error_clear(&err);
    st = ss_distribution_compute(0, 3, (const double[3]){0.5, 0.3, 0.2}, 3,
                                 NULL, &out, &err);
    tu_expect_error(st, &err, SS_EINVAL, "atoms", "atoms 0");
    cr_expect(out == &sentinel, "*out written on failure");
}

/* Work budget (header): SS_EBUDGET naming max_diagrams or max_table_cells,
 * checked before work; a budget equal to the need is enough. */
Test(distribution, budget_limits) {
    double p[10];
    tu_fill_uniform(p, 10);
    ss_distribution sentinel;
    ss_distribution *out = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    ss_budget b = {.max_diagrams = 1000, .max_table_cells = UINT64_MAX};
    double t0 = tu_seconds_now();
    ss_status st = ss_distribution_compute(100, 10, p, 10, &b, &out, &err);
    tu_expect_error(st, &err, SS_EBUDGET, "max_diagrams",
                    "(100,10) with 1000 diagrams");
    cr_expect(tu_seconds_now() - t0 < 1.0,
              "over-budget call did not fail fast");
    cr_expect(out == &sentinel, "*out written on failure");

    const double q[3] = {0.5, 0.3, 0.2};
    uint64_t cells = ss_diagram_table_cells(20, 3);
    cr_assert(cells > 0 && cells < UINT64_MAX,
              "table cells for (20,3): %" PRIu64, cells);
    b.max_diagrams = UINT64_MAX;
    b.max_table_cells = cells - 1;
    ss_error_clear(&err);
    st = ss_distribution_compute(20, 3, q, 3, &b, &out, &err);
    tu_expect_error(st, &err, SS_EBUDGET, "max_table_cells",
                    "(20,3) with cells − 1");
    cr_expect(out == &sentinel, "*out written on failure");
    b.max_table_cells = cells;
    b.max_diagrams = ss_diagram_count(20, 3);
    ss_error_clear(&err);
    st = ss_distribution_compute(20, 3, q, 3, &b, &out, &err);
    cr_assert(
        st == SS_OK,
        "(20,3) with exactly the needed budget: expected ok, got %s (%s: %s)",
        ss_status_name(st), err.field, err.message);
    ss_distribution_free(out);
}

/* A zero limit means the default's (header), here as in the analysis's
 * cost model: a zeroed budget computes what NULL computes, and a single
 * zero field still leaves the other limit in force. */
Test(distribution, zero_limits_mean_the_defaults) {
    const double q[3] = {0.5, 0.3, 0.2};
    ss_budget zero;
    memset(&zero, 0, sizeof zero);
    ss_error err;
    ss_error_clear(&err);
    ss_distribution *a = NULL, *b = NULL;
    cr_assert_eq(ss_distribution_compute(20, 3, q, 3, &zero, &a, &err), SS_OK,
                 "zeroed budget: %s: %s", err.field, err.message);
    cr_assert_eq(ss_distribution_compute(20, 3, q, 3, NULL, &b, &err), SS_OK);
    cr_assert_eq(a->diagrams->count, b->diagrams->count);
    for (size_t i = 0; i < a->diagrams->count; ++i)
        cr_expect_eq(a->probability[i], b->probability[i], "diagram %zu", i);
    ss_distribution_free(a);
    ss_distribution_free(b);
    ss_diagram_set *set = NULL;
    cr_assert_eq(ss_diagram_set_alloc(20, 3, &zero, &set, &err), SS_OK);
    cr_expect_eq(set->count, ss_diagram_count(20, 3));
    ss_diagram_set_free(set);
    ss_budget cells_only = {.max_table_cells = 1};
    ss_distribution *c = NULL;
    ss_error_clear(&err);
    tu_expect_error(ss_distribution_compute(20, 3, q, 3, &cells_only, &c, &err),
                    &err, SS_EBUDGET, "max_table_cells",
                    "one cell, max_diagrams zero (the default)");
}

/* Range (header): SS_ERANGE when n·ln(d·p_max) is too large for extended
 * precision.  n = 100000, p = (0.9, 0.1): n·ln(1.8) ≈ 58779, far beyond
 * ln(LDBL_MAX) ≈ 11356 (x87 extended), while the table itself (50001
 * diagrams) is within the default budget.  Nothing may be written. */
Test(distribution, range_error_for_huge_spread) {
    const double p[2] = {0.9, 0.1};
    ss_distribution sentinel;
    ss_distribution *out = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    ss_status st =
        ss_distribution_compute(SS_ATOMS_MAX, 2, p, 2, NULL, &out, &err);
    cr_expect(st == SS_ERANGE && err.code == SS_ERANGE,
              "(100000, (0.9,0.1)): expected numeric-range, got %s (field "
              "\"%s\": %s)",
              ss_status_name(st), err.field, err.message);
    cr_expect(out == &sentinel, "*out written on failure");
    if (st == SS_OK && out != &sentinel)
        ss_distribution_free(out);
}

/* The converse: a uniform spectrum has d·p_max = 1, so a large n is in range;
 * n = 2000, d = 2 against the hook-content closed form (Stanley EC2
 * Cor. 7.21.4): 1e-9 relative for P >= 1e-12, total within 1e-10 of 1. */
Test(distribution, large_uniform_in_range) {
    const unsigned n = 2000;
    const double p[2] = {0.5, 0.5};
    ss_distribution *dist = tu_distribution(n, 2, p);
    check_invariants(dist, n, 2, p);
    for (size_t i = 0; i < dist->diagrams->count; ++i) {
        const uint32_t *r = dist->diagrams->rows + i * 2;
        long double lw = tu_log_tableaux(r, 2) + tu_log_dimension(r, 2, 2) -
                         (long double)n * logl(2.0L);
        double want = (double)expl(lw);
        if (want < 1e-12)
            continue;
        cr_expect(tu_rel_err(dist->probability[i], want) <= 1e-9,
                  "uniform n=2000: λ=(%u,%u) expected %.17g, got %.17g", r[0],
                  r[1], want, dist->probability[i]);
    }
    ss_distribution_free(dist);
}

/* Grouping a distribution by content (ss_levels_alloc, header): each level's
 * probability is the sum over its members (1e-12 relative, sums of
 * positives), members by decreasing probability, levels cover the table.
 * (6,3) contains the degenerate pair (4,1,1)/(3,3) at c = 3 (domain.md §2). */
Test(distribution, levels_of_a_distribution) {
    const double a[3] = {0.5, 0.3, 0.2}, b[4] = {0.4, 0.3, 0.2, 0.1};
    const struct {
        unsigned n, d;
        const double *p;
    } cases[] = {{6, 3, a}, {12, 3, a}, {9, 4, b}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        ss_distribution *dist =
            tu_distribution(cases[t].n, cases[t].d, cases[t].p);
        ss_levels *lv = tu_levels(dist);
        cr_assert(lv->first[0] == 0 &&
                      lv->first[lv->count] == dist->diagrams->count,
                  "levels do not cover the table");
        double total = 0.0;
        for (size_t g = 0; g < lv->count; ++g) {
            double s = 0.0;
            for (size_t m = lv->first[g]; m < lv->first[g + 1]; ++m) {
                size_t idx = lv->members[m];
                cr_assert(dist->diagrams->content[idx] == lv->content[g],
                          "member misfiled");
                s += dist->probability[idx];
                if (m > lv->first[g])
                    cr_assert(
                        dist->probability[lv->members[m - 1]] >=
                            dist->probability[idx],
                        "level %zu: members not by decreasing probability", g);
            }
            cr_expect(tu_rel_err(lv->probability[g], s) <= 1e-12,
                      "level c=%" PRId64 ": probability %.17g, Σ members %.17g",
                      lv->content[g], lv->probability[g], s);
            total += lv->probability[g];
        }
        cr_expect(fabs(total - 1.0) <= 1e-10, "levels total %.17g", total);
        ss_levels_free(lv);
        ss_distribution_free(dist);
    }
}
