/*
 * analysis.c — the inversion pipeline: validate → content units → moment
 * fit (always, except for the diagrams method: it is the estimate of the
 * moments method, the start of the likelihood and the covariance of summary
 * runs) → spectrum with covariance (roots and delta method for d <= 3,
 * maximum entropy with exact feasible ranges when underdetermined, nearest
 * physical point when outside the region) → optional likelihood →
 * candidates per run → flags.  Owns the ss_analysis and everything in it.
 */
#include "internal.h"

#include <gsl/gsl_cdf.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Common practice: below about 30 shots the normal approximation for a
 * sample variance is poor. */
#define SS__FEW_SHOTS 30
/* Half-width of an eigenvalue interval above which it says little. */
#define SS__WIDE_INTERVAL 0.1
/* symmetry-caution: the pair-coupling spread s breaks the permutation
 * symmetry by a term of typical size s·√C(n,2)·|J| (C(n,2) independent
 * deviations of the SWAP couplings, each SWAP of norm 1), against a level
 * spacing |J| between content sums.  First-order perturbation theory then
 * mixes diagrams with weight ≈ (s·√C(n,2))².  Our stated criterion: flag
 * when that ratio reaches 0.1 (≈ 1 % mixing). */
#define SS__SYMMETRY_RATIO 0.1

static double ss__sq(double x) { return x * x; }

static void ss__set_intervals(ss_analysis *a, double zc) {
    if (a->interval != SS_INTERVAL_DELTA)
        return; /* made where the interval kind was chosen */
    for (unsigned i = 0; i < a->levels; i++) {
        double se = a->stderr_[i], v = a->values[i];
        a->lower[i] = isfinite(se) ? fmax(0.0, v - zc * se) : 0.0;
        a->upper[i] = isfinite(se) ? fmin(1.0, v + zc * se) : 1.0;
    }
}

static void ss__stderr_from_cov(ss_analysis *a) {
    unsigned d = a->levels;
    for (unsigned i = 0; i < d; i++)
        a->stderr_[i] = sqrt(fmax(a->covariance[i * d + i], 0.0));
}

/* Feasible ranges and maximum-entropy point for θ (P3 unknown: union over
 * its admissible interval P2² <= P3 <= P2^1.5). */
static size_t ss__underdetermined_point(unsigned d, const double *theta,
                                        int use_p3, double *lo, double *hi,
                                        double *p) {
    if (use_p3)
        return ss__moment_solutions(d, theta[0], theta[1], lo, hi, p);
    size_t found = ss__maxent_given_p2(d, theta[0], p);
    double p3lo = theta[0] * theta[0], p3hi = pow(theta[0], 1.5);
    int first = 1;
    for (int g = 0; g <= 64; g++) {
        double l[SS_LEVELS_MAX], h[SS_LEVELS_MAX], m[SS_LEVELS_MAX];
        double p3 = p3lo + (p3hi - p3lo) * g / 64.0;
        if (ss__moment_solutions(d, theta[0], p3, l, h, m) == 0)
            continue;
        for (unsigned i = 0; i < d; i++) {
            lo[i] = first ? l[i] : fmin(lo[i], l[i]);
            hi[i] = first ? h[i] : fmax(hi[i], h[i]);
        }
        first = 0;
    }
    if (first)
        for (unsigned i = 0; i < d; i++)
            lo[i] = hi[i] = p[i];
    return found;
}

/* Underdetermined spectra: the honest interval for each eigenvalue is its
 * range over every spectrum whose power sums lie in the confidence region of
 * (P2, P3): the union of the exact feasible ranges at the centre and on
 * rings at half and full radius of the region (16 directions each). */
static void ss__region_ranges(ss_analysis *a, const double *theta,
                              const ss__fit *fit, int use_p3) {
    unsigned d = a->levels;
    int npar = use_p3 ? 2 : 1;
    double radius = sqrt(gsl_cdf_chisq_Pinv(a->confidence, npar));
    double l11 = sqrt(fit->cov[0]), l21 = 0, l22 = 0;
    if (use_p3) { /* Cholesky factor of the 2x2 covariance */
        l21 = fit->cov[1] / l11;
        l22 = sqrt(fmax(fit->cov[3] - l21 * l21, 0));
    }
    memcpy(a->lower, a->feasible_lower, d * sizeof(double));
    memcpy(a->upper, a->feasible_upper, d * sizeof(double));
    int dirs = use_p3 ? 16 : 2;
    for (int ring = 1; ring <= 2; ring++)
        for (int k = 0; k < dirs; k++) {
            double ang = 2 * 3.14159265358979323846 * k / dirs;
            double u = cos(ang) * radius * ring / 2,
                   v = sin(ang) * radius * ring / 2;
            double t[2] = {theta[0] + l11 * u, theta[1] + l21 * u + l22 * v};
            double lo[SS_LEVELS_MAX], hi[SS_LEVELS_MAX], p[SS_LEVELS_MAX];
            if (t[0] < 1.0 / d || t[0] > 1.0)
                continue;
            if (ss__underdetermined_point(d, t, use_p3, lo, hi, p) == 0)
                continue;
            for (unsigned i = 0; i < d; i++) {
                a->lower[i] = fmin(a->lower[i], lo[i]);
                a->upper[i] = fmax(a->upper[i], hi[i]);
            }
        }
    /* a standard error in the usual sense does not exist here: report the
     * half-width of that range divided by the normal quantile */
    double zc = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * a->confidence);
    memset(a->covariance, 0, sizeof a->covariance);
    for (unsigned i = 0; i < d; i++) {
        a->stderr_[i] = 0.5 * (a->upper[i] - a->lower[i]) / zc;
        a->covariance[i * d + i] = a->stderr_[i] * a->stderr_[i];
    }
}

