/*
 * test_diagram.c — Criterion tests for the Young-diagram module of the core:
 * ss_diagram_count, ss_diagram_set_alloc (enumeration, order, budget and
 * argument errors), ss_diagram_content, ss_diagram_log_tableaux,
 * ss_diagram_log_dimension, ss_diagram_is_valid, and the grouping of a bare
 * diagram set by content (ss_levels_alloc with probability NULL).
 * Every numerical check names its outside source and tolerance beside it.
 */
#include "testutil.h"

TestSuite(diagram, .init = tu_quiet_gsl);

/* Partitions of n into at most k parts, OEIS A026820 rows for k = 1..n
 * (statistics-sources.md §6, rows read from OEIS).  Exact. */
Test(diagram, count_matches_A026820_rows) {
    static const uint64_t row4[] = {1, 3, 4, 5};
    static const uint64_t row6[] = {1, 4, 7, 9, 10, 11};
    static const uint64_t row8[] = {1, 5, 10, 15, 18, 20, 21, 22};
    static const struct {
        unsigned n;
        const uint64_t *row;
    } rows[] = {{4, row4}, {6, row6}, {8, row8}};
    for (size_t t = 0; t < TU_COUNT_OF(rows); ++t) {
        for (unsigned k = 1; k <= rows[t].n; ++k) {
            uint64_t got = ss_diagram_count(rows[t].n, k);
            cr_expect(got == rows[t].row[k - 1],
                      "ss_diagram_count(%u,%u): expected %" PRIu64
                      ", got %" PRIu64,
                      rows[t].n, k, rows[t].row[k - 1], got);
        }
    }
    /* More parts than atoms allowed: all partitions, p(4) = 5, p(8) = 22
     * (OEIS A000041).  Exact. */
    cr_expect(ss_diagram_count(4, 9) == 5,
              "ss_diagram_count(4,9): expected 5, got %" PRIu64,
              ss_diagram_count(4, 9));
    cr_expect(ss_diagram_count(8, 16) == 22,
              "ss_diagram_count(8,16): expected 22, got %" PRIu64,
              ss_diagram_count(8, 16));
}

/* Larger values of A026820 quoted in domain.md §4: 884 (100,3), 8037 (100,4),
 * 195491 (60,10), 6292069 (100,10).  p(100) = 190569292 (OEIS A000041)
 * [from memory].  Exact; counts only, nothing enumerated. */
Test(diagram, count_large_values) {
    static const struct {
        unsigned n, k;
        uint64_t want;
    } cases[] = {{100, 3, 884},
                 {100, 4, 8037},
                 {60, 10, 195491},
                 {100, 10, 6292069},
                 {100, 100, 190569292}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        uint64_t got = ss_diagram_count(cases[t].n, cases[t].k);
        cr_expect(got == cases[t].want,
                  "ss_diagram_count(%u,%u): expected %" PRIu64 ", got %" PRIu64,
                  cases[t].n, cases[t].k, cases[t].want, got);
    }
}

/* At most 3 parts: a(n) = round((n+3)^2/12) (OEIS A001399) [from memory; it
 * reproduces 884 at n = 100 and 61 at n = 24, both quoted in domain.md].
 * Exact for n = 1..200. */
Test(diagram, count_three_parts_closed_form) {
    for (unsigned n = 1; n <= 200; ++n) {
        uint64_t want = (uint64_t)(((n + 3) * (n + 3) + 6) / 12);
        uint64_t got = ss_diagram_count(n, 3);
        cr_expect(got == want,
                  "ss_diagram_count(%u,3): expected %" PRIu64 ", got %" PRIu64,
                  n, want, got);
    }
}

/* The header promises saturation at UINT64_MAX.  Partitions of 100000 into at
 * most 16 parts number about n^15/(15!·16!) ~ 1e49 > 2^64. */
Test(diagram, count_saturates) {
    uint64_t got = ss_diagram_count(SS_ATOMS_MAX, SS_LEVELS_MAX);
    cr_expect(got == UINT64_MAX,
              "ss_diagram_count(%u,%u): expected UINT64_MAX, got %" PRIu64,
              SS_ATOMS_MAX, SS_LEVELS_MAX, got);
}

/* Checks one enumerated set: fields, count == ss_diagram_count, every
 * diagram valid (own check and ss_diagram_is_valid), strictly decreasing in
 * reverse lexicographic order (hence distinct) starting at (n), stored
 * content == the row formula of domain.md §1. */
