/*
 * svg_model.h — an analysis as the pages and figures read it: the stored
 * request and result documents (api_request.h, api_render.c,
 * analysis_exec.h) turned into plain C values once, and the model's
 * predicted law of the energy readings at the estimate, per atom number.
 *
 * Reading is tolerant: a member that is missing or of the wrong type
 * counts as absent (older records lack the calibration echo, a method
 * without a spectrum has no "spectrum"), numbers stored as null read as NaN
 * and are shown as "n/a".  Only what the pages show is read.
 */
#ifndef SWAPSPEC_SVG_MODEL_H
#define SWAPSPEC_SVG_MODEL_H

#include <jansson.h>
#include <stddef.h>
#include <stdint.h>

#include "swapspec.h"

typedef struct {
    uint32_t rows[SS_LEVELS_MAX]; /* zero-padded */
    int64_t content;
    double energy, z;
    double probability; /* P_n(λ | estimate); NaN without an estimate */
    unsigned group;     /* 0: alone; k >= 1: degenerate group k of its run */
} svg_candidate;

typedef struct {
    unsigned atoms;
    size_t shots;
    double mean_energy, energy_variance, window_sd;
    size_t window_count;
    double *energies; /* the per-shot readings (owned), NULL for a summary */
    size_t energy_count;
    svg_candidate *candidates; /* owned */
    size_t candidate_count;
    unsigned group_count;
} svg_run;

typedef struct {
    char code[32];
    char message[480];
    int run; /* -1 for all runs */
} svg_flag;

typedef struct {
    unsigned levels;
    char method[16];
    double confidence;
    int has_spectrum;
    char interval[32]; /* delta-method, bootstrap-percentile, ... */
    char estimate[32]; /* moments, maximum-likelihood, maximum-entropy */
    double values[SS_LEVELS_MAX], stderr_[SS_LEVELS_MAX];
    double lower[SS_LEVELS_MAX], upper[SS_LEVELS_MAX];
    double purity, purity_stderr;
    int has_feasible;
    double feasible_lower[SS_LEVELS_MAX], feasible_upper[SS_LEVELS_MAX];
    int has_naive;
    double naive[SS_LEVELS_MAX];
    /* the calibration the result was computed with */
    ss_calibration cal;
    char cal_source[16]; /* "request", "default", "ref", "" = not recorded */
    char cal_name[72];   /* source "ref" */
    unsigned cal_version;
    char cal_valid_from[32];
    char measured_at[40]; /* from the request, "" when not given */
    svg_flag *flags;      /* owned */
    size_t flag_count;
    svg_run *runs; /* owned */
    size_t run_count;
    char label[128]; /* set by the caller (the record's label) */
} svg_analysis;

/* Reads the two documents (request may be NULL).  SS_EINTERNAL naming
 * "result" when result is not an object or has no valid "levels";
 * SS_ENOMEM.  Release with svg_analysis_release (also after a failure). */
ss_status svg_analysis_from_json(const json_t *request, const json_t *result,
                                 svg_analysis *out, ss_error *err);
void svg_analysis_release(svg_analysis *a); /* accepts a zeroed value */

/* The predicted law of the readings of `atoms` atoms at the estimate:
 * one entry per distinct energy (diagrams of equal content share it),
 * energies increasing. */
typedef enum {
    SVG_LAW_FULL,       /* every diagram, from the core's exact law */
    SVG_LAW_CANDIDATES, /* only the result's candidates (the full law was
                           over the budget or could not be computed) */
    SVG_LAW_MARKS       /* no estimate: candidate energies without heights */
} svg_law_kind;

typedef struct {
    unsigned atoms;
    svg_law_kind kind;
    size_t count;
    double *energy;      /* owned, increasing */
    double *probability; /* owned; NaN for SVG_LAW_MARKS */
    double mean_energy;  /* model mean E0 + V·C(n,2) + J·C(n,2)·P2 (exact,
                            domain notes §2); NaN without an estimate */
    char note[200];      /* why the law is not complete, "" when it is */
} svg_law;

/* One law per distinct atom number of the runs, increasing, at most
 * max_laws of them (*total receives how many there are).  Each full law
 * comes from ss_distribution_compute at a->values with the calibration of
 * the result; the budget is shared by all of them (each computation is
 * charged its diagram count and table cells), and a law that does not fit
 * what is left, or fails, falls back to the candidates with a note.
 * SS_ENOMEM only.  Release with svg_laws_free. */
ss_status svg_laws_compute(const svg_analysis *a, const ss_budget *budget,
                           size_t max_laws, svg_law **out, size_t *count,
                           size_t *total, ss_error *err);
void svg_laws_free(svg_law *laws, size_t count); /* accepts NULL */

/* "(4,1,1)" for a diagram (zero rows dropped).  out needs cap bytes. */
void svg_diagram_name(const uint32_t *rows, unsigned levels, char *out,
                      size_t cap);

#endif /* SWAPSPEC_SVG_MODEL_H */
