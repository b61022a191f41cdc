/*
 * candidates.c — the Young diagrams behind a run's energies.
 *
 * For one run: every diagram whose energy lies within `window` standard
 * deviations of the run's mean energy, where the deviation is the spread of
 * the run (its sample standard deviation, which includes detection noise) or,
 * for a run without spread, the detection noise; with neither, only exact
 * matches count.  Listed by probability at the estimated spectrum (by |z|
 * without one), at most SS_CANDIDATES_MAX, with λ/n for each and the groups
 * that share a content (degenerate energies).  Also the naive reading: λ/n
 * of the diagram whose energy is nearest the mean.
 *
 * Owns the candidate array it hands to the ss_run_result.
 */
#include "internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct {
    size_t index;
    double z;
    double prob;
} ss__pick;

static int ss__cmp_pick(const void *pa, const void *pb) {
    const ss__pick *a = pa, *b = pb;
    if (a->prob != b->prob) /* NaN-free: prob is 0 without an estimate */
        return a->prob < b->prob ? 1 : -1;
    double za = fabs(a->z), zb = fabs(b->z);
    if (za != zb)
        return za < zb ? -1 : 1;
    return (a->index > b->index) - (a->index < b->index);
}

/* Keeps the first `keep` picks in comparator order (a strict total order,
 * so the result equals qsort followed by truncation) in O(count·keep)
 * instead of sorting every diagram in the window.  Returns the kept count. */
static size_t ss__top_picks(ss__pick *picks, size_t count, size_t keep) {
    size_t kept = 0;
    for (size_t i = 0; i < count; i++) {
        ss__pick p = picks[i];
        if (kept == keep && ss__cmp_pick(&p, &picks[kept - 1]) >= 0)
            continue;
        size_t j = kept < keep ? kept++ : kept - 1;
        while (j > 0 && ss__cmp_pick(&p, &picks[j - 1]) < 0) {
            picks[j] = picks[j - 1];
            j--;
        }
        picks[j] = p;
    }
    return kept;
}

ss_status ss__run_candidates(unsigned d, const ss_calibration *cal,
                             const ss__run_stats *rs, double window,
                             const ss_distribution *dist,
                             const ss_diagram_set *set, ss_run_result *out,
                             double *naive, ss_error *err) {
    size_t n = set->count;
    unsigned atoms = set->atoms;
    double sd = sqrt(fmax(rs->energy_variance, 0.0));
    if (!(sd > 0))
        sd = cal->noise_sd;
    double mean = rs->mean_energy;
    double tol = 1e-9 * fmax(1.0, fabs(mean));
    ss__pick *picks = malloc((n ? n : 1) * sizeof *picks);
    if (picks == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    size_t count = 0, nearest = 0;
    double best_gap = HUGE_VAL;
    /* E(λ) = E(content 0) + J·c(λ), the same sum ss_calibration_energy
     * forms, hoisted out of the loop */
    double e0 = ss_calibration_energy(cal, atoms, 0);
    for (size_t i = 0; i < n; i++) {
        double e = e0 + cal->exchange * (double)set->content[i];
        double gap = fabs(e - mean);
        double prob = dist ? dist->probability[i] : 0.0;
        if (gap < best_gap - tol || (fabs(gap - best_gap) <= tol && dist &&
                                     prob > dist->probability[nearest])) {
            best_gap = gap;
            nearest = i;
        }
        double z = sd > 0 ? (e - mean) / sd : (gap <= tol ? 0.0 : HUGE_VAL);
        if (fabs(z) <= window)
            picks[count++] = (ss__pick){i, z, prob};
    }
    out->window_count = count;
    out->window_sd = sd;
    if (count == 0) { /* nothing in the window: list the nearest energy */
        double en = ss_calibration_energy(cal, atoms, set->content[nearest]);
        for (size_t i = 0; i < n; i++)
            if (set->content[i] == set->content[nearest])
                picks[count++] =
                    (ss__pick){i, sd > 0 ? (en - mean) / sd : HUGE_VAL,
                               dist ? dist->probability[i] : 0.0};
    }
    count = ss__top_picks(picks, count, SS_CANDIDATES_MAX);
    out->candidates = calloc(count ? count : 1, sizeof *out->candidates);
    if (out->candidates == NULL) {
        free(picks);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    out->candidate_count = count;
    for (size_t k = 0; k < count; k++) {
        ss_candidate *c = &out->candidates[k];
        const uint32_t *row = set->rows + picks[k].index * d;
        memcpy(c->rows, row, d * sizeof *row);
        c->content = set->content[picks[k].index];
        c->energy = ss_calibration_energy(cal, atoms, c->content);
        c->z = isfinite(picks[k].z) ? picks[k].z : nan("");
        c->probability = dist ? picks[k].prob : nan("");
        for (unsigned i = 0; i < d; i++)
            c->spectrum_estimate[i] = (double)row[i] / atoms;
    }
    /* groups of listed candidates sharing a content */
    unsigned groups = 0;
    for (size_t a = 0; a < count; a++) {
        if (out->candidates[a].degenerate_group)
            continue;
        int shared = 0;
        for (size_t b = a + 1; b < count; b++)
            if (out->candidates[b].content == out->candidates[a].content) {
                if (!shared)
                    groups++;
                shared = 1;
                out->candidates[b].degenerate_group = groups;
            }
        if (shared)
            out->candidates[a].degenerate_group = groups;
    }
    out->degenerate_group_count = groups;
    for (unsigned i = 0; i < d; i++)
        naive[i] = (double)set->rows[nearest * d + i] / atoms;
    free(picks);
    return SS_OK;
}