/* d = 3: the profile interval of each eigenvalue under the
 * Gaussian approximation for (P2, P3), i.e. its range over the physical
 * points of the ellipse (θ − θ̂)ᵀΣ⁻¹(θ − θ̂) <= z² (z the normal quantile:
 * one degree of freedom per eigenvalue).  It follows the curved root map
 * instead of linearising it, which is what fails near equal eigenvalues.
 * The physical part of the ellipse is sampled on its rim and along the
 * three boundary families of the region (ties and a zero eigenvalue).  Returns
 * 0 when no sampled point is physical. */
static int ss__profile_d3(ss_analysis *a, const ss__fit *fit, double zc) {
    double l11 = sqrt(fit->cov[0]);
    double l21 = fit->cov[1] / l11;
    double l22 = sqrt(fmax(fit->cov[3] - l21 * l21, 0));
    double det = fit->cov[0] * fit->cov[3] - fit->cov[1] * fit->cov[1];
    if (!(l11 > 0) || !(det > 0))
        return 0;
    double lo[3] = {1, 1, 1}, hi[3] = {0, 0, 0};
    int found = 0;
    /* p(θ) has no critical point inside the region (its Jacobian is
     * singular only on the region's boundary), so the extremes over the
     * ellipse ∩ region lie on the ellipse or on the region's boundary */
    /* the rim by rotation: (c, s) turns by 2π/96 per step */
    const double dc = cos(2 * 3.14159265358979323846 / 96);
    const double ds = sin(2 * 3.14159265358979323846 / 96);
    double cs = 1.0, sn = 0.0;
    for (int k = 0; k < 96; k++) {
        double u = cs * zc, v = sn * zc;
        double c2 = cs * dc - sn * ds;
        sn = sn * dc + cs * ds;
        cs = c2;
        double p[3];
        if (!ss__spectrum_from_moments(3, fit->theta[0] + l11 * u,
                                       fit->theta[1] + l21 * u + l22 * v, p))
            continue;
        for (int i = 0; i < 3; i++) {
            lo[i] = fmin(lo[i], p[i]);
            hi[i] = fmax(hi[i], p[i]);
        }
        found = 1;
    }
    for (int fam = 0; fam < 3; fam++)
        for (int k = 0; k <= 240; k++) {
            double t = k / 240.0, p[3];
            if (fam == 0) { /* (t, (1−t)/2, (1−t)/2), t in [1/3, 1] */
                p[0] = 1.0 / 3 + t * 2.0 / 3;
                p[1] = p[2] = 0.5 * (1 - p[0]);
            } else if (fam == 1) { /* (t, t, 1−2t), t in [1/3, 1/2] */
                p[0] = p[1] = 1.0 / 3 + t / 6;
                p[2] = 1 - 2 * p[0];
            } else { /* (t, 1−t, 0), t in [1/2, 1] */
                p[0] = 0.5 + t / 2;
                p[1] = 1 - p[0];
                p[2] = 0;
            }
            /* power sums in double: a point off by 1e-16 is as good */
            double s2 = p[0] * p[0] + p[1] * p[1] + p[2] * p[2];
            double s3 =
                p[0] * p[0] * p[0] + p[1] * p[1] * p[1] + p[2] * p[2] * p[2];
            double r0 = s2 - fit->theta[0];
            double r1 = s3 - fit->theta[1];
            double q = (r0 * r0 * fit->cov[3] - 2 * r0 * r1 * fit->cov[1] +
                        r1 * r1 * fit->cov[0]) /
                       det;
            if (q > zc * zc)
                continue;
            for (int i = 0; i < 3; i++) {
                lo[i] = fmin(lo[i], p[i]);
                hi[i] = fmax(hi[i], p[i]);
            }
            found = 1;
        }
    if (!found)
        return 0;
    for (int i = 0; i < 3; i++) {
        a->lower[i] = fmin(lo[i], a->values[i]);
        a->upper[i] = fmax(hi[i], a->values[i]);
    }
    return 1;
}

static int ss__inside(unsigned d, const ss__fit *fit) {
    double P2 = fit->theta[0], P3 = fit->theta[1], p[SS_LEVELS_MAX];
    double lo[SS_LEVELS_MAX], hi[SS_LEVELS_MAX];
    if (P2 < 1.0 / d - 1e-12 || P2 > 1.0 + 1e-12)
        return 0;
    if (d == 2 || fit->npar == 1)
        return 1;
    if (d == 3)
        return ss__spectrum_from_moments(3, P2, P3, p);
    return ss__moment_solutions(d, P2, P3, lo, hi, p) > 0;
}

