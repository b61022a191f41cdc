/*
 * distribution_dp.h — the branching step of the Schur recursion, written
 * once and compiled for two number types by distribution.c: define
 * SS__DP_REAL (double or long double), SS__DP_LOG (log or logl),
 * SS__DP_NAME and SS__DP_FILL, then include.  See
 * distribution.c for the recursion and the rank order it runs in.
 */
/* Adds variable xm to the level whose table covers partitions with at most
 * M rows (the table already holds s at M variables for <= M−1 rows). */
static void SS__DP_NAME(SS__DP_REAL *t, const ss__rank_table *rt, unsigned M,
                        SS__DP_REAL e_prev, SS__DP_REAL xm, SS__DP_REAL *epow) {
    long atoms = (long)rt->atoms;
    ss__odometer o;
    /* 1. partitions with a_M >= 1: s_ν(x_1..x_M) = e^{a_M} s_{ν−a_M}. */
    epow[0] = 1; /* products of positives: relative error j·2^-64 */
    for (long j = 1; (long)M * j <= atoms; j++)
        epow[j] = epow[j - 1] * e_prev;
    ss__odometer_start(&o, M, atoms);
    uint64_t base = 0;
    do {
        long run = o.b[1];
        if (M == 1) {
            for (long a1 = 1; a1 <= run; a1++)
                t[a1] = epow[a1] * t[0];
        } else if (o.a[M] >= 1) {
            long src[SS_LEVELS_MAX + 1];
            memcpy(src, o.a, sizeof src);
            src[M] = 0;
            uint64_t sbase = ss__rank_of(rt, src, M - 1);
            SS__DP_REAL f = epow[o.a[M]];
            for (long a1 = 0; a1 <= run; a1++)
                t[base + (uint64_t)a1] = f * t[sbase + (uint64_t)a1];
        }
        base += (uint64_t)run + 1;
    } while (ss__odometer_next(&o));
    /* 2. horizontal strips for the new variable, one row at a time. */
    for (unsigned k = M; k >= 1; k--) {
        ss__odometer_start(&o, M, atoms);
        base = 0;
        do {
            long run = o.b[1];
            if (k == 1) {
                SS__DP_REAL *r = t + base;
                for (long a1 = 1; a1 <= run; a1++)
                    r[a1] += xm * r[a1 - 1];
            } else if (o.a[k] >= 1) {
                long nb[SS_LEVELS_MAX + 1];
                memcpy(nb, o.a, sizeof nb);
                nb[k]--;
                nb[k - 1]++;
                uint64_t nbase = ss__rank_of(rt, nb, M);
                /* for k == 2 the neighbour's a_1 is ours plus one; its rank
                 * already includes that one box through nb[1] = 1. */
                SS__DP_REAL *r = t + base;
                const SS__DP_REAL *s = t + nbase;
                for (long a1 = 0; a1 <= run; a1++)
                    r[a1] += xm * s[a1];
            }
            base += (uint64_t)run + 1;
        } while (ss__odometer_next(&o));
    }
}

/* Fills the probabilities of every diagram from the finished table t: log
 * P = log f^λ (row form of the hook length formula, from the log tables)
 * + n·log p_max + λ_r·log(x_1⋯x_r) + log s.  Accumulates ΣP and ΣP·c. */
static void SS__DP_FILL(ss_distribution *d, const SS__DP_REAL *t,
                        const ss__rank_table *rt, unsigned rank,
                        const long double *lfact, const long double *llog,
                        long double log_scale, long double log_e,
                        long double *total, long double *mean) {
    const ss_diagram_set *set = d->diagrams;
    unsigned levels = set->levels, M = rank - 1;
    for (size_t i = 0; i < set->count; i++) {
        const uint32_t *row = set->rows + i * levels;
        double lp = -HUGE_VAL;
        if (rank == levels || row[rank] == 0) {
            long a[SS_LEVELS_MAX + 1];
            for (unsigned j = 1; j < rank; j++)
                a[j] = (long)row[j - 1] - (long)row[j];
            SS__DP_REAL s = t[ss__rank_of(rt, a, M)];
            if (s > 0) {
                /* the logs sum in long double in both precisions, so that
                 * large terms that cancel (pure states) leave no trace */
                long double lf = lfact[set->atoms];
                for (unsigned j = 0; j < levels; j++) {
                    unsigned long lj = row[j] + (levels - 1u - j);
                    lf -= lfact[lj];
                    for (unsigned k = j + 1; k < levels; k++)
                        lf += llog[lj - (row[k] + (levels - 1u - k))];
                }
                lp = (double)(lf + log_scale +
                              (long double)row[rank - 1] * log_e +
                              (long double)SS__DP_LOG(s));
            }
        }
        d->log_probability[i] = lp;
        d->probability[i] = exp(lp);
        *total += d->probability[i];
        *mean += (long double)d->probability[i] * (long double)set->content[i];
    }
}
