/*
 * test_sampler.c — Criterion tests for the simulated-shot module of the
 * core: ss_sampler_alloc / ss_sampler_draw / ss_sampler_shot.  Checks that
 * the RSK shapes are valid diagrams, follow P_n(·|p) (chi-square goodness of
 * fit against ss_distribution), are reproducible from the seed, satisfy the
 * O'Donnell–Wright band on row means, and that simulated energies carry the
 * calibration energy plus Gaussian noise of the stated width; bad input is
 * rejected with a named field.  All random streams use gsl_rng_mt19937 with
 * fixed seeds, so every statistical check is deterministic; its false-alarm
 * rate (the chance that a correct sampler fails at a *random* seed) is stated.
 */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_rng.h>

#include "testutil.h"

TestSuite(sampler, .init = tu_quiet_gsl, .timeout = 120);

static gsl_rng *make_rng(unsigned long seed) {
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    cr_assert(r != NULL);
    gsl_rng_set(r, seed);
    return r;
}

static void draw_ok(ss_sampler *s, gsl_rng *rng, unsigned n, uint32_t *rows) {
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_sampler_draw(s, rng, n, rows, &err);
    cr_assert(st == SS_OK, "ss_sampler_draw(n=%u): %s (%s)", n,
              ss_status_name(st), err.message);
}

/* Every shape is a partition of n with at most d rows (RSK, header);
 * a pure state only fills row 1 and a rank-r state at most r rows
 * (Greene's theorem: a word in r letters has no decreasing subsequence
 * longer than r; statistics-sources.md §3.7).  Exact. */
Test(sampler, shapes_are_valid) {
    static const struct {
        unsigned n, d, rank;
        double p[16];
    } cases[] = {
        {1, 2, 2, {0.5, 0.5}},
        {50,
         16,
         16,
         {0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625,
          0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625, 0.0625}},
        {30, 3, 1, {0.0, 1.0, 0.0}},
        {25, 4, 2, {0.0, 0.6, 0.0, 0.4}},
        {40, 5, 5, {0.3, 0.25, 0.2, 0.15, 0.1}},
    };
    gsl_rng *rng = make_rng(11UL);
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        unsigned n = cases[t].n, d = cases[t].d;
        ss_sampler *s = tu_sampler(d, cases[t].p);
        for (int shot = 0; shot < 2000; ++shot) {
            uint32_t rows[SS_LEVELS_MAX];
            draw_ok(s, rng, n, rows);
            cr_assert(tu_is_diagram(rows, d, n) &&
                          ss_diagram_is_valid(rows, d, n),
                      "case %zu shot %d: (%u,%u,...) is not a diagram of %u", t,
                      shot, rows[0], rows[1], n);
            cr_assert(tu_row_count(rows, d) <= cases[t].rank,
                      "case %zu shot %d: %u rows from a rank-%u state", t, shot,
                      tu_row_count(rows, d), cases[t].rank);
        }
        ss_sampler_free(s);
    }
    /* the largest admissible shot */
    double u[16];
    tu_fill_uniform(u, 16);
    ss_sampler *s = tu_sampler(16, u);
    uint32_t rows[16];
    draw_ok(s, rng, SS_ATOMS_MAX, rows);
    cr_expect(tu_is_diagram(rows, 16, SS_ATOMS_MAX),
              "shot of %u atoms is not a diagram", SS_ATOMS_MAX);
    ss_sampler_free(s);
    gsl_rng_free(rng);
}

/* Pearson chi-square of sampled shapes against P_n from ss_distribution
 * (the RSK shape of an i.i.d. word has law P_n: O'Donnell & Wright, STOC
 * 2016; statistics-sources.md §3.6).  Cells with expected count < 5 are
 * pooled (smallest first) until the pool reaches 5.  Threshold: the 0.999
 * quantile gsl_cdf_chisq_Qinv(1e-3, dof), i.e. a false-alarm rate of 1e-3
 * for a correct sampler at a random seed; the seed here is fixed, so the
 * outcome is deterministic.  A shape with P = 0 fails at once. */
