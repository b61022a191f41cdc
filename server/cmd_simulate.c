/*
 * cmd_simulate.c — `swapspec simulate`: random shots from the model.
 *
 * Owns the simulate command: it seeds a Mersenne Twister (gsl_rng_mt19937)
 * with --seed, draws --shots shots with the core's RSK sampler
 * (ss_sampler_shot: a Young diagram and its noisy energy per shot), and
 * reports every reading with the run's sample mean and variance.  The same
 * seed and inputs always give the same output.
 */
#include <stdlib.h>

#include <gsl/gsl_rng.h>

#include "calibration_file.h"
#include "cli_json.h"
#include "commands.h"

enum {
    OPT_LEVELS,
    OPT_ATOMS,
    OPT_SPECTRUM,
    OPT_SHOTS,
    OPT_SEED,
    OPT_CALIBRATION,
    OPT_N
};

#define SIMULATE_MAX_SHOTS 1000000UL
/* Work cap of the command line: atoms drawn in one call (shots x atoms). */
#define SIMULATE_MAX_DRAWS 1000000000ULL
/* The cost model of one simulation, in units of about 4 ns on the 2-core
 * reference machine (Release build):
 *     work = shots x (atoms + 32) x (levels + 8).
 * An atom's row insertion visits at most `levels` rows: 21-29 ns per atom
 * at d = 2, 45 at d = 4, 48 at d = 8 and up to 93 at d = 16 (p_i ∝ 16 − i,
 * the slowest of seven spectra tried: uniform, linear, quadratic,
 * geometric 0.9/0.7/0.5, one level dominant; a loop over ss_sampler_draw
 * timed with CLOCK_PROCESS_CPUTIME_ID), that is 2.9-3.9 ns per unit of
 * atoms x (levels + 8).  Each shot's diagram and reading cost 1.2-4 µs more
 * to render (`swapspec simulate` with 1 to 64 atoms, 10^6 shots), which the
 * 32 extra atoms cover.  Over HTTP a request may do SIMULATE_SERVED_WORK
 * units (about 2 s), refused up front beyond that. */
#define SIMULATE_SERVED_WORK 500000000ULL
/* The deadline is looked at after about this many atoms drawn. */
#define SIMULATE_CLOCK_ATOMS 65536U

static const cli_option simulate_options[OPT_N] = {
    [OPT_LEVELS] = CLI_OPTION_LEVELS,
    [OPT_ATOMS] = CLI_OPTION_ATOMS,
    [OPT_SPECTRUM] = CLI_OPTION_SPECTRUM,
    [OPT_SHOTS] = {"shots", CLI_UINT, 1, "K", 1, SIMULATE_MAX_SHOTS, 0,
                   "number of simulated shots (1..1000000)"},
    [OPT_SEED] = {"seed", CLI_UINT, 0, "SEED", 0, 4294967295UL, 0,
                  "32-bit seed of the mt19937 generator (default 1)"},
    [OPT_CALIBRATION] = CLI_OPTION_CALIBRATION,
};

/* Sample mean and variance (K − 1 denominator), two passes in extended
 * precision.  *var_out is left alone when k < 2. */
static void simulate_moments(const double *x, size_t k, double *mean_out,
                             double *var_out) {
    long double sum = 0.0L, dev = 0.0L;
    for (size_t i = 0; i < k; i++)
        sum += x[i];
    long double mean = sum / (long double)k;
    for (size_t i = 0; i < k; i++)
        dev += ((long double)x[i] - mean) * ((long double)x[i] - mean);
    *mean_out = (double)mean;
    if (k >= 2)
        *var_out = (double)(dev / (long double)(k - 1));
}

static json_t *simulate_summary(const double *energies, size_t shots,
                                ss_error *err) {
    double mean = 0.0, var = 0.0;
    simulate_moments(energies, shots, &mean, &var);
    json_t *obj = json_object();
    if (obj == NULL)
        return NULL;
    cli_json_put_int(obj, "shots", (int64_t)shots, err);
    cli_json_put_real(obj, "mean_energy", mean, err);
    if (shots >= 2)
        cli_json_put_real(obj, "energy_variance", var, err);
    else
        cli_json_put(obj, "energy_variance", json_null(), err);
    return obj;
}

/* Draws the shots; energies has room for `shots` values.  Past the
 * budget's max_seconds (none when budget is NULL or sets none) it stops
 * with SS_EDEADLINE. */
static void simulate_draw(ss_sampler *sampler, gsl_rng *rng, unsigned atoms,
                          unsigned levels, const ss_calibration *cal,
                          size_t shots, const ss_budget *budget,
                          double *energies, json_t *diagrams, ss_error *err) {
    uint32_t rows[SS_LEVELS_MAX];
    double deadline = ss_budget_deadline(budget);
    size_t stride = atoms >= SIMULATE_CLOCK_ATOMS
                        ? 1
                        : SIMULATE_CLOCK_ATOMS / atoms; /* shots per look */
    for (size_t k = 0; k < shots && err->code == SS_OK; k++) {
        if (k % stride == 0 && ss_budget_expired(deadline)) {
            ss_error_set(err, SS_EDEADLINE, "max_seconds",
                         "the simulation did not finish %zu shots within "
                         "%.3g s (the request deadline); ask for fewer",
                         shots, budget->max_seconds);
            return;
        }
        if (ss_sampler_shot(sampler, rng, atoms, cal, rows, &energies[k],
                            err) != SS_OK)
            return;
        cli_json_append(diagrams, cli_json_diagram(rows, levels), err);
    }
}

