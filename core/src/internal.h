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

/* *budget with each zero limit replaced by the default's; the defaults
 * when budget is NULL (diagram.c). */
ss_budget ss__budget_or_default(const ss_budget *budget);

typedef struct {
    unsigned rows;
    unsigned atoms;
    uint64_t *cum; /* (rows+1) x (atoms+1): cum[i*(atoms+1)+B] = C_i(B) */
} ss__rank_table;

/* Fills t (saturating at UINT64_MAX).  SS_ENOMEM on failure. */
ss_status ss__rank_table_init(ss__rank_table *t, unsigned rows, unsigned atoms);
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

/* The cost model of an analysis, estimated from the request alone before
 * any work (budget.c).
 *
 * Exact laws: every run's Schur table is built once (candidates, the
 * likelihood's start) and once more for a bootstrap at the estimate; the
 * cells of all runs together, twice with a bootstrap, must stay within
 * budget.max_table_cells (a table fills at about 150–300 ns per cell on the
 * 2-core reference machine, Release build: 1.2 s for (n, d) = (83, 9)).
 *
 * Bootstrap: one unit is about 20 ns, the cost of one content level of the
 * multinomial draw of one run (16–19 ns measured, Release, at (n, d) =
 * (10 000, 2) and (3461, 3)).  A replicate costs
 *     fixed(d) + Σ_runs (SS__BOOT_UNITS_PER_RUN + L(n_r, d)),
 * L = number of distinct contents ≤ min(diagrams, C(n,2) − c_min + 1)
 * (ss_diagram_content_levels_max), the
 * per-run part being the refit's Gauss–Newton steps and noise draws (0.2–5
 * µs measured with 1000 runs).  fixed(d) is the spectrum of the replicate's
 * moments: closed forms for d ≤ 3 (1.3–18 µs, but 212 µs at the uniform
 * d = 2 spectrum, where the point falls on the boundary), the maximum-
 * entropy solutions for d ≥ 4, measured worst over seven spectra (uniform,
 * linear, geometric 0.9/0.7/0.5, one level 3× and 30× the others) at 1.6,
 * 2.5, 4.2, 10 and 15 ms per replicate for d = 4, 6, 8, 12, 16, which
 * 3200·(d² + 16) units bounds.  Timed with CLOCK_PROCESS_CPUTIME_ID around
 * ss_analysis_run with and without the bootstrap.  A request over
 * SS__BOOT_UNITS_MAX (about 3 s) is refused with SS_EBUDGET naming
 * "bootstrap"; the automatic bootstrap of a singular fit draws what fits. */
#define SS__BOOT_UNITS_MAX 150000000ull
#define SS__BOOT_UNITS_CLOSED 12800ull
#define SS__BOOT_UNITS_PER_LEVEL2 3200ull
#define SS__BOOT_UNITS_PER_RUN 256ull
/* Replicates of the automatic bootstrap (a singular root map), and the
 * fewest worth drawing for a standard error (Efron & Tibshirani, An
 * Introduction to the Bootstrap, §6.4: 25 to 200 [from memory]). */
#define SS__AUTO_BOOTSTRAP 200u
#define SS__AUTO_BOOTSTRAP_MIN 25u
typedef struct {
    uint64_t table_cells;     /* Σ_runs cells(n_r, d), saturating */
    uint64_t replicate_units; /* one bootstrap replicate */
    unsigned bootstrap;       /* replicates the request will draw */
} ss__cost;
uint64_t ss__bootstrap_fixed_units(unsigned levels);
/* Estimates the cost of a validated request into *out; SS_EBUDGET naming
 * "runs" (or "runs[i].atoms" when one run alone is too big) or
 * "bootstrap", with the limit, when it is over; SS_ENOMEM. */
ss_status ss__analysis_cost(const ss_analysis_request *req, ss__cost *out,
                            ss_error *err);
/* Replicates the automatic bootstrap may draw: SS__AUTO_BOOTSTRAP, fewer
 * when the work budget allows fewer, 0 when it allows fewer than
 * SS__AUTO_BOOTSTRAP_MIN or the tables would not fit twice. */
unsigned ss__bootstrap_auto(const ss__cost *c, const ss_analysis_request *req);

/* qsort comparator: doubles in decreasing order (spectrum.c). */
int ss__cmp_double_desc(const void *a, const void *b);

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
                             const long double *lfact, const long double *llog);

/* Recomputes the probabilities of an existing distribution at a new
 * spectrum p (levels entries, validated).  The diagram set is kept; the
 * budget was checked when the distribution was made (the table only shrinks
 * when eigenvalues vanish). */
/* The exact laws for several atom numbers at one spectrum p (levels
 * values), from one Schur table built for the largest: outs[k] for
 * atoms[k].  Same errors as ss_distribution_compute (the budget is that of
 * the largest atom number); on failure nothing is allocated. */
ss_status ss__distribution_compute_many(const unsigned *atoms, size_t count,
                                        unsigned levels, const double *p,
                                        const ss_budget *budget,
                                        ss_distribution **outs, ss_error *err);
ss_status ss__distribution_update(ss_distribution *d, const double *p,
                                  ss_error *err);

