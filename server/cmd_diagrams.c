/*
 * cmd_diagrams.c — `swapspec diagrams`: which Young diagrams an energy
 * reading can come from.
 *
 * Owns the diagrams command: it enumerates the diagrams of n atoms on d
 * levels (ss_diagram_set_alloc), selects them by content, by a measured
 * energy within a window of detection-noise standard deviations, or not at
 * all, and lists the groups of selected diagrams that share a content
 * (ss_levels_alloc): those no energy resolution can tell apart.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "calibration_file.h"
#include "cli_json.h"
#include "commands.h"

enum {
    OPT_LEVELS,
    OPT_ATOMS,
    OPT_CONTENT,
    OPT_ENERGY,
    OPT_ENERGY_SD,
    OPT_CALIBRATION,
    OPT_N
};

/* Half-width of the energy window, in standard deviations. */
#define DIAGRAMS_WINDOW_SD 3
/* Relative tolerance of an exact energy match (noise_sd 0). */
#define DIAGRAMS_EXACT_TOL 1e-9
/* Most diagrams one served document may list (the selection plus the
 * members of its degenerate groups).  Rendering and sending cost 15-20 µs a
 * diagram on the 2-core reference machine, Release build, in documents of
 * a million (the 907 376 diagrams of (n, d) = (63, 16) in 17 s, the
 * 999 941 of (3461, 3) in 15 s), less in smaller ones (a window of
 * (63, 16) listing 41 242 and their groups: 0.76 s in all), so 100 000
 * take about 2 s at most.  The selection is counted after the enumeration,
 * which the budget's max_diagrams bounds (0.3-0.5 s for a million
 * diagrams), and before anything is rendered. */
#define DIAGRAMS_SERVED_LISTED 100000U

static const cli_option diagrams_options[OPT_N] = {
    [OPT_LEVELS] = CLI_OPTION_LEVELS,
    [OPT_ATOMS] = CLI_OPTION_ATOMS,
    [OPT_CONTENT] = {"content", CLI_INT, 0, "C", 0, 0, 0,
                     "list only the diagrams with content sum C"},
    [OPT_ENERGY] = {"energy", CLI_REAL, 0, "E", 0, 0, 0,
                    "list the diagrams whose energy lies within 3 standard "
                    "deviations of the reading E"},
    [OPT_ENERGY_SD] = {"energy-sd", CLI_REAL, 0, "S", 0, 0, 1,
                       "standard deviation of the reading (default: the "
                       "calibration's noise_sd; 0 asks for an exact match)"},
    [OPT_CALIBRATION] = CLI_OPTION_CALIBRATION,
};

typedef enum { SELECT_ALL, SELECT_CONTENT, SELECT_ENERGY } diagrams_mode;

/* The selection rule, fixed before any diagram is looked at. */
typedef struct {
    diagrams_mode mode;
    int64_t content;
    double energy;
    double sd;        /* standard deviation of the reading */
    double halfwidth; /* accepted |E(λ) − E| */
} diagrams_filter;

