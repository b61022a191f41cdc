/*
 * test_inversion.c — deterministic Criterion tests for the inversion entry
 * point ss_analysis_run (header section "Inversion"): the flags it raises and
 * the numbers behind them (degenerate-energy, outside-physical-region,
 * underdetermined, noise-dominated, few-shots), exact recovery of d = 2 and
 * d = 3 spectra from noise-free moments, exact feasible ranges for d = 4, the
 * naive λ/n reading, and strict rejection of bad requests with the exact
 * field path, leaving the output pointer untouched.
 *
 * "Exact" runs carry the closed-form mean and variance of the readout
 * (domain.md §2, statistics-sources.md §3.3) with K = 10^6 shots, so their
 * statistical error is tiny and the inversion must reproduce the spectrum to
 * the stated tolerance.  The Monte Carlo checks of the same module (interval
 * coverage, bias, efficiency) live in test_coverage.c.
 */
#include <gsl/gsl_poly.h>
#include <stdio.h>

#include "inversion_util.h"

TestSuite(inversion, .init = tu_quiet_gsl, .timeout = 600);

/* ------------------------------------------------------------------------ */
/* degenerate energies                                                       */

static const ss_candidate *find_candidate(const ss_run_result *rr,
                                          const uint32_t *rows, unsigned d) {
    for (size_t k = 0; k < rr->candidate_count; k++)
        if (memcmp(rr->candidates[k].rows, rows, d * sizeof *rows) == 0)
            return &rr->candidates[k];
    return NULL;
}

/* domain.md §2 (and statistics-sources.md §5.4): for d = 3 the first
 * collision of content sums is n = 6, c(4,1,1) = c(3,3) = 3.  By hand from
 * the row form c = Σ_i [λ_i(λ_i−1)/2 − (i−1)λ_i]: (4,1,1) → 6 + (0−1) +
 * (0−2) = 3 and (3,3) → 3 + (3−3) = 3; rechecked below with testutil's
 * independent tu_content.  A summary run whose mean energy sits exactly at
 * content 3 (default calibration: energy = content) with a small variance
 * (0.04, sd 0.2, so the 3-sd window [2.4, 3.6] holds content 3 only) must
 * list both diagrams in one degenerate group and raise degenerate-energy on
 * run 0.  (Mean content 3 means P2 = 3/15 = 0.2 < 1/3, outside the region:
 * the spectrum is then the nearest physical one, which only sets the
 * candidates' probabilities; the listing itself depends on the window.)
 * Exact (integer) checks. */
Test(inversion, degenerate_energy_n6_d3) {
    const uint32_t a411[3] = {4, 1, 1}, a33[3] = {3, 3, 0};
    cr_assert(tu_content(a411, 3) == 3 && tu_content(a33, 3) == 3,
              "hand values of the contents are wrong");
    ss_run run = {
        .atoms = 6, .shots = 400, .mean_energy = 3.0, .energy_variance = 0.04};
    ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_MOMENTS);
    ss_analysis *a = iv_analyse(&req, "n=6 d=3 mean 3");
    char buf[512];
    const ss_flag *f = iv_flag(a, "degenerate-energy", 0);
    cr_assert(f != NULL, "no degenerate-energy flag on run 0; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    cr_assert(a->run_count == 1);
    const ss_run_result *rr = &a->runs[0];
    const ss_candidate *c1 = find_candidate(rr, a411, 3);
    const ss_candidate *c2 = find_candidate(rr, a33, 3);
    cr_assert(c1 != NULL && c2 != NULL,
              "candidates lack (4,1,1) or (3,3) (%zu listed)",
              rr->candidate_count);
    cr_assert(c1->content == 3 && c2->content == 3,
              "contents %lld and %lld, expected 3 and 3",
              (long long)c1->content, (long long)c2->content);
    cr_assert(c1->degenerate_group >= 1 &&
                  c1->degenerate_group == c2->degenerate_group,
              "(4,1,1) in group %u, (3,3) in group %u: expected one shared "
              "group >= 1",
              c1->degenerate_group, c2->degenerate_group);
    cr_assert(rr->degenerate_group_count >= 1);
    /* λ/n of each candidate (header: spectrum_estimate = λ/n), exact */
    cr_assert(c1->spectrum_estimate[0] == 4.0 / 6.0 &&
              c2->spectrum_estimate[1] == 3.0 / 6.0);
    /* the sentence: one group is "1 energy … belongs", and the default
     * calibration has no unit, so none (and no blank) follows the energy */
    cr_assert_eq(rr->degenerate_group_count, 1);
    cr_expect(strstr(f->message, "1 energy among the candidates belongs") !=
                  NULL,
              "%s", f->message);
    cr_expect(strstr(f->message, "e.g. content 3 at 3)") != NULL, "%s",
              f->message);
    /* the estimate is the nearest physical point, the uniform spectrum:
     * ill-conditioned with a gap of 0 (never a rounding below it) and no
     * delta-method standard error (null, not 0) */
    const ss_flag *ill = iv_flag(a, "ill-conditioned", -1);
    cr_assert(ill != NULL, "no ill-conditioned flag; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    cr_expect(strstr(ill->message, "(gap 0, where no delta-method standard "
                                   "error exists)") != NULL,
              "%s", ill->message);
    for (size_t k = 0; k < ill->number_count; k++) {
        if (strcmp(ill->numbers[k].name, "min_gap") == 0)
            cr_expect(ill->numbers[k].value == 0.0, "min_gap %g",
                      ill->numbers[k].value);
        if (strcmp(ill->numbers[k].name, "gap_stderr") == 0)
            cr_expect(isnan(ill->numbers[k].value), "gap_stderr %g",
                      ill->numbers[k].value);
    }
    ss_analysis_free(a);
}

/* domain.md §2: d = 2 never has degenerate diagrams (c is strictly monotone
 * in the second row: c(n−k, k) = C(n−k,2) + C(k,2) − k).  For every n from 2
 * to 30, summary runs with means at each diagram's content and half-way
 * below it, small (0.01) and wide (25) variances: never a degenerate-energy
 * flag and never a non-zero degenerate group.  Means at or just above
 * C(n,2)/2 (P2 near or below 1/2, the edge of the region) make the core
 * bootstrap (about 0.2 s each), so there only the lowest content is used,
 * once per n.  Exact. */