/* The cost model above; served = the request came over HTTP (the service
 * passes its budget, the command line none). */
static ss_status simulate_check(const cli_value *v, int served, double *sorted,
                                ss_error *err) {
    unsigned long long shots = v[OPT_SHOTS].u, atoms = v[OPT_ATOMS].u;
    unsigned long long levels = v[OPT_LEVELS].u;
    unsigned long long per_shot = (atoms + 32) * (levels + 8);
    if (served && shots * per_shot > SIMULATE_SERVED_WORK)
        return ss_error_set(err, SS_EBUDGET, "shots",
                            "at most %llu shots of %llu atoms on %llu levels "
                            "per request (work budget: shots x (atoms + 32) "
                            "x (levels + 8) <= %llu units of about 4 ns); "
                            "got %llu",
                            SIMULATE_SERVED_WORK / per_shot, atoms, levels,
                            SIMULATE_SERVED_WORK, shots);
    if (shots * atoms > SIMULATE_MAX_DRAWS)
        return ss_error_set(err, SS_EBUDGET, "shots",
                            "shots x atoms = %llu exceeds the limit of %llu "
                            "simulated atoms per call; ask for fewer shots",
                            shots * atoms, SIMULATE_MAX_DRAWS);
    return ss_spectrum_validate(v[OPT_SPECTRUM].list, v[OPT_SPECTRUM].list_len,
                                (unsigned)levels, sorted, err);
}

static ss_status simulate_run(const cli_parsed *args, json_t **doc_out,
                              ss_error *err) {
    const cli_value *v = args->values;
    const char *cal_path =
        v[OPT_CALIBRATION].present ? v[OPT_CALIBRATION].text : NULL;
    const char *cal_source = "default";
    unsigned levels = (unsigned)v[OPT_LEVELS].u;
    unsigned atoms = (unsigned)v[OPT_ATOMS].u;
    size_t shots = (size_t)v[OPT_SHOTS].u;
    unsigned long seed = v[OPT_SEED].present ? v[OPT_SEED].u : 1UL;
    double sorted[SS_LEVELS_MAX];
    ss_calibration cal = ss_calibration_default();
    if (cli_calibration_resolve(args->calibration, cal_path, &cal, &cal_source,
                                err) != SS_OK ||
        ss_calibration_check_atoms(&cal, atoms, err) != SS_OK ||
        simulate_check(v, args->budget != NULL, sorted, err) != SS_OK)
        return err->code;
    ss_sampler *sampler = NULL;
    if (ss_sampler_alloc(levels, v[OPT_SPECTRUM].list, v[OPT_SPECTRUM].list_len,
                         &sampler, err) != SS_OK)
        return err->code;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    double *energies = malloc(shots * sizeof *energies);
    json_t *doc = json_object(), *diagrams = json_array();
    if (rng == NULL || energies == NULL || doc == NULL || diagrams == NULL)
        ss_error_set(err, SS_ENOMEM, "shots", "no memory for %zu shots", shots);
    if (err->code == SS_OK) {
        gsl_rng_set(rng, seed);
        simulate_draw(sampler, rng, atoms, levels, &cal, shots, args->budget,
                      energies, diagrams, err);
        cli_json_put_int(doc, "levels", levels, err);
        cli_json_put_int(doc, "atoms", atoms, err);
        cli_json_put(doc, "spectrum",
                     cli_json_reals(sorted, levels, "spectrum", err), err);
        cli_json_put_int(doc, "seed", (int64_t)seed, err);
        cli_json_put(doc, "calibration",
                     cli_json_calibration(&cal, cal_source, err), err);
        cli_json_put(doc, "energies",
                     cli_json_reals(energies, shots, "energies", err), err);
        cli_json_put(doc, "diagrams", diagrams, err);
        diagrams = NULL;
        if (err->code == SS_OK)
            cli_json_put(doc, "summary", simulate_summary(energies, shots, err),
                         err);
    }
    json_decref(diagrams);
    free(energies);
    gsl_rng_free(rng);
    ss_sampler_free(sampler);
    return cli_json_finish(doc, doc_out, err);
}

const cli_command cli_cmd_simulate = {
    "simulate",
    "random shots (diagram and noisy energy) from the model",
    "Simulated shots: for each shot a Young diagram drawn from the "
    "Schur-Weyl law (RSK shape of a random word) and its energy reading "
    "with detection noise, plus the run's sample mean and variance.",
    simulate_options,
    OPT_N,
    "The readings are random: the same --seed reproduces them exactly; "
    "energy_variance uses the K - 1 denominator (null for one shot).",
    simulate_run,
    NULL,
};
