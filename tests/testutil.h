/*
 * testutil.h — small shared helpers for the core test programs
 * (tests/test_*.c).
 *
 * Everything here is `static inline` and independent of the core's own
 * algorithms: the reference quantities (content sum, hook length formula,
 * Weyl dimension, d = 2 and d = 3 Schur polynomials by the branching rule)
 * are written from the textbook formulas so that the tests compare the core
 * against a second, separate computation.  The header also holds the
 * assertion helpers for error records (status, field, "nothing written").
 */
#ifndef SWAPSPEC_TESTUTIL_H
#define SWAPSPEC_TESTUTIL_H

#include <criterion/criterion.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>
#include <inttypes.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "swapspec.h"

/* Suite initialiser: the header asks every program linking the core to turn
 * GSL's abort-on-error handler off once. */
static inline void tu_quiet_gsl(void) { gsl_set_error_handler_off(); }

/* C(n,2) as a double (exact for every n the tests use). */
/* A sampler for spectrum p (d levels), asserting that it was made. */
static inline ss_sampler *tu_sampler(unsigned d, const double *p) {
    ss_error err;
    ss_error_clear(&err);
    ss_sampler *s = NULL;
    ss_status st = ss_sampler_alloc(d, p, d, &s, &err);
    cr_assert(st == SS_OK && s != NULL, "ss_sampler_alloc(d=%u): %s (%s: %s)",
              d, ss_status_name(st), err.field, err.message);
    return s;
}

static inline double tu_pairs(unsigned n) {
    return 0.5 * (double)n * ((double)n - 1.0);
}

static inline double tu_rel_err(double got, double want) {
    if (got == want)
        return 0.0;
    return fabs(got - want) / fabs(want);
}

/* |got − want| <= tol·max(1, |want|): relative for large, absolute near 0. */
static inline int tu_close(double got, double want, double tol) {
    double scale = fabs(want) > 1.0 ? fabs(want) : 1.0;
    return fabs(got - want) <= tol * scale;
}

static inline unsigned tu_row_sum(const uint32_t *rows, unsigned levels) {
    unsigned s = 0;
    for (unsigned i = 0; i < levels; ++i)
        s += rows[i];
    return s;
}

static inline unsigned tu_row_count(const uint32_t *rows, unsigned levels) {
    unsigned r = 0;
    while (r < levels && rows[r] > 0)
        ++r;
    return r;
}

/* Own validity test: non-increasing, summing to atoms. */
static inline int tu_is_diagram(const uint32_t *rows, unsigned levels,
                                unsigned atoms) {
    for (unsigned i = 1; i < levels; ++i)
        if (rows[i] > rows[i - 1])
            return 0;
    return tu_row_sum(rows, levels) == atoms;
}

/* Content sum from the row form in domain.md §1:
 * c(λ) = Σ_i [ λ_i(λ_i − 1)/2 − (i − 1)·λ_i ], rows i counted from 1. */
static inline int64_t tu_content(const uint32_t *rows, unsigned levels) {
    int64_t c = 0;
    for (unsigned i = 0; i < levels; ++i) {
        int64_t r = (int64_t)rows[i];
        c += r * (r - 1) / 2 - (int64_t)i * r;
    }
    return c;
}

/* log f^λ by the hook length formula f^λ = n!/Π h(u) (Frame–Robinson–Thrall,
 * Canad. J. Math. 6 (1954), Thm 1; Sagan, The Symmetric Group, Thm 3.10.2),
 * cell by cell in long double.  Hook of cell (i,j), 0-based:
 * h = (λ_i − j − 1) + (λ'_j − i − 1) + 1. */
static inline long double tu_log_tableaux(const uint32_t *rows,
                                          unsigned levels) {
    unsigned n = tu_row_sum(rows, levels);
    unsigned len = tu_row_count(rows, levels);
    long double lg = lgammal((long double)n + 1.0L);
    for (unsigned i = 0; i < len; ++i) {
        for (unsigned j = 0; j < rows[i]; ++j) {
            unsigned col = 0; /* λ'_j: rows longer than j */
            while (col < len && rows[col] > j)
                ++col;
            unsigned hook = (rows[i] - j - 1) + (col - i - 1) + 1;
            lg -= logl((long double)hook);
        }
    }
    return lg;
}