Test(inversion, no_degenerate_energy_for_d2) {
    const double variances[] = {0.01, 25.0};
    for (unsigned n = 2; n <= 30; n++) {
        for (unsigned k = 0; 2 * k <= n; k++) {
            uint32_t rows[2] = {n - k, k};
            double c = (double)tu_content(rows, 2);
            int lowest = 2 * k + 2 > n;
            if (c < 0.5 * tu_pairs(n) + 1.0 && !lowest)
                continue;
            for (int half = 0; half <= 1; half++) {
                for (size_t v = 0; v < TU_COUNT_OF(variances); v++) {
                    if (lowest && (half || v))
                        continue;
                    ss_run run = {.atoms = n,
                                  .shots = 200,
                                  .mean_energy = c - 0.5 * half,
                                  .energy_variance = variances[v]};
                    ss_analysis_request req =
                        iv_request(2, &run, 1, SS_METHOD_MOMENTS);
                    char what[96];
                    snprintf(what, sizeof what, "d=2 n=%u mean %.1f var %g", n,
                             run.mean_energy, variances[v]);
                    ss_analysis *a = iv_analyse(&req, what);
                    cr_assert(iv_flag(a, "degenerate-energy", -2) == NULL,
                              "%s: degenerate-energy flag for d = 2", what);
                    const ss_run_result *rr = &a->runs[0];
                    cr_assert(rr->degenerate_group_count == 0, "%s", what);
                    for (size_t j = 0; j < rr->candidate_count; j++)
                        cr_assert(rr->candidates[j].degenerate_group == 0,
                                  "%s: candidate %zu in a group", what, j);
                    ss_analysis_free(a);
                }
            }
        }
    }
}

/* ------------------------------------------------------------------------ */
/* outside the physical region                                               */

/* domain.md §2: P2 ∈ [1/d, 1]; a measured point outside means
 * miscalibration or too few shots, "say so, and how far outside it is (in
 * standard errors)".  Mean content 1.3·C(10,2) = 58.5 implies P2 = 1.3 with
 * a small variance (1.0) and K = 400: no shot noise explains that, so the
 * flag must report distance_se > 3 (the header's Mahalanobis distance; the
 * issue's threshold) and blame the calibration.  d = 2 and d = 3. */
Test(inversion, outside_physical_far) {
    for (unsigned d = 2; d <= 3; d++) {
        ss_run run = {.atoms = 10,
                      .shots = 400,
                      .mean_energy = 1.3 * tu_pairs(10),
                      .energy_variance = 1.0};
        ss_analysis_request req = iv_request(d, &run, 1, SS_METHOD_MOMENTS);
        ss_analysis *a = iv_analyse(&req, "P2 = 1.3");
        char buf[512];
        const ss_flag *f = iv_flag(a, "outside-physical-region", -2);
        cr_assert(f != NULL, "d=%u: no outside-physical-region flag; flags: %s",
                  d, iv_flag_list(a, buf, sizeof buf));
        double dist = NAN;
        cr_assert(iv_flag_number(f, "distance_se", &dist),
                  "d=%u: the flag has no distance_se number", d);
        cr_assert(dist > 3.0, "d=%u: distance_se %g, expected > 3", d, dist);
        cr_assert(a->diagnostics.distance_se > 3.0,
                  "d=%u: diagnostics.distance_se %g, expected > 3", d,
                  a->diagnostics.distance_se);
        cr_assert(strstr(f->message, "calibration") != NULL,
                  "d=%u: message does not mention the calibration: %s", d,
                  f->message);
        /* the point estimate is still a spectrum: it is the pure state
         * closest to P2 = 1.3 (1e-6) */
        cr_assert(a->has_spectrum);
        double sum = 0.0;
        for (unsigned i = 0; i < d; i++) {
            cr_assert(a->values[i] >= -1e-12, "d=%u: values[%u] = %g", d, i,
                      a->values[i]);
            sum += a->values[i];
        }
        cr_assert(fabs(sum - 1.0) < 1e-9, "d=%u: values sum to %.12g", d, sum);
        cr_assert(fabs(a->values[0] - 1.0) < 1e-6,
                  "d=%u: values[0] = %.9g, expected the pure state", d,
                  a->values[0]);
        ss_analysis_free(a);
    }
}

/* A one-standard-error excursion below the maximally mixed state: truth
 * p = uniform (P2 = 1/d, P3 = 1/d², the corner of the region), the variance
 * at its exact value (domain.md §2) and the mean one standard error of the
 * mean, sqrt(Var[c]/K), below C(n,2)/d.  That is ordinary shot noise: the
 * flag (the point is outside) must give distance_se < 2 and say so ("shot
 * noise").  n = 10, K = 400, d = 2 and 3. */
Test(inversion, outside_physical_one_standard_error) {
    for (unsigned d = 2; d <= 3; d++) {
        unsigned n = 10;
        size_t K = 400;
        double p[3];
        tu_fill_uniform(p, d);
        double p2 = 1.0 / d, p3 = 1.0 / ((double)d * d);
        double var = ss_content_variance(n, p2, p3);
        double se = sqrt(var / (double)K);
        ss_run run = {.atoms = n,
                      .shots = K,
                      .mean_energy = tu_pairs(n) * p2 - se,
                      .energy_variance = var};
        ss_analysis_request req = iv_request(d, &run, 1, SS_METHOD_MOMENTS);
        ss_analysis *a = iv_analyse(&req, "1-se excursion");
        char buf[512];
        const ss_flag *f = iv_flag(a, "outside-physical-region", -2);
        cr_assert(f != NULL, "d=%u: no outside-physical-region flag; flags: %s",
                  d, iv_flag_list(a, buf, sizeof buf));
        double dist = NAN;
        cr_assert(iv_flag_number(f, "distance_se", &dist),
                  "d=%u: the flag has no distance_se number", d);
        cr_assert(dist > 0.0 && dist < 2.0,
                  "d=%u: distance_se %g, expected in (0, 2)", d, dist);
        cr_assert(strstr(f->message, "shot noise") != NULL,
                  "d=%u: message does not name shot noise: %s", d, f->message);
        ss_analysis_free(a);
    }
}

/* ------------------------------------------------------------------------ */
/* underdetermined d = 4: feasible ranges                                     */

/* Independent reference for d = 4 (domain.md §2, Newton's identities): the
 * spectra with power sums (1, P2, P3) and smallest eigenvalue s have their
 * other three eigenvalues at the roots of t³ − e1·t² + e2·t − e3, with
 * e1 = 1 − s, Q2 = P2 − s², Q3 = P3 − s³, e2 = (e1² − Q2)/2 and
 * e3 = (Q3 − e1·Q2 + e2·e1)/3.  Returns 1 and the ordered spectrum when the
 * three roots are real and >= s (1e-12). */
static int d4_spectrum_at(double p2, double p3, double s, double *p) {
    double e1 = 1.0 - s, q2 = p2 - s * s, q3 = p3 - s * s * s;
    double e2 = 0.5 * (e1 * e1 - q2), e3 = (q3 - e1 * q2 + e2 * e1) / 3.0;
    double x0 = 0, x1 = 0, x2 = 0;
    if (gsl_poly_solve_cubic(-e1, e2, -e3, &x0, &x1, &x2) != 3)
        return 0;
    if (x0 < s - 1e-12)
        return 0;
    p[0] = x2; /* gsl_poly_solve_cubic returns ascending roots */
    p[1] = x1;
    p[2] = x0;
    p[3] = s;
    return 1;
}

