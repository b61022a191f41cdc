/*
 * test_coverage.c — Monte Carlo checks of the inversion (ss_analysis_run):
 * each repetition simulates a run of shots with ss_sampler_shot (RSK shapes,
 * O'Donnell & Wright, STOC 2016; domain.md §1) at a fixed gsl_rng_mt19937
 * seed and inverts it.  Checked: the coverage of the reported intervals
 * (moments and likelihood), the unbiasedness of the moment purity, the
 * likelihood's variance against its own Cramér–Rao bound (and that bound
 * against a separate computation of the Fisher information at the truth),
 * the moment estimate against the naive λ/n reading, and the coverage of
 * the underdetermined d = 4 ranges.
 *
 * All seeds are fixed, so every outcome is deterministic; each comment
 * gives the false-alarm rate the band would have at a random seed for a
 * correct estimator.  Coverage bands are the issue's [0.92, 0.99] for 95 %
 * intervals; with R repetitions the binomial standard error of a coverage
 * of 0.95 is sqrt(0.95·0.05/R) (0.0109 at R = 400).  Each test prints what
 * it measured and its run time to stderr.  Whole program, --jobs 2 (as
 * ctest runs it): about 33 s in a Release build, 57 s with ASan+UBSan, on
 * the 2-core build machine; the d = 4 likelihood case dominates.
 */
#include <stdio.h>

#include "inversion_util.h"

TestSuite(coverage, .init = tu_quiet_gsl, .timeout = 1200);

#define COVERAGE_LOW 0.92
#define COVERAGE_HIGH 0.99

typedef struct {
    const char *label;
    unsigned d, n;
    double p[SS_LEVELS_MAX];
    size_t shots;  /* K per run */
    unsigned reps; /* repetitions */
    unsigned long seed;
    ss_method method;
    int per_shot; /* pass the readings (1) or their mean and variance (0) */
} cov_case;

typedef struct {
    double
        covered[SS_LEVELS_MAX]; /* fraction of reps with lower <= p <= upper */
    double joint;               /* all eigenvalues at once */
    unsigned underdetermined;   /* reps carrying that flag */
    double seconds;
} cov_result;

/* Runs one coverage configuration: each repetition draws c->shots shots of
 * c->n atoms (noise-free default calibration), inverts them with c->method
 * and checks lower[i] <= p[i] <= upper[i] for every eigenvalue. */
static cov_result run_coverage(const cov_case *c) {
    cov_result res;
    memset(&res, 0, sizeof res);
    double t0 = tu_seconds_now();
    ss_calibration cal = ss_calibration_default();
    gsl_rng *rng = iv_rng(c->seed);
    ss_sampler *s = tu_sampler(c->d, c->p);
    double *e = malloc(c->shots * sizeof *e);
    cr_assert(e != NULL);
    unsigned hit[SS_LEVELS_MAX] = {0}, joint = 0;
    for (unsigned r = 0; r < c->reps; r++) {
        iv_shots(s, rng, c->n, &cal, c->shots, e);
        ss_run run = c->per_shot ? iv_per_shot(c->n, e, c->shots)
                                 : iv_summary_of(c->n, e, c->shots);
        ss_analysis_request req = iv_request(c->d, &run, 1, c->method);
        ss_analysis *a = iv_analyse(&req, c->label);
        int all = 1;
        for (unsigned i = 0; i < c->d; i++) {
            int in = a->lower[i] <= c->p[i] && c->p[i] <= a->upper[i];
            hit[i] += (unsigned)in;
            all &= in;
        }
        joint += (unsigned)all;
        res.underdetermined += iv_flag(a, "underdetermined", -2) != NULL;
        ss_analysis_free(a);
    }
    for (unsigned i = 0; i < c->d; i++)
        res.covered[i] = (double)hit[i] / c->reps;
    res.joint = (double)joint / c->reps;
    res.seconds = tu_seconds_now() - t0;
    fprintf(stderr,
            "coverage %-22s d=%u n=%-3u K=%-5zu reps=%u (%s, %s):", c->label,
            c->d, c->n, c->shots, c->reps, ss_method_name(c->method),
            c->per_shot ? "per-shot" : "summary");
    for (unsigned i = 0; i < c->d; i++)
        fprintf(stderr, " %.3f", res.covered[i]);
    fprintf(stderr, "  joint %.3f  [%.1f s]\n", res.joint, res.seconds);
    free(e);
    ss_sampler_free(s);
    gsl_rng_free(rng);
    return res;
}

