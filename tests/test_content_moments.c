/*
 * test_content_moments.c — the closed-form moments of the content sum
 * (ss_content_moments) against the exact distribution and known identities.
 *
 * The closed form comes from expanding c(λ)^k over products of k
 * transpositions (generator core/gen/content_moments_gen.c); here it is
 * checked against moments summed over the exact Schur–Weyl table, against
 * the mean and variance identities of domain.md §2 (E[c] = C(n,2)·P2 and
 * the P3 variance formula), against the point mass of a pure state, and
 * against a two-atom case worked by hand.
 */
#include <criterion/criterion.h>
#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "swapspec.h"

static void cm_setup(void) { gsl_set_error_handler_off(); }

/* Central moments summed over the exact table. */
static void cm_exact(unsigned n, unsigned d, const double *p, double out[4]) {
    ss_error err;
    ss_error_clear(&err);
    ss_distribution *dist = NULL;
    cr_assert(ss_distribution_compute(n, d, p, d, NULL, &dist, &err) == SS_OK,
              "%s", err.message);
    long double m = 0, c2 = 0, c3 = 0, c4 = 0;
    for (size_t i = 0; i < dist->diagrams->count; i++)
        m += dist->probability[i] * (long double)dist->diagrams->content[i];
    for (size_t i = 0; i < dist->diagrams->count; i++) {
        long double x = (long double)dist->diagrams->content[i] - m;
        long double w = dist->probability[i];
        c2 += w * x * x;
        c3 += w * x * x * x;
        c4 += w * x * x * x * x;
    }
    out[0] = (double)m;
    out[1] = (double)c2;
    out[2] = (double)c3;
    out[3] = (double)c4;
    ss_distribution_free(dist);
}

/* |a − b| <= tol·scale, scale = max(1, |b|, ref) where ref is the natural
 * size of the quantity (the variance^(k/2) for the k-th central moment), so
 * a moment that is zero by symmetry is held to the rounding of its terms. */
static int cm_close(double a, double b, double tol, double ref) {
    return fabs(a - b) <= tol * fmax(1.0, fmax(fabs(b), ref));
}

Test(content_moments, equal_exact_table, .init = cm_setup) {
    static const struct {
        unsigned n, d;
        double p[6];
    } cases[] = {
        {2, 2, {0.7, 0.3}},
        {3, 3, {0.5, 1.0 / 3, 1.0 / 6}},
        {5, 4, {0.4, 0.3, 0.2, 0.1}},
        {12, 3, {0.6, 0.3, 0.1}},
        {24, 3, {0.6, 0.3, 0.1}},
        {40, 4, {0.25, 0.25, 0.25, 0.25}},
        {30, 6, {0.3, 0.2, 0.2, 0.15, 0.1, 0.05}},
        {60, 2, {0.5, 0.5}},
        {18, 5, {0.6, 0.4, 0, 0, 0}},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        double got[4], want[4];
        ss_error err;
        ss_error_clear(&err);
        cr_assert(ss_content_moments(cases[k].n, cases[k].p, cases[k].d,
                                     cases[k].d, got, &err) == SS_OK,
                  "%s", err.message);
        cm_exact(cases[k].n, cases[k].d, cases[k].p, want);
        double sd = sqrt(want[1]);
        /* tolerance 1e-9 relative: both sides are sums of a few hundred
         * positive-weighted terms in extended precision */
        cr_expect(cm_close(got[0], want[0], 1e-9, 0), "case %zu mean", k);
        cr_expect(cm_close(got[1], want[1], 1e-9, 0), "case %zu mu2", k);
        cr_expect(cm_close(got[2], want[2], 1e-9, sd * sd * sd),
                  "case %zu mu3 %.17g vs %.17g", k, got[2], want[2]);
        cr_expect(cm_close(got[3], want[3], 1e-9, want[1] * want[1]),
                  "case %zu mu4 %.17g vs %.17g", k, got[3], want[3]);
    }
}

Test(content_moments, mean_and_variance_identities, .init = cm_setup) {
    /* domain.md §2: E[c] = C(n,2)·P2 and the variance with P3 */
    double p[3] = {0.55, 0.3, 0.15}, out[4];
    double p2 = ss_spectrum_power_sum(p, 3, 2),
           p3 = ss_spectrum_power_sum(p, 3, 3);
    for (unsigned n = 2; n <= 200; n += 7) {
        cr_assert(ss_content_moments(n, p, 3, 3, out, NULL) == SS_OK);
        cr_expect(cm_close(out[0], ss_content_mean(n, p2), 1e-12, 0));
        cr_expect(cm_close(out[1], ss_content_variance(n, p2, p3), 1e-10, 0),
                  "n=%u: %.17g vs %.17g", n, out[1],
                  ss_content_variance(n, p2, p3));
    }
}

Test(content_moments, pure_state_and_symmetry, .init = cm_setup) {
    double pure[4] = {1, 0, 0, 0}, out[4];
    cr_assert(ss_content_moments(9, pure, 4, 4, out, NULL) == SS_OK);
    /* λ = (n) with probability 1: c = C(n,2), no spread */
    cr_expect(out[0] == 36.0 && fabs(out[1]) < 1e-9 && fabs(out[2]) < 1e-9 &&
              fabs(out[3]) < 1e-9);
    /* n = 2, p = (½, ½): c = +1 with probability s_(2) = 3/4 and −1 with
     * s_(1,1) = 1/4 (worked by hand), so mean ½, μ2 = 3/4, μ3 = −3/4,
     * μ4 = (3/4)(1/16) + (1/4)(81/16) = 21/16 */
    double half[2] = {0.5, 0.5};
    cr_assert(ss_content_moments(2, half, 2, 2, out, NULL) == SS_OK);
    cr_expect(fabs(out[0] - 0.5) < 1e-15);
    cr_expect(fabs(out[1] - 0.75) < 1e-15);    /* 1 − 1/4 */
    cr_expect(fabs(out[2] - (-0.75)) < 1e-15); /* E[(c−½)³] */
    cr_expect(fabs(out[3] - 21.0 / 16.0) < 1e-15);
}

Test(content_moments, bad_input_names_the_field, .init = cm_setup) {
    double out[4], bad[3] = {0.6, 0.6, -0.2};
    ss_error err;
    ss_error_clear(&err);
    cr_expect(ss_content_moments(10, bad, 3, 3, out, &err) == SS_EINVAL);
    cr_expect(strcmp(err.field, "spectrum[2]") == 0, "field %s", err.field);
    double ok[2] = {0.5, 0.5};
    ss_error_clear(&err);
    cr_expect(ss_content_moments(0, ok, 2, 2, out, &err) == SS_EINVAL);
    cr_expect(strcmp(err.field, "atoms") == 0);
}
