/*
 * diagram.c — Young diagrams λ ⊢ n with at most d rows: counting (OEIS
 * A026820), iterative enumeration in reverse lexicographic order, the
 * content sum, f^λ (hook length formula) and dim_GL(N)(λ) (Weyl/hook-content
 * formula) in log form, and the partition ranking table used by the Schur
 * recursion.  Owns the ss_diagram_set allocations.
 */
#include "internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

ss_budget ss_budget_default(void) {
    ss_budget b = {8000000u, 64000000u, SS_BUDGET_WORK_DEFAULT, 0.0};
    return b;
}

ss_budget ss__budget_or_default(const ss_budget *budget) {
    ss_budget d = ss_budget_default();
    if (budget == NULL)
        return d;
    ss_budget b = *budget;
    if (b.max_diagrams == 0)
        b.max_diagrams = d.max_diagrams;
    if (b.max_table_cells == 0)
        b.max_table_cells = d.max_table_cells;
    if (b.max_work == 0)
        b.max_work = d.max_work;
    return b;
}

/* Partitions of j into at most k parts for j = 0..atoms, in counts[]. */
static ss_status ss__partition_counts(unsigned atoms, unsigned k,
                                      uint64_t *counts) {
    for (unsigned j = 0; j <= atoms; j++)
        counts[j] = (j == 0);
    /* conjugation: at most k parts <=> every part at most k */
    for (unsigned part = 1; part <= k; part++)
        for (unsigned j = part; j <= atoms; j++)
            counts[j] = ss__sat_add(counts[j], counts[j - part]);
    return SS_OK;
}

uint64_t ss_diagram_count(unsigned atoms, unsigned levels) {
    if (levels == 0)
        return atoms == 0;
    uint64_t *c = malloc(((size_t)atoms + 1) * sizeof *c);
    if (c == NULL)
        return UINT64_MAX;
    ss__partition_counts(atoms, levels, c);
    uint64_t r = c[atoms];
    free(c);
    return r;
}

ss_status ss__rank_table_init(ss__rank_table *t, unsigned rows,
                              unsigned atoms) {
    size_t width = (size_t)atoms + 1;
    t->rows = rows;
    t->atoms = atoms;
    t->cum = malloc(((size_t)rows + 1) * width * sizeof *t->cum);
    if (t->cum == NULL)
        return SS_ENOMEM;
    for (unsigned i = 0; i <= rows; i++) {
        uint64_t *row = t->cum + (size_t)i * width;
        ss__partition_counts(atoms, i, row);
        for (size_t b = 1; b < width; b++) /* prefix sums: size <= B */
            row[b] = ss__sat_add(row[b], row[b - 1]);
    }
    return SS_OK;
}

void ss__rank_table_release(ss__rank_table *t) {
    if (t == NULL)
        return;
    free(t->cum);
    t->cum = NULL;
}

uint64_t ss_diagram_table_cells(unsigned atoms, unsigned levels) {
    if (levels == 0)
        return 0;
    ss__rank_table t;
    if (ss__rank_table_init(&t, levels - 1, atoms) != SS_OK)
        return UINT64_MAX;
    uint64_t cells = ss__rank_cum(&t, levels - 1, (long)atoms);
    ss__rank_table_release(&t);
    return cells;
}

int64_t ss_diagram_content(const uint32_t *rows, unsigned levels) {
    int64_t c = 0;
    for (unsigned i = 0; i < levels; i++) {
        int64_t l = rows[i];
        c += l * (l - 1) / 2 - (int64_t)i * l;
    }
    return c;
}

long double ss__log_tableaux(const uint32_t *rows, unsigned levels,
                             const long double *lfact,
                             const long double *llog) {
    /* f^λ = n! Π_{i<j} (l_i − l_j) / Π_i l_i!, l_i = λ_i + d − i
     * (hook length formula in row form; Frame–Robinson–Thrall 1954).
     * lfact[k] = log k!, llog[k] = log k when given; computed otherwise. */
    unsigned long n = 0;
    long double acc = 0.0L;
    for (unsigned i = 0; i < levels; i++) {
        unsigned long li = rows[i] + (levels - 1u - i);
        n += rows[i];
        acc -= lfact ? lfact[li] : lgammal((long double)li + 1.0L);
        for (unsigned j = i + 1; j < levels; j++) {
            unsigned long diff = li - (rows[j] + (levels - 1u - j));
            acc += llog ? llog[diff] : logl((long double)diff);
        }
    }
    return acc + (lfact ? lfact[n] : lgammal((long double)n + 1.0L));
}

double ss_diagram_log_tableaux(const uint32_t *rows, unsigned levels) {
    return (double)ss__log_tableaux(rows, levels, NULL, NULL);
}