static void check_enumeration(unsigned n, unsigned d) {
    ss_diagram_set *set = tu_diagram_set(n, d);
    cr_assert(set->atoms == n && set->levels == d,
              "set (%u,%u): fields hold (%u,%u)", n, d, set->atoms,
              set->levels);
    uint64_t want = ss_diagram_count(n, d);
    cr_assert((uint64_t)set->count == want,
              "set (%u,%u): count %zu differs from ss_diagram_count %" PRIu64,
              n, d, set->count, want);
    cr_assert(set->rows[0] == n,
              "set (%u,%u): first diagram should be (n), row 1 = %u", n, d,
              set->rows[0]);
    for (size_t i = 0; i < set->count; ++i) {
        const uint32_t *r = set->rows + i * d;
        cr_assert(tu_is_diagram(r, d, n),
                  "set (%u,%u): diagram %zu is not a partition of %u", n, d, i,
                  n);
        cr_assert(ss_diagram_is_valid(r, d, n) == 1,
                  "set (%u,%u): ss_diagram_is_valid rejects diagram %zu", n, d,
                  i);
        if (i > 0)
            cr_assert(tu_revlex_before(r - d, r, d),
                      "set (%u,%u): diagrams %zu and %zu not in strict "
                      "reverse-lex order",
                      n, d, i - 1, i);
        int64_t c = tu_content(r, d);
        cr_assert(set->content[i] == c,
                  "set (%u,%u): content[%zu] expected %" PRId64
                  ", got %" PRId64,
                  n, d, i, c, set->content[i]);
        cr_assert(
            ss_diagram_content(r, d) == c,
            "ss_diagram_content of diagram %zu of (%u,%u): expected %" PRId64
            ", got %" PRId64,
            i, n, d, c, ss_diagram_content(r, d));
    }
    ss_diagram_set_free(set);
}

Test(diagram, enumeration_small_all_levels) {
    for (unsigned n = 1; n <= 14; ++n)
        for (unsigned d = SS_LEVELS_MIN; d <= SS_LEVELS_MAX; ++d)
            check_enumeration(n, d);
}

Test(diagram, enumeration_larger) {
    check_enumeration(40, 5);
    check_enumeration(100, 3);
    check_enumeration(60, 10); /* 195491 diagrams (domain.md §4) */
}

Test(diagram, is_valid_rejects) {
    const uint32_t up[3] = {2, 3, 0};
    const uint32_t short_sum[3] = {3, 1, 0};
    const uint32_t ok[3] = {3, 1, 1};
    cr_expect(ss_diagram_is_valid(up, 3, 5) == 0,
              "(2,3) is increasing but was accepted");
    cr_expect(ss_diagram_is_valid(short_sum, 3, 5) == 0,
              "(3,1) sums to 4, accepted for 5");
    cr_expect(ss_diagram_is_valid(ok, 3, 5) == 1, "(3,1,1) of 5 was rejected");
}

/* Sums over all diagrams of f^λ = exp(ss_diagram_log_tableaux) rounded:
 * levels = max(n,2) so that no diagram is cut (n <= 16). */
static void sum_tableaux(unsigned n, unsigned d, uint64_t *sum_f,
                         uint64_t *sum_f2) {
    ss_diagram_set *set = tu_diagram_set(n, d);
    uint64_t s1 = 0, s2 = 0;
    for (size_t i = 0; i < set->count; ++i) {
        uint64_t f = tu_round_count(
            ss_diagram_log_tableaux(set->rows + i * d, d), "f^λ");
        s1 += f;
        s2 += f * f;
    }
    ss_diagram_set_free(set);
    *sum_f = s1;
    *sum_f2 = s2;
}

/* Σ_λ f^λ = number of involutions, OEIS A000085 (n = 1..10; n = 0 is not an
 * admissible atom count).  Σ_λ (f^λ)² = n! (RSK; Stanley EC2 Cor. 7.13.6
 * [from memory]; statistics-sources.md §3.4).  Exact after rounding. */
