/*
 * page_flags.c — what each flag of an analysis means and what to do about
 * it, in plain sentences for the analysis page, keyed by the stable codes
 * of SS_FLAG_MAP (core/include/swapspec.h).  The page shows these texts
 * and, under them, the analysis's own message with its numbers.  Owns only
 * constant tables.
 */
#include <string.h>

#include "page.h"

static const page_flag_text page_flag_table[] = {
    {"degenerate-energy", "Diagrams that share an energy",
     "Two or more Young diagrams of this atom number have the same content "
     "sum, so they give exactly the same energy reading. No energy "
     "resolution can tell them apart: the split of probability between them "
     "comes from the model at the estimate, not from the readings.",
     "Read each framed group in the diagrams figure as one outcome. To "
     "separate them, add runs with atom numbers whose diagrams all have "
     "distinct energies."},
    {"underdetermined", "The readings allow a range of spectra",
     "With this many levels the measured moments fix only some power sums of "
     "the spectrum (the mean energy gives the purity, the variance adds the "
     "third power sum), and a whole set of spectra fits them. The point "
     "estimate is one member of that set (the maximum-entropy spectrum); "
     "the feasible ranges show everything the data allow.",
     "Do not read the point estimate as measured: quote the feasible ranges. "
     "Per-shot readings carry higher moments, and runs with several atom "
     "numbers add more; both narrow the set."},
    {"outside-physical-region", "The readings fit no physical state",
     "The measured moments lie outside the region that any spectrum can "
     "produce, by the distance given in standard errors. The usual cause is a "
     "calibration that does not match the trap (offset, pair shift or "
     "exchange coupling), less often a run with too few shots.",
     "Check that the calibration version used (see Inputs) was valid when "
     "the shots were taken; if the trap changed, store a corrected version "
     "and reprocess this analysis. Otherwise take more shots."},
    {"noise-dominated", "Detection noise swamps the signal",
     "The detection noise is large compared with the spread of energies the "
     "diagrams produce, so the readings say little about the spectrum beyond "
     "the mean and the intervals are wide.",
     "Lower the readout noise, take many more shots, or use more atoms so "
     "that the energy levels spread further apart than the noise."},
    {"few-shots", "Too few shots for reliable error bars",
     "A run has so few shots that the standard errors and intervals, which "
     "rest on a large-sample approximation, may be off.",
     "Treat the intervals as rough. Take more shots, or pool this run with "
     "others of the same preparation."},
    {"ill-conditioned", "The estimate is fragile",
     "The estimate depends very sensitively on the measured moments (nearly "
     "equal eigenvalues, or a nearly singular information matrix), so a "
     "small change in the data moves it a lot.",
     "Rely on the intervals rather than the point values. More shots or "
     "another atom number help; a bootstrap (the request's bootstrap option) "
     "gives intervals that do not depend on linearisation."},
    {"symmetry-caution", "The trap may break the model's symmetry",
     "The calibration reports a spread of the pair couplings. The energy "
     "model assumes that every pair of atoms interacts equally, as in a "
     "flat-bottomed trap; a spread mixes the diagrams, so readings can depart "
     "from the model.",
     "Treat the estimate as approximate until the coupling spread is small; "
     "check the flatness of the trap."},
};

const page_flag_text *page_flag_text_find(const char *code) {
    for (size_t i = 0; i < sizeof page_flag_table / sizeof page_flag_table[0];
         i++)
        if (strcmp(page_flag_table[i].code, code) == 0)
            return &page_flag_table[i];
    return NULL;
}

const page_flag_text *page_flag_texts(size_t *count) {
    *count = sizeof page_flag_table / sizeof page_flag_table[0];
    return page_flag_table;
}