static void widen(const double *p, double *lo, double *hi) {
    for (unsigned i = 0; i < 4; i++) {
        lo[i] = fmin(lo[i], p[i]);
        hi[i] = fmax(hi[i], p[i]);
    }
}

/* Walks s from q's own smallest eigenvalue down and up in steps of 1e-4 while
 * the spectrum exists, then bisects (100 halvings) each end of that
 * connected piece of the solution curve; lo/hi receive the range of each
 * eigenvalue over the piece (its extremes sit at the ends, where two
 * eigenvalues meet or the smallest reaches 0: the Lagrange argument of
 * moment_map.c, but the search here is a separate one). */
static void d4_reference_ranges(const double *q, double *lo, double *hi) {
    double p2 = ss_spectrum_power_sum(q, 4, 2);
    double p3 = ss_spectrum_power_sum(q, 4, 3);
    double p[4];
    for (unsigned i = 0; i < 4; i++)
        lo[i] = hi[i] = q[i];
    for (int dir = -1; dir <= 1; dir += 2) {
        double in = q[3], out = q[3];
        for (;;) {
            double next = in + dir * 1e-4;
            if (next < 0.0)
                next = 0.0;
            if (next > 0.25)
                next = 0.25;
            if (!d4_spectrum_at(p2, p3, next, p)) {
                out = next;
                break;
            }
            widen(p, lo, hi);
            in = next;
            if (next == 0.0 || next == 0.25) {
                out = in;
                break;
            }
        }
        for (int it = 0; it < 100 && out != in; it++) {
            double mid = 0.5 * (in + out);
            if (d4_spectrum_at(p2, p3, mid, p)) {
                widen(p, lo, hi);
                in = mid;
            } else {
                out = mid;
            }
        }
    }
}

/* Checks an underdetermined d = 4 analysis of exact moments of q (n = 12,
 * K = 10^6): flags and fields from the header; q inside the feasible
 * ranges (1e-6, the ranges are exact extremes over all spectra with q's
 * P2, P3, so q itself must be inside), and so is the whole piece of the
 * solution curve through q found by d4_reference_ranges (1e-6); the
 * max-entropy point has q's power sums (1e-6 relative; K = 10^6 makes the
 * fitted P2, P3 equal to q's up to round-off since the exact run solves the
 * moment equations) and at least q's entropy (1e-9; q competes in the same
 * constraint set). */
static void check_underdetermined(const double *q, ss_method method,
                                  const char *what) {
    const unsigned d = 4, n = 12;
    ss_calibration cal = ss_calibration_default();
    ss_run run = iv_exact_run(n, 1000000, q, d, &cal);
    ss_analysis_request req = iv_request(d, &run, 1, method);
    ss_analysis *a = iv_analyse(&req, what);
    char buf[512];
    cr_assert(a->method == SS_METHOD_MOMENTS, "%s: method %s", what,
              ss_method_name(a->method));
    cr_assert(iv_flag(a, "underdetermined", -2) != NULL,
              "%s: no underdetermined flag; flags: %s", what,
              iv_flag_list(a, buf, sizeof buf));
    cr_assert(a->has_feasible_ranges && a->spectrum_is_max_entropy,
              "%s: has_feasible_ranges %d, spectrum_is_max_entropy %d", what,
              a->has_feasible_ranges, a->spectrum_is_max_entropy);
    double p2 = ss_spectrum_power_sum(q, d, 2);
    double p3 = ss_spectrum_power_sum(q, d, 3);
    cr_assert(tu_close(a->p2, p2, 1e-6) && tu_close(a->p3, p3, 1e-6),
              "%s: fitted (P2, P3) = (%.9g, %.9g), truth (%.9g, %.9g)", what,
              a->p2, a->p3, p2, p3);
    double rlo[4], rhi[4];
    d4_reference_ranges(q, rlo, rhi);
    for (unsigned i = 0; i < d; i++) {
        cr_assert(a->feasible_lower[i] <= q[i] + 1e-6 &&
                      q[i] <= a->feasible_upper[i] + 1e-6,
                  "%s: eigenvalue %u = %.9g outside its feasible range "
                  "[%.9g, %.9g] (q = %.6f %.6f %.6f %.6f; the reference "
                  "range is [%.9g, %.9g])",
                  what, i, q[i], a->feasible_lower[i], a->feasible_upper[i],
                  q[0], q[1], q[2], q[3], rlo[i], rhi[i]);
        cr_assert(a->lower[i] <= q[i] + 1e-6 && q[i] <= a->upper[i] + 1e-6,
                  "%s: eigenvalue %u = %.9g outside [lower, upper] = "
                  "[%.9g, %.9g]",
                  what, i, q[i], a->lower[i], a->upper[i]);
        cr_assert(a->feasible_lower[i] <= rlo[i] + 1e-6 &&
                      rhi[i] <= a->feasible_upper[i] + 1e-6,
                  "%s: eigenvalue %u: feasible range [%.9g, %.9g] misses "
                  "part of the reference range [%.9g, %.9g]",
                  what, i, a->feasible_lower[i], a->feasible_upper[i], rlo[i],
                  rhi[i]);
        cr_assert(a->feasible_lower[i] <= a->values[i] + 1e-9 &&
                      a->values[i] <= a->feasible_upper[i] + 1e-9,
                  "%s: the point estimate leaves its own feasible range", what);
    }
    double v2 = ss_spectrum_power_sum(a->values, d, 2);
    double v3 = ss_spectrum_power_sum(a->values, d, 3);
    cr_assert(tu_close(v2, p2, 1e-6) && tu_close(v3, p3, 1e-6),
              "%s: the max-entropy point has (P2, P3) = (%.9g, %.9g), "
              "expected (%.9g, %.9g)",
              what, v2, v3, p2, p3);
    cr_assert(iv_entropy(a->values, d) >= iv_entropy(q, d) - 1e-9,
              "%s: the 'max-entropy' point (%.6f %.6f %.6f %.6f) has entropy "
              "%.12g below the truth's %.12g",
              what, a->values[0], a->values[1], a->values[2], a->values[3],
              iv_entropy(a->values, d), iv_entropy(q, d));
    ss_analysis_free(a);
}

/* domain.md §2: d >= 4 is not invertible from means and variances (a set of
 * spectra shares P2, P3).  Fixed truths with method auto (summary runs →
 * moments) and method moments: (0.4, 0.3, 0.2, 0.1) — the example —
 * and (0.35, 0.3, 0.2, 0.15), both symmetric about 1/4, whose solution
 * curves end at a two-valued spectrum (a, a, b, b) (for P2 = 0.3, P3 = 0.1:
 * a, b = (5 ± √5)/20 = 0.3618, 0.1382, checked by hand: 2(a + b) = 1,
 * 2(a² + b²) = 0.3, 2(a³ + b³) = 0.1); and (0.45, 0.3, 0.15, 0.1), which is
 * not symmetric. */