Test(diagram, tableaux_sums_A000085_and_factorial) {
    static const uint64_t a000085[] = {1,  1,   2,   4,    10,  26,
                                       76, 232, 764, 2620, 9496};
    uint64_t fact = 1;
    for (unsigned n = 1; n <= 10; ++n) {
        fact *= n;
        uint64_t s1, s2;
        sum_tableaux(n, n < 2 ? 2 : n, &s1, &s2);
        cr_expect(s1 == a000085[n],
                  "Σ f^λ for n=%u: expected %" PRIu64
                  " (A000085), got %" PRIu64,
                  n, a000085[n], s1);
        cr_expect(s2 == fact,
                  "Σ (f^λ)² for n=%u: expected %" PRIu64 " (n!), got %" PRIu64,
                  n, fact, s2);
    }
}

/* Σ f^λ over at most 2 rows = C(n, floor(n/2)), OEIS A001405; over at most 3
 * rows = Motzkin numbers, OEIS A001006 (statistics-sources.md §6).  Exact. */
Test(diagram, tableaux_sums_A001405_A001006) {
    static const uint64_t a001405[] = {1, 2, 3, 6, 10, 20, 35, 70, 126, 252};
    static const uint64_t a001006[] = {1, 2, 4, 9, 21, 51, 127, 323, 835, 2188};
    for (unsigned n = 1; n <= 10; ++n) {
        uint64_t s1, s2;
        sum_tableaux(n, 2, &s1, &s2);
        cr_expect(s1 == a001405[n - 1],
                  "Σ f^λ, <=2 rows, n=%u: expected %" PRIu64
                  " (A001405), got %" PRIu64,
                  n, a001405[n - 1], s1);
        sum_tableaux(n, 3, &s1, &s2);
        cr_expect(s1 == a001006[n - 1],
                  "Σ f^λ, <=3 rows, n=%u: expected %" PRIu64
                  " (A001006), got %" PRIu64,
                  n, a001006[n - 1], s1);
    }
}

/* Σ f^λ over at most k rows for n = 8, k = 2..8: OEIS A182172 row
 * 70, 323, 588, 715, 756, 763, 764 (statistics-sources.md §6).  Exact. */
Test(diagram, tableaux_sums_A182172_row8) {
    static const uint64_t row[] = {70, 323, 588, 715, 756, 763, 764};
    for (unsigned k = 2; k <= 8; ++k) {
        uint64_t s1, s2;
        sum_tableaux(8, k, &s1, &s2);
        cr_expect(s1 == row[k - 2],
                  "Σ f^λ, n=8, <=%u rows: expected %" PRIu64 ", got %" PRIu64,
                  k, row[k - 2], s1);
    }
}

/* Hook length formula values (Sagan, The Symmetric Group, Thm 3.10.2; the
 * two-row squares (m,m) give the Catalan numbers, OEIS A000108; f^(4,3,2,1) =
 * 768 by hand: 10!/(7·5·5·3·3·3)).  Exact after rounding. */
Test(diagram, tableaux_textbook_values) {
    static const struct {
        uint32_t rows[4];
        uint64_t f;
    } cases[] = {
        {{3, 2, 0, 0}, 5},  {{3, 1, 1, 0}, 6},   {{4, 2, 0, 0}, 9},
        {{2, 2, 0, 0}, 2},  {{2, 1, 0, 0}, 2},   {{3, 2, 1, 0}, 16},
        {{4, 1, 1, 0}, 10}, {{4, 3, 2, 1}, 768}, {{3, 3, 0, 0}, 5},
        {{4, 4, 0, 0}, 14}, {{5, 5, 0, 0}, 42},  {{10, 10, 0, 0}, 16796},
        {{1, 1, 1, 1}, 1},  {{7, 0, 0, 0}, 1},
    };
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        uint64_t got =
            tu_round_count(ss_diagram_log_tableaux(cases[t].rows, 4), "f^λ");
        cr_expect(got == cases[t].f,
                  "f^(%u,%u,%u,%u): expected %" PRIu64 ", got %" PRIu64,
                  cases[t].rows[0], cases[t].rows[1], cases[t].rows[2],
                  cases[t].rows[3], cases[t].f, got);
    }
}

/* log f^λ and log dim against the test's own long-double hook-length and
 * Weyl-product evaluation (testutil.h) on every diagram of some sets:
 * |Δ log| <= 1e-12·max(1, |log|). */
