/*
 * sampler.c — simulated shots.  The shape of the RSK insertion tableau of a
 * word of n i.i.d. letters drawn from p has law P_n(λ|p) (Schur–Weyl; see
 * O'Donnell & Wright, STOC 2016, arXiv:1508.01907), so one shot costs one
 * word and its row insertions.  Only the shape matters, so each row is kept
 * as counts per letter: inserting letter a into a row bumps the smallest
 * letter b > a present there (O(d) per row, at most d rows).  Letters come
 * from GSL's Walker alias table (gsl_ran_discrete, O(1) per letter).
 *
 * Owns the ss_sampler (alias table and a per-shot scratch tableau); one
 * sampler and its gsl_rng belong to one thread at a time.
 */
#include "swapspec.h"

#include <gsl/gsl_randist.h>
#include <stdlib.h>
#include <string.h>

struct ss_sampler {
    unsigned levels;
    gsl_ran_discrete_t *letters;
    uint32_t count[SS_LEVELS_MAX][SS_LEVELS_MAX]; /* count[row][letter] */
};

ss_status ss_sampler_alloc(unsigned levels, const double *p, size_t len,
                           ss_sampler **out, ss_error *err) {
    double q[SS_LEVELS_MAX];
    ss_status st = ss_spectrum_validate(p, len, levels, q, err);
    if (st != SS_OK)
        return st;
    ss_sampler *s = calloc(1, sizeof *s);
    if (s == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    s->levels = levels;
    /* validated: finite, non-negative, summing to 1, so GSL cannot fail on
     * its arguments; only allocation can. */
    s->letters = gsl_ran_discrete_preproc(levels, q);
    if (s->letters == NULL) {
        free(s);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    *out = s;
    return SS_OK;
}

void ss_sampler_free(ss_sampler *s) {
    if (s == NULL)
        return;
    gsl_ran_discrete_free(s->letters);
    free(s);
}

ss_status ss_sampler_draw(ss_sampler *s, gsl_rng *rng, unsigned atoms,
                          uint32_t *rows_out, ss_error *err) {
    if (atoms < 1 || atoms > SS_ATOMS_MAX)
        return ss_error_set(err, SS_EINVAL, "atoms",
                            "atoms must be an integer from 1 to %d, got %u",
                            SS_ATOMS_MAX, atoms);
    unsigned d = s->levels;
    uint32_t len[SS_LEVELS_MAX] = {0};
    for (unsigned r = 0; r < d; r++)
        memset(s->count[r], 0, d * sizeof s->count[r][0]);
    for (unsigned k = 0; k < atoms; k++) {
        unsigned a = (unsigned)gsl_ran_discrete(rng, s->letters);
        for (unsigned r = 0; r < d; r++) {
            uint32_t *row = s->count[r];
            unsigned b = a + 1;
            while (b < d && row[b] == 0)
                b++;
            row[a]++;
            if (b == d) { /* nothing larger: the letter ends the row */
                len[r]++;
                break;
            }
            row[b]--; /* b is bumped into the next row */
            a = b;
        }
    }
    memcpy(rows_out, len, d * sizeof *rows_out);
    return SS_OK;
}

ss_status ss_sampler_shot(ss_sampler *s, gsl_rng *rng, unsigned atoms,
                          const ss_calibration *cal, uint32_t *rows_out,
                          double *energy_out, ss_error *err) {
    ss_status st = ss_sampler_draw(s, rng, atoms, rows_out, err);
    if (st != SS_OK)
        return st;
    double e = ss_calibration_energy(cal, atoms,
                                     ss_diagram_content(rows_out, s->levels));
    if (cal->noise_sd > 0.0)
        e += gsl_ran_gaussian_ziggurat(rng, cal->noise_sd);
    *energy_out = e;
    return SS_OK;
}