Test(inversion, underdetermined_d4_fixed_truths) {
    const double truths[][4] = {
        {0.4, 0.3, 0.2, 0.1}, {0.35, 0.3, 0.2, 0.15}, {0.45, 0.3, 0.15, 0.1}};
    for (size_t t = 0; t < TU_COUNT_OF(truths); t++) {
        char what[64];
        snprintf(what, sizeof what, "d=4 truth %zu, auto", t);
        check_underdetermined(truths[t], SS_METHOD_AUTO, what);
        snprintf(what, sizeof what, "d=4 truth %zu, moments", t);
        check_underdetermined(truths[t], SS_METHOD_MOMENTS, what);
    }
}

/* 50 random spectra (uniform on the simplex, gsl_rng_mt19937 seed 4004),
 * each analysed at its own exact (P2, P3): each must lie inside the
 * feasible ranges reported for it (check_underdetermined). */
Test(inversion, underdetermined_d4_random_spectra) {
    gsl_rng *rng = iv_rng(4004UL);
    for (int t = 0; t < 50; t++) {
        double q[4];
        iv_random_spectrum(rng, 4, q);
        char what[64];
        snprintf(what, sizeof what, "random d=4 spectrum %d", t);
        check_underdetermined(q, SS_METHOD_MOMENTS, what);
    }
    gsl_rng_free(rng);
}

/* ------------------------------------------------------------------------ */
/* exact recovery for d = 2 and d = 3                                         */

/* domain.md §2: with P1 = 1, (P2, P3) determine the spectrum for d = 2 and
 * d = 3 (Newton's identities, roots of a cubic).  Summary runs whose mean and
 * variance are exactly the closed forms (K = 10^6) must give the spectrum to
 * 1e-6 and P2, P3 to 1e-8 (relative) with method moments, and no
 * outside-physical flag.  The calibration is non-trivial (offset, pair
 * shift, negative exchange) so that the energy→content conversion is part
 * of the check.  The closed form used for the data (ss_content_variance) is
 * first compared with a separate transcription of domain.md §2 (1e-12). */
static void check_exact(unsigned d, const double *p, const unsigned *ns,
                        size_t nrun, const ss_calibration *cal) {
    ss_run runs[4];
    char what[160];
    int w = snprintf(what, sizeof what, "d=%u p=(%g,%g,%g) n=", d, p[0], p[1],
                     d > 2 ? p[2] : 0.0);
    for (size_t r = 0; r < nrun; r++) {
        runs[r] = iv_exact_run(ns[r], 1000000, p, d, cal);
        w += snprintf(what + w, sizeof what - (size_t)w, "%u ", ns[r]);
        double p2 = ss_spectrum_power_sum(p, d, 2);
        double p3 = ss_spectrum_power_sum(p, d, 3);
        cr_assert(tu_close(ss_content_variance(ns[r], p2, p3),
                           iv_content_variance(ns[r], p2, p3), 1e-12),
                  "ss_content_variance(%u) disagrees with domain.md §2", ns[r]);
    }
    ss_analysis_request req = iv_request(d, runs, nrun, SS_METHOD_MOMENTS);
    req.calibration = *cal;
    ss_analysis *a = iv_analyse(&req, what);
    char buf[512];
    cr_assert(a->method == SS_METHOD_MOMENTS && a->has_spectrum, "%s", what);
    cr_assert(iv_flag(a, "outside-physical-region", -2) == NULL,
              "%s: exact moments flagged outside; flags: %s", what,
              iv_flag_list(a, buf, sizeof buf));
    cr_assert(!a->spectrum_is_max_entropy && !a->has_feasible_ranges,
              "%s: d <= 3 reported as underdetermined", what);
    for (unsigned i = 0; i < d; i++)
        cr_assert(fabs(a->values[i] - p[i]) <= 1e-6,
                  "%s: eigenvalue %u = %.12g, expected %.12g", what, i,
                  a->values[i], p[i]);
    cr_assert(tu_close(a->p2, ss_spectrum_power_sum(p, d, 2), 1e-8),
              "%s: P2 = %.12g", what, a->p2);
    cr_assert(tu_close(a->p3, ss_spectrum_power_sum(p, d, 3), 1e-8),
              "%s: P3 = %.12g", what, a->p3);
    ss_analysis_free(a);
}

Test(inversion, exact_moments_recover_d2_d3) {
    ss_calibration plain = ss_calibration_default();
    ss_calibration odd = ss_calibration_default();
    odd.offset = 1250.0;
    odd.pair_shift = 0.75;
    odd.exchange = -2.5;
    const double d2[][2] = {{0.7, 0.3}, {0.9, 0.1}, {0.55, 0.45}};
    const double d3[][3] = {{0.55, 0.3, 0.15},
                            {0.5, 0.3, 0.2},
                            {0.7, 0.2, 0.1},
                            {0.4, 0.35, 0.25},
                            {0.6, 0.25, 0.15}};
    const unsigned n2[] = {2, 5, 12, 40}, n3[] = {3, 6, 12, 40};
    for (int c = 0; c < 2; c++) {
        const ss_calibration *cal = c ? &odd : &plain;
        for (size_t s = 0; s < TU_COUNT_OF(d2); s++)
            for (size_t k = 0; k < TU_COUNT_OF(n2); k++)
                check_exact(2, d2[s], &n2[k], 1, cal);
        for (size_t s = 0; s < TU_COUNT_OF(d3); s++)
            for (size_t k = 0; k < TU_COUNT_OF(n3); k++)
                check_exact(3, d3[s], &n3[k], 1, cal);
        /* several runs with different atom numbers combine exactly too */
        const unsigned mix[] = {6, 20, 9};
        check_exact(3, d3[0], mix, 3, cal);
        check_exact(2, d2[0], mix, 3, cal);
    }
}

/* The likelihood from per-shot readings "at the expectation" (K = 10^6
 * noise-free readings with counts K·P(c|p) rounded; iv_expected_readings):
 * by Gibbs' inequality the expected log-likelihood Σ_c P(c|p)·log P(c|q) is
 * largest at q = p when the content law identifies the spectrum, so the
 * maximiser must return p (1e-4: the rounding of counts moves it by about
 * 1e-6, the optimiser's size tolerance is 1e-8 in its own coordinates).
 * Cases: d = 2, n = 24, (0.7, 0.3); d = 3, n = 12, (0.55, 0.3, 0.15); d = 4,
 * n = 12, (0.4, 0.3, 0.2, 0.1) — per-shot data carry the higher moments
 * that means and variances lack (domain.md §2), so d = 4 is identified and
 * the Fisher rank must be d − 1 with no underdetermined flag.  The reported
 * Cramér–Rao standard deviations must match the bound computed separately
 * at the truth (iv_crb_at) within 0.2 % relative (both use central
 * differences; the estimate sits about 1e-5 from the truth, which moves the
 * bound by about 1e-4 relative). */