static void ss__flag_outside(ss_analysis *a, const ss__fit *fit,
                             const double *theta_used, double dist,
                             const ss__run_stats *rs, size_t R,
                             const ss_calibration *cal) {
    unsigned d = a->levels;
    size_t big = 0;
    for (size_t r = 1; r < R; r++)
        if (rs[r].shots * rs[r].atoms > rs[big].shots * rs[big].atoms)
            big = r;
    double N = 0.5 * rs[big].atoms * (rs[big].atoms - 1.0);
    double shift = cal->exchange * N * (fit->theta[0] - theta_used[0]);
    const char *cause;
    if (dist <= 2.0)
        cause = "within two standard errors: shot noise alone puts a few "
                "percent of honest runs this far out; the estimate uses the "
                "nearest physical point and its interval stays usable";
    else if (dist <= 3.0)
        cause = "between two and three standard errors: borderline; check "
                "the calibration and collect more shots";
    else if (fit->theta[0] > 1.0 || fit->theta[0] < 1.0 / d)
        cause = "more than three standard errors: more than shot noise "
                "explains; the mean energy fits no state, so the offset, "
                "pair_shift or exchange of the calibration is the likely "
                "cause";
    else
        cause = "more than three standard errors: more than shot noise "
                "explains; the variance fits no state with this purity, so "
                "unsubtracted or over-subtracted detection noise (noise_sd) "
                "or a wrong exchange is the likely cause";
    ss_flag *f = ss__flag_add(
        a, SS_FLAG_OUTSIDE_PHYSICAL, -1,
        "The measured power sums (P2 = %.6g%s) lie outside the region any "
        "%u-level spectrum reaches, %.2f standard errors from it: %s. An "
        "offset error of %.4g%s%s in run %zu would explain the purity part.",
        fit->theta[0], fit->npar == 2 ? ", with P3" : "", d, dist, cause, shift,
        cal->unit[0] ? " " : "", cal->unit, big);
    ss__flag_number(f, "distance_se", dist);
    ss__flag_number(f, "p2", fit->theta[0]);
    ss__flag_number(f, "p2_stderr", sqrt(fit->cov[0]));
    if (fit->npar == 2) {
        ss__flag_number(f, "p3", fit->theta[1]);
        ss__flag_number(f, "p3_stderr", sqrt(fit->cov[3]));
    }
    ss__flag_number(f, "p2_physical", theta_used[0]);
    ss__flag_number(f, "implied_offset_shift", shift);
}

static void ss__estimate_moments(ss_analysis *a, const ss_analysis_request *req,
                                 const ss__run_stats *rs, const ss__fit *fit) {
    unsigned d = a->levels;
    int use_p3 = fit->npar == 2;
    double theta[2] = {fit->theta[0], use_p3 || d == 2 ? fit->theta[1] : 0};
    double p[SS_LEVELS_MAX] = {0};
    a->p2 = fit->theta[0];
    a->p2_stderr = sqrt(fit->cov[0]);
    a->p3 = fit->theta[1];
    a->p3_stderr = sqrt(fit->cov[3]);
    a->p2_p3_covariance = fit->cov[1];
    a->p3_determined = use_p3 || d == 2;
    if (!ss__inside(d, fit)) {
        double W[4] = {0, 0, 0, 0}, dist;
        if (use_p3) {
            double det = fit->cov[0] * fit->cov[3] - fit->cov[1] * fit->cov[2];
            W[0] = fit->cov[3] / det;
            W[1] = W[2] = -fit->cov[1] / det;
            W[3] = fit->cov[0] / det;
        } else {
            W[0] = 1.0 / fit->cov[0];
        }
        if (!use_p3) { /* one dimension: clamp */
            double p2 = fmin(1.0, fmax(1.0 / d, theta[0]));
            dist = fabs(theta[0] - p2) / sqrt(fit->cov[0]);
            theta[0] = p2;
            if (d == 2)
                theta[1] = 0.5 * (3 * p2 - 1);
            ss__point_spectrum(d, theta, 0, p);
        } else {
            dist = ss__nearest_physical(d, theta, W, 1, p);
            theta[0] = ss_spectrum_power_sum(p, d, 2);
            theta[1] = ss_spectrum_power_sum(p, d, 3);
        }
        a->diagnostics.distance_se = dist;
        ss__flag_outside(a, fit, theta, dist, rs, req->run_count,
                         &req->calibration);
    }
    a->has_spectrum = 1;
    if (d == 2 || (d == 3 && use_p3)) {
        if (a->diagnostics.distance_se == 0)
            ss__spectrum_from_moments(d, theta[0], theta[1], p);
        memcpy(a->values, p, d * sizeof *p);
        double G[6];
        if (ss__spectrum_jacobian(d, p, G)) {
            for (unsigned i = 0; i < d; i++)
                for (unsigned j = 0; j < d; j++) {
                    double v = G[i * 2] * G[j * 2] * fit->cov[0];
                    if (use_p3)
                        v += (G[i * 2] * G[j * 2 + 1] +
                              G[i * 2 + 1] * G[j * 2]) *
                                 fit->cov[1] +
                             G[i * 2 + 1] * G[j * 2 + 1] * fit->cov[3];
                    a->covariance[i * d + j] = v;
                }
            ss__stderr_from_cov(a);
        } else {
            for (unsigned i = 0; i < d; i++)
                a->stderr_[i] = nan("");
            for (unsigned i = 0; i < d * d; i++)
                a->covariance[i] = nan("");
        }
    } else {
        double lo[SS_LEVELS_MAX], hi[SS_LEVELS_MAX];
        if (ss__underdetermined_point(d, theta, use_p3, lo, hi, p) == 0) {
            /* θ on the region's edge where no solution was resolved (e.g.
             * P2 projected to 1/d): the ranges shrink to the point, which
             * falls back to the uniform spectrum if it is not usable */
            int usable = 1;
            for (unsigned i = 0; i < d; i++)
                usable &= isfinite(p[i]) && p[i] >= 0 && p[i] <= 1;
            for (unsigned i = 0; i < d; i++) {
                p[i] = usable ? p[i] : 1.0 / d;
                lo[i] = hi[i] = p[i];
            }
        }
        memcpy(a->values, p, d * sizeof *p);
        memcpy(a->feasible_lower, lo, d * sizeof *lo);
        memcpy(a->feasible_upper, hi, d * sizeof *hi);
        a->has_feasible_ranges = 1;
        a->spectrum_is_max_entropy = 1;
        a->interval = SS_INTERVAL_REGION;
        ss__region_ranges(a, theta, fit, use_p3);
        int npar = use_p3 ? 2 : 1;
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_UNDERDETERMINED, -1,
            "Means and variances fix %d power sum%s (P2%s) but a %u-level "
            "spectrum needs %u: the values shown are the maximum-entropy "
            "spectrum with the measured power sums, and feasible_ranges "
            "gives, for each eigenvalue, the exact range over all spectra "
            "with them. Per-shot energies (likelihood) or more levels of "
            "moments are needed to pin it down.",
            npar, npar == 1 ? "" : "s", npar == 2 ? ", P3" : "", d, d - 1);
        ss__flag_number(f, "levels", d);
        ss__flag_number(f, "power_sums_fixed", npar);
        ss__flag_number(f, "power_sums_needed", d - 1);
    }
    /* nearly equal eigenvalues: the root map's derivative blows up */
    if (!a->spectrum_is_max_entropy) {
        double worst_ratio = HUGE_VAL, gap = 0, gap_se = 0;
        int singular = !isfinite(a->stderr_[0]);
        if (singular) { /* the smallest gap; no delta-method error exists */
            gap = HUGE_VAL;
            for (unsigned i = 0; i + 1 < d; i++)
                gap = fmin(gap, fmax(a->values[i] - a->values[i + 1], 0));
            gap_se = NAN; /* written as null */
        }
        for (unsigned i = 0; !singular && i + 1 < d; i++) {
            /* values are in descending order up to a rounding: a tie can
             * come out one unit in the last place the other way */
            double g = fmax(a->values[i] - a->values[i + 1], 0);
            double v = a->covariance[i * d + i] +
                       a->covariance[(i + 1) * d + i + 1] -
                       2 * a->covariance[i * d + i + 1];
            double se = sqrt(fmax(v, 0));
            if (se > 0 && g / se < worst_ratio) {
                worst_ratio = g / se;
                gap = g;
                gap_se = se;
            }
        }
        if (singular || worst_ratio < 2.0) {
            char se_text[64];
            if (singular)
                snprintf(se_text, sizeof se_text,
                         "where no delta-method standard error exists");
            else
                snprintf(se_text, sizeof se_text, "standard error %.3g",
                         gap_se);
            ss_flag *f = ss__flag_add(
                a, SS_FLAG_ILL_CONDITIONED, -1,
                "Two eigenvalues are nearly equal (gap %.3g, %s): the map "
                "from power sums to eigenvalues is nearly singular there, so "
                "delta-method standard errors mislead; the intervals follow "
                "the curved map instead (profile intervals for three "
                "levels, bootstrap percentiles otherwise; see "
                "spectrum.interval).",
                gap, se_text);
            ss__flag_number(f, "min_gap", gap);
            ss__flag_number(f, "gap_stderr", gap_se);
        }
    }
}