/* log dim of the GL(dim) irrep λ by the Weyl product
 * Π_{i<j<=dim} (λ_i − λ_j + j − i)/(j − i) (Fulton–Harris, Representation
 * Theory, Thm 6.3 [from memory]; Stanley EC2 Cor. 7.21.4 for the equivalent
 * hook-content form); -INFINITY when λ has more than dim rows. */
static inline long double tu_log_dimension(const uint32_t *rows,
                                           unsigned levels, unsigned dim) {
    if (tu_row_count(rows, levels) > dim)
        return -INFINITY;
    long double lg = 0.0L;
    for (unsigned i = 0; i < dim; ++i) {
        long double li = i < levels ? (long double)rows[i] : 0.0L;
        for (unsigned j = i + 1; j < dim; ++j) {
            long double lj = j < levels ? (long double)rows[j] : 0.0L;
            lg += logl((li - lj + (long double)(j - i)) / (long double)(j - i));
        }
    }
    return lg;
}

/* exp(logv) rounded to an integer; asserts it is an integer to 1e-9 relative
 * (a count computed in logs must land on an integer). */
static inline uint64_t tu_round_count(double logv, const char *what) {
    double v = exp(logv);
    double r = nearbyint(v);
    cr_assert(fabs(v - r) <= 1e-9 * (r > 1.0 ? r : 1.0),
              "%s: exp(log) = %.17g is not an integer", what, v);
    return (uint64_t)r;
}

/* Reverse lexicographic comparison: > 0 when a comes before b in the order
 * the header promises ((n) first). */
static inline int tu_revlex_before(const uint32_t *a, const uint32_t *b,
                                   unsigned levels) {
    for (unsigned i = 0; i < levels; ++i) {
        if (a[i] != b[i])
            return a[i] > b[i];
    }
    return 0;
}

/* Index of rows in the set, or set->count when absent (linear search). */
static inline size_t tu_find_diagram(const ss_diagram_set *set,
                                     const uint32_t *rows) {
    for (size_t i = 0; i < set->count; ++i) {
        if (memcmp(set->rows + i * set->levels, rows,
                   set->levels * sizeof(uint32_t)) == 0)
            return i;
    }
    return set->count;
}

static inline void tu_fill_uniform(double *p, unsigned d) {
    for (unsigned i = 0; i < d; ++i)
        p[i] = 1.0 / (double)d;
}

/* Sorted copy (decreasing) of p, for comparisons with the stored spectrum. */
static inline void tu_sort_desc(const double *p, unsigned d, double *out) {
    for (unsigned i = 0; i < d; ++i)
        out[i] = p[i];
    for (unsigned i = 1; i < d; ++i) {
        double v = out[i];
        unsigned j = i;
        while (j > 0 && out[j - 1] < v) {
            out[j] = out[j - 1];
            --j;
        }
        out[j] = v;
    }
}

/* Two-variable Schur polynomial, subtraction free, in long double:
 * s_(a,b)(x,y) = (xy)^b · Σ_{j=0}^{a−b} x^j y^{a−b−j}
 * (SSYT with two letters: the b full columns contribute (xy)^b, the a−b
 * single boxes of row 1 are any word x…xy…y; Stanley EC2 Def. 7.10.1). */
static inline long double tu_schur2(unsigned a, unsigned b, long double x,
                                    long double y) {
    long double s = 0.0L;
    for (unsigned j = 0; j <= a - b; ++j)
        s += powl(x, (long double)j) * powl(y, (long double)(a - b - j));
    return powl(x * y, (long double)b) * s;
}

/* Three-variable Schur polynomial by one step of the branching rule
 * s_λ(x,y,z) = Σ_{μ: λ/μ horizontal strip} s_μ(x,y)·z^{|λ|−|μ|}
 * (Macdonald, Symmetric Functions, I (5.11) [from memory]); interlacing
 * λ1 >= μ1 >= λ2 >= μ2 >= λ3.  Subtraction free. */
static inline long double tu_schur3(const uint32_t *l, long double x,
                                    long double y, long double z) {
    long double s = 0.0L;
    unsigned n = l[0] + l[1] + l[2];
    for (unsigned m1 = l[1]; m1 <= l[0]; ++m1) {
        for (unsigned m2 = l[2]; m2 <= l[1]; ++m2)
            s += tu_schur2(m1, m2, x, y) * powl(z, (long double)(n - m1 - m2));
    }
    return s;
}