/* The band for each eigenvalue separately. */
static void expect_band(const cov_case *c, const cov_result *res) {
    for (unsigned i = 0; i < c->d; i++)
        cr_expect(res->covered[i] >= COVERAGE_LOW &&
                      res->covered[i] <= COVERAGE_HIGH,
                  "%s (d=%u n=%u K=%zu, %s): coverage of eigenvalue %u is "
                  "%.3f, outside [%.2f, %.2f]",
                  c->label, c->d, c->n, c->shots, ss_method_name(c->method), i,
                  res->covered[i], COVERAGE_LOW, COVERAGE_HIGH);
}

/* Moment inversion (delta method on the (P2, P3) fit, domain.md §3),
 * summary runs (mean and K−1 variance of K = 400 simulated shots), one run
 * per repetition, R = 1000 repetitions, 95 % intervals; band [0.92, 0.99]
 * per eigenvalue.  Binomial SE at 0.95: 0.0069, so the band is −4.3 / +5.8
 * SE; an interval of true coverage 0.94 would fall below 0.92 at a random
 * seed with probability about 0.4 %.  Seeds 2101..2103 (d = 2) and
 * 3101..3103 (d = 3).  Measured in a Release build with these seeds:
 *   d = 2, n = 8 / 24 / 60:  0.941 / 0.958 / 0.946;
 *   d = 3, n = 24: 0.970 0.949 0.927 (4000 reps at another seed: 0.969
 *   0.963 0.942);  n = 60: 0.955 0.961 0.946;
 *   d = 3, n = 8: 0.984 1.000 0.945 — FAILS the band (eigenvalue 1): with
 *   8 atoms and 400 shots P3 is barely determined, the root map's
 *   derivative blows up (ill-conditioned is flagged in about 80 % of
 *   repetitions) and the delta-method interval of the middle eigenvalue
 *   covers most of [0, 1] (mean width 0.44).  Kept and reported to the
 *   lead rather than weakened. */
Test(coverage, moments_d2) {
    const unsigned ns[] = {8, 24, 60};
    for (size_t k = 0; k < TU_COUNT_OF(ns); k++) {
        cov_case c = {.label = "moments p=(.7,.3)",
                      .d = 2,
                      .n = ns[k],
                      .p = {0.7, 0.3},
                      .shots = 400,
                      .reps = 1000,
                      .seed = 2101 + k,
                      .method = SS_METHOD_MOMENTS};
        cov_result r = run_coverage(&c);
        expect_band(&c, &r);
    }
}

Test(coverage, moments_d3) {
    const unsigned ns[] = {8, 24, 60};
    for (size_t k = 0; k < TU_COUNT_OF(ns); k++) {
        cov_case c = {.label = "moments p=(.55,.3,.15)",
                      .d = 3,
                      .n = ns[k],
                      .p = {0.55, 0.3, 0.15},
                      .shots = 400,
                      .reps = 1000,
                      .seed = 3101 + k,
                      .method = SS_METHOD_MOMENTS};
        cov_result r = run_coverage(&c);
        expect_band(&c, &r);
    }
}

/* The same moment inversion fed the per-shot readings (the fit then takes
 * its covariance from the sample moments instead of the model): n = 24,
 * d = 3, K = 400, R = 1000, seed 3201. */
Test(coverage, moments_d3_per_shot) {
    cov_case c = {.label = "moments per-shot",
                  .d = 3,
                  .n = 24,
                  .p = {0.55, 0.3, 0.15},
                  .shots = 400,
                  .reps = 1000,
                  .seed = 3201,
                  .method = SS_METHOD_MOMENTS,
                  .per_shot = 1};
    cov_result r = run_coverage(&c);
    expect_band(&c, &r);
}

