/*
 * internal.h — helpers shared between core modules; never included from
 * outside core/.  Names carry the ss__ prefix.
 *
 * The partition ranking table: partitions ν with at most `rows` rows and
 * |ν| <= atoms, written in difference coordinates a_i = ν_i − ν_{i+1}
 * (|ν| = Σ i·a_i), are ranked lexicographically with a_rows most
 * significant and a_1 least significant.  With C_i(B) = number of such
 * partitions with at most i rows and size <= B,
 *     rank(a) = Σ_{i=rows..1} [C_i(B_i) − C_i(B_{i−1})],
 * where B_rows = atoms and B_{i−1} = B_i − i·a_i.  Runs of a_1 are contiguous
 * (rank grows by one with a_1), and the partitions with a_rows = 0 are the
 * first C_{rows−1}(atoms) ranks in exactly the order of the (rows−1)-row
 * ranking: the Schur table of one level is a prefix of the next.
 */
#ifndef SWAPSPEC_INTERNAL_H
#define SWAPSPEC_INTERNAL_H

#include "swapspec.h"

typedef struct {
    unsigned rows;
    unsigned atoms;
    uint64_t *cum; /* (rows+1) x (atoms+1): cum[i*(atoms+1)+B] = C_i(B) */
} ss__rank_table;

/* Fills t (saturating at UINT64_MAX).  SS_ENOMEM on failure. */
ss_status ss__rank_table_init(ss__rank_table *t, unsigned rows,
                              unsigned atoms);
void ss__rank_table_release(ss__rank_table *t);

static inline uint64_t ss__rank_cum(const ss__rank_table *t, unsigned i,
                                    long budget) {
    if (budget < 0)
        return 0;
    return t->cum[(size_t)i * (t->atoms + 1u) + (size_t)budget];
}

/* Rank of the partition with difference coordinates a[1..m] (a[0] unused),
 * m <= t->rows, all coordinates above m zero, |ν| <= t->atoms. */
static inline uint64_t ss__rank_of(const ss__rank_table *t, const long *a,
                                   unsigned m) {
    uint64_t r = 0;
    long budget = (long)t->atoms;
    for (unsigned i = m; i >= 1; i--) {
        long next = budget - (long)i * a[i];
        r += ss__rank_cum(t, i, budget) - ss__rank_cum(t, i, next);
        budget = next;
    }
    return r;
}

/* Saturating arithmetic for counts. */
static inline uint64_t ss__sat_add(uint64_t a, uint64_t b) {
    return a > UINT64_MAX - b ? UINT64_MAX : a + b;
}

/* Next diagram in reverse lexicographic order among λ ⊢ n with at most
 * `levels` rows; returns 0 after the last one ((1,...,1) or its truncation). */
int ss__diagram_next(uint32_t *rows, unsigned levels);

/* log f^λ in extended precision; lfact[k] = log k! and llog[k] = log k for
 * k <= atoms + levels, or NULL to evaluate lgammal/logl directly. */
long double ss__log_tableaux(const uint32_t *rows, unsigned levels,
                             const long double *lfact,
                             const long double *llog);

#endif