Test(inversion, likelihood_expected_counts_recover_spectrum) {
    const struct {
        unsigned d, n;
        double p[4];
    } cases[] = {{2, 24, {0.7, 0.3}},
                 {3, 12, {0.55, 0.3, 0.15}},
                 {4, 12, {0.4, 0.3, 0.2, 0.1}}};
    const size_t K = 1000000;
    for (size_t t = 0; t < TU_COUNT_OF(cases); t++) {
        unsigned d = cases[t].d, n = cases[t].n;
        const double *p = cases[t].p;
        size_t count = 0;
        double *e = iv_expected_readings(n, d, p, K, &count);
        ss_run run = iv_per_shot(n, e, count);
        ss_analysis_request req = iv_request(d, &run, 1, SS_METHOD_LIKELIHOOD);
        char what[64];
        snprintf(what, sizeof what, "expected counts d=%u n=%u", d, n);
        ss_analysis *a = iv_analyse(&req, what);
        char buf[512];
        cr_assert(a->method == SS_METHOD_LIKELIHOOD && a->has_spectrum);
        for (unsigned i = 0; i < d; i++)
            cr_assert(fabs(a->values[i] - p[i]) <= 1e-4,
                      "%s: eigenvalue %u = %.8f, expected %.8f", what, i,
                      a->values[i], p[i]);
        cr_assert(a->diagnostics.fisher_rank == (int)d - 1,
                  "%s: Fisher rank %d, expected %u", what,
                  a->diagnostics.fisher_rank, d - 1);
        cr_assert(iv_flag(a, "underdetermined", -2) == NULL,
                  "%s: underdetermined with per-shot data; flags: %s", what,
                  iv_flag_list(a, buf, sizeof buf));
        double crb[4];
        cr_assert(iv_crb_at(n, d, p, (double)count, crb));
        for (unsigned i = 0; i < d; i++)
            cr_assert(fabs(a->diagnostics.cramer_rao_stderr[i] / crb[i] -
                           1.0) <= 2e-3,
                      "%s: Cramér–Rao sd of eigenvalue %u is %.6g, the bound "
                      "at the truth is %.6g",
                      what, i, a->diagnostics.cramer_rao_stderr[i], crb[i]);
        ss_analysis_free(a);
        free(e);
    }
}

/* ------------------------------------------------------------------------ */
/* noise-dominated and few-shots                                              */

/* Detection noise σ = 10 (σ² = 100) with a reported energy variance of 50:
 * the noise-subtracted variance is negative, so the run's variance says
 * nothing about P3 and the flag noise-dominated must name run 0.  Control:
 * σ = 0.5 with the exact variance plus σ² (n = 10, K = 400, p = (0.5, 0.3,
 * 0.2)) raises no such flag. */
Test(inversion, noise_dominated) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    cal.noise_sd = 10.0;
    ss_run run = iv_exact_run(10, 400, p, 3, &cal);
    run.energy_variance = 50.0;
    ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_MOMENTS);
    req.calibration = cal;
    ss_analysis *a = iv_analyse(&req, "noise 10, variance 50");
    char buf[512];
    cr_assert(iv_flag(a, "noise-dominated", 0) != NULL,
              "no noise-dominated flag on run 0; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    ss_analysis_free(a);

    cal.noise_sd = 0.5;
    run = iv_exact_run(10, 400, p, 3, &cal);
    req.calibration = cal;
    a = iv_analyse(&req, "noise 0.5, exact variance");
    cr_assert(iv_flag(a, "noise-dominated", -2) == NULL,
              "noise-dominated raised for a run whose variance is mostly "
              "signal; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    ss_analysis_free(a);
}

/* A run of 10 shots gets a few-shots flag on that run carrying the number
 * shots_needed (more than the 10 it has); the same run with 400 shots gets
 * no per-run few-shots flag.  Exact moments of p = (0.5, 0.3, 0.2), n = 10,
 * d = 3; the short run is run 1 of two so the run index is checked too. */
Test(inversion, few_shots) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    ss_run runs[2] = {iv_exact_run(10, 400, p, 3, &cal),
                      iv_exact_run(12, 10, p, 3, &cal)};
    ss_analysis_request req = iv_request(3, runs, 2, SS_METHOD_MOMENTS);
    ss_analysis *a = iv_analyse(&req, "10-shot run");
    char buf[512];
    const ss_flag *f = iv_flag(a, "few-shots", 1);
    cr_assert(f != NULL, "no few-shots flag on run 1; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    double need = NAN;
    cr_assert(iv_flag_number(f, "shots_needed", &need),
              "few-shots flag without shots_needed");
    cr_assert(need > 10.0, "shots_needed = %g for a 10-shot run", need);
    cr_assert(iv_flag(a, "few-shots", 0) == NULL,
              "few-shots raised on the 400-shot run 0");
    ss_analysis_free(a);
}

/* The candidates' probabilities of a many-run request (the core computes
 * the laws of all runs from one shared Schur table) equal, diagram by
 * diagram, the law of each run computed on its own by
 * ss_distribution_compute at the estimated spectrum.  Identity check;
 * tolerance 1e-13 relative (both sum the same long-double logs, only the
 * table's size differs).  Ten summary runs n = 8..26 at the exact moments
 * of p = (0.6, 0.3, 0.1) (as the benchmark) plus a repeated n. */
Test(inversion, shared_table_probabilities) {
    const double p[3] = {0.6, 0.3, 0.1};
    ss_calibration cal = ss_calibration_default();
    ss_run runs[11];
    for (unsigned r = 0; r < 10; r++)
        runs[r] = iv_exact_run(8 + 2 * r, 400, p, 3, &cal);
    runs[10] = iv_exact_run(12, 400, p, 3, &cal);
    ss_analysis_request req = iv_request(3, runs, 11, SS_METHOD_MOMENTS);
    ss_analysis *a = iv_analyse(&req, "eleven runs");
    size_t checked = 0;
    for (size_t r = 0; r < a->run_count; r++) {
        ss_distribution *dist = NULL;
        ss_error err;
        ss_error_clear(&err);
        cr_assert_eq(ss_distribution_compute(a->runs[r].atoms, 3, a->values, 3,
                                             NULL, &dist, &err),
                     SS_OK, "%s", err.message);
        const ss_diagram_set *set = dist->diagrams;
        for (size_t k = 0; k < a->runs[r].candidate_count; k++) {
            const ss_candidate *c = &a->runs[r].candidates[k];
            size_t i = 0;
            while (i < set->count &&
                   memcmp(set->rows + i * 3, c->rows, 3 * sizeof *c->rows))
                i++;
            cr_assert(i < set->count, "run %zu: candidate not a diagram", r);
            double want = dist->probability[i];
            cr_assert(fabs(c->probability - want) <= 1e-13 * want,
                      "run %zu (n = %u) candidate %zu: %.17g vs %.17g", r,
                      a->runs[r].atoms, k, c->probability, want);
            checked++;
        }
        ss_distribution_free(dist);
    }
    cr_assert(checked >= 30, "only %zu candidates checked", checked);
    ss_analysis_free(a);
}

/* Per-shot energies at d = 6 from n = 6 atoms with three zero eigenvalues,
 * p = (0.5, 0.3, 0.2, 0, 0, 0), 1000 shots (seed 7): the likelihood leaves
 * four directions unidentified (Fisher rank 1 of 5).  Its profile search
 * once returned p1 in [0.535, 0.543] (truth 0.5 outside, against a
 * curvature standard error of 0.04); now the intervals are the exact
 * moment region, which must contain every true eigenvalue, with the
 * underdetermined flag naming the Fisher rank. */
Test(inversion, likelihood_many_unidentified_directions) {
    const double p[6] = {0.5, 0.3, 0.2, 0, 0, 0};
    ss_sampler *smp = tu_sampler(6, p);
    gsl_rng *rng = iv_rng(7);
    ss_calibration cal = ss_calibration_default();
    static double e[1000];
    iv_shots(smp, rng, 6, &cal, 1000, e);
    ss_run run = iv_per_shot(6, e, 1000);
    ss_analysis_request req = iv_request(6, &run, 1, SS_METHOD_LIKELIHOOD);
    ss_analysis *a = iv_analyse(&req, "d = 6, n = 6");
    char buf[1024];
    for (unsigned i = 0; i < 6; i++)
        cr_assert(a->lower[i] <= p[i] + 1e-12 && p[i] <= a->upper[i] + 1e-12,
                  "eigenvalue %u: truth %g outside [%g, %g]", i, p[i],
                  a->lower[i], a->upper[i]);
    const ss_flag *f = iv_flag(a, "underdetermined", -1);
    cr_assert(f != NULL, "no underdetermined flag; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    double rank = NAN;
    cr_assert(iv_flag_number(f, "fisher_rank", &rank) && rank <= 2.0,
              "fisher_rank %g", rank);
    ss_analysis_free(a);
    gsl_rng_free(rng);
    ss_sampler_free(smp);
}

/* The likelihood's work budget (ss_budget.max_work) and deadline
 * (max_seconds): 300 per-shot readings
 * at n = 12, d = 3 fit within the default, but with max_work = 10 000 units
 * (a few evaluations) method likelihood stops with SS_EBUDGET naming
 * max_work, and method auto falls back to the moments, deterministically
 * (the count has no clock in it: two runs give the same values). */
Test(inversion, likelihood_work_budget) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_sampler *smp = tu_sampler(3, p);
    gsl_rng *rng = iv_rng(12);
    ss_calibration cal = ss_calibration_default();
    static double e[300];
    iv_shots(smp, rng, 12, &cal, 300, e);
    ss_run run = iv_per_shot(12, e, 300);
    ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_LIKELIHOOD);
    ss_analysis *a = iv_analyse(&req, "default budget");
    cr_assert_eq(a->method, SS_METHOD_LIKELIHOOD);
    ss_analysis_free(a);
    req.budget.max_work = 10000;
    ss_error err;
    ss_error_clear(&err);
    a = NULL;
    cr_assert_eq(ss_analysis_run(&req, &a, &err), SS_EBUDGET, "%s",
                 err.message);
    cr_assert_str_eq(err.field, "max_work");
    cr_assert_null(a);
    req.method = SS_METHOD_AUTO;
    ss_analysis *b1 = iv_analyse(&req, "auto, small budget");
    ss_analysis *b2 = iv_analyse(&req, "auto, small budget again");
    cr_assert_eq(b1->method, SS_METHOD_MOMENTS);
    for (unsigned i = 0; i < 3; i++)
        cr_assert_eq(b1->values[i], b2->values[i]);
    ss_analysis_free(b1);
    ss_analysis_free(b2);
    /* the wall-clock deadline (max_seconds) ends the fit the same way, as
     * SS_EDEADLINE (503 in the service); auto stays with the moments */
    req.budget.max_work = 0;
    req.budget.max_seconds = 1e-9;
    req.method = SS_METHOD_LIKELIHOOD;
    ss_error_clear(&err);
    ss_status dst = ss_analysis_run(&req, &a, &err);
    cr_assert_eq(dst, SS_EDEADLINE, "%s: %s", ss_status_name(dst), err.message);
    cr_assert_str_eq(err.field, "max_seconds");
    req.method = SS_METHOD_AUTO;
    b1 = iv_analyse(&req, "auto, past the deadline");
    cr_assert_eq(b1->method, SS_METHOD_MOMENTS);
    ss_analysis_free(b1);
    gsl_rng_free(rng);
    ss_sampler_free(smp);
}