/* Likelihood (observed-information intervals) from per-shot readings with
 * noise_sd 0: d = 2 (n = 24, K = 400, R = 1000), d = 3 (n = 24, K = 400,
 * R = 600), d = 4 (n = 12, K = 1000, p = (0.4, 0.3, 0.2, 0.1), R = 400);
 * seeds 5101..5103.  Binomial SE at 0.95: 0.0069 / 0.0089 / 0.0109.
 * Measured in a Release build with these seeds: d = 2 0.950; d = 3 0.948
 * 0.947 0.950; d = 4 0.938 0.990 0.998 0.948 — FAILS the band (eigenvalue
 * 2): in about 65 % of repetitions the maximiser lies on a tie of two
 * eigenvalues (its likelihood is above the truth's, so the optimiser is
 * not at fault), where the observed information is nearly singular; the
 * reported sd is then about twice the empirical one (0.104 vs 0.046 for
 * p2, exploratory seed) and the core flags ill-conditioned.  Kept and
 * reported to the lead rather than weakened. */
Test(coverage, likelihood) {
    const cov_case cases[] = {
        {.label = "likelihood p=(.7,.3)",
         .d = 2,
         .n = 24,
         .p = {0.7, 0.3},
         .shots = 400,
         .reps = 1000,
         .seed = 5101,
         .method = SS_METHOD_LIKELIHOOD,
         .per_shot = 1},
        {.label = "likelihood p=(.55,.3,.15)",
         .d = 3,
         .n = 24,
         .p = {0.55, 0.3, 0.15},
         .shots = 400,
         .reps = 600,
         .seed = 5102,
         .method = SS_METHOD_LIKELIHOOD,
         .per_shot = 1},
        {.label = "likelihood p=(.4,.3,.2,.1)",
         .d = 4,
         .n = 12,
         .p = {0.4, 0.3, 0.2, 0.1},
         .shots = 1000,
         .reps = 400,
         .seed = 5103,
         .method = SS_METHOD_LIKELIHOOD,
         .per_shot = 1},
    };
    for (size_t k = 0; k < TU_COUNT_OF(cases); k++) {
        cov_result r = run_coverage(&cases[k]);
        expect_band(&cases[k], &r);
    }
}

/* domain.md §2 / statistics-sources.md §3.3: E[c] = C(n,2)·P2, so the
 * moment purity is unbiased (for one run the fit solves the two moment
 * equations exactly, so P2 = mean content / C(n,2)).  d = 3, n = 24,
 * p = (0.55, 0.3, 0.15), K = 400 summary runs, R = 400, seed 7101: the mean
 * of a->p2 must lie within 3 standard errors of the mean (sample sd /
 * sqrt(R)) of the truth (false-alarm rate 0.27 % at a random seed).
 * Measured (Release): +1.80 SE (4000 repetitions at this seed: +1.0 SE, and
 * the fitted P2 equals mean content / C(n,2) to 6e-17 in every one). */
Test(coverage, purity_unbiased) {
    const double p[3] = {0.55, 0.3, 0.15};
    const unsigned n = 24, R = 400;
    const size_t K = 400;
    double t0 = tu_seconds_now();
    ss_calibration cal = ss_calibration_default();
    gsl_rng *rng = iv_rng(7101UL);
    ss_sampler *s = tu_sampler(3, p);
    double *e = malloc(K * sizeof *e);
    cr_assert(e != NULL);
    long double sum = 0.0L, sq = 0.0L;
    for (unsigned r = 0; r < R; r++) {
        iv_shots(s, rng, n, &cal, K, e);
        ss_run run = iv_summary_of(n, e, K);
        ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_MOMENTS);
        ss_analysis *a = iv_analyse(&req, "purity");
        sum += a->p2;
        sq += (long double)a->p2 * a->p2;
        ss_analysis_free(a);
    }
    double mean = (double)(sum / R);
    double sd = sqrt((double)((sq - sum * sum / R) / (R - 1)));
    double se = sd / sqrt((double)R);
    double truth = ss_spectrum_power_sum(p, 3, 2);
    fprintf(stderr,
            "purity: mean P2 %.6f, truth %.6f, sd %.5f, (mean - truth)/se "
            "%+.2f  [%.1f s]\n",
            mean, truth, sd, (mean - truth) / se, tu_seconds_now() - t0);
    cr_expect(fabs(mean - truth) <= 3.0 * se,
              "mean P2 %.6f is %.2f standard errors (%.2g) from the truth "
              "%.6f",
              mean, (mean - truth) / se, se, truth);
    free(e);
    ss_sampler_free(s);
    gsl_rng_free(rng);
}

