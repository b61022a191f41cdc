/*
 * moments.c — the moment inversion: per-run mean and variance of the content
 * sum to (P2, P3) by generalised least squares, and its parametric
 * bootstrap.
 *
 * Per run (atoms n, K shots, N = C(n,2), noise τ = σ/|J| in content units)
 * the observations are y1 = mean content and y2 = sample variance − τ², with
 *     E[y1] = N·P2,   E[y2] = N − N(2n−3)·P2² + 2(n−2)N·P3
 * (domain.md §2; the variance identity rewritten with C(n,2) − C(n−2,2) =
 * 2n − 3).  Their covariance comes from the central moments μ2, μ3, μ4 of the
 * noisy content (the textbook sampling moments of the mean and the unbiased
 * variance: Var ȳ = μ2/K, Cov(ȳ, s²) = μ3/K, Var s² = μ4/K −
 * μ2²(K−3)/(K(K−1))): sample moments for per-shot runs, the exact model at
 * the current estimate for summary runs.  The runs are combined by
 * Gauss–Newton on Σ rᵀ Σ⁻¹ r, re-weighting at the new estimate (three
 * rounds).  For d = 2 the spectrum has one parameter and P3 = (3·P2 − 1)/2.
 *
 * Owns nothing across calls; distributions made for the model moments are
 * freed before returning.
 */
#include "internal.h"

#include <gsl/gsl_randist.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static double ss__pairs_n(unsigned n) { return 0.5 * n * (n - 1.0); }

/* Model f(θ) and its Jacobian row for one run. */
static void ss__model(unsigned d, int npar, unsigned n, const double *theta,
                      double f[2], double J[2][2]) {
    double N = ss__pairs_n(n), P2 = theta[0];
    double P3 = npar == 2 ? theta[1] : (d == 2 ? 0.5 * (3.0 * P2 - 1.0) : 0.0);
    f[0] = N * P2;
    f[1] = N - N * (2.0 * n - 3.0) * P2 * P2 + 2.0 * (n - 2.0) * N * P3;
    J[0][0] = N;
    J[0][1] = 0.0;
    J[1][0] = -2.0 * N * (2.0 * n - 3.0) * P2;
    J[1][1] = 2.0 * (n - 2.0) * N;
    if (npar == 1 && d == 2)
        J[1][0] += 3.0 * (n - 2.0) * N;
}

/* Covariance of (y1, y2) from moments of the noise-free content (m2, m3, m4)
 * and the noise variance tau2. */
static void ss__obs_covariance(const ss__run_stats *r, double m2, double m3,
                               double m4, double cov[3]) {
    double K = (double)r->shots, t2 = r->tau2;
    double M2 = m2 + t2, M3 = m3, M4 = m4 + 6.0 * m2 * t2 + 3.0 * t2 * t2;
    double floor_var = 1e-24 * fmax(1.0, ss__pairs_n(r->atoms));
    cov[0] = fmax(M2 / K, floor_var);
    cov[1] = M3 / K;
    cov[2] = fmax(M4 / K - M2 * M2 * (K - 3.0) / (K * (K - 1.0)), floor_var);
}

/* One Gauss–Newton fit with fixed per-run weights.  y[r] are observations;
 * W[r] inverse covariances.  Returns chi2; theta updated; A = JᵀWJ. */
static double ss__gn(unsigned d, int npar, const ss__run_stats *rs, size_t R,
                     const double (*y)[2], const double (*W)[3], double *theta,
                     double A_out[4]) {
    double chi2 = 0.0;
    for (int it = 0; it < 30; it++) {
        double A[4] = {0}, g[2] = {0};
        chi2 = 0.0;
        for (size_t r = 0; r < R; r++) {
            double f[2], J[2][2];
            ss__model(d, npar, rs[r].atoms, theta, f, J);
            double res[2] = {y[r][0] - f[0], y[r][1] - f[1]};
            double w00 = W[r][0], w01 = W[r][1], w11 = W[r][2];
            double wr[2] = {w00 * res[0] + w01 * res[1],
                            w01 * res[0] + w11 * res[1]};
            chi2 += res[0] * wr[0] + res[1] * wr[1];
            for (int a = 0; a < npar; a++) {
                double wj0 = w00 * J[0][a] + w01 * J[1][a];
                double wj1 = w01 * J[0][a] + w11 * J[1][a];
                g[a] += J[0][a] * wr[0] + J[1][a] * wr[1];
                for (int b = 0; b < npar; b++)
                    A[a * 2 + b] += wj0 * J[0][b] + wj1 * J[1][b];
            }
        }
        double step[2] = {0, 0};
        if (npar == 1) {
            step[0] = A[0] > 0 ? g[0] / A[0] : 0.0;
        } else {
            double det = A[0] * A[3] - A[1] * A[2];
            if (fabs(det) > 0) {
                step[0] = (A[3] * g[0] - A[1] * g[1]) / det;
                step[1] = (A[0] * g[1] - A[2] * g[0]) / det;
            }
        }
        theta[0] += step[0];
        if (npar == 2)
            theta[1] += step[1];
        memcpy(A_out, A, sizeof A);
        if (fabs(step[0]) < 1e-15 && fabs(step[1]) < 1e-15)
            break;
    }
    return chi2;
}

