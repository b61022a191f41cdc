/*
 * swapspec.h — the one public header of the swapspec numerical core.
 *
 * The core turns a single-atom spectrum p (d levels) into the exact law of the
 * interaction-energy readout of n atoms in a box trap, and (later) back again.
 * Everything the daemon and the command line use from core/ is declared here;
 * nothing else under core/ may be included from outside it.
 *
 * Conventions (after GSL and jansson):
 *  - names read ss_<module>_<object>_<verb>; heap objects come in _alloc/_free
 *    (or _compute/_free) pairs and every _free accepts NULL;
 *  - functions return an ss_status; on failure they fill the caller-owned
 *    ss_error (first error wins) with the offending field and a sentence;
 *  - outputs come last, as pointers; nothing is written there on failure;
 *  - no I/O, no global mutable state: every function is thread-safe as long as
 *    each thread uses its own objects (an ss_sampler and its gsl_rng belong to
 *    one thread at a time);
 *  - the core never lets GSL's default abort-on-error handler fire: arguments
 *    are validated before any GSL call.  Programs linking the core should still
 *    call gsl_set_error_handler_off() once at start-up.
 */
#ifndef SWAPSPEC_H
#define SWAPSPEC_H

#include <stddef.h>
#include <stdint.h>

#include <gsl/gsl_rng.h>