/* symmetry-caution (core/src/analysis.c, SS__SYMMETRY_RATIO): the stated
 * criterion is spread·√C(n,2) >= 0.1.  For n = 24, C(24,2) = 276 and
 * √276 = 16.61, so spread 0.01 gives 0.166 (flag, on the 24-atom run 1 of
 * two, with breaking_to_spacing = 0.01·√276 to 1e-12) and spread 0.005
 * gives 0.083 (no flag); the 10-atom run 0 (√45·0.01 = 0.067) is below the
 * criterion either way.  A negative spread is refused naming the field. */
Test(inversion, symmetry_caution) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    ss_run runs[2] = {iv_exact_run(10, 400, p, 3, &cal),
                      iv_exact_run(24, 400, p, 3, &cal)};
    ss_analysis_request req = iv_request(3, runs, 2, SS_METHOD_MOMENTS);
    req.calibration.coupling_spread = 0.01;
    ss_analysis *a = iv_analyse(&req, "spread 0.01");
    char buf[512];
    const ss_flag *f = iv_flag(a, "symmetry-caution", 1);
    cr_assert(f != NULL, "no symmetry-caution flag on run 1; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    double ratio = NAN;
    cr_assert(iv_flag_number(f, "breaking_to_spacing", &ratio));
    cr_assert(fabs(ratio - 0.01 * sqrt(276.0)) < 1e-12, "ratio %.17g", ratio);
    cr_assert(iv_flag(a, "symmetry-caution", 0) == NULL);
    ss_analysis_free(a);

    req.calibration.coupling_spread = 0.005;
    a = iv_analyse(&req, "spread 0.005");
    cr_assert(iv_flag(a, "symmetry-caution", -2) == NULL,
              "symmetry-caution at spread·√C(n,2) = 0.083; flags: %s",
              iv_flag_list(a, buf, sizeof buf));
    ss_analysis_free(a);

    req.calibration.coupling_spread = -0.1;
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *bad = NULL;
    cr_assert_eq(ss_analysis_run(&req, &bad, &err), SS_EINVAL);
    cr_assert_str_eq(err.field, "calibration.coupling_spread");
    cr_assert_null(bad);
}

/* ------------------------------------------------------------------------ */
/* likelihood: readings that match no diagram                                 */

/* With noise_sd = 0 every reading must sit on the energy of some diagram
 * (domain.md §1: a shot reads out E(λ)).  Simulated shots (n = 6, d = 3,
 * p = (0.5, 0.3, 0.2), seed 606) with one reading replaced: content 2.5 (not
 * an integer) at shot 7 of run 0, and content 14 (an integer, but no diagram
 * of 6 atoms with <= 3 rows has it: the contents are 15, 9, 5, 3, 3, 0, −3)
 * at shot 12 of run 1.  Expected SS_EINVAL with the exact field path. */