static ss_status ss__estimate_likelihood(ss_analysis *a,
                                         const ss_analysis_request *req,
                                         const ss__run_stats *rs, double zc,
                                         ss_error *err) {
    unsigned d = a->levels;
    /* the exact moment region of the moments step (d >= 4), kept for the
     * case where the likelihood leaves several directions unidentified */
    int had_region = a->interval == SS_INTERVAL_REGION;
    double region_lo[SS_LEVELS_MAX], region_hi[SS_LEVELS_MAX];
    memcpy(region_lo, a->lower, d * sizeof *region_lo);
    memcpy(region_hi, a->upper, d * sizeof *region_hi);
    ss__lik_result res;
    ss_status st =
        ss__likelihood_fit(d, &req->calibration, rs, req->runs, req->run_count,
                           &req->budget, a->values, zc, &res, err);
    if (st != SS_OK)
        return st;
    memcpy(a->values, res.p, d * sizeof *res.p);
    if (res.covariance_ok) {
        memcpy(a->covariance, res.covariance, d * d * sizeof(double));
    } else if (res.crb_ok) {
        memset(a->covariance, 0, sizeof a->covariance);
        for (unsigned i = 0; i < d; i++)
            a->covariance[i * d + i] = ss__sq(res.crb_stderr[i]);
    }
    ss__stderr_from_cov(a);
    a->diagnostics.log_likelihood = -res.neg_log_likelihood;
    a->diagnostics.iterations = res.iterations;
    a->diagnostics.fisher_rank = res.fisher_rank;
    a->diagnostics.fisher_condition = res.fisher_condition;
    memcpy(a->diagnostics.cramer_rao_stderr, res.crb_stderr,
           d * sizeof(double));
    /* power sums of the fitted spectrum, delta method */
    double g2[SS_LEVELS_MAX], g3[SS_LEVELS_MAX];
    for (unsigned i = 0; i < d; i++) {
        g2[i] = 2 * a->values[i];
        g3[i] = 3 * a->values[i] * a->values[i];
    }
    double v22 = 0, v33 = 0, v23 = 0;
    for (unsigned i = 0; i < d; i++)
        for (unsigned j = 0; j < d; j++) {
            double c = a->covariance[i * d + j];
            v22 += g2[i] * g2[j] * c;
            v33 += g3[i] * g3[j] * c;
            v23 += g2[i] * g3[j] * c;
        }
    a->p2 = ss_spectrum_power_sum(a->values, d, 2);
    a->p3 = ss_spectrum_power_sum(a->values, d, 3);
    a->p2_stderr = sqrt(fmax(v22, 0));
    a->p3_stderr = sqrt(fmax(v33, 0));
    a->p2_p3_covariance = v23;
    a->p3_determined = 1;
    /* the likelihood identifies what the moments could not: drop those */
    size_t keep = 0;
    int full = res.fisher_rank >= (int)d - 1;
    for (size_t i = 0; i < a->flag_count; i++) {
        ss_flag_code c = a->flags[i].code;
        if ((c == SS_FLAG_UNDERDETERMINED && full) ||
            c == SS_FLAG_ILL_CONDITIONED)
            continue;
        a->flags[keep++] = a->flags[i];
    }
    a->flag_count = keep;
    double min_gap = HUGE_VAL;
    for (unsigned i = 0; i + 1 < d; i++)
        min_gap = fmin(min_gap, a->values[i] - a->values[i + 1]);
    if (full || min_gap < 1e-4) {
        a->has_feasible_ranges = 0;
        a->spectrum_is_max_entropy = 0;
        a->interval = SS_INTERVAL_DELTA;
    }
    if (!full && min_gap < 1e-4) {
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_ILL_CONDITIONED, -1,
            "The likelihood peaks where two eigenvalues are equal (gap "
            "%.2g). There the Fisher information is singular (rank %d of "
            "%u) and no Cramér–Rao bound exists; the error bars come from "
            "the observed curvature and are only indicative.",
            min_gap, res.fisher_rank, d - 1);
        ss__flag_number(f, "min_gap", min_gap);
        ss__flag_number(f, "fisher_rank", res.fisher_rank);
        for (unsigned i = 0; i < d; i++)
            a->diagnostics.cramer_rao_stderr[i] = nan("");
    } else if (!full) {
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_UNDERDETERMINED, -1,
            "The Fisher information of the per-shot data has rank %d, below "
            "the %u the spectrum needs: some directions of the spectrum are "
            "not identified by these energies.",
            res.fisher_rank, d - 1);
        ss__flag_number(f, "fisher_rank", res.fisher_rank);
        ss__flag_number(f, "parameters", d - 1);
        for (unsigned i = 0; i < d; i++)
            a->diagnostics.cramer_rao_stderr[i] = nan("");
    }
    if (full && res.fisher_condition > 1e8) {
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_ILL_CONDITIONED, -1,
            "The Fisher information is nearly singular (condition number "
            "%.3g): some combination of eigenvalues is barely constrained, "
            "typically nearly equal eigenvalues.",
            res.fisher_condition);
        ss__flag_number(f, "fisher_condition", res.fisher_condition);
    }
    if (res.profile_ok) {
        a->interval = SS_INTERVAL_PROFILE;
        for (unsigned i = 0; i < d; i++) {
            a->lower[i] = res.profile_lower[i];
            a->upper[i] = res.profile_upper[i];
        }
    }
    /* The profile search copes with a tie of two eigenvalues (rank d − 2:
     * d = 4 coverage 0.955/0.988/0.988/0.955 in test_coverage).  With three
     * or more unidentified directions (several zero eigenvalues, few atoms
     * for many levels) it was seen to stop far inside the likelihood
     * region (d = 6, n = 6, p = (.5,.3,.2,0,0,0), 1000 shots: p1 interval
     * width 0.0075 against 2·1.96·0.040 from the curvature, truth
     * outside); when an interval there is under a quarter of the curvature
     * one, the exact moment region is reported instead (conservative). */
    int collapsed = 0; /* a profile interval far narrower than the
                          observed-curvature one: the search stalled */
    for (unsigned i = 0; res.profile_ok && i < d; i++)
        if (isfinite(a->stderr_[i]) && a->stderr_[i] > 0 &&
            a->upper[i] - a->lower[i] < 0.25 * 2.0 * zc * a->stderr_[i])
            collapsed = 1;
    if (res.fisher_rank <= (int)d - 4 && had_region && collapsed) {
        size_t kept = 0; /* this flag replaces the moments' one */
        for (size_t i = 0; i < a->flag_count; i++)
            if (a->flags[i].code != SS_FLAG_UNDERDETERMINED)
                a->flags[kept++] = a->flags[i];
        a->flag_count = kept;
        a->interval = SS_INTERVAL_REGION; /* widened to hold the point by
                                             ss_analysis_run */
        memcpy(a->lower, region_lo, d * sizeof *region_lo);
        memcpy(a->upper, region_hi, d * sizeof *region_hi);
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_UNDERDETERMINED, -1,
            "The per-shot likelihood leaves %d directions of the spectrum "
            "unidentified (Fisher rank %d of %u): the intervals shown are "
            "the exact ranges over the moment confidence region, which are "
            "conservative; the point is the maximum-likelihood spectrum.",
            (int)d - 1 - res.fisher_rank, res.fisher_rank, d - 1);
        ss__flag_number(f, "fisher_rank", res.fisher_rank);
        ss__flag_number(f, "parameters", d - 1);
    }
    return SS_OK;
}

