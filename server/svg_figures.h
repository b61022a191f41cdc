/*
 * svg_figures.h — the four figures of an analysis, written in SVG by the
 * daemon itself (see svg_plot.h for what every figure shares):
 *
 *  - readings  (svg_readings.c): per atom number, the measured energies
 *    (a histogram of per-shot readings; mean ± standard error for summary
 *    runs) over the model's law at the estimate — a stick at each energy
 *    level E(λ) with its probability and, where the detection noise is at
 *    least half a level spacing, that law broadened by the noise;
 *  - spectrum  (svg_spectrum.c): each eigenvalue with its interval, the
 *    feasible range where the data leave the spectrum underdetermined, and
 *    the naive λ/n beside it;
 *  - diagrams  (svg_diagrams.c): the candidate Young diagrams of each run
 *    drawn as boxes (English convention: rows left-aligned, longest on
 *    top), each with its probability as a bar, degenerate ones framed
 *    together;
 *  - revisions (svg_revisions.c): the spectrum of every revision of a
 *    reprocessed analysis side by side, with the calibration version of
 *    each.
 *
 * Each writer appends one complete <svg> element to t (standalone: with the
 * XML declaration, for a file of its own).  Nothing fails here: out of
 * memory is remembered by t.
 */
#ifndef SWAPSPEC_SVG_FIGURES_H
#define SWAPSPEC_SVG_FIGURES_H

#include <stddef.h>

#include "page_text.h"
#include "svg_model.h"

/* Width of every figure (px). */
#define SVG_FIGURE_WIDTH 760.0
/* Readings: at most this many histogram bins across a panel (the bin width
 * is an odd number of level spacings |J|). */
#define SVG_READINGS_BINS_MAX 60
/* Readings: panels (atom numbers) drawn at most; laws computed at most. */
#define SVG_READINGS_PANELS_MAX 8
/* Diagrams: runs drawn at most. */
#define SVG_DIAGRAMS_RUNS_MAX 6
/* Diagrams: a probability of 1 is a bar this long (px); p is p times it. */
#define SVG_DIAGRAMS_BAR_FULL 96.0
/* Revisions: drawn at most (the latest ones). */
#define SVG_REVISIONS_MAX 8

/* laws: from svg_laws_compute (count of them, total atom numbers). */
void svg_readings_write(page_text *t, const svg_analysis *a,
                        const svg_law *laws, size_t count, size_t total,
                        int standalone);
void svg_spectrum_write(page_text *t, const svg_analysis *a, int standalone);
void svg_diagrams_write(page_text *t, const svg_analysis *a, int standalone);

/* One revision of an analysis, as the revisions figure and the page's
 * table of revisions show it. */
typedef struct {
    unsigned revision;
    char created_at[32];
    char calibration[96]; /* "box-trap-A v2", "inline", "default" */
    char software_version[32];
    unsigned levels;
    int has_spectrum;
    double values[SS_LEVELS_MAX], lower[SS_LEVELS_MAX], upper[SS_LEVELS_MAX];
    char flags[160]; /* flag codes, comma-separated */
} svg_revision;

/* revs: oldest first; the last SVG_REVISIONS_MAX are drawn. */
void svg_revisions_write(page_text *t, const svg_revision *revs, size_t n,
                         const char *label, int standalone);

/* The subscript digits of i ("₁₂") as UTF-8.  out needs 48 bytes. */
const char *svg_subscript(unsigned i, char out[48]);

#endif /* SWAPSPEC_SVG_FIGURES_H */
