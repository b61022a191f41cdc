/*
 * spectrum.c — validation of single-atom spectra, power sums, and the closed
 * forms for the mean and variance of the content sum.
 *
 * The closed forms are the exact identities of domain.md §2 (E[c] = C(n,2)·P2
 * and the variance with P3), which the tests hold against the exact tables
 * and against brute-force diagonalisation.  Owns no memory.
 */
#include "internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int ss__cmp_double_desc(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return (x < y) - (x > y);
}

ss_status ss_spectrum_validate(const double *p, size_t len, unsigned levels,
                               double *sorted_out, ss_error *err) {
    if (levels < SS_LEVELS_MIN || levels > SS_LEVELS_MAX)
        return ss_error_set(err, SS_EINVAL, "levels",
                            "levels must be an integer from %d to %d, got %u",
                            SS_LEVELS_MIN, SS_LEVELS_MAX, levels);
    if (p == NULL || len != levels)
        return ss_error_set(err, SS_EINVAL, "spectrum",
                            "spectrum must have exactly %u entries (one per "
                            "level), got %zu",
                            levels, p ? len : (size_t)0);
    long double sum = 0.0L;
    for (size_t i = 0; i < len; i++) {
        char field[32];
        snprintf(field, sizeof field, "spectrum[%zu]", i);
        if (!isfinite(p[i]))
            return ss_error_set(err, SS_EINVAL, field,
                                "spectrum entries must be finite numbers");
        if (p[i] < 0.0)
            return ss_error_set(err, SS_EINVAL, field,
                                "spectrum entries must be >= 0, got %.17g",
                                p[i]);
        sum += p[i];
    }
    double off = (double)(sum - 1.0L);
    if (fabs(off) > SS_SPECTRUM_SUM_TOL)
        return ss_error_set(err, SS_EINVAL, "spectrum",
                            "spectrum must sum to 1 within %g; it sums to "
                            "%.17g (off by %.3g)",
                            SS_SPECTRUM_SUM_TOL, (double)sum, off);
    if (sorted_out != NULL) {
        double tmp[SS_LEVELS_MAX];
        memcpy(tmp, p, len * sizeof *tmp);
        qsort(tmp, len, sizeof *tmp, ss__cmp_double_desc);
        memcpy(sorted_out, tmp, len * sizeof *tmp);
    }
    return SS_OK;
}

double ss_spectrum_power_sum(const double *p, unsigned levels, unsigned k) {
    long double s = 0.0L;
    for (unsigned i = 0; i < levels; i++) {
        long double t = 1.0L;
        for (unsigned j = 0; j < k; j++)
            t *= p[i];
        s += t;
    }
    return (double)s;
}

double ss_content_mean(unsigned atoms, double p2) {
    double pairs = 0.5 * (double)atoms * ((double)atoms - 1.0);
    return pairs * p2;
}

double ss_content_variance(unsigned atoms, double p2, double p3) {
    double n = (double)atoms;
    double pairs = 0.5 * n * (n - 1.0);
    double pairs_rest = n >= 2.0 ? 0.5 * (n - 2.0) * (n - 3.0) : 0.0;
    if (atoms < 2)
        return 0.0;
    return pairs * (1.0 + 2.0 * (n - 2.0) * p3 + pairs_rest * p2 * p2) -
           pairs * pairs * p2 * p2;
}