Test(diagram, logs_match_reference_on_whole_sets) {
    static const unsigned cases[][2] = {{30, 6}, {24, 3}, {16, 16}, {50, 4}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        unsigned n = cases[t][0], d = cases[t][1];
        ss_diagram_set *set = tu_diagram_set(n, d);
        for (size_t i = 0; i < set->count; ++i) {
            const uint32_t *r = set->rows + i * d;
            double want = (double)tu_log_tableaux(r, d);
            double got = ss_diagram_log_tableaux(r, d);
            cr_assert(
                tu_close(got, want, 1e-12),
                "log f^λ, diagram %zu of (%u,%u): expected %.17g, got %.17g", i,
                n, d, want, got);
            for (unsigned dim = 1; dim <= d + 2 && dim <= SS_LEVELS_MAX;
                 ++dim) {
                double wd = (double)tu_log_dimension(r, d, dim);
                double gd = ss_diagram_log_dimension(r, d, dim);
                if (isinf(wd))
                    cr_assert(isinf(gd) && gd < 0,
                              "log dim_%u of diagram %zu of (%u,%u): expected "
                              "-inf, got %.17g",
                              dim, i, n, d, gd);
                else
                    cr_assert(tu_close(gd, wd, 1e-12),
                              "log dim_%u of diagram %zu of (%u,%u): expected "
                              "%.17g, got %.17g",
                              dim, i, n, d, wd, gd);
            }
        }
        ss_diagram_set_free(set);
    }
}

/* SU(3) irrep dimensions (particle-physics tables; statistics-sources.md §6,
 * OEIS A098737): dim = (a+1)(b+1)(a+b+2)/2, a = λ1−λ2, b = λ2−λ3; e.g.
 * (2,1) -> 8, (3,3) -> 10, (4,2) -> 27.  Exact after rounding. */
Test(diagram, gl3_dimensions) {
    static const struct {
        uint32_t rows[4];
        uint64_t dim;
    } cases[] = {
        {{1, 0, 0, 0}, 3},  {{2, 0, 0, 0}, 6},  {{2, 1, 0, 0}, 8},
        {{3, 0, 0, 0}, 10}, {{3, 3, 0, 0}, 10}, {{3, 1, 0, 0}, 15},
        {{4, 0, 0, 0}, 15}, {{4, 2, 0, 0}, 27}, {{1, 1, 1, 0}, 1},
        {{2, 2, 2, 0}, 1},  {{2, 2, 0, 0}, 6},  {{2, 1, 1, 0}, 3},
        {{3, 1, 1, 0}, 6},  {{5, 1, 0, 0}, 35}, {{4, 4, 0, 0}, 15},
        {{3, 2, 1, 0}, 8},
    };
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        const uint32_t *r = cases[t].rows;
        /* the closed form, evaluated here as an independent cross-check */
        uint64_t a = r[0] - r[1], b = r[1] - r[2];
        cr_assert((a + 1) * (b + 1) * (a + b + 2) / 2 == cases[t].dim,
                  "table entry %zu", t);
        uint64_t got =
            tu_round_count(ss_diagram_log_dimension(r, 4, 3), "dim_3");
        cr_expect(got == cases[t].dim,
                  "dim_GL(3) (%u,%u,%u): expected %" PRIu64 ", got %" PRIu64,
                  r[0], r[1], r[2], cases[t].dim, got);
    }
    /* more non-zero rows than dim: -INFINITY (header) */
    const uint32_t four[4] = {1, 1, 1, 1};
    double g = ss_diagram_log_dimension(four, 4, 3);
    cr_expect(isinf(g) && g < 0, "log dim_3 (1,1,1,1): expected -inf, got %g",
              g);
    const uint32_t two[4] = {3, 1, 0, 0};
    g = ss_diagram_log_dimension(two, 4, 1);
    cr_expect(isinf(g) && g < 0, "log dim_1 (3,1): expected -inf, got %g", g);
}

/* Symmetric and exterior powers: dim_d (n) = C(n+d−1, d−1), dim_d (1^k) =
 * C(d,k) (Fulton–Harris, Representation Theory, §6.1 [from memory]).
 * Relative 1e-12 on the value. */
