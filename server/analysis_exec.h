/*
 * analysis_exec.h — one analysis from a decoded request to its result
 * document, shared by `swapspec analyze`, POST /v1/analyses and the
 * reprocessing runner, so that the three give the same document for the
 * same request and calibration.
 *
 * A request gives its calibration inline, not at all (the default), or by
 * reference to a stored calibration ({"ref": NAME, "version"?: N}).  A
 * reference resolves to the pinned version, or else to the version valid
 * when the shots were taken: the greatest valid_from <= measured_at (the
 * analysis's creation time when the request gives none), ties to the higher
 * version number.  The result document carries the calibration it used
 * under "calibration" ({offset, pair_shift, exchange, noise_sd,
 * coupling_spread?, unit, source, and for source "ref" name, version and
 * valid_from}).
 */
#ifndef SWAPSPEC_ANALYSIS_EXEC_H
#define SWAPSPEC_ANALYSIS_EXEC_H

#include <jansson.h>

#include "api_request.h"
#include "store.h"

/* The calibration an analysis runs with and where it came from. */
typedef struct {
    ss_calibration cal;
    const char *source;  /* "request", "default" or "ref" (static text) */
    char name[72];       /* ref: the calibration's name */
    unsigned version;    /* ref: the version used */
    char valid_from[32]; /* ref: that version's valid_from */
} analysis_calibration;

/* The calibration of req: inline or default as decoded; a reference looked
 * up in the store through c (which may be NULL only when req has no
 * reference), at measured_at or else at `fallback_at` (record form).
 * Errors name the request field: SS_EINVAL "calibration.ref" (no such
 * calibration, or no version valid at that time), "calibration.version"
 * (no such version); store failures as the store reports them. */
ss_status analysis_calibration_resolve(store_conn *c, const api_request *req,
                                       const char *fallback_at,
                                       analysis_calibration *out,
                                       ss_error *err);

/* The same for a stored version (reprocessing): source "ref". */
void analysis_calibration_from_stored(const store_calibration *k,
                                      analysis_calibration *out);

/* Runs req with cal under budget (NULL = the request's own) and writes
 * the result document: the analysis (api_render.h), the request's label,
 * and the calibration used — compact text with numbers as
 * JSON_REAL_PRECISION(17) writes them (json_text.h).  On success *text is
 * new (release with free), *len its length, and method receives the
 * method actually used; on failure err is set and nothing is written. */
ss_status analysis_execute_text(const api_request *req,
                                const analysis_calibration *cal,
                                const ss_budget *budget, char **text,
                                size_t *len, char method[16], ss_error *err);

/* The same document as a new jansson object (for the command line). */
ss_status analysis_execute(const api_request *req,
                           const analysis_calibration *cal,
                           const ss_budget *budget, json_t **doc,
                           char method[16], ss_error *err);

#endif /* SWAPSPEC_ANALYSIS_EXEC_H */