/* Scans msg for a decimal number within 1% of want (in absolute value). */
static inline int tu_message_mentions(const char *msg, double want) {
    for (const char *s = msg; *s; ++s) {
        if ((*s >= '0' && *s <= '9') ||
            (*s == '.' && s[1] >= '0' && s[1] <= '9')) {
            if (s > msg && ((s[-1] >= '0' && s[-1] <= '9') || s[-1] == '.'))
                continue; /* only at the start of a number */
            char *end = NULL;
            double v = strtod(s, &end);
            if (end != s && fabs(fabs(v) - fabs(want)) <= 0.01 * fabs(want))
                return 1;
        }
    }
    return 0;
}

/* Asserts that a failing call returned `want`, recorded it in err, and named
 * a field that contains `field_part` (NULL: only that the field is set). */
static inline void tu_expect_error(ss_status got, const ss_error *err,
                                   ss_status want, const char *field_part,
                                   const char *what) {
    cr_assert(got == want,
              "%s: expected status %s, got %s (field \"%s\", message \"%s\")",
              what, ss_status_name(want), ss_status_name(got), err->field,
              err->message);
    cr_assert(err->code == want, "%s: err.code expected %s, got %s", what,
              ss_status_name(want), ss_status_name(err->code));
    if (field_part)
        cr_assert(strstr(err->field, field_part) != NULL,
                  "%s: err.field expected to contain \"%s\", got \"%s\" "
                  "(message \"%s\")",
                  what, field_part, err->field, err->message);
    else
        cr_assert(err->field[0] != '\0',
                  "%s: err.field is empty (message \"%s\")", what,
                  err->message);
    cr_assert(err->message[0] != '\0', "%s: err.message is empty", what);
}

static inline int tu_starts_with(const char *s, const char *prefix) {
    return strncmp(s, prefix, strlen(prefix)) == 0;
}

static inline double tu_seconds_now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Computes a distribution and asserts success (message carries err). */
static inline ss_distribution *tu_distribution(unsigned n, unsigned d,
                                               const double *p) {
    ss_error err;
    ss_error_clear(&err);
    ss_distribution *dist = NULL;
    ss_status st = ss_distribution_compute(n, d, p, d, NULL, &dist, &err);
    cr_assert(st == SS_OK && dist != NULL,
              "ss_distribution_compute(n=%u, d=%u): expected ok, got %s (field "
              "\"%s\": %s)",
              n, d, ss_status_name(st), err.field, err.message);
    return dist;
}

/* Groups a distribution's diagrams by content and asserts success. */
static inline ss_levels *tu_levels(const ss_distribution *dist) {
    ss_levels *lv = NULL;
    ss_error err;
    ss_error_clear(&err);
    ss_status st =
        ss_levels_alloc(dist->diagrams, dist->probability, &lv, &err);
    cr_assert(st == SS_OK, "ss_levels_alloc: %s (%s)", ss_status_name(st),
              err.message);
    return lv;
}

static inline ss_diagram_set *tu_diagram_set(unsigned n, unsigned d) {
    ss_error err;
    ss_error_clear(&err);
    ss_diagram_set *set = NULL;
    ss_status st = ss_diagram_set_alloc(n, d, NULL, &set, &err);
    cr_assert(st == SS_OK && set != NULL,
              "ss_diagram_set_alloc(n=%u, d=%u): expected ok, got %s (field "
              "\"%s\": %s)",
              n, d, ss_status_name(st), err.field, err.message);
    return set;
}

/* A point of the probability simplex with i.i.d. Exp(1) weights (uniform on
 * the simplex), from a caller-owned, seeded generator. */
static inline void tu_random_simplex(gsl_rng *rng, unsigned d, double *p) {
    double s = 0.0;
    for (unsigned i = 0; i < d; ++i) {
        p[i] = -log(gsl_rng_uniform_pos(rng));
        s += p[i];
    }
    for (unsigned i = 0; i < d; ++i)
        p[i] /= s;
}

#define TU_COUNT_OF(a) (sizeof(a) / sizeof((a)[0]))

#endif /* SWAPSPEC_TESTUTIL_H */