static ss_status diagrams_filter_init(const cli_value *v,
                                      const ss_calibration *cal,
                                      diagrams_filter *f, ss_error *err) {
    if (v[OPT_CONTENT].present && v[OPT_ENERGY].present)
        return ss_error_set(err, SS_EINVAL, "content",
                            "give either --content or --energy, not both");
    if (v[OPT_ENERGY_SD].present && !v[OPT_ENERGY].present)
        return ss_error_set(err, SS_EINVAL, "energy-sd",
                            "--energy-sd applies to --energy, which is "
                            "missing");
    if (v[OPT_ENERGY].present &&
        !isfinite(ss_calibration_content(cal, (unsigned)v[OPT_ATOMS].u,
                                         v[OPT_ENERGY].r)))
        return ss_error_set(err, SS_EINVAL, "energy",
                            "--energy %.6g is no finite content under this "
                            "calibration (exchange %.3g): check its units",
                            v[OPT_ENERGY].r, cal->exchange);
    f->mode = v[OPT_CONTENT].present  ? SELECT_CONTENT
              : v[OPT_ENERGY].present ? SELECT_ENERGY
                                      : SELECT_ALL;
    f->content = v[OPT_CONTENT].i;
    f->energy = v[OPT_ENERGY].r;
    f->sd = v[OPT_ENERGY_SD].present ? v[OPT_ENERGY_SD].r : cal->noise_sd;
    f->halfwidth = f->sd > 0.0
                       ? (double)DIAGRAMS_WINDOW_SD * f->sd
                       : DIAGRAMS_EXACT_TOL * fmax(1.0, fabs(f->energy));
    if (!isfinite(f->halfwidth))
        return ss_error_set(err, SS_EINVAL,
                            v[OPT_ENERGY_SD].present ? "energy-sd"
                                                     : "calibration",
                            "the window of %d standard deviations (%.3g) "
                            "leaves the range of numbers",
                            DIAGRAMS_WINDOW_SD, f->sd);
    return SS_OK;
}

static int diagrams_keep(const diagrams_filter *f, int64_t content,
                         double energy) {
    switch (f->mode) {
    case SELECT_CONTENT:
        return content == f->content;
    case SELECT_ENERGY:
        return fabs(energy - f->energy) <= f->halfwidth;
    case SELECT_ALL:
        break;
    }
    return 1;
}

static json_t *diagrams_entry(const ss_diagram_set *set, size_t i,
                              double energy, const diagrams_filter *f,
                              ss_error *err) {
    json_t *obj = json_object();
    if (obj == NULL)
        return NULL;
    cli_json_put(obj, "diagram",
                 cli_json_diagram(set->rows + i * set->levels, set->levels),
                 err);
    cli_json_put_int(obj, "content", set->content[i], err);
    cli_json_put_real(obj, "energy", energy, err);
    if (f->mode == SELECT_ENERGY && f->sd > 0.0)
        cli_json_put_real(obj, "z", (energy - f->energy) / f->sd, err);
    return obj;
}

/* Groups of >= 2 selected diagrams sharing a content, in content order. */
static json_t *diagrams_degenerate(const ss_diagram_set *set,
                                   const ss_levels *groups,
                                   const unsigned char *keep, ss_error *err) {
    json_t *all = json_array();
    for (size_t l = 0; all != NULL && l < groups->count; l++) {
        size_t kept = 0;
        for (size_t m = groups->first[l]; m < groups->first[l + 1]; m++)
            kept += keep[groups->members[m]];
        if (kept < 2)
            continue;
        json_t *group = json_array();
        for (size_t m = groups->first[l];
             group != NULL && m < groups->first[l + 1]; m++) {
            size_t i = groups->members[m];
            if (keep[i])
                cli_json_append(
                    group,
                    cli_json_diagram(set->rows + i * set->levels, set->levels),
                    err);
        }
        cli_json_append(all, group, err);
    }
    return all;
}

/* Marks the selected diagrams in keep; returns how many diagrams the
 * document would list (the selection and its degenerate groups). */
static size_t diagrams_select(const ss_diagram_set *set,
                              const ss_levels *groups, const diagrams_filter *f,
                              const ss_calibration *cal, unsigned char *keep) {
    size_t listed = 0;
    for (size_t i = 0; i < set->count; i++) {
        double e = ss_calibration_energy(cal, set->atoms, set->content[i]);
        keep[i] = (unsigned char)diagrams_keep(f, set->content[i], e);
        listed += keep[i];
    }
    for (size_t l = 0; l < groups->count; l++) {
        size_t kept = 0;
        for (size_t m = groups->first[l]; m < groups->first[l + 1]; m++)
            kept += keep[groups->members[m]];
        listed += kept >= 2 ? kept : 0;
    }
    return listed;
}