static void chi_square_case(unsigned n, unsigned d, const double *p,
                            unsigned long shots, unsigned long seed) {
    ss_distribution *dist = tu_distribution(n, d, p);
    const ss_diagram_set *set = dist->diagrams;
    size_t m = set->count;
    unsigned long *obs = calloc(m, sizeof(unsigned long));
    cr_assert(obs != NULL);
    ss_sampler *s = tu_sampler(d, p);
    gsl_rng *rng = make_rng(seed);
    for (unsigned long k = 0; k < shots; ++k) {
        uint32_t rows[SS_LEVELS_MAX];
        draw_ok(s, rng, n, rows);
        size_t i = tu_find_diagram(set, rows);
        cr_assert(i < m, "shot %lu: shape (%u,%u,...) not in the table", k,
                  rows[0], rows[1]);
        obs[i] += 1;
    }
    /* cells with P > 0, sorted by expected count (insertion sort, m small) */
    double *e = malloc(m * sizeof(double));
    double *o = malloc(m * sizeof(double));
    cr_assert(e && o);
    size_t cells = 0;
    for (size_t i = 0; i < m; ++i) {
        if (dist->probability[i] == 0.0) {
            cr_assert(obs[i] == 0,
                      "shape %zu has P = 0 but was drawn %lu times", i, obs[i]);
            continue;
        }
        double ev = dist->probability[i] * (double)shots, ov = (double)obs[i];
        size_t j = cells++;
        while (j > 0 && e[j - 1] > ev) {
            e[j] = e[j - 1];
            o[j] = o[j - 1];
            --j;
        }
        e[j] = ev;
        o[j] = ov;
    }
    double pool_e = 0.0, pool_o = 0.0;
    size_t next = 0;
    while (next < cells && (e[next] < 5.0 || (pool_e > 0.0 && pool_e < 5.0))) {
        pool_e += e[next];
        pool_o += o[next];
        ++next;
    }
    double chi2 = 0.0;
    size_t k_cells = 0;
    if (pool_e > 0.0) {
        chi2 += (pool_o - pool_e) * (pool_o - pool_e) / pool_e;
        ++k_cells;
    }
    for (size_t j = next; j < cells; ++j) {
        chi2 += (o[j] - e[j]) * (o[j] - e[j]) / e[j];
        ++k_cells;
    }
    cr_assert(k_cells >= 2, "too few cells for a chi-square test");
    double dof = (double)(k_cells - 1);
    double limit = gsl_cdf_chisq_Qinv(1e-3, dof);
    cr_expect(chi2 <= limit,
              "chi-square (n=%u,d=%u, %lu shots): %.4g over %zu cells exceeds "
              "the 0.999 quantile "
              "%.4g (dof %.0f)",
              n, d, shots, chi2, k_cells, limit, dof);
    free(e);
    free(o);
    free(obs);
    gsl_rng_free(rng);
    ss_sampler_free(s);
    ss_distribution_free(dist);
}

Test(sampler, chi_square_n5_d3) {
    /* statistics-sources.md §3.6 ran this case with 2e5 samples */
    const double p[3] = {0.5, 0.3, 0.2};
    chi_square_case(5, 3, p, 200000UL, 5UL);
}

Test(sampler, chi_square_n12_d3) {
    const double p[3] = {0.6, 0.3, 0.1};
    chi_square_case(12, 3, p, 200000UL, 12UL);
}

Test(sampler, chi_square_degenerate_and_rank_deficient) {
    const double u[4] = {0.25, 0.25, 0.25, 0.25};
    const double r[3] = {0.0, 0.5, 0.5};
    chi_square_case(8, 4, u, 100000UL, 8UL);
    chi_square_case(9, 3, r, 100000UL, 9UL);
}

/* Same seed -> same sequence of shapes; a different seed -> a different
 * sequence (500 shots of 20 atoms in d = 4 cannot all coincide in
 * practice; deterministic at the fixed seeds). */
Test(sampler, reproducible_from_seed) {
    const double p[4] = {0.4, 0.3, 0.2, 0.1};
    ss_sampler *s = tu_sampler(4, p);
    gsl_rng *a = make_rng(99UL), *b = make_rng(99UL), *c = make_rng(100UL);
    int differs = 0;
    for (int k = 0; k < 500; ++k) {
        uint32_t ra[4], rb[4], rc[4];
        draw_ok(s, a, 20, ra);
        draw_ok(s, b, 20, rb);
        draw_ok(s, c, 20, rc);
        cr_assert(memcmp(ra, rb, sizeof ra) == 0,
                  "shot %d differs between equal seeds", k);
        differs |= memcmp(ra, rc, sizeof ra) != 0;
    }
    cr_expect(differs,
              "seeds 99 and 100 gave identical sequences of 500 shapes");
    gsl_rng_free(a);
    gsl_rng_free(b);
    gsl_rng_free(c);
    ss_sampler_free(s);
}

/* noise_sd = 0: no noise draw (header), so ss_sampler_shot draws the same
 * shapes as ss_sampler_draw from the same seed and the energy is exactly
 * E(λ) = offset + V·C(n,2) + J·c(λ) (domain.md §1). */
