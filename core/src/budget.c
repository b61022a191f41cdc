/*
 * budget.c — the work budget of one analysis: the clock behind
 * ss_budget.max_seconds (deadlines of the iterative phases on
 * CLOCK_MONOTONIC, which no change of the wall clock moves), and the cost
 * model that refuses an over-budget analysis before any work: the cells of
 * the runs' Schur tables, and the work of a parametric bootstrap.  Owns
 * nothing beyond the scratch table of one estimate.
 */
#include "internal.h"

#include <stdio.h>
#include <time.h>

static double ss__now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

double ss_budget_deadline(const ss_budget *budget) {
    if (budget == NULL || !(budget->max_seconds > 0))
        return 0.0;
    return ss__now() + budget->max_seconds;
}

int ss_budget_expired(double deadline) {
    return deadline > 0 && ss__now() > deadline;
}

uint64_t ss__bootstrap_fixed_units(unsigned levels) {
    return levels <= 3
               ? SS__BOOT_UNITS_CLOSED
               : SS__BOOT_UNITS_PER_LEVEL2 * ((uint64_t)levels * levels + 16u);
}

/* The method that will run: auto is the likelihood when a run has per-shot
 * energies (ss_analysis_run). */
static int ss__runs_bootstrap(const ss_analysis_request *req) {
    ss_method m = req->method;
    if (m == SS_METHOD_AUTO) {
        m = SS_METHOD_MOMENTS;
        for (size_t r = 0; r < req->run_count; r++)
            if (req->runs[r].energies != NULL)
                m = SS_METHOD_LIKELIHOOD;
    }
    return m == SS_METHOD_MOMENTS;
}

/* The request's max_table_cells (0: the default's). */
static uint64_t ss__table_cap(const ss_analysis_request *req) {
    return ss__budget_or_default(&req->budget).max_table_cells;
}

ss_status ss__analysis_cost(const ss_analysis_request *req, ss__cost *out,
                            ss_error *err) {
    unsigned d = req->levels, nmax = 0;
    for (size_t r = 0; r < req->run_count; r++)
        nmax = req->runs[r].atoms > nmax ? req->runs[r].atoms : nmax;
    /* one table gives every run's counts: C_i(B) = diagrams with at most i
     * rows and size <= B, so cells(n, d) = C_{d−1}(n) (the Schur table of
     * ss_diagram_table_cells) and count(n, d) = C_d(n) − C_d(n − 1) */
    ss__rank_table t;
    if (ss__rank_table_init(&t, d, nmax) != SS_OK)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    ss__cost c = {0, ss__bootstrap_fixed_units(d), 0};
    size_t biggest = 0;
    uint64_t biggest_cells = 0;
    for (size_t r = 0; r < req->run_count; r++) {
        unsigned n = req->runs[r].atoms;
        uint64_t cells = ss__rank_cum(&t, d - 1, (long)n);
        uint64_t upto = ss__rank_cum(&t, d, (long)n);
        uint64_t count = upto == UINT64_MAX
                             ? UINT64_MAX /* saturated: beyond any budget */
                             : upto - ss__rank_cum(&t, d, (long)n - 1);
        c.table_cells = ss__sat_add(c.table_cells, cells);
        if (cells > biggest_cells) {
            biggest_cells = cells;
            biggest = r;
        }
        c.replicate_units = ss__sat_add(
            c.replicate_units, SS__BOOT_UNITS_PER_RUN +
                                   ss_diagram_content_levels_max(n, d, count));
    }
    ss__rank_table_release(&t);
    c.bootstrap = ss__runs_bootstrap(req) ? req->bootstrap : 0;

    /* every run's exact law once (candidates, likelihood), once more for
     * the bootstrap at the estimate */
    uint64_t phases = c.bootstrap > 0 ? 2 : 1;
    uint64_t cap = ss__table_cap(req);
    if (c.table_cells > cap / phases) {
        char field[48] = "runs";
        if (biggest_cells > cap / phases)
            snprintf(field, sizeof field, "runs[%zu].atoms", biggest);
        return ss_error_set(
            err, SS_EBUDGET, field,
            "at most %llu Schur-table cells for the exact laws of all runs "
            "together%s (work budget max_table_cells); got %s%llu",
            (unsigned long long)(cap / phases),
            phases > 1 ? ", half the budget with a bootstrap" : "",
            c.table_cells == UINT64_MAX ? "more than " : "",
            (unsigned long long)(c.table_cells -
                                 (c.table_cells == UINT64_MAX)));
    }
    /* bootstrap × units > max, without overflow */
    if (c.bootstrap > 0 && c.replicate_units > SS__BOOT_UNITS_MAX / c.bootstrap)
        return ss_error_set(
            err, SS_EBUDGET, "bootstrap",
            "at most %llu bootstrap replicates for these runs (%llu work units "
            "each, about 20 ns per unit; at most %llu per request); got %u",
            (unsigned long long)(SS__BOOT_UNITS_MAX / c.replicate_units),
            (unsigned long long)c.replicate_units,
            (unsigned long long)SS__BOOT_UNITS_MAX, c.bootstrap);
    *out = c;
    return SS_OK;
}

unsigned ss__bootstrap_auto(const ss__cost *c, const ss_analysis_request *req) {
    uint64_t afford = SS__BOOT_UNITS_MAX / c->replicate_units;
    if (c->table_cells > ss__table_cap(req) / 2 ||
        afford < SS__AUTO_BOOTSTRAP_MIN)
        return 0; /* the error bars stay those of the delta method */
    return afford < SS__AUTO_BOOTSTRAP ? (unsigned)afford : SS__AUTO_BOOTSTRAP;
}