/* Over DIAGRAMS_SERVED_LISTED: SS_EBUDGET naming what selected so much. */
static ss_status diagrams_check(const cli_value *v, const diagrams_filter *f,
                                int inline_calibration, size_t listed,
                                ss_error *err) {
    if (listed <= DIAGRAMS_SERVED_LISTED)
        return SS_OK;
    const char *field = "atoms";
    if (f->mode == SELECT_CONTENT)
        field = "content";
    else if (f->mode == SELECT_ENERGY)
        field = v[OPT_ENERGY_SD].present ? "energy-sd"
                : inline_calibration     ? "calibration"
                                         : "energy";
    return ss_error_set(err, SS_EBUDGET, field,
                        "at most %u listed diagrams (the selection and its "
                        "degenerate groups) per request; got %zu: narrow the "
                        "selection",
                        DIAGRAMS_SERVED_LISTED, listed);
}

/* Why a selection listed nothing, in a sentence: a content no diagram of
 * (n, d) has, a reading outside every diagram's energy, or a reading that
 * falls between two energy levels (their energies given). */
static void diagrams_why_none(const ss_diagram_set *set,
                              const diagrams_filter *f,
                              const ss_calibration *cal, char *out,
                              size_t cap) {
    if (f->mode == SELECT_CONTENT) { /* (n) has the largest content */
        int64_t n = set->atoms, cmax = n * (n - 1) / 2;
        int64_t cmin = ss_diagram_content_min(set->atoms, set->levels);
        snprintf(out, cap,
                 "No Young diagram of %u atoms on %u levels has content %lld: "
                 "their contents run from %lld to %lld, and not every "
                 "integer in between occurs.",
                 set->atoms, set->levels, (long long)f->content,
                 (long long)cmin, (long long)cmax);
        return;
    }
    const char *gap = cal->unit[0] ? " " : "";
    double below = -HUGE_VAL, above = HUGE_VAL, lo = HUGE_VAL, hi = -HUGE_VAL;
    for (size_t i = 0; i < set->count; i++) {
        double e = ss_calibration_energy(cal, set->atoms, set->content[i]);
        lo = fmin(lo, e);
        hi = fmax(hi, e);
        if (e < f->energy)
            below = fmax(below, e);
        else
            above = fmin(above, e);
    }
    if (f->energy < lo || f->energy > hi)
        snprintf(out, cap,
                 "No diagram's energy lies within %d sd (%.4g%s%s) of the "
                 "reading %.6g%s%s: %u atoms on %u levels have energies from "
                 "%.6g to %.6g%s%s only, so the reading is outside what the "
                 "model allows; check the calibration (offset, pair_shift, "
                 "exchange) and the atom number.",
                 DIAGRAMS_WINDOW_SD, f->halfwidth, gap, cal->unit, f->energy,
                 gap, cal->unit, set->atoms, set->levels, lo, hi, gap,
                 cal->unit);
    else
        snprintf(out, cap,
                 "No diagram's energy lies within %d sd (%.4g%s%s) of the "
                 "reading %.6g%s%s: it falls between the energy levels "
                 "%.6g and %.6g%s%s; a larger energy_sd widens the window.",
                 DIAGRAMS_WINDOW_SD, f->halfwidth, gap, cal->unit, f->energy,
                 gap, cal->unit, below, above, gap, cal->unit);
}