static void ss__invert_cov(const double c[3], double w[3]) {
    double det = c[0] * c[2] - c[1] * c[1];
    if (det <= 0.0) { /* drop the correlation if it is numerically singular */
        w[0] = 1.0 / c[0];
        w[1] = 0.0;
        w[2] = 1.0 / c[2];
        return;
    }
    w[0] = c[2] / det;
    w[1] = -c[1] / det;
    w[2] = c[0] / det;
}

ss_status ss__moments_fit(unsigned d, ss__run_stats *rs, size_t R, ss__fit *fit,
                          ss_error *err) {
    int any3 = 0;
    for (size_t r = 0; r < R; r++)
        any3 |= rs[r].atoms >= 3;
    int npar = (d >= 3 && any3) ? 2 : 1;
    double(*y)[2] = malloc(R * sizeof *y);
    double(*W)[3] = malloc(R * sizeof *W);
    if (y == NULL || W == NULL) {
        free(y);
        free(W);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    /* starting point: shot-weighted purity, P3 from the pooled variance */
    double theta[2] = {0, 0}, wsum = 0, p3sum = 0, p3w = 0;
    for (size_t r = 0; r < R; r++) {
        double N = ss__pairs_n(rs[r].atoms), K = (double)rs[r].shots;
        y[r][0] = rs[r].y1;
        y[r][1] = rs[r].y2;
        theta[0] += K * rs[r].y1 / N;
        wsum += K;
    }
    theta[0] /= wsum;
    double p2c = fmin(1.0, fmax(1.0 / d, theta[0]));
    for (size_t r = 0; r < R; r++) {
        unsigned n = rs[r].atoms;
        if (n < 3)
            continue;
        double N = ss__pairs_n(n), K = (double)rs[r].shots;
        p3sum += K * (rs[r].y2 / N - 1.0 + (2.0 * n - 3.0) * p2c * p2c) /
                 (2.0 * (n - 2.0));
        p3w += K;
    }
    theta[1] = p3w > 0 ? p3sum / p3w : p2c * p2c;
    if (d == 2)
        theta[1] = 0.5 * (3.0 * theta[0] - 1.0);

    double A[4] = {0}, chi2 = 0.0;
    ss_status st = SS_OK;
    for (int round = 0; round < 3 && st == SS_OK; round++) {
        /* spectrum at which the summary runs' higher moments are taken */
        double p[SS_LEVELS_MAX];
        ss__point_spectrum(d, theta, npar == 2, p);
        ss__content_poly cp;
        ss__content_poly_init(&cp, p, d);
        for (size_t r = 0; r < R; r++) {
            double m2, m3, m4;
            if (rs[r].per_shot) {
                m2 = fmax(rs[r].s2 - rs[r].tau2, 0.0);
                m3 = rs[r].m3;
                /* sample μ4 of the noisy content, noise part removed */
                m4 = fmax(rs[r].m4 - 6.0 * m2 * rs[r].tau2 -
                              3.0 * rs[r].tau2 * rs[r].tau2,
                          m2 * m2);
            } else {
                /* exact model moments at the current estimate, kept as
                 * skewness and kurtosis; the scale is the larger of the
                 * model's and the run's own variance, and at least one
                 * content unit² (readings are integers in content units),
                 * so an estimate on the boundary (a pure state has no
                 * spread) cannot make a run look infinitely precise */
                double mean, c[3];
                ss__content_poly_moments(&cp, rs[r].atoms, &mean, c);
                double skew = 0.0, kurt = 3.0; /* Gaussian when c[0] = 0 */
                if (c[0] > 1e-12) {
                    skew = c[1] / pow(c[0], 1.5);
                    kurt = c[2] / (c[0] * c[0]);
                }
                m2 = fmax(fmax(c[0], rs[r].s2 - rs[r].tau2), 1.0);
                m3 = skew * pow(m2, 1.5);
                m4 = kurt * m2 * m2;
            }
            double cov[3];
            ss__obs_covariance(&rs[r], m2, m3, m4, cov);
            memcpy(rs[r].cov, cov, sizeof cov);
            ss__invert_cov(cov, W[r]);
        }
        if (st == SS_OK)
            chi2 = ss__gn(d, npar, rs, R, (const double(*)[2])y,
                          (const double(*)[3])W, theta, A);
    }
    if (st == SS_OK) {
        fit->npar = npar;
        fit->theta[0] = theta[0];
        fit->theta[1] = npar == 2
                            ? theta[1]
                            : (d == 2 ? 0.5 * (3.0 * theta[0] - 1.0) : nan(""));
        double cov[4] = {0, 0, 0, 0};
        if (npar == 1) {
            cov[0] = A[0] > 0 ? 1.0 / A[0] : HUGE_VAL;
            if (d == 2) { /* P3 = (3 P2 − 1)/2 */
                cov[1] = cov[2] = 1.5 * cov[0];
                cov[3] = 2.25 * cov[0];
            } else {
                cov[3] = nan("");
                cov[1] = cov[2] = nan("");
            }
        } else {
            double det = A[0] * A[3] - A[1] * A[2];
            cov[0] = A[3] / det;
            cov[1] = cov[2] = -A[1] / det;
            cov[3] = A[0] / det;
        }
        memcpy(fit->cov, cov, sizeof cov);
        fit->chi2 = chi2;
        fit->dof = (int)(2 * R) - npar;
    }
    free(y);
    free(W);
    return st;
}

/* --- parametric bootstrap ------------------------------------------------ */

static int ss__cmp_double(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Quantile of sorted x[0..n-1] by linear interpolation (Hyndman & Fan type
 * 7, the default of common statistics packages). */
static double ss__quantile(const double *x, size_t n, double q) {
    if (n == 1)
        return x[0];
    double h = q * (double)(n - 1);
    size_t lo = (size_t)h;
    if (lo + 1 >= n)
        return x[n - 1];
    return x[lo] + (h - (double)lo) * (x[lo + 1] - x[lo]);
}

/* One replicate of a run, drawn exactly but without drawing every shot: the
 * counts per content level are multinomial; with Gaussian noise η the sums
 * Σ(c+η) and Σ(c+η)² follow from A = Ση ~ N(0, Kτ²), B = Σcη given A
 * (Gaussian, mean τ²ΣcA/(Kτ²), variance τ²(Σc² − (Σc)²/K)), and the
 * independent Σ(η − η̄)² ~ τ²χ²_{K−1} (normal sample mean and variance are
 * independent). */
static void ss__replicate_run(gsl_rng *rng, size_t nlev, const double *prob,
                              const int64_t *content, unsigned *cnt,
                              size_t shots, double tau2, double y[2]) {
    double K = (double)shots;
    gsl_ran_multinomial(rng, nlev, (unsigned)shots, prob, cnt);
    long double s1 = 0, s2 = 0;
    for (size_t l = 0; l < nlev; l++) {
        long double c = (long double)content[l];
        s1 += cnt[l] * c;
        s2 += cnt[l] * c * c;
    }
    if (tau2 > 0) {
        double tau = sqrt(tau2);
        double A = gsl_ran_gaussian_ziggurat(rng, tau * sqrt(K));
        double vb = (double)(tau2 * (s2 - s1 * s1 / K));
        double B = (double)(s1 * A / K) +
                   gsl_ran_gaussian_ziggurat(rng, sqrt(fmax(vb, 0.0)));
        double Q = tau2 * gsl_ran_chisq(rng, K - 1.0);
        s2 += 2.0L * B + Q + (long double)A * A / K;
        s1 += A;
    }
    y[0] = (double)(s1 / K);
    y[1] = (double)((s2 - s1 * s1 / K) / (K - 1.0)) - tau2;
}

ss_status ss__moments_bootstrap(unsigned d, const ss__run_stats *rs, size_t R,
                                const double *p_hat, const ss__fit *fit,
                                unsigned replicates, uint64_t seed,
                                const ss_budget *budget, double confidence,
                                double *sd_spectrum, double *sd_p2,
                                double *q_lo, double *q_hi, ss_error *err) {
    ss_status st = SS_OK;
    ss_levels **lv = calloc(R, sizeof *lv);
    double(*y)[2] = malloc(R * sizeof *y);
    double(*W)[3] = malloc(R * sizeof *W);
    unsigned *cnt = NULL;
    size_t maxlev = 1;
    double *reps = malloc((size_t)replicates * d * sizeof *reps);
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    long double sum[SS_LEVELS_MAX] = {0}, sq[SS_LEVELS_MAX] = {0};
    long double s2sum = 0, s2sq = 0;
    if (lv == NULL || y == NULL || W == NULL || rng == NULL || reps == NULL) {
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
        goto done;
    }
    gsl_rng_set(rng, (unsigned long)seed);
    /* exact content law at the estimate, per run */
    for (size_t r = 0; r < R && st == SS_OK; r++) {
        ss_distribution *dist = NULL;
        st = ss_distribution_compute(rs[r].atoms, d, p_hat, d, budget, &dist,
                                     err);
        if (st == SS_OK)
            st =
                ss_levels_alloc(dist->diagrams, dist->probability, &lv[r], err);
        if (st == SS_OK && lv[r]->count > maxlev)
            maxlev = lv[r]->count;
        ss_distribution_free(dist);
        ss__invert_cov(rs[r].cov, W[r]);
    }
    if (st == SS_OK && (cnt = malloc(maxlev * sizeof *cnt)) == NULL)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    if (st != SS_OK)
        goto done;
    double deadline = ss_budget_deadline(budget);
    for (unsigned b = 0; b < replicates; b++) {
        if ((b & 15u) == 0 && ss_budget_expired(deadline)) {
            st = ss_error_set(err, SS_EDEADLINE, "max_seconds",
                              "the bootstrap did not finish %u replicates "
                              "within %.3g s (the request deadline); ask for "
                              "fewer",
                              replicates, budget->max_seconds);
            goto done;
        }
        for (size_t r = 0; r < R; r++)
            ss__replicate_run(rng, lv[r]->count, lv[r]->probability,
                              lv[r]->content, cnt, rs[r].shots, rs[r].tau2,
                              y[r]);
        double theta[2] = {fit->theta[0], fit->theta[1]}, A[4];
        ss__gn(d, fit->npar, rs, R, (const double(*)[2])y,
               (const double(*)[3])W, theta, A);
        double p[SS_LEVELS_MAX];
        ss__point_spectrum(d, theta, fit->npar == 2, p);
        for (unsigned i = 0; i < d; i++) {
            sum[i] += p[i];
            sq[i] += (long double)p[i] * p[i];
            reps[(size_t)i * replicates + b] = p[i];
        }
        s2sum += theta[0];
        s2sq += (long double)theta[0] * theta[0];
    }
    long double nb = replicates, corr = nb / fmaxl(nb - 1.0L, 1.0L);
    for (unsigned i = 0; i < d; i++) {
        long double m = sum[i] / nb;
        sd_spectrum[i] = (double)sqrtl(fmaxl(sq[i] / nb - m * m, 0.0L) * corr);
    }
    /* percentile intervals (Efron & Tibshirani, An Introduction to the
     * Bootstrap, ch. 13 [from memory]) */
    double alpha = 1.0 - confidence;
    for (unsigned i = 0; i < d; i++) {
        double *col = reps + (size_t)i * replicates;
        qsort(col, replicates, sizeof *col, ss__cmp_double);
        q_lo[i] = ss__quantile(col, replicates, 0.5 * alpha);
        q_hi[i] = ss__quantile(col, replicates, 1.0 - 0.5 * alpha);
    }
    long double m2 = s2sum / nb;
    *sd_p2 = (double)sqrtl(fmaxl(s2sq / nb - m2 * m2, 0.0L) * corr);
done:
    for (size_t r = 0; lv && r < R; r++)
        ss_levels_free(lv[r]);
    free(lv);
    free(cnt);
    free(reps);
    free(y);
    free(W);
    gsl_rng_free(rng);
    return st;
}