Test(sampler, shot_without_noise_is_exact) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    cal.offset = 3.5;
    cal.pair_shift = 0.25;
    cal.exchange = -1.5;
    cal.noise_sd = 0.0;
    ss_sampler *s = tu_sampler(3, p);
    gsl_rng *a = make_rng(7UL), *b = make_rng(7UL);
    const unsigned n = 15;
    for (int k = 0; k < 1000; ++k) {
        uint32_t ra[3], rb[3];
        double energy = NAN;
        draw_ok(s, a, n, ra);
        ss_error err;
        ss_error_clear(&err);
        ss_status st = ss_sampler_shot(s, b, n, &cal, rb, &energy, &err);
        cr_assert(st == SS_OK, "ss_sampler_shot: %s (%s)", ss_status_name(st),
                  err.message);
        cr_assert(memcmp(ra, rb, sizeof ra) == 0,
                  "shot %d: shot() and draw() shapes differ", k);
        int64_t c = tu_content(rb, 3);
        double want = ss_calibration_energy(&cal, n, c);
        cr_assert(energy == want, "shot %d: energy %.17g, E(λ) = %.17g", k,
                  energy, want);
        double hand = 3.5 + 0.25 * tu_pairs(n) - 1.5 * (double)c;
        cr_assert(tu_rel_err(energy, hand) <= 1e-14,
                  "shot %d: energy %.17g, hand formula %.17g", k, energy, hand);
    }
    gsl_rng_free(a);
    gsl_rng_free(b);
    ss_sampler_free(s);
}

/* noise_sd = σ > 0: residuals energy − E(λ) are N(0, σ²).  Over N shots the
 * sample mean must lie within 4σ/√N of 0 and the sample sd within
 * 4·σ/√(2N) of σ (normal theory: sd of the sample sd ≈ σ/√(2N)); 4-sigma
 * bands, false-alarm rate about 6e-5 each. */
Test(sampler, shot_noise_has_stated_width) {
    const double p[3] = {0.6, 0.3, 0.1};
    ss_calibration cal = ss_calibration_default();
    cal.offset = -2.0;
    cal.pair_shift = 0.1;
    cal.exchange = 0.8;
    cal.noise_sd = 0.7;
    ss_sampler *s = tu_sampler(3, p);
    gsl_rng *rng = make_rng(31UL);
    const unsigned n = 10;
    const unsigned long shots = 100000UL;
    double sum = 0.0, sum2 = 0.0;
    for (unsigned long k = 0; k < shots; ++k) {
        uint32_t rows[3];
        double energy;
        ss_error err;
        ss_error_clear(&err);
        ss_status st = ss_sampler_shot(s, rng, n, &cal, rows, &energy, &err);
        cr_assert(st == SS_OK, "ss_sampler_shot: %s (%s)", ss_status_name(st),
                  err.message);
        double r = energy - ss_calibration_energy(&cal, n, tu_content(rows, 3));
        sum += r;
        sum2 += r * r;
    }
    double nn = (double)shots;
    double mean = sum / nn;
    double sd = sqrt((sum2 - nn * mean * mean) / (nn - 1.0));
    double sigma = cal.noise_sd;
    cr_expect(fabs(mean) <= 4.0 * sigma / sqrt(nn),
              "noise mean %.6g outside ±%.3g", mean, 4.0 * sigma / sqrt(nn));
    cr_expect(fabs(sd - sigma) <= 4.0 * sigma / sqrt(2.0 * nn),
              "noise sd %.6g, expected %.3g ± %.3g", sd, sigma,
              4.0 * sigma / sqrt(2.0 * nn));
    gsl_rng_free(rng);
    ss_sampler_free(s);
}

/* Row means of sampled shapes.  (1) O'Donnell & Wright II
 * (arXiv:1612.00034; statistics-sources.md §2.2): E[λ_k] = p_k·n ±
 * 2√(p_k·d·n); the sample mean is allowed an extra 4·s_k/√M of Monte Carlo
 * error (s_k the sample sd, M shots).  (2) The sample mean must also agree
 * with the exact E[λ_k] from the ss_distribution table within 4·s_k/√M
 * (4-sigma band, false-alarm rate about 6e-5 per row). */