/* Efficiency of the likelihood (domain.md §3: the Fisher information gives
 * the Cramér–Rao bound, the floor an unbiased estimator sits on; with
 * distinct eigenvalues the maximum-likelihood estimator reaches it
 * asymptotically, statistics-sources.md §5.1).  n = 12, d = 3,
 * p = (0.55, 0.3, 0.15), K = 2000 noise-free readings, R = 400, seed 8101:
 *  - the empirical variance of each eigenvalue lies in [0.75, 1.25] × the
 *    mean over repetitions of cramer_rao_stderr² (the relative SE of a
 *    sample variance of R = 400 is sqrt(2/399) = 0.071, so the band is
 *    ±3.5 SE; below 0.75 would beat the bound, a bug);
 *  - that mean CRB variance agrees with the bound at the truth computed
 *    separately (iv_crb_at, inversion_util.h) within 10 % (the CRB at the
 *    estimate moves by O(1/√K) relative, a few per cent at K = 2000; the
 *    deterministic check at the truth itself, to 0.2 %, is in
 *    test_inversion.c).
 * Measured (Release): variance / mean CRB variance = 1.132, 1.076, 0.975;
 * mean CRB variance / CRB at the truth = 1.013, 1.049, 1.078. */
Test(coverage, likelihood_variance_vs_cramer_rao) {
    const double p[3] = {0.55, 0.3, 0.15};
    const unsigned n = 12, R = 400;
    const size_t K = 2000;
    double t0 = tu_seconds_now();
    ss_calibration cal = ss_calibration_default();
    gsl_rng *rng = iv_rng(8101UL);
    ss_sampler *s = tu_sampler(3, p);
    double *e = malloc(K * sizeof *e);
    cr_assert(e != NULL);
    long double sum[3] = {0}, sq[3] = {0}, crb2[3] = {0};
    for (unsigned r = 0; r < R; r++) {
        iv_shots(s, rng, n, &cal, K, e);
        ss_run run = iv_per_shot(n, e, K);
        ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_LIKELIHOOD);
        ss_analysis *a = iv_analyse(&req, "likelihood K=2000");
        cr_assert(a->method == SS_METHOD_LIKELIHOOD);
        for (unsigned i = 0; i < 3; i++) {
            double c = a->diagnostics.cramer_rao_stderr[i];
            cr_assert(isfinite(c) && c > 0, "rep %u: CRB sd %g", r, c);
            sum[i] += a->values[i];
            sq[i] += (long double)a->values[i] * a->values[i];
            crb2[i] += (long double)c * c;
        }
        ss_analysis_free(a);
    }
    double own[3];
    cr_assert(iv_crb_at(n, 3, p, (double)K, own), "singular Fisher matrix");
    for (unsigned i = 0; i < 3; i++) {
        double var = (double)((sq[i] - sum[i] * sum[i] / R) / (R - 1));
        double bound = (double)(crb2[i] / R);
        fprintf(stderr,
                "likelihood K=2000 eigenvalue %u: mean %.5f (truth %.2f), "
                "var %.4g, mean CRB var %.4g (ratio %.3f), CRB var at truth "
                "%.4g\n",
                i, (double)(sum[i] / R), p[i], var, bound, var / bound,
                own[i] * own[i]);
        cr_expect(var <= 1.25 * bound && var >= 0.75 * bound,
                  "eigenvalue %u: variance %.4g is %.3f x the Cramér–Rao "
                  "variance %.4g (band [0.75, 1.25])",
                  i, var, var / bound, bound);
        cr_expect(fabs(bound / (own[i] * own[i]) - 1.0) <= 0.10,
                  "eigenvalue %u: core CRB variance %.4g vs %.4g computed at "
                  "the truth",
                  i, bound, own[i] * own[i]);
    }
    fprintf(stderr, "likelihood K=2000: %.1f s\n", tu_seconds_now() - t0);
    free(e);
    ss_sampler_free(s);
    gsl_rng_free(rng);
}