/* moment_map.c — see its header paragraph. */
int ss__spectrum_from_moments(unsigned d, double p2, double p3, double *p);
int ss__spectrum_jacobian(unsigned d, const double *p, double *G);
size_t ss__moment_solutions(unsigned d, double p2, double p3, double *lo,
                            double *hi, double *maxent);
void ss__simplex_from_z(unsigned d, const double *z, double *p);
void ss__z_from_simplex(unsigned d, const double *p, double *z);
double ss__nearest_physical(unsigned d, const double theta[2],
                            const double W[4], int use_p3, double *p_star);
/* Maximum-entropy spectrum with Σp² = p2 only; returns solutions found. */
size_t ss__maxent_given_p2(unsigned d, double p2, double *maxent);
/* A physical spectrum for θ = (P2, P3): the roots for d <= 3, the maximum-
 * entropy spectrum for d >= 4 (or when P3 is unknown), the nearest physical
 * point (Euclidean metric) when θ is outside the region. */
void ss__point_spectrum(unsigned d, const double *theta, int use_p3, double *p);

/* content_moments.c — exact mean and central moments μ2, μ3, μ4 of the
 * content sum at spectrum p (closed form through P2..P5). */
void ss__content_moments(unsigned atoms, const double *p, unsigned levels,
                         double *mean, double central[3]);
/* The same in two steps, for many atom numbers at one spectrum: coef[k][m]
 * is the coefficient of C(n, m) in E[c^k] (the spectrum-dependent part,
 * computed once), then each atom number costs nine binomials. */
typedef struct {
    long double coef[5][9];
} ss__content_poly;
void ss__content_poly_init(ss__content_poly *cp, const double *p,
                           unsigned levels);
void ss__content_poly_moments(const ss__content_poly *cp, unsigned atoms,
                              double *mean, double central[3]);

/* moments.c — per-run statistics in content units and the GLS fit. */
typedef struct {
    unsigned atoms;
    size_t shots;
    double mean_energy, energy_variance; /* as measured, energy units */
    int per_shot;
    double y1;     /* mean content */
    double s2;     /* sample variance of the content readings */
    double y2;     /* s2 − tau2 */
    double tau2;   /* detection-noise variance in content units */
    double m3, m4; /* sample central moments (per-shot runs) */
    double cov[3]; /* Var y1, Cov(y1,y2), Var y2 used in the last fit */
} ss__run_stats;

typedef struct {
    int npar;        /* 1: P2 only (d = 2, or no run with n >= 3) */
    double theta[2]; /* P2, P3 (P3 NaN when undetermined) */
    double cov[4];   /* 2x2 covariance of theta */
    double chi2;
    int dof;
} ss__fit;

ss_status ss__moments_fit(unsigned d, ss__run_stats *rs, size_t R, ss__fit *fit,
                          ss_error *err);
/* Parametric bootstrap of the moment fit at p_hat: standard deviations of
 * the spectrum (sd_spectrum) and of P2 (sd_p2), and the percentile interval
 * at `confidence` of each eigenvalue (q_lo, q_hi). */
ss_status ss__moments_bootstrap(unsigned d, const ss__run_stats *rs, size_t R,
                                const double *p_hat, const ss__fit *fit,
                                unsigned replicates, uint64_t seed,
                                const ss_budget *budget, double confidence,
                                double *sd_spectrum, double *sd_p2,
                                double *q_lo, double *q_hi, ss_error *err);

/* likelihood.c — maximum likelihood from per-shot energies. */
typedef struct {
    double p[SS_LEVELS_MAX]; /* the maximiser, descending */
    double neg_log_likelihood;
    unsigned iterations;
    int boundary; /* smallest eigenvalue at the boundary (< 1e-7) */
    int covariance_ok;
    double covariance[SS_LEVELS_MAX * SS_LEVELS_MAX]; /* observed info */
    int crb_ok;
    double crb_stderr[SS_LEVELS_MAX];
    int fisher_rank;
    double fisher_condition;
    int profile_ok; /* profile-likelihood intervals computed (ties) */
    double profile_lower[SS_LEVELS_MAX], profile_upper[SS_LEVELS_MAX];
} ss__lik_result;

/* profile_z > 0: at a non-regular maximum (tie, singular information) also
 * compute profile-likelihood intervals with 2Δℓ <= profile_z². */
ss_status ss__likelihood_fit(unsigned d, const ss_calibration *cal,
                             const ss__run_stats *rs, const ss_run *runs,
                             size_t R, const ss_budget *budget,
                             const double *p_start, double profile_z,
                             ss__lik_result *out, ss_error *err);

/* candidates.c — diagrams behind one run's energies; naive λ/n. */
ss_status ss__run_candidates(unsigned d, const ss_calibration *cal,
                             const ss__run_stats *rs, double window,
                             const ss_distribution *dist,
                             const ss_diagram_set *set, ss_run_result *out,
                             double *naive, ss_error *err);

/* request.c — validation and conversion to content units. */
ss_status ss__request_validate(const ss_analysis_request *req, ss_error *err);
void ss__run_stats_fill(const ss_analysis_request *req, ss__run_stats *rs);

/* flags.c — flag construction (NULL when out of memory). */
ss_flag *ss__flag_add(ss_analysis *a, ss_flag_code code, int run,
                      const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
void ss__flag_number(ss_flag *f, const char *name, double value);

#endif