static void diagrams_render(json_t *doc, const ss_diagram_set *set,
                            const ss_levels *groups, const diagrams_filter *f,
                            const ss_calibration *cal,
                            const unsigned char *keep, ss_error *err) {
    json_t *list = json_array();
    size_t listed = 0;
    for (size_t i = 0; list != NULL && i < set->count; i++) {
        if (keep[i]) {
            double e = ss_calibration_energy(cal, set->atoms, set->content[i]);
            cli_json_append(list, diagrams_entry(set, i, e, f, err), err);
            listed++;
        }
    }
    cli_json_put_int(doc, "levels", set->levels, err);
    cli_json_put_int(doc, "atoms", set->atoms, err);
    cli_json_put_int(doc, "total_diagrams", (int64_t)set->count, err);
    if (f->mode == SELECT_CONTENT)
        cli_json_put_int(doc, "content", f->content, err);
    if (f->mode == SELECT_ENERGY) {
        cli_json_put_real(doc, "energy", f->energy, err);
        cli_json_put_real(doc, "energy_sd", f->sd, err);
        cli_json_put_int(doc, "window_sd", DIAGRAMS_WINDOW_SD, err);
        cli_json_put_real(doc, "tolerance", f->halfwidth, err);
        cli_json_put_real(doc, "content_estimate",
                          ss_calibration_content(cal, set->atoms, f->energy),
                          err);
    }
    cli_json_put_int(doc, "count", (int64_t)listed, err);
    if (listed == 0 && f->mode != SELECT_ALL) {
        char note[400];
        diagrams_why_none(set, f, cal, note, sizeof note);
        cli_json_put_string(doc, "note", note, err);
    }
    cli_json_put(doc, "diagrams", list, err);
    if (err->code == SS_OK)
        cli_json_put(doc, "degenerate_groups",
                     diagrams_degenerate(set, groups, keep, err), err);
}

static ss_status diagrams_run(const cli_parsed *args, json_t **doc_out,
                              ss_error *err) {
    const cli_value *v = args->values;
    const char *cal_path =
        v[OPT_CALIBRATION].present ? v[OPT_CALIBRATION].text : NULL;
    const char *cal_source = "default";
    ss_calibration cal = ss_calibration_default();
    diagrams_filter filter = {SELECT_ALL, 0, 0.0, 0.0, 0.0};
    if (cli_calibration_resolve(args->calibration, cal_path, &cal, &cal_source,
                                err) != SS_OK ||
        ss_calibration_check_atoms(&cal, (unsigned)v[OPT_ATOMS].u, err) !=
            SS_OK ||
        diagrams_filter_init(v, &cal, &filter, err) != SS_OK)
        return err->code;
    ss_diagram_set *set = NULL;
    if (ss_diagram_set_alloc((unsigned)v[OPT_ATOMS].u,
                             (unsigned)v[OPT_LEVELS].u, args->budget, &set,
                             err) != SS_OK)
        return err->code;
    ss_levels *groups = NULL;
    unsigned char *keep = NULL;
    json_t *doc = NULL;
    if (ss_levels_alloc(set, NULL, &groups, err) == SS_OK) {
        keep = calloc(set->count ? set->count : 1, 1);
        doc = json_object();
        if (keep == NULL || doc == NULL)
            ss_error_set(err, SS_ENOMEM, "", "no memory for the result");
    }
    if (err->code == SS_OK) {
        size_t listed = diagrams_select(set, groups, &filter, &cal, keep);
        if (args->budget != NULL) /* served over HTTP */
            diagrams_check(v, &filter, args->calibration != NULL, listed, err);
    }
    if (err->code == SS_OK) {
        diagrams_render(doc, set, groups, &filter, &cal, keep, err);
        cli_json_put(doc, "calibration",
                     cli_json_calibration(&cal, cal_source, err), err);
    }
    free(keep);
    ss_levels_free(groups);
    ss_diagram_set_free(set);
    return cli_json_finish(doc, doc_out, err);
}

const cli_command cli_cmd_diagrams = {
    "diagrams",
    "Young diagrams, their contents and energies; degenerate groups",
    "Young diagrams of n atoms on d levels with their content sums and "
    "energies: all of them, those with one content, or those an energy "
    "reading is compatible with; groups sharing a content are flagged, "
    "because no energy measurement can separate them.",
    diagrams_options,
    OPT_N,
    "With --energy E the window is E +/- 3 S (window_sd 3); when S is 0 an "
    "exact match within 1e-9 * max(1, |E|) is required.  Diagrams are listed "
    "in reverse lexicographic order, (n) first.",
    diagrams_run,
    NULL,
};