static void ss__flags_runs(ss_analysis *a, const ss_analysis_request *req,
                           const ss__run_stats *rs, double zc) {
    double total = 0;
    for (size_t r = 0; r < req->run_count; r++) {
        total += (double)rs[r].shots;
        double se = sqrt(rs[r].cov[2]);
        if (rs[r].tau2 > 0 && (rs[r].y2 <= 0 || rs[r].y2 < 2 * se)) {
            double J2 = ss__sq(req->calibration.exchange);
            ss_flag *f = ss__flag_add(
                a, SS_FLAG_NOISE_DOMINATED, (int)r,
                "Run %zu: after subtracting the detection-noise variance "
                "(%.4g) the energy variance leaves %.4g ± %.4g, %s; its "
                "variance says little about P3. Lower the detection noise or "
                "take more shots.",
                r, rs[r].tau2 * J2, rs[r].y2 * J2, se * J2,
                rs[r].y2 <= 0 ? "which is not positive"
                              : "less than two standard errors above zero");
            ss__flag_number(f, "energy_variance", rs[r].energy_variance);
            ss__flag_number(f, "noise_variance", rs[r].tau2 * J2);
            ss__flag_number(f, "excess_variance", rs[r].y2 * J2);
            ss__flag_number(f, "excess_stderr", se * J2);
        }
        if (rs[r].shots < SS__FEW_SHOTS) {
            ss_flag *f = ss__flag_add(
                a, SS_FLAG_FEW_SHOTS, (int)r,
                "Run %zu has %zu shots; below about %d the normal "
                "approximation behind its error bars is poor (common "
                "practice). Take at least %d.",
                r, rs[r].shots, SS__FEW_SHOTS, SS__FEW_SHOTS);
            ss__flag_number(f, "shots", (double)rs[r].shots);
            ss__flag_number(f, "shots_needed", SS__FEW_SHOTS);
        }
    }
    double worst = 0;
    for (unsigned i = 0; i < a->levels; i++)
        if (isfinite(a->stderr_[i]))
            worst = fmax(worst, zc * a->stderr_[i]);
    if (a->has_spectrum && worst > SS__WIDE_INTERVAL) {
        double need = ceil(total * ss__sq(worst / SS__WIDE_INTERVAL));
        ss_flag *f = ss__flag_add(
            a, SS_FLAG_FEW_SHOTS, -1,
            "The widest eigenvalue interval has half-width %.3g, more than "
            "%.2g: with %.0f shots in all the spectrum is barely "
            "constrained. About %.0f shots would bring it to %.2g.",
            worst, SS__WIDE_INTERVAL, total, need, SS__WIDE_INTERVAL);
        ss__flag_number(f, "half_width", worst);
        ss__flag_number(f, "shots", total);
        ss__flag_number(f, "shots_needed", need);
    }
}