Test(diagram, gl_dimensions_symmetric_and_exterior_powers) {
    for (unsigned d = 1; d <= 16; ++d) {
        for (unsigned n = 1; n <= 30; ++n) {
            uint32_t rows[16] = {0};
            rows[0] = n;
            double want = lgamma(n + d) - lgamma(n + 1.0) - lgamma((double)d);
            double got = ss_diagram_log_dimension(rows, 16, d);
            cr_expect(tu_close(got, want, 1e-12),
                      "log dim_%u (%u): expected %.17g, got %.17g", d, n, want,
                      got);
        }
        for (unsigned k = 1; k <= d; ++k) {
            uint32_t rows[16] = {0};
            for (unsigned i = 0; i < k; ++i)
                rows[i] = 1;
            double want =
                lgamma(d + 1.0) - lgamma(k + 1.0) - lgamma(d - k + 1.0);
            double got = ss_diagram_log_dimension(rows, 16, d);
            cr_expect(tu_close(got, want, 1e-12),
                      "log dim_%u (1^%u): expected %.17g, got %.17g", d, k,
                      want, got);
        }
    }
}

/* Frobenius: the transposition class sum acts on S^λ as c(λ) =
 * C(n,2)·χ^λ(τ)/f^λ (statistics-sources.md §3.2).  Characters χ^λ(τ) (column
 * 211 / 2111) and f^λ (column 1111 / 11111) from the S4 and S5 tables in
 * statistics-sources.md §6 (Fulton–Harris §2.3, §3.1).  Exact. */
Test(diagram, content_against_character_tables) {
    static const struct {
        unsigned n;
        uint32_t rows[5];
        int chi_tau;
        int f;
    } rows[] = {
        {4, {4, 0, 0, 0, 0}, 1, 1},  {4, {3, 1, 0, 0, 0}, 1, 3},
        {4, {2, 2, 0, 0, 0}, 0, 2},  {4, {2, 1, 1, 0, 0}, -1, 3},
        {4, {1, 1, 1, 1, 0}, -1, 1}, {5, {5, 0, 0, 0, 0}, 1, 1},
        {5, {4, 1, 0, 0, 0}, 2, 4},  {5, {3, 2, 0, 0, 0}, 1, 5},
        {5, {3, 1, 1, 0, 0}, 0, 6},  {5, {2, 2, 1, 0, 0}, -1, 5},
        {5, {2, 1, 1, 1, 0}, -2, 4}, {5, {1, 1, 1, 1, 1}, -1, 1},
    };
    for (size_t t = 0; t < TU_COUNT_OF(rows); ++t) {
        unsigned n = rows[t].n;
        int pairs = (int)(n * (n - 1) / 2);
        cr_assert((pairs * rows[t].chi_tau) % rows[t].f == 0,
                  "table row %zu not integral", t);
        int64_t want = pairs * rows[t].chi_tau / rows[t].f;
        int64_t got = ss_diagram_content(rows[t].rows, 5);
        cr_expect(got == want,
                  "c(%u,%u,%u,%u,%u): expected %" PRId64
                  " (Frobenius), got %" PRId64,
                  rows[t].rows[0], rows[t].rows[1], rows[t].rows[2],
                  rows[t].rows[3], rows[t].rows[4], want, got);
        uint64_t f =
            tu_round_count(ss_diagram_log_tableaux(rows[t].rows, 5), "f^λ");
        cr_expect(f == (uint64_t)rows[t].f,
                  "f^λ for table row %zu: expected %d (character degree), got "
                  "%" PRIu64,
                  t, rows[t].f, f);
    }
}

/* Degenerate contents by hand (domain.md §2; statistics-sources.md §5.4):
 * c(4,1,1) = c(3,3) = 3; c(3,1,1,1) = c(2,2,2) = −3.  Exact. */
Test(diagram, content_hand_examples) {
    static const struct {
        uint32_t rows[4];
        int64_t c;
    } cases[] = {{{4, 1, 1, 0}, 3},  {{3, 3, 0, 0}, 3},  {{3, 1, 1, 1}, -3},
                 {{2, 2, 2, 0}, -3}, {{6, 0, 0, 0}, 15}, {{1, 1, 1, 1}, -6}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        int64_t got = ss_diagram_content(cases[t].rows, 4);
        cr_expect(got == cases[t].c,
                  "c(%u,%u,%u,%u): expected %" PRId64 ", got %" PRId64,
                  cases[t].rows[0], cases[t].rows[1], cases[t].rows[2],
                  cases[t].rows[3], cases[t].c, got);
    }
}