#ifdef __cplusplus
extern "C" {
#endif

/* ------------------------------------------------------------------------ */
/* Status table: one row per outcome, shared by the core and the HTTP server.
 * X(ENUM, name, HTTP status, message)                                      */
#define SS_STATUS_MAP(X)                                                       \
    X(SS_OK, "ok", 200, "success")                                             \
    X(SS_EINVAL, "invalid-argument", 422, "a field has an invalid value")      \
    X(SS_EBUDGET, "work-budget-exceeded", 422,                                 \
      "the request exceeds the configured work budget")                        \
    X(SS_ERANGE, "numeric-range", 422,                                         \
      "the result would leave the representable floating-point range")         \
    X(SS_ENOMEM, "out-of-memory", 503, "memory could not be allocated")        \
    X(SS_EMALFORMED, "malformed-input", 400, "the input could not be parsed")  \
    X(SS_ENOTFOUND, "not-found", 404, "no such resource")                      \
    X(SS_EINTERNAL, "internal-error", 500, "an internal computation failed")   \
    X(SS_EUNAUTHORIZED, "unauthorized", 401,                                   \
      "a valid bearer token is required")                                      \
    X(SS_EFORBIDDEN, "forbidden", 403,                                         \
      "the token's role does not allow this request")                          \
    X(SS_EMETHOD, "method-not-allowed", 405,                                   \
      "the route does not support this method")                                \
    X(SS_ECONFLICT, "conflict", 409,                                           \
      "a request with this Idempotency-Key is still being processed")          \
    X(SS_ETOOLARGE, "content-too-large", 413,                                  \
      "the request body exceeds the size limit")                               \
    X(SS_EMEDIATYPE, "unsupported-media-type", 415,                            \
      "the request body must be application/json")                             \
    X(SS_EIDEMPOTENCY, "idempotency-key-reused", 422,                          \
      "this Idempotency-Key was used with a different request body")           \
    X(SS_EBUSY, "store-busy", 503,                                             \
      "the store is busy; retry after the indicated delay")                    \
    X(SS_ESTORE, "store-unavailable", 503,                                     \
      "the store could not complete the operation")                            \
    X(SS_ESTOREFULL, "insufficient-storage", 507,                              \
      "the store has no space left")                                           \
    X(SS_EUNAVAILABLE, "unavailable", 503,                                     \
      "the service is shutting down or overloaded")                            \
    X(SS_EDEADLINE, "deadline-exceeded", 503,                                  \
      "the computation did not finish within the request deadline")

typedef enum {
#define SS_X_ENUM(e, name, http, msg) e,
    SS_STATUS_MAP(SS_X_ENUM)
#undef SS_X_ENUM
        SS_STATUS_COUNT
} ss_status;

/* Stable short name ("invalid-argument"); "unknown" for out-of-range codes. */
const char *ss_status_name(ss_status code);
/* Generic one-line message for the code. */
const char *ss_status_message(ss_status code);
/* HTTP status the server maps the code to (500 for unknown codes). */
int ss_status_http(ss_status code);

/* Caller-owned error record.  The first error reported is kept; later ones
 * are ignored until ss_error_clear().  field is a JSON-pointer-like path
 * ("spectrum[2]", "runs[1].energy_variance") or "" when no field applies. */
typedef struct {
    ss_status code;
    char field[96];
    char message[320];
} ss_error;

void ss_error_clear(ss_error *err);
/* Records (code, field, printf-style message) unless err is NULL or already
 * holds an error.  Returns code, so callers can `return ss_error_set(...)`. */
ss_status ss_error_set(ss_error *err, ss_status code, const char *field,
                       const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* ------------------------------------------------------------------------ */
/* Limits and work budget.                                                   */
#define SS_LEVELS_MIN 2
#define SS_LEVELS_MAX 16
#define SS_ATOMS_MAX 100000

/* How much work one call may do.  Counts are taken before anything is
 * enumerated, so an over-budget call fails fast with SS_EBUDGET naming the
 * limit.  max_diagrams bounds the number of Young diagrams produced;
 * max_table_cells bounds the cells of the Schur-polynomial table (the memory
 * driver: 16 bytes per cell, two tables alive at once); for an analysis,
 * the cells of all its runs' tables together, twice with a bootstrap.
 * A limit of 0 (max_diagrams, max_table_cells, max_work) means the
 * default's, so a zeroed budget behaves as ss_budget_default(). */
typedef struct {
    uint64_t max_diagrams;
    uint64_t max_table_cells;
    /* Bounds the iterative fits whose cost is not known up front: the
     * likelihood counts, per evaluation of its objective, d² per table cell
     * and d per diagram of every exact law it recomputes plus shots ×
     * levels of its kernels, and stops with SS_EBUDGET (field "max_work")
     * once the sum passes this; method auto then stays with the moments.
     * Deterministic (no clock): the same request always gets the same
     * answer.  0 = the default. */
    uint64_t max_work;
    /* Wall-clock limit (seconds, CLOCK_MONOTONIC) of each iterative phase
     * — the likelihood fit, the bootstrap — for a machine slower or busier
     * than max_work assumes: past it SS_EDEADLINE (field "max_seconds");
     * method auto then stays with the moments.  0 = none. */
    double max_seconds;
} ss_budget;

/* The default: 8 000 000 diagrams, 64 000 000 table cells (about 1.3 GiB
 * at peak for the largest admitted problem, (n, d) = (100, 10)) and
 * 30 000 000 000 work units (a unit costs about 2.3 ns on the 2-core
 * reference machine, at d = 6 and d = 16 alike: about 70 s; the
 * (n, d) = (20, 6) fit of 10 000 shots uses about 8·10^8). */
#define SS_BUDGET_WORK_DEFAULT 30000000000ull
ss_budget ss_budget_default(void);

/* The deadline of a phase that starts now: max_seconds from now on
 * CLOCK_MONOTONIC (which no change of the wall clock moves), or 0 when
 * budget is NULL or sets none.  ss_budget_expired tells whether such a
 * deadline has passed (never for 0). */
double ss_budget_deadline(const ss_budget *budget);
int ss_budget_expired(double deadline);

/* ------------------------------------------------------------------------ */
/* Young diagrams (module diagram).  A diagram with at most d rows is stored as
 * d row lengths, non-increasing, zero-padded: (4,1,1) with d = 3 is {4,1,1},
 * (3,3) with d = 3 is {3,3,0}.                                              */

/* Number of partitions of atoms into at most levels parts (OEIS A026820),
 * saturating at UINT64_MAX.  Cheap: O(atoms * levels). */
uint64_t ss_diagram_count(unsigned atoms, unsigned levels);

/* Cells of the Schur table ss_distribution_compute would need for (atoms,
 * levels), saturating at UINT64_MAX. */
uint64_t ss_diagram_table_cells(unsigned atoms, unsigned levels);

/* Content sum c(λ) = Σ_boxes (column − row) of rows[0..levels-1]. */
int64_t ss_diagram_content(const uint32_t *rows, unsigned levels);
/* The smallest content sum of a diagram of atoms boxes with at most levels
 * rows: that of the most balanced one (rows of q + 1 boxes, then rows of
 * q), because moving a box down to a shorter row lowers the content.  The
 * contents of such diagrams lie in [this, C(atoms, 2)]. */
int64_t ss_diagram_content_min(unsigned atoms, unsigned levels);
/* At most how many distinct content sums (so energy levels) the diagrams
 * of atoms boxes with at most levels rows have: the width of that range,
 * C(atoms, 2) − ss_diagram_content_min + 1, and no more than `diagrams`,
 * their number (ss_diagram_count, passed in by callers that have it). */
uint64_t ss_diagram_content_levels_max(unsigned atoms, unsigned levels,
                                       uint64_t diagrams);

/* log f^λ, the log of the number of standard Young tableaux (hook length
 * formula in its row form).  rows must be a valid diagram. */
double ss_diagram_log_tableaux(const uint32_t *rows, unsigned levels);

/* log dim of the GL(dim) irrep λ (hook-content / Weyl formula); -INFINITY
 * when λ has more than dim non-zero rows. */
double ss_diagram_log_dimension(const uint32_t *rows, unsigned levels,
                                unsigned dim);

/* 1 if rows[0..levels-1] is a non-increasing sequence summing to atoms. */
int ss_diagram_is_valid(const uint32_t *rows, unsigned levels, unsigned atoms);

/* An enumerated set of diagrams λ ⊢ atoms with at most levels rows, in
 * reverse lexicographic order ((n) first). */
typedef struct {
    unsigned atoms;
    unsigned levels;
    size_t count;
    uint32_t *rows;   /* count * levels entries, diagram i at rows + i*levels */
    int64_t *content; /* count entries */
} ss_diagram_set;

/* Enumerates iteratively.  SS_EINVAL for levels outside [2,16] or atoms
 * outside [1, SS_ATOMS_MAX]; SS_EBUDGET when the count exceeds
 * budget->max_diagrams (budget NULL = default); SS_ENOMEM. */
ss_status ss_diagram_set_alloc(unsigned atoms, unsigned levels,
                               const ss_budget *budget, ss_diagram_set **out,
                               ss_error *err);
void ss_diagram_set_free(ss_diagram_set *set);

/* ------------------------------------------------------------------------ */
/* Calibration and energy (module calib).                                    */
typedef struct {
    double offset;     /* E0 */
    double pair_shift; /* V, per pair of atoms */
    double exchange;   /* J, multiplies the content sum; non-zero */
    double noise_sd;   /* σ of the detection noise, >= 0 */
    /* Measured spread of the pair couplings: the standard deviation of
     * J_ij / J over the pairs (dimensionless, >= 0; 0 = uniform or not
     * measured).  The energy model assumes equal couplings; a spread breaks
     * the permutation symmetry and mixes diagrams (flag symmetry-caution). */
    double coupling_spread;
    char unit[16]; /* free-form unit label, e.g. "Hz" */
} ss_calibration;

/* offset 0, pair_shift 0, exchange 1, noise_sd 0, unit "" (energies in units
 * of J, so an energy reading equals a content sum). */
ss_calibration ss_calibration_default(void);

/* SS_EINVAL naming the field: non-finite values, exchange == 0,
 * noise_sd < 0, coupling_spread < 0, unit not NUL-terminated. */
ss_status ss_calibration_validate(const ss_calibration *cal, ss_error *err);

/* SS_EINVAL naming "calibration" when, for this many atoms, the energies
 * E(λ) (contents within ±C(n,2)) plus 40 noise standard deviations leave
 * the range of doubles (e.g. pair_shift 1e308 with 8 atoms). */
ss_status ss_calibration_check_atoms(const ss_calibration *cal, unsigned atoms,
                                     ss_error *err);

/* E(λ) = offset + pair_shift·C(n,2) + exchange·content. */
double ss_calibration_energy(const ss_calibration *cal, unsigned atoms,
                             int64_t content);

/* The content an energy corresponds to: (E − offset − pair_shift·C(n,2)) / J,
 * as a real number (not rounded). */
double ss_calibration_content(const ss_calibration *cal, unsigned atoms,
                              double energy);

/* ------------------------------------------------------------------------ */
/* Spectra (module spectrum).                                                */

/* Largest allowed |Σp − 1|. */
#define SS_SPECTRUM_SUM_TOL 1e-9

/* Checks that p has exactly `levels` entries (len must equal levels), all
 * finite and >= 0, summing to 1 within SS_SPECTRUM_SUM_TOL (the message says
 * by how much it is off).  On success writes the entries sorted in
 * decreasing order to sorted_out (levels doubles; may alias p). */
ss_status ss_spectrum_validate(const double *p, size_t len, unsigned levels,
                               double *sorted_out, ss_error *err);

/* Power sum P_k = Σ p_i^k. */
double ss_spectrum_power_sum(const double *p, unsigned levels, unsigned k);

/* Closed forms for the content sum of λ drawn from P_n(·|p), in terms of
 * P2 = Σp², P3 = Σp³ (domain notes §2; exact identities):
 *   E[c]   = C(n,2)·P2
 *   Var[c] = C(n,2)·[1 + 2(n−2)·P3 + C(n−2,2)·P2²] − C(n,2)²·P2²        */
double ss_content_mean(unsigned atoms, double p2);
double ss_content_variance(unsigned atoms, double p2, double p3);

/* Exact mean and central moments μ2, μ3, μ4 of the content sum under
 * P_n(·|p) (out[0..3]), in closed form through P2..P5: the class sum of
 * transpositions acts as c(λ) on each irrep, so E[c^k] expands over
 * products of k transpositions (table generated by core/gen/).  Validates p
 * like ss_spectrum_validate. */
ss_status ss_content_moments(unsigned atoms, const double *p, size_t len,
                             unsigned levels, double out[4], ss_error *err);

/* ------------------------------------------------------------------------ */
/* The Schur–Weyl distribution (module distribution).                        */

/* P_n(λ|p) = f^λ s_λ(p) for every λ ⊢ n with at most d rows, computed with a
 * subtraction-free branching recursion over Gelfand–Tsetlin patterns in
 * extended precision (relative error far below 1e-9 for every λ, including
 * repeated, zero and nearly equal eigenvalues). */
typedef struct {
    ss_diagram_set *diagrams; /* owned */
    double *probability;      /* diagrams->count entries, sum 1 ± 1e-12 */
    double *log_probability;  /* natural log; -INFINITY where P is exactly 0
                                 (more rows than non-zero eigenvalues), and
                                 finite where P underflows to 0 in double */
    double spectrum[SS_LEVELS_MAX]; /* the input, sorted, first `levels` */
    double mean_content;            /* Σ P·c from the table */
    double content_variance;        /* Σ P·(c − mean)² from the table */
    double total;                   /* Σ P (a check: 1 within 1e-10) */
} ss_distribution;

/* Validates p (see ss_spectrum_validate: len must equal levels), checks the
 * budget (SS_EBUDGET naming max_diagrams or max_table_cells), and fills the
 * table.  The table needs ss_diagram_table_cells(atoms, r) cells, r the
 * number of non-zero eigenvalues (zero eigenvalues drop out).  SS_ERANGE
 * when n·ln(r·p_max) > 10000 (then the probabilities span more than
 * extended precision holds; f^λ <= r^n bounds the span).
 * budget NULL = default.  Free with ss_distribution_free. */
ss_status ss_distribution_compute(unsigned atoms, unsigned levels,
                                  const double *p, size_t len,
                                  const ss_budget *budget,
                                  ss_distribution **out, ss_error *err);
void ss_distribution_free(ss_distribution *dist);

/* Indices of the diagrams sorted by decreasing probability (ties: table
 * order).  Caller frees the returned array with free(); NULL on ENOMEM. */
size_t *ss_distribution_order_by_probability(const ss_distribution *dist);

/* ------------------------------------------------------------------------ */
/* Energy levels: diagrams grouped by content (module levels).               */
typedef struct {
    size_t count;        /* number of distinct content values */
    int64_t *content;    /* count entries, increasing */
    double *probability; /* count entries (0 when built from a bare set) */
    size_t *first;       /* count+1 offsets into members */
    size_t *members;     /* diagram indices, grouped by content; within a
                            group by decreasing probability (or table
                            order for a bare set) */
} ss_levels;

/* Groups a diagram set (probabilities NULL) or a distribution's diagrams
 * (probabilities = dist->probability) by content.  SS_ENOMEM on failure. */
ss_status ss_levels_alloc(const ss_diagram_set *set, const double *probability,
                          ss_levels **out, ss_error *err);
void ss_levels_free(ss_levels *levels);

/* ------------------------------------------------------------------------ */
/* Simulated shots (module sampler): the RSK shape of an i.i.d. word of n
 * letters drawn from p has law P_n(·|p) (O'Donnell & Wright, STOC 2016). */
typedef struct ss_sampler ss_sampler;

/* Validates p (len must equal levels) and builds the letter table.  */
ss_status ss_sampler_alloc(unsigned levels, const double *p, size_t len,
                           ss_sampler **out, ss_error *err);
void ss_sampler_free(ss_sampler *s);

/* Draws one shot of `atoms` atoms with rng and writes the RSK shape to
 * rows_out (levels entries, zero-padded).  SS_EINVAL if atoms is 0 or above
 * SS_ATOMS_MAX. */
ss_status ss_sampler_draw(ss_sampler *s, gsl_rng *rng, unsigned atoms,
                          uint32_t *rows_out, ss_error *err);

/* One simulated shot: draws a shape as ss_sampler_draw does and writes its
 * energy E(λ) under cal plus Gaussian detection noise of sd cal->noise_sd
 * (no noise draw when noise_sd is 0) to energy_out. */
ss_status ss_sampler_shot(ss_sampler *s, gsl_rng *rng, unsigned atoms,
                          const ss_calibration *cal, uint32_t *rows_out,
                          double *energy_out, ss_error *err);

/* ------------------------------------------------------------------------ */
/* Inversion: measured energies to spectra (module analysis and friends).    */

#define SS_RUNS_MAX 1000       /* runs in one request */
#define SS_SHOTS_MAX 1000000   /* shots in one run (and in a request) */
#define SS_BOOTSTRAP_MAX 10000 /* bootstrap replicates */
#define SS_CANDIDATES_MAX 16   /* candidates listed per run */

typedef enum {
    SS_METHOD_AUTO,
    SS_METHOD_MOMENTS,
    SS_METHOD_LIKELIHOOD,
    SS_METHOD_DIAGRAMS
} ss_method;

/* "auto", "moments", "likelihood", "diagrams". */
const char *ss_method_name(ss_method m);
/* SS_OK and *out set when name is one of the four names; SS_EINVAL else. */
ss_status ss_method_parse(const char *name, ss_method *out);

/* One run: shots of `atoms` atoms.  Either a summary (shots, mean_energy,
 * energy_variance with the K−1 denominator; energies NULL) or per-shot
 * readings (energies, energy_count; shots/mean/variance are then derived
 * and the given values ignored). */
typedef struct {
    unsigned atoms;
    size_t shots;
    double mean_energy;
    double energy_variance;
    const double *energies;
    size_t energy_count;
} ss_run;

typedef struct {
    unsigned levels;
    ss_calibration calibration;
    const ss_run *runs;
    size_t run_count;
    ss_method method;
    double confidence;  /* in (0,1); default 0.95 */
    unsigned bootstrap; /* parametric bootstrap replicates; 0 = none */
    uint64_t seed;      /* for the bootstrap; default 1 */
    double window;      /* candidate window in standard deviations (3) */
    ss_budget budget;
} ss_analysis_request;

ss_analysis_request ss_analysis_request_default(void);

/* Flags: stable codes for what the data cannot decide. */
#define SS_FLAG_MAP(X)                                                         \
    X(SS_FLAG_DEGENERATE_ENERGY, "degenerate-energy")                          \
    X(SS_FLAG_UNDERDETERMINED, "underdetermined")                              \
    X(SS_FLAG_OUTSIDE_PHYSICAL, "outside-physical-region")                     \
    X(SS_FLAG_NOISE_DOMINATED, "noise-dominated")                              \
    X(SS_FLAG_FEW_SHOTS, "few-shots")                                          \
    X(SS_FLAG_ILL_CONDITIONED, "ill-conditioned")                              \
    X(SS_FLAG_SYMMETRY_CAUTION, "symmetry-caution")

typedef enum {
#define SS_X_FLAG(e, name) e,
    SS_FLAG_MAP(SS_X_FLAG)
#undef SS_X_FLAG
        SS_FLAG_COUNT
} ss_flag_code;

const char *ss_flag_name(ss_flag_code code);

#define SS_FLAG_NUMBERS_MAX 8
typedef struct {
    ss_flag_code code;
    int run; /* index of the run concerned, -1 for all */
    char message[480];
    unsigned number_count; /* the numbers that justify the flag */
    struct {
        char name[32];
        double value;
    } numbers[SS_FLAG_NUMBERS_MAX];
} ss_flag;

/* How the intervals [lower, upper] of a spectrum were made. */
typedef enum {
    SS_INTERVAL_DELTA,     /* value ± z·stderr, delta method (or observed
                              information for the likelihood) */
    SS_INTERVAL_BOOTSTRAP, /* percentile interval of a parametric bootstrap
                              (used where the delta method breaks down:
                              nearly equal eigenvalues) */
    SS_INTERVAL_REGION,    /* range over all spectra whose power sums lie in
                              the confidence region (underdetermined) */
    SS_INTERVAL_PROFILE    /* profile-likelihood interval (likelihood at a
                              non-regular point) */
} ss_interval_kind;

/* "delta-method", "bootstrap-percentile", "confidence-region",
 * "profile-likelihood". */
const char *ss_interval_name(ss_interval_kind k);

typedef struct {
    uint32_t rows[SS_LEVELS_MAX];
    int64_t content;
    double energy;
    double z;           /* (energy − reading) / window sd */
    double probability; /* P_n(λ | estimate); NaN when no estimate */
    double spectrum_estimate[SS_LEVELS_MAX]; /* λ/n */
    unsigned degenerate_group; /* 0: alone; k >= 1: shares its content with
                                  the other candidates of group k */
} ss_candidate;

typedef struct {
    unsigned atoms;
    size_t shots;
    double mean_energy;
    double energy_variance;
    double window_sd;         /* sd used for z */
    size_t window_count;      /* diagrams inside the window (the list holds
                                 at most SS_CANDIDATES_MAX of them) */
    ss_candidate *candidates; /* by |z|, then probability */
    size_t candidate_count;
    unsigned degenerate_group_count;
} ss_run_result;

typedef struct {
    unsigned levels;
    ss_method method; /* the method actually used (never auto) */
    double confidence;
    int has_spectrum;             /* 0 for method diagrams */
    int spectrum_is_max_entropy;  /* point estimate is the max-entropy
                                     spectrum with the measured P2, P3 */
    ss_interval_kind interval;    /* how lower/upper were made */
    double values[SS_LEVELS_MAX]; /* descending */
    double stderr_[SS_LEVELS_MAX];
    double lower[SS_LEVELS_MAX];
    double upper[SS_LEVELS_MAX];
    double covariance[SS_LEVELS_MAX * SS_LEVELS_MAX]; /* levels x levels */
    double p2, p2_stderr, p3, p3_stderr, p2_p3_covariance;
    int p3_determined; /* 0 when no run has atoms >= 3 */
    int has_feasible_ranges;
    double feasible_lower[SS_LEVELS_MAX];
    double feasible_upper[SS_LEVELS_MAX];
    int has_naive;
    double naive[SS_LEVELS_MAX];
    ss_flag *flags;
    size_t flag_count;
    ss_run_result *runs;
    size_t run_count;
    struct {
        double chi2;
        int dof;
        double p_value;        /* NaN when dof <= 0 */
        double distance_se;    /* Mahalanobis distance to the physical
                                  region in standard errors (0 inside) */
        double log_likelihood; /* likelihood method only, else NaN */
        unsigned iterations;
        int fisher_rank; /* likelihood: rank of the Fisher matrix */
        double fisher_condition;
        double cramer_rao_stderr[SS_LEVELS_MAX]; /* likelihood: CRB sd */
        unsigned bootstrap_replicates;
        double bootstrap_stderr[SS_LEVELS_MAX];
        double bootstrap_p2_stderr;
    } diagnostics;
} ss_analysis;

/* Validates the request (every field error names its path, e.g.
 * "runs[2].energy_variance"), checks the budget, runs the method and fills a
 * new ss_analysis.  Free with ss_analysis_free. */
ss_status ss_analysis_run(const ss_analysis_request *req, ss_analysis **out,
                          ss_error *err);
void ss_analysis_free(ss_analysis *a);

#ifdef __cplusplus
}
#endif

#endif /* SWAPSPEC_H */