/* One flag for the run with the most atoms whose coupling spread breaks
 * the symmetry the energy model assumes (see SS__SYMMETRY_RATIO). */
static void ss__flag_symmetry(ss_analysis *a, const ss_analysis_request *req) {
    double s = req->calibration.coupling_spread;
    size_t worst = SIZE_MAX;
    double ratio = 0;
    for (size_t r = 0; r < req->run_count; r++) {
        double n = (double)req->runs[r].atoms;
        double q = s * sqrt(0.5 * n * (n - 1.0));
        if (q >= SS__SYMMETRY_RATIO && q > ratio) {
            ratio = q;
            worst = r;
        }
    }
    if (worst == SIZE_MAX)
        return;
    double J = fabs(req->calibration.exchange);
    const char *unit_gap = req->calibration.unit[0] ? " " : ""; /* none: "" */
    ss_flag *f = ss__flag_add(
        a, SS_FLAG_SYMMETRY_CAUTION, (int)worst,
        "Run %zu (%u atoms): the measured pair-coupling spread (%.3g of J) "
        "adds a symmetry-breaking term of about %.3g%s%s against a level "
        "spacing of %.3g%s%s, so diagrams mix at about the %.2g level and "
        "the energies no longer follow the equal-coupling model exactly. "
        "Treat the spectrum as approximate; flatten the trap or use fewer "
        "atoms.",
        worst, req->runs[worst].atoms, s, ratio * J, unit_gap,
        req->calibration.unit, J, unit_gap, req->calibration.unit,
        ratio * ratio);
    ss__flag_number(f, "coupling_spread", s);
    ss__flag_number(f, "atoms", req->runs[worst].atoms);
    ss__flag_number(f, "breaking_to_spacing", ratio);
    ss__flag_number(f, "threshold", SS__SYMMETRY_RATIO);
    ss__flag_number(f, "mixing_weight", ratio * ratio);
}

/* One flag per run whose candidates include diagrams sharing a content. */
static void ss__flag_degenerate(ss_analysis *a, const ss_run_result *out,
                                size_t r, const ss_calibration *cal) {
    size_t members = 0, first = SIZE_MAX;
    double prob = 0;
    for (size_t k = 0; k < out->candidate_count; k++)
        if (out->candidates[k].degenerate_group) {
            members++;
            prob += out->candidates[k].probability;
            if (first == SIZE_MAX || out->candidates[k].probability >
                                         out->candidates[first].probability)
                first = k;
        }
    const ss_candidate *c = &out->candidates[first];
    ss_flag *f = ss__flag_add(
        a, SS_FLAG_DEGENERATE_ENERGY, (int)r,
        "Run %zu (%u atoms): %u %s among the candidates %s to more "
        "than one Young diagram (%zu diagrams in all; e.g. content %lld at "
        "%.6g%s%s), and the diagrams of each such energy imply different "
        "spectra: no energy resolution can tell them apart (listed in "
        "runs[%zu].degenerate_groups).",
        r, out->atoms, out->degenerate_group_count,
        out->degenerate_group_count == 1 ? "energy" : "energies",
        out->degenerate_group_count == 1 ? "belongs" : "belong", members,
        (long long)c->content, c->energy, cal->unit[0] ? " " : "", cal->unit,
        r);
    ss__flag_number(f, "atoms", out->atoms);
    ss__flag_number(f, "groups", out->degenerate_group_count);
    ss__flag_number(f, "diagrams", (double)members);
    ss__flag_number(f, "example_content", (double)c->content);
    if (a->has_spectrum)
        ss__flag_number(f, "probability_in_groups", prob);
}