/* domain.md §3: the naive energy inversion (λ/n of the diagram at the mean
 * energy) is biased — for p = (0.6, 0.3, 0.1), n = 24, E[c] = 126.96 while
 * the diagram nearest n·p has c = 102 — whereas the moment inversion is
 * consistent.  Summary runs of K = 400, R = 300, seed 9101: the mean
 * Euclidean error ‖p̂ − p‖ of the moment estimate must be below that of
 * a->naive.  (The naive error does not shrink with K; the moment error is
 * a few 1e-2 at K = 400, so the margin is wide.)  Measured (Release):
 * moments 0.0234, naive 0.0849. */
Test(coverage, moments_beat_naive) {
    const double p[3] = {0.6, 0.3, 0.1};
    const unsigned n = 24, R = 300;
    const size_t K = 400;
    double t0 = tu_seconds_now();
    ss_calibration cal = ss_calibration_default();
    gsl_rng *rng = iv_rng(9101UL);
    ss_sampler *s = tu_sampler(3, p);
    double *e = malloc(K * sizeof *e);
    cr_assert(e != NULL);
    double err_moments = 0.0, err_naive = 0.0;
    for (unsigned r = 0; r < R; r++) {
        iv_shots(s, rng, n, &cal, K, e);
        ss_run run = iv_summary_of(n, e, K);
        ss_analysis_request req = iv_request(3, &run, 1, SS_METHOD_MOMENTS);
        ss_analysis *a = iv_analyse(&req, "moments vs naive");
        cr_assert(a->has_naive && a->has_spectrum);
        double dm = 0.0, dn = 0.0;
        for (unsigned i = 0; i < 3; i++) {
            dm += (a->values[i] - p[i]) * (a->values[i] - p[i]);
            dn += (a->naive[i] - p[i]) * (a->naive[i] - p[i]);
        }
        err_moments += sqrt(dm) / R;
        err_naive += sqrt(dn) / R;
        ss_analysis_free(a);
    }
    fprintf(stderr,
            "moments vs naive (p=(.6,.3,.1), n=24, K=400): mean error "
            "moments %.4f, naive %.4f  [%.1f s]\n",
            err_moments, err_naive, tu_seconds_now() - t0);
    cr_expect(err_moments < err_naive,
              "moment estimate error %.4f is not below the naive %.4f",
              err_moments, err_naive);
    free(e);
    ss_sampler_free(s);
    gsl_rng_free(rng);
}

/* domain.md §2: d = 4 is not determined by means and variances; the
 * analysis must say so (flag underdetermined in every repetition) and its
 * [lower, upper] — the range over all spectra whose (P2, P3) lie in the
 * confidence region — must contain the truth, all four eigenvalues at once,
 * in at least 92 % of repetitions (each eigenvalue alone is then covered at
 * least as often).  p = (0.4, 0.3, 0.2, 0.1), n = 24, K = 400 summary
 * runs, R = 300, seed 4101.  Measured (Release): joint 0.993. */
Test(coverage, underdetermined_d4) {
    cov_case c = {.label = "moments d=4",
                  .d = 4,
                  .n = 24,
                  .p = {0.4, 0.3, 0.2, 0.1},
                  .shots = 400,
                  .reps = 300,
                  .seed = 4101,
                  .method = SS_METHOD_MOMENTS};
    cov_result r = run_coverage(&c);
    cr_expect(r.underdetermined == c.reps,
              "underdetermined raised in %u of %u repetitions",
              r.underdetermined, c.reps);
    cr_expect(r.joint >= COVERAGE_LOW,
              "the truth lies in [lower, upper] in %.3f of repetitions, "
              "below %.2f",
              r.joint, COVERAGE_LOW);
}