static ss_levels *group_by_content(const ss_diagram_set *set) {
    ss_error err;
    ss_error_clear(&err);
    ss_levels *lv = NULL;
    ss_status st = ss_levels_alloc(set, NULL, &lv, &err);
    cr_assert(st == SS_OK && lv != NULL,
              "ss_levels_alloc: expected ok, got %s (%s)", ss_status_name(st),
              err.message);
    /* structure the header promises for a bare set */
    cr_assert(lv->first[0] == 0 && lv->first[lv->count] == set->count,
              "levels offsets do not cover all %zu diagrams", set->count);
    for (size_t g = 0; g < lv->count; ++g) {
        if (g > 0)
            cr_assert(lv->content[g] > lv->content[g - 1],
                      "level contents not increasing at %zu", g);
        cr_assert(lv->probability[g] == 0.0,
                  "bare set: level %zu probability %g, expected 0", g,
                  lv->probability[g]);
        cr_assert(lv->first[g + 1] > lv->first[g], "empty level %zu", g);
        for (size_t m = lv->first[g]; m < lv->first[g + 1]; ++m) {
            size_t idx = lv->members[m];
            cr_assert(idx < set->count, "member index %zu out of range", idx);
            cr_assert(set->content[idx] == lv->content[g],
                      "diagram %zu (c=%" PRId64
                      ") filed under content %" PRId64,
                      idx, set->content[idx], lv->content[g]);
            if (m > lv->first[g])
                cr_assert(idx > lv->members[m - 1],
                          "bare set: group %zu not in table order", g);
        }
    }
    return lv;
}

/* d = 2: c is strictly monotone in the second row, so no two diagrams share a
 * content (domain.md §2; statistics-sources.md §5.4).  d = 3 has no
 * collision below n = 6.  Exact, n = 1..60. */
Test(diagram, two_levels_never_degenerate) {
    for (unsigned n = 1; n <= 60; ++n) {
        for (unsigned d = 2; d <= 3; ++d) {
            if (d == 3 && n >= 6)
                continue;
            ss_diagram_set *set = tu_diagram_set(n, d);
            ss_levels *lv = group_by_content(set);
            cr_expect(
                lv->count == set->count,
                "(n=%u,d=%u): %zu diagrams but only %zu distinct contents", n,
                d, set->count, lv->count);
            ss_levels_free(lv);
            ss_diagram_set_free(set);
        }
    }
}

static void expect_group(const ss_diagram_set *set, const ss_levels *lv,
                         int64_t c, const uint32_t *a, const uint32_t *b) {
    size_t g = 0;
    while (g < lv->count && lv->content[g] != c)
        ++g;
    cr_assert(g < lv->count, "no level with content %" PRId64, c);
    cr_assert(lv->first[g + 1] - lv->first[g] == 2,
              "level c=%" PRId64 ": expected 2 members, got %zu", c,
              lv->first[g + 1] - lv->first[g]);
    size_t ia = tu_find_diagram(set, a), ib = tu_find_diagram(set, b);
    cr_assert(ia < set->count && ib < set->count,
              "diagrams of the example not enumerated");
    size_t m0 = lv->members[lv->first[g]], m1 = lv->members[lv->first[g] + 1];
    cr_expect((m0 == ia && m1 == ib) || (m0 == ib && m1 == ia),
              "level c=%" PRId64 ": members %zu,%zu, expected %zu,%zu", c, m0,
              m1, ia, ib);
}

/* First degeneracies (domain.md §2, statistics-sources.md §5.4):
 * d = 3, n = 6: only (4,1,1) and (3,3) collide, at c = 3;
 * d = 4, n = 6: (3,1,1,1) and (2,2,2) share c = −3.  Exact. */
Test(diagram, first_degenerate_levels) {
    ss_diagram_set *set = tu_diagram_set(6, 3);
    ss_levels *lv = group_by_content(set);
    cr_expect(lv->count == set->count - 1,
              "(6,3): expected %zu levels, got %zu", set->count - 1, lv->count);
    const uint32_t a3[3] = {4, 1, 1}, b3[3] = {3, 3, 0};
    expect_group(set, lv, 3, a3, b3);
    ss_levels_free(lv);
    ss_diagram_set_free(set);

    set = tu_diagram_set(6, 4);
    lv = group_by_content(set);
    const uint32_t a4[4] = {3, 1, 1, 1}, b4[4] = {2, 2, 2, 0};
    expect_group(set, lv, -3, a4, b4);
    ss_levels_free(lv);
    ss_diagram_set_free(set);
}