Test(inversion, likelihood_reading_matches_no_diagram) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    gsl_rng *rng = iv_rng(606UL);
    ss_sampler *s = tu_sampler(3, p);
    double e0[50], e1[50];
    iv_shots(s, rng, 6, &cal, 50, e0);
    iv_shots(s, rng, 6, &cal, 50, e1);
    /* baseline: the untouched readings are accepted */
    ss_run runs[2] = {iv_per_shot(6, e0, 50), iv_per_shot(6, e1, 50)};
    ss_analysis_request req = iv_request(3, runs, 2, SS_METHOD_LIKELIHOOD);
    ss_analysis *a = iv_analyse(&req, "clean readings");
    cr_assert(a->method == SS_METHOD_LIKELIHOOD);
    ss_analysis_free(a);

    const struct {
        size_t run, shot;
        double energy;
        const char *field;
    } cases[] = {{0, 7, 2.5, "runs[0].energies[7]"},
                 {1, 12, 14.0, "runs[1].energies[12]"}};
    for (size_t t = 0; t < TU_COUNT_OF(cases); t++) {
        double *e = cases[t].run == 0 ? e0 : e1;
        double keep = e[cases[t].shot];
        e[cases[t].shot] = cases[t].energy;
        ss_error err;
        ss_error_clear(&err);
        ss_analysis *out = NULL;
        ss_status st = ss_analysis_run(&req, &out, &err);
        tu_expect_error(st, &err, SS_EINVAL, NULL, cases[t].field);
        cr_assert(strcmp(err.field, cases[t].field) == 0,
                  "field \"%s\", expected \"%s\" (%s)", err.field,
                  cases[t].field, err.message);
        cr_assert(out == NULL, "output written on failure");
        e[cases[t].shot] = keep;
    }
    ss_sampler_free(s);
    gsl_rng_free(rng);
}

/* ------------------------------------------------------------------------ */
/* bad input                                                                  */

/* The header: on failure nothing is written to the outputs, and every field
 * error names its path.  *out starts as a sentinel address and must still
 * hold it; the call must return within 1 s (validation precedes any work;
 * generous for sanitizer builds). */
static void expect_rejected(const ss_analysis_request *req, const char *field,
                            int exact, const char *what) {
    static ss_analysis sentinel;
    ss_analysis *out = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    double t0 = tu_seconds_now();
    ss_status st = ss_analysis_run(req, &out, &err);
    double dt = tu_seconds_now() - t0;
    if (st == SS_OK && out != &sentinel)
        ss_analysis_free(out);
    tu_expect_error(st, &err, SS_EINVAL, field, what);
    if (exact)
        cr_assert(strcmp(err.field, field) == 0,
                  "%s: field \"%s\", expected exactly \"%s\" (%s)", what,
                  err.field, field, err.message);
    cr_assert(out == &sentinel, "%s: *out was written on failure", what);
    cr_assert(dt < 1.0, "%s: rejection took %.3f s", what, dt);
}

/* Three valid summary runs (exact moments of (0.5, 0.3, 0.2), n = 10, 12,
 * 14, K = 400) into which each test puts one defect. */
static void base_runs(ss_run *runs) {
    const double p[3] = {0.5, 0.3, 0.2};
    ss_calibration cal = ss_calibration_default();
    for (unsigned r = 0; r < 3; r++)
        runs[r] = iv_exact_run(10 + 2 * r, 400, p, 3, &cal);
}

Test(inversion, bad_input_fields) {
    ss_run runs[3];
    base_runs(runs);
    ss_analysis_request req = iv_request(3, runs, 3, SS_METHOD_MOMENTS);
    ss_analysis *ok = iv_analyse(&req, "the valid base request");
    ss_analysis_free(ok);

    runs[2].energy_variance = -0.5;
    expect_rejected(&req, "runs[2].energy_variance", 1, "negative variance");
    base_runs(runs);

    runs[1].shots = 0;
    expect_rejected(&req, "runs[1].shots", 1, "shots 0");
    runs[1].shots = 1;
    expect_rejected(&req, "runs[1].shots", 1, "shots 1");
    base_runs(runs);

    runs[0].atoms = 1;
    expect_rejected(&req, "runs[0].atoms", 1, "atoms 1");
    base_runs(runs);
    runs[2].atoms = 1;
    expect_rejected(&req, "runs[2].atoms", 1, "atoms 1 in run 2");
    base_runs(runs);

    /* per-shot readings */
    double e[20];
    for (size_t k = 0; k < 20; k++)
        e[k] = (k % 3 == 0) ? 45.0 : 35.0; /* contents of (10), (9,1) */
    ss_run rs[2] = {runs[0], iv_per_shot(10, e, 20)};
    ss_analysis_request rq = iv_request(3, rs, 2, SS_METHOD_AUTO);
    e[5] = NAN;
    expect_rejected(&rq, "runs[1].energies[5]", 1, "NaN reading");
    e[5] = 35.0;
    e[0] = INFINITY;
    expect_rejected(&rq, "runs[1].energies[0]", 1, "+Inf reading");
    e[0] = 45.0;
    e[19] = -INFINITY;
    expect_rejected(&rq, "runs[1].energies[19]", 1, "-Inf reading");
    e[19] = 45.0;
    rs[1].energy_count = 0;
    expect_rejected(&rq, "runs[1].energies", 1, "empty energies");
    rs[1].energy_count = 20;
    rs[0] = iv_per_shot(10, e, 20);
    rs[1] = runs[1];
    e[3] = NAN;
    expect_rejected(&rq, "runs[0].energies[3]", 1, "NaN reading in run 0");
    e[3] = 45.0;

    /* request-level fields */
    req = iv_request(3, runs, 3, SS_METHOD_MOMENTS);
    req.calibration.exchange = 0.0;
    expect_rejected(&req, "exchange", 0, "exchange 0");
    req = iv_request(3, runs, 3, SS_METHOD_MOMENTS);
    const double conf[] = {0.0, 1.0, 1.5, -0.2, NAN};
    for (size_t i = 0; i < TU_COUNT_OF(conf); i++) {
        char what[48];
        snprintf(what, sizeof what, "confidence %g", conf[i]);
        req.confidence = conf[i];
        expect_rejected(&req, "confidence", 1, what);
    }
    req = iv_request(3, runs, 3, SS_METHOD_MOMENTS);
    req.bootstrap = SS_BOOTSTRAP_MAX + 1;
    expect_rejected(&req, "bootstrap", 1, "bootstrap above the maximum");
    req = iv_request(3, runs, 3, SS_METHOD_LIKELIHOOD);
    expect_rejected(&req, "method", 1, "likelihood without per-shot data");

    /* more runs than SS_RUNS_MAX, each valid */
    ss_run *many = malloc((SS_RUNS_MAX + 1) * sizeof *many);
    cr_assert(many != NULL);
    for (size_t r = 0; r < SS_RUNS_MAX + 1; r++)
        many[r] = runs[r % 3];
    req = iv_request(3, many, SS_RUNS_MAX + 1, SS_METHOD_MOMENTS);
    expect_rejected(&req, "runs", 1, "SS_RUNS_MAX + 1 runs");
    free(many);
}