/* Runs are handled in batches whose exact laws come from one Schur table
 * (ss__distribution_compute_many); a batch holds at most this many diagrams
 * in all, so that memory stays that of one large run. */
#define SS__BATCH_DIAGRAMS 65536u

static ss_status ss__candidates_all(ss_analysis *a,
                                    const ss_analysis_request *req,
                                    const ss__run_stats *rs, ss_error *err) {
    unsigned d = a->levels;
    double naive_sum[SS_LEVELS_MAX] = {0}, wsum = 0;
    ss_status st = SS_OK;
    size_t R = req->run_count;
    ss_distribution **dists = calloc(R ? R : 1, sizeof *dists);
    unsigned *atoms = malloc((R ? R : 1) * sizeof *atoms);
    if (dists == NULL || atoms == NULL)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    uint64_t *counts = calloc(R ? R : 1, sizeof *counts);
    if (st == SS_OK && counts == NULL)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    for (size_t r = 0; st == SS_OK && r < R; r++) {
        atoms[r] = rs[r].atoms;
        counts[r] = a->has_spectrum ? ss_diagram_count(atoms[r], d) : 0;
    }
    for (size_t first = 0; first < R && st == SS_OK;) {
        size_t end = first + 1;
        if (a->has_spectrum) {
            uint64_t sum = counts[first];
            while (end < R && sum + counts[end] <= SS__BATCH_DIAGRAMS)
                sum += counts[end++];
            st = ss__distribution_compute_many(atoms + first, end - first, d,
                                               a->values, &req->budget,
                                               dists + first, err);
        }
        for (size_t r = first; r < end && st == SS_OK; r++) {
            ss_diagram_set *set = NULL;
            if (!a->has_spectrum)
                st = ss_diagram_set_alloc(rs[r].atoms, d, &req->budget, &set,
                                          err);
            if (st != SS_OK)
                break;
            ss_run_result *out = &a->runs[r];
            double naive[SS_LEVELS_MAX];
            out->atoms = rs[r].atoms;
            out->shots = rs[r].shots;
            out->mean_energy = rs[r].mean_energy;
            out->energy_variance = rs[r].energy_variance;
            st = ss__run_candidates(
                d, &req->calibration, &rs[r], req->window, dists[r],
                dists[r] ? dists[r]->diagrams : set, out, naive, err);
            for (unsigned i = 0; i < d; i++)
                naive_sum[i] += (double)rs[r].shots * naive[i];
            wsum += (double)rs[r].shots;
            if (st == SS_OK && out->degenerate_group_count > 0)
                ss__flag_degenerate(a, out, r, &req->calibration);
            ss_diagram_set_free(set);
            ss_distribution_free(dists[r]);
            dists[r] = NULL;
        }
        first = end;
    }
    for (size_t r = 0; dists && r < R; r++)
        ss_distribution_free(dists[r]);
    free(dists);
    free(atoms);
    free(counts);
    if (st == SS_OK) {
        a->has_naive = 1;
        for (unsigned i = 0; i < d; i++)
            a->naive[i] = naive_sum[i] / wsum;
    }
    return st;
}

/* The projection onto the simplex can leave a zero eigenvalue a rounding
 * below zero (fuzz findings: -9.99e-16 and -1.22e-15, which the exact law
 * of the candidates and of the bootstrap then refused as a spectrum):
 * such an entry becomes zero and the sum is restored. */
static void ss__snap_to_simplex(double *v, unsigned d) {
    double total = 0;
    int clamped = 0;
    for (unsigned i = 0; i < d; i++) {
        if (v[i] < 0 && v[i] > -1e-12) {
            v[i] = 0;
            clamped = 1;
        }
        total += v[i];
    }
    if (clamped && total > 0)
        for (unsigned i = 0; i < d; i++)
            v[i] /= total;
}