/* Argument errors (header): levels outside [2,16], atoms outside
 * [1, SS_ATOMS_MAX] give SS_EINVAL naming the field; nothing written. */
Test(diagram, set_alloc_rejects_bad_arguments) {
    static const struct {
        unsigned n, d;
        const char *field;
    } cases[] = {{5, 1, "levels"},
                 {5, 17, "levels"},
                 {0, 3, "atoms"},
                 {SS_ATOMS_MAX + 1, 3, "atoms"}};
    ss_diagram_set sentinel;
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        ss_error err;
        ss_error_clear(&err);
        ss_diagram_set *out = &sentinel;
        ss_status st =
            ss_diagram_set_alloc(cases[t].n, cases[t].d, NULL, &out, &err);
        char what[64];
        snprintf(what, sizeof what, "set_alloc(n=%u, d=%u)", cases[t].n,
                 cases[t].d);
        tu_expect_error(st, &err, SS_EINVAL, cases[t].field, what);
        cr_expect(out == &sentinel, "%s: *out was written on failure", what);
    }
}

/* Work budget (header): the count is checked before enumeration, so an
 * over-budget call fails fast with SS_EBUDGET naming max_diagrams and writes
 * nothing.  (100000, 16) would take forever to enumerate: returning within
 * 1 s (generous, ASan) shows nothing was enumerated. */
Test(diagram, set_alloc_budget) {
    ss_budget b = {.max_diagrams = 1000, .max_table_cells = UINT64_MAX};
    ss_diagram_set sentinel;
    ss_diagram_set *out = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_diagram_set_alloc(100, 10, &b, &out, &err);
    tu_expect_error(st, &err, SS_EBUDGET, "max_diagrams",
                    "set_alloc(100,10), budget 1000");
    cr_expect(out == &sentinel, "*out written on SS_EBUDGET");

    ss_error_clear(&err);
    double t0 = tu_seconds_now();
    st = ss_diagram_set_alloc(SS_ATOMS_MAX, SS_LEVELS_MAX, NULL, &out, &err);
    double dt = tu_seconds_now() - t0;
    tu_expect_error(st, &err, SS_EBUDGET, "max_diagrams",
                    "set_alloc(100000,16), default budget");
    cr_expect(out == &sentinel, "*out written on SS_EBUDGET");
    cr_expect(dt < 1.0, "over-budget call took %.3f s; expected a fast failure",
              dt);

    /* boundary: count(10,3) = 14 (A026820) fits a budget of 14, not of 13 */
    b.max_diagrams = 13;
    ss_error_clear(&err);
    st = ss_diagram_set_alloc(10, 3, &b, &out, &err);
    tu_expect_error(st, &err, SS_EBUDGET, "max_diagrams",
                    "set_alloc(10,3), budget 13");
    cr_expect(out == &sentinel, "*out written on SS_EBUDGET");
    b.max_diagrams = 14;
    ss_error_clear(&err);
    st = ss_diagram_set_alloc(10, 3, &b, &out, &err);
    cr_assert(st == SS_OK,
              "set_alloc(10,3) with budget 14: expected ok, got %s (%s)",
              ss_status_name(st), err.message);
    cr_expect(out != &sentinel && out->count == 14,
              "set_alloc(10,3): expected 14 diagrams");
    ss_diagram_set_free(out);
}

/* The default budget as documented in the header, and the header's claim
 * that it admits (n, d) = (100, 10) (6292069 diagrams, domain.md §4). */
Test(diagram, default_budget) {
    ss_budget b = ss_budget_default();
    cr_expect(b.max_diagrams == 8000000u,
              "default max_diagrams: expected 8000000, got %" PRIu64,
              b.max_diagrams);
    cr_expect(b.max_table_cells == 64000000u,
              "default max_table_cells: expected 64000000, got %" PRIu64,
              b.max_table_cells);
    cr_expect(ss_diagram_count(100, 10) <= b.max_diagrams,
              "(100,10) exceeds default diagrams");
    uint64_t cells = ss_diagram_table_cells(100, 10);
    cr_expect(cells > 0 && cells <= b.max_table_cells,
              "table cells for (100,10) = %" PRIu64
              " exceed the default budget",
              cells);
    cr_expect(ss_diagram_table_cells(SS_ATOMS_MAX, SS_LEVELS_MAX) >
                  b.max_table_cells,
              "table cells for (100000,16) fit the default budget?");
}