double ss_diagram_log_dimension(const uint32_t *rows, unsigned levels,
                                unsigned dim) {
    /* dim_GL(N) λ = Π_{i<j<=N} (λ_i − λ_j + j − i)/(j − i) (Weyl; equal to the
     * hook-content product, Stanley EC2 Cor. 7.21.4). */
    for (unsigned i = dim; i < levels; i++)
        if (rows[i] != 0)
            return -HUGE_VAL;
    long double acc = 0.0L;
    for (unsigned i = 0; i < dim; i++) {
        long double li = i < levels ? (long double)rows[i] : 0.0L;
        for (unsigned j = i + 1; j < dim; j++) {
            long double lj = j < levels ? (long double)rows[j] : 0.0L;
            acc += logl(li - lj + (long double)(j - i)) -
                   logl((long double)(j - i));
        }
    }
    return (double)acc;
}

int ss_diagram_is_valid(const uint32_t *rows, unsigned levels, unsigned atoms) {
    uint64_t sum = 0;
    for (unsigned i = 0; i < levels; i++) {
        if (i > 0 && rows[i] > rows[i - 1])
            return 0;
        sum += rows[i];
    }
    return sum == atoms;
}

int ss__diagram_next(uint32_t *rows, unsigned levels) {
    /* Find the rightmost row that can lose one box such that the boxes to
     * its right plus that one still fit below it; refill greedily. */
    uint64_t tail = 0;
    for (unsigned k = levels; k-- > 0;) {
        if (rows[k] > 0) {
            uint64_t v = rows[k] - 1u;
            uint64_t room = v * (uint64_t)(levels - 1 - k);
            if (room >= tail + 1) {
                uint64_t rem = tail + 1;
                rows[k] = (uint32_t)v;
                for (unsigned j = k + 1; j < levels; j++) {
                    uint64_t put = rem < v ? rem : v;
                    rows[j] = (uint32_t)put;
                    rem -= put;
                }
                return 1;
            }
        }
        tail += rows[k];
    }
    return 0;
}

static ss_status ss__check_shape(unsigned atoms, unsigned levels,
                                 ss_error *err) {
    if (levels < SS_LEVELS_MIN || levels > SS_LEVELS_MAX)
        return ss_error_set(err, SS_EINVAL, "levels",
                            "levels must be an integer from %d to %d, got %u",
                            SS_LEVELS_MIN, SS_LEVELS_MAX, levels);
    if (atoms < 1 || atoms > SS_ATOMS_MAX)
        return ss_error_set(err, SS_EINVAL, "atoms",
                            "atoms must be an integer from 1 to %d, got %u",
                            SS_ATOMS_MAX, atoms);
    return SS_OK;
}

ss_status ss_diagram_set_alloc(unsigned atoms, unsigned levels,
                               const ss_budget *budget, ss_diagram_set **out,
                               ss_error *err) {
    ss_status st = ss__check_shape(atoms, levels, err);
    if (st != SS_OK)
        return st;
    ss_budget b = ss__budget_or_default(budget);
    uint64_t count = ss_diagram_count(atoms, levels);
    if (count > b.max_diagrams)
        return ss_error_set(err, SS_EBUDGET, "max_diagrams",
                            "%u atoms with %u levels have %llu Young "
                            "diagrams; the work budget max_diagrams allows "
                            "%llu",
                            atoms, levels, (unsigned long long)count,
                            (unsigned long long)b.max_diagrams);
    ss_diagram_set *set = calloc(1, sizeof *set);
    if (set == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    set->atoms = atoms;
    set->levels = levels;
    set->count = (size_t)count;
    set->rows = malloc(set->count * levels * sizeof *set->rows);
    set->content = malloc(set->count * sizeof *set->content);
    if (set->rows == NULL || set->content == NULL) {
        ss_diagram_set_free(set);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    uint32_t cur[SS_LEVELS_MAX] = {0};
    cur[0] = atoms;
    size_t i = 0;
    do {
        memcpy(set->rows + i * levels, cur, levels * sizeof *cur);
        set->content[i] = ss_diagram_content(cur, levels);
        i++;
    } while (i < set->count && ss__diagram_next(cur, levels));
    if (i != set->count) {
        ss_diagram_set_free(set);
        return ss_error_set(err, SS_EINTERNAL, "",
                            "diagram enumeration stopped early");
    }
    *out = set;
    return SS_OK;
}

void ss_diagram_set_free(ss_diagram_set *set) {
    if (set == NULL)
        return;
    free(set->rows);
    free(set->content);
    free(set);
}

uint64_t ss_diagram_content_levels_max(unsigned atoms, unsigned levels,
                                       uint64_t diagrams) {
    int64_t n = atoms;
    uint64_t span =
        (uint64_t)(n * (n - 1) / 2 - ss_diagram_content_min(atoms, levels) + 1);
    return span < diagrams ? span : diagrams;
}

int64_t ss_diagram_content_min(unsigned atoms, unsigned levels) {
    unsigned rows = atoms < levels ? atoms : levels;
    if (rows == 0)
        return 0;
    int64_t q = atoms / rows, extra = atoms % rows, c = 0;
    for (int64_t i = 0; i < (int64_t)rows; i++) {
        int64_t l = q + (i < extra);
        c += l * (l - 1) / 2 - i * l;
    }
    return c;
}