static void row_means_case(unsigned n, unsigned d, const double *p,
                           unsigned long shots, unsigned long seed) {
    ss_distribution *dist = tu_distribution(n, d, p);
    double exact[SS_LEVELS_MAX] = {0};
    for (size_t i = 0; i < dist->diagrams->count; ++i)
        for (unsigned k = 0; k < d; ++k)
            exact[k] +=
                dist->probability[i] * (double)dist->diagrams->rows[i * d + k];
    ss_sampler *s = tu_sampler(d, p);
    gsl_rng *rng = make_rng(seed);
    double sum[SS_LEVELS_MAX] = {0}, sum2[SS_LEVELS_MAX] = {0};
    for (unsigned long m = 0; m < shots; ++m) {
        uint32_t rows[SS_LEVELS_MAX];
        draw_ok(s, rng, n, rows);
        for (unsigned k = 0; k < d; ++k) {
            sum[k] += (double)rows[k];
            sum2[k] += (double)rows[k] * (double)rows[k];
        }
    }
    double mm = (double)shots;
    for (unsigned k = 0; k < d; ++k) {
        double mean = sum[k] / mm;
        double var = (sum2[k] - mm * mean * mean) / (mm - 1.0);
        double mc = 4.0 * sqrt(var > 0.0 ? var : 0.0) / sqrt(mm);
        double pk = dist->spectrum[k];
        double band = 2.0 * sqrt(pk * (double)d * (double)n);
        cr_expect(fabs(mean - pk * (double)n) <= band + mc,
                  "OW band (n=%u,d=%u) row %u: mean %.6g, p_k·n = %.6g, "
                  "allowed ±(%.4g + %.4g)",
                  n, d, k + 1, mean, pk * (double)n, band, mc);
        cr_expect(fabs(mean - exact[k]) <= mc + 1e-12,
                  "(n=%u,d=%u) row %u: sample mean %.6g, exact E[λ_k] %.6g, "
                  "4-sigma %.3g",
                  n, d, k + 1, mean, exact[k], mc);
    }
    gsl_rng_free(rng);
    ss_sampler_free(s);
    ss_distribution_free(dist);
}

Test(sampler, row_means_odonnell_wright_band) {
    const double a[3] = {0.6, 0.3, 0.1}, b[2] = {0.7, 0.3};
    double u[4];
    tu_fill_uniform(u, 4);
    row_means_case(12, 3, a, 40000UL, 101UL);
    row_means_case(50, 4, u, 20000UL, 102UL);
    row_means_case(100, 2, b, 20000UL, 103UL);
    gsl_rng *rng = make_rng(104UL);
    double p[5];
    tu_random_simplex(rng, 5, p);
    gsl_rng_free(rng);
    row_means_case(40, 5, p, 20000UL, 105UL);
}

/* Bad input (header): invalid spectra and level counts are SS_EINVAL at
 * allocation, naming the field, with nothing written; atom counts 0 and
 * above SS_ATOMS_MAX are SS_EINVAL at draw/shot time, outputs untouched. */
Test(sampler, rejects_bad_input) {
    static const struct {
        double p[4];
        size_t len;
        unsigned levels;
        const char *field;
        const char *what;
    } cases[] = {
        {{0.6, 0.5, -0.1, 0}, 3, 3, "spectrum", "negative entry"},
        {{NAN, 0.5, 0.5, 0}, 3, 3, "spectrum", "NaN entry"},
        {{0.5, 0.5, 0, 0}, 2, 3, "spectrum", "length 2 for 3 levels"},
        {{0.5, 0.3, 0.2 + 1e-6, 0}, 3, 3, "spectrum", "sum off by 1e-6"},
        {{1.0, 0, 0, 0}, 1, 1, "levels", "1 level"},
    };
    static double sentinel_storage;
    ss_sampler *const sentinel =
        (ss_sampler *)(void *)&sentinel_storage; /* never dereferenced */
    ss_sampler *out = sentinel;
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        ss_error err;
        ss_error_clear(&err);
        ss_status st = ss_sampler_alloc(cases[t].levels, cases[t].p,
                                        cases[t].len, &out, &err);
        tu_expect_error(st, &err, SS_EINVAL, cases[t].field, cases[t].what);
        cr_expect(out == sentinel, "%s: *out written on failure",
                  cases[t].what);
    }
    double p17[17];
    tu_fill_uniform(p17, 17);
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_sampler_alloc(17, p17, 17, &out, &err);
    tu_expect_error(st, &err, SS_EINVAL, "levels", "17 levels");

    const double p[3] = {0.5, 0.3, 0.2};
    ss_sampler *s = tu_sampler(3, p);
    gsl_rng *rng = make_rng(1UL);
    uint32_t rows[3] = {77, 77, 77};
    double energy = 12345.0;
    ss_calibration cal = ss_calibration_default();
    const unsigned bad_atoms[2] = {0, SS_ATOMS_MAX + 1};
    for (int t = 0; t < 2; ++t) {
        ss_error_clear(&err);
        st = ss_sampler_draw(s, rng, bad_atoms[t], rows, &err);
        tu_expect_error(st, &err, SS_EINVAL, "atoms",
                        "draw with bad atom count");
        ss_error_clear(&err);
        st = ss_sampler_shot(s, rng, bad_atoms[t], &cal, rows, &energy, &err);
        tu_expect_error(st, &err, SS_EINVAL, "atoms",
                        "shot with bad atom count");
        cr_expect(rows[0] == 77 && rows[1] == 77 && rows[2] == 77 &&
                      energy == 12345.0,
                  "outputs written on failure (atoms %u)", bad_atoms[t]);
    }
    gsl_rng_free(rng);
    ss_sampler_free(s);
}