ss_status ss_analysis_run(const ss_analysis_request *req, ss_analysis **out,
                          ss_error *err) {
    ss__cost cost;
    ss_status st = ss__request_validate(req, err);
    if (st == SS_OK) /* refused before any work when over the budget */
        st = ss__analysis_cost(req, &cost, err);
    if (st != SS_OK)
        return st;
    unsigned d = req->levels;
    size_t R = req->run_count;
    ss_analysis *a = calloc(1, sizeof *a);
    ss__run_stats *rs = calloc(R, sizeof *rs);
    if (a != NULL)
        a->runs = calloc(R, sizeof *a->runs);
    if (a == NULL || rs == NULL || a->runs == NULL) {
        free(rs);
        ss_analysis_free(a);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    a->run_count = R;
    a->levels = d;
    a->confidence = req->confidence;
    a->diagnostics.log_likelihood = nan("");
    a->diagnostics.p_value = nan("");
    ss__run_stats_fill(req, rs);
    int any_shot = 0;
    for (size_t r = 0; r < R; r++)
        any_shot |= rs[r].per_shot;
    ss_method method = req->method;
    if (method == SS_METHOD_AUTO)
        method = any_shot ? SS_METHOD_LIKELIHOOD : SS_METHOD_MOMENTS;
    if (method == SS_METHOD_LIKELIHOOD && !any_shot) {
        st = ss_error_set(err, SS_EINVAL, "method",
                          "the likelihood method needs per-shot energies in "
                          "at least one run");
        goto done;
    }
    a->method = method;
    double zc = gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * req->confidence);
    if (method != SS_METHOD_DIAGRAMS) {
        ss__fit fit;
        st = ss__moments_fit(d, rs, R, &fit, err);
        if (st != SS_OK)
            goto done;
        a->diagnostics.chi2 = fit.chi2;
        a->diagnostics.dof = fit.dof;
        if (fit.dof > 0 && isfinite(fit.chi2) && fit.chi2 >= 0)
            a->diagnostics.p_value = gsl_cdf_chisq_Q(fit.chi2, fit.dof);
        ss__estimate_moments(a, req, rs, &fit);
        ss__snap_to_simplex(a->values, d); /* before the bootstrap uses it */
        /* d = 3: profile intervals follow the curved root map (the delta
         * method linearises it and fails near equal eigenvalues) */
        if (st == SS_OK && method == SS_METHOD_MOMENTS && d == 3 &&
            fit.npar == 2 && !a->spectrum_is_max_entropy &&
            ss__profile_d3(a, &fit, zc))
            a->interval = SS_INTERVAL_PROFILE;
        /* where the delta method gives no standard error at all (a
         * singular root map), a parametric bootstrap supplies it, and the
         * intervals too unless they are profile intervals */
        int singular = !isfinite(a->stderr_[0]);
        unsigned boots = req->bootstrap;
        if (singular && boots < SS__AUTO_BOOTSTRAP &&
            method == SS_METHOD_MOMENTS) { /* as many as the budget allows */
            unsigned afford = ss__bootstrap_auto(&cost, req);
            boots = afford > boots ? afford : boots;
        }
        if (st == SS_OK && boots > 0 && method == SS_METHOD_MOMENTS) {
            double sd[SS_LEVELS_MAX], qlo[SS_LEVELS_MAX], qhi[SS_LEVELS_MAX];
            double sdp2 = 0;
            st = ss__moments_bootstrap(d, rs, R, a->values, &fit, boots,
                                       req->seed, &req->budget, req->confidence,
                                       sd, &sdp2, qlo, qhi, err);
            if (st == SS_OK) {
                a->diagnostics.bootstrap_replicates = boots;
                memcpy(a->diagnostics.bootstrap_stderr, sd, d * sizeof *sd);
                a->diagnostics.bootstrap_p2_stderr = sdp2;
                if (singular)
                    memcpy(a->stderr_, sd, d * sizeof *sd);
                if (singular && a->interval == SS_INTERVAL_DELTA) {
                    a->interval = SS_INTERVAL_BOOTSTRAP;
                    for (unsigned i = 0; i < d; i++) {
                        a->lower[i] = fmin(qlo[i], a->values[i]);
                        a->upper[i] = fmax(qhi[i], a->values[i]);
                    }
                }
            }
        }
        if (st == SS_OK && method == SS_METHOD_LIKELIHOOD) {
            st = ss__estimate_likelihood(a, req, rs, zc, err);
            if ((st == SS_EBUDGET || st == SS_EDEADLINE) &&
                req->method == SS_METHOD_AUTO) {
                ss_error_clear(err); /* too big for the likelihood: stay */
                a->method = SS_METHOD_MOMENTS;
                st = SS_OK;
            }
        }
        if (st != SS_OK)
            goto done;
        ss__snap_to_simplex(a->values, a->levels); /* likelihood too */
        /* the root and projection maps can leave two equal eigenvalues one
         * rounding apart in the wrong order: restore the order */
        for (unsigned i = 0; i + 1 < a->levels; i++)
            if (a->values[i + 1] > a->values[i]) {
                qsort(a->values, a->levels, sizeof *a->values,
                      ss__cmp_double_desc);
                break;
            }
        ss__set_intervals(a, zc);
        /* every interval holds its point: the likelihood's point with the
         * moments' region (rank-deficient fits), or a projected point next
         * to a sampled region, can fall just outside it; and every
         * interval stays in [0, 1] (a profile bound can land a rounding
         * below zero: the same fuzz finding) */
        for (unsigned i = 0; i < a->levels; i++) {
            a->lower[i] = fmax(0.0, fmin(a->lower[i], a->values[i]));
            a->upper[i] = fmin(1.0, fmax(a->upper[i], a->values[i]));
        }
        ss__flags_runs(a, req, rs, zc);
    }
    st = ss__candidates_all(a, req, rs, err);
    if (st == SS_OK)
        ss__flag_symmetry(a, req);
done:
    free(rs);
    if (st != SS_OK) {
        ss_analysis_free(a);
        return st;
    }
    *out = a;
    return SS_OK;
}

void ss_analysis_free(ss_analysis *a) {
    if (a == NULL)
        return;
    for (size_t r = 0; a->runs && r < a->run_count; r++)
        free(a->runs[r].candidates);
    free(a->runs);
    free(a->flags);
    free(a);
}