/* ------------------------------------------------------------------------ */
/* the naive reading                                                          */

/* domain.md §3 "naive energy inversion": λ/n of the diagram whose energy is
 * nearest the mean.  For p = (0.6, 0.3, 0.1), n = 24: E[c] = 276·0.46 =
 * 126.96 (domain.md §3, checked here against C(24,2)·P2 to 1e-9).  The naive
 * spectrum must be λ/24 for a diagram λ (entries multiples of 1/24 within
 * 1e-9, summing to 1, non-increasing), and its content must be a content
 * nearest 126.96 among all diagrams of 24 with <= 3 rows (enumerated with
 * ss_diagram_set_alloc, contents recomputed with testutil's tu_content).
 * Exact moments, K = 400. */
Test(inversion, naive_is_a_diagram_over_n) {
    const double p[3] = {0.6, 0.3, 0.1};
    const unsigned n = 24;
    ss_calibration cal = ss_calibration_default();
    ss_run run = iv_exact_run(n, 400, p, 3, &cal);
    cr_assert(fabs(run.mean_energy - 126.96) < 1e-9, "E[c] = %.12g",
              run.mean_energy);
    ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_MOMENTS);
    ss_analysis *a = iv_analyse(&req, "naive n=24");
    cr_assert(a->has_naive);
    uint32_t rows[3];
    double sum = 0.0;
    for (unsigned i = 0; i < 3; i++) {
        double x = a->naive[i] * n;
        cr_assert(fabs(x - nearbyint(x)) < 1e-9,
                  "naive[%u]·24 = %.12g is not an integer", i, x);
        rows[i] = (uint32_t)nearbyint(x);
        sum += a->naive[i];
    }
    cr_assert(fabs(sum - 1.0) < 1e-12 && tu_is_diagram(rows, 3, n),
              "naive (%u,%u,%u)/24 is not a diagram of 24", rows[0], rows[1],
              rows[2]);
    ss_diagram_set *set = tu_diagram_set(n, 3);
    double best = HUGE_VAL;
    for (size_t i = 0; i < set->count; i++)
        best = fmin(best, fabs((double)tu_content(set->rows + 3 * i, 3) -
                               run.mean_energy));
    double gap = fabs((double)tu_content(rows, 3) - run.mean_energy);
    cr_assert(fabs(gap - best) < 1e-9,
              "naive (%u,%u,%u) has content %lld, %.4g from the mean; the "
              "nearest content is %.4g away",
              rows[0], rows[1], rows[2], (long long)tu_content(rows, 3), gap,
              best);
    ss_diagram_set_free(set);
    ss_analysis_free(a);
}

/* ss_analysis_run that must refuse req with SS_EBUDGET naming field. */
static void expect_over_budget(const ss_analysis_request *req,
                               const char *field, const char *what) {
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *a = NULL;
    ss_status st = ss_analysis_run(req, &a, &err);
    cr_assert(st == SS_EBUDGET && strcmp(err.field, field) == 0,
              "%s: %s naming \"%s\", expected work-budget-exceeded naming "
              "\"%s\" (%s)",
              what, ss_status_name(st), err.field, field, err.message);
    cr_assert(strstr(err.message, "at most") != NULL, "%s: %s", what,
              err.message);
    cr_assert_null(a);
}

/* The analysis's cost model (core/src/internal.h, budget.c), held at its
 * boundaries; every number is worked by hand from the model's formulas,
 * not read from the program:
 * - Schur-table cells.  For d = 2, cells(n, 2) = n + 1 (the partitions of
 *   at most n boxes with at most one row: 0..n), so with max_table_cells
 *   100, runs of 40 and 50 atoms need 41 + 51 = 92 cells (accepted), one
 *   more of 10 atoms makes 103 (refused, naming "runs"), one run of 100
 *   atoms alone needs 101 (naming "runs[0].atoms"); with a bootstrap the
 *   cells count twice, so 40 and 10 atoms (41 + 11 = 52 > 100/2) are over.
 * - Bootstrap replicates.  One run of 12 atoms on 4 levels costs
 *   3200·(4² + 16) + 256 + L units a replicate, L = min(34, 66 + 6 + 1) =
 *   34 (34 diagrams of 12 with at most 4 rows, OEIS A026820; contents from
 *   −6 for (3,3,3,3) to C(12,2) = 66 for (12)): 102 690 units, and
 *   1.5·10^8 / 102 690 = 1460.7, so 1460 replicates run and 1461 are
 *   refused before any work.  Exact. */
Test(inversion, cost_model_boundaries) {
    const double p2[2] = {0.7, 0.3};
    ss_calibration cal = ss_calibration_default();
    ss_run runs[3] = {iv_exact_run(40, 200, p2, 2, &cal),
                      iv_exact_run(50, 200, p2, 2, &cal),
                      iv_exact_run(10, 200, p2, 2, &cal)};
    ss_analysis_request req = iv_request(2, runs, 2, SS_METHOD_MOMENTS);
    req.budget.max_table_cells = 100;
    ss_analysis_free(iv_analyse(&req, "92 cells of 100"));
    req.run_count = 3;
    expect_over_budget(&req, "runs", "103 cells of 100");
    ss_run big = iv_exact_run(100, 200, p2, 2, &cal);
    req.runs = &big;
    req.run_count = 1;
    expect_over_budget(&req, "runs[0].atoms", "one run of 101 cells");
    ss_run pair[2] = {runs[0], runs[2]}; /* 40 and 10 atoms */
    req.runs = pair;
    req.run_count = 2;
    ss_analysis_free(iv_analyse(&req, "52 cells of 100"));
    req.bootstrap = 10;
    expect_over_budget(&req, "runs", "52 cells of 100 / 2 (bootstrap)");

    const double p4[4] = {0.4, 0.3, 0.2, 0.1};
    ss_run one = iv_exact_run(12, 1000, p4, 4, &cal);
    req = iv_request(4, &one, 1, SS_METHOD_MOMENTS);
    req.bootstrap = 1461;
    expect_over_budget(&req, "bootstrap", "1461 replicates");
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *a = NULL;
    ss_analysis_run(&req, &a, &err);
    cr_assert(strstr(err.message, "at most 1460 bootstrap replicates") &&
                  strstr(err.message, "got 1461"),
              "%s", err.message);
    req.bootstrap = 1460;
    a = iv_analyse(&req, "1460 replicates");
    cr_assert_eq(a->diagnostics.bootstrap_replicates, 1460u);
    ss_analysis_free(a);
}
