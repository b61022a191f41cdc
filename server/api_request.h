/*
 * api_request.h — the JSON form of an analysis request, parsed strictly.
 *
 * Shared by `swapspec analyze` and the HTTP service.  The document is one
 * object:
 *   {"levels": 3,
 *    "calibration": {"offset", "pair_shift", "exchange", "noise_sd",
 *                    "coupling_spread"?, "unit"?} | {"ref", "version"?},
 *    "measured_at": "2026-12-02T03:50:12Z",
 *    "runs": [{"atoms", "shots", "mean_energy", "energy_variance"} |
 *             {"atoms", "energies": [...]}],
 *    "method": "auto|moments|likelihood|diagrams", "confidence": 0.95,
 *    "bootstrap": 0, "seed": 1, "window": 3, "label": "..."}
 * Unknown keys, duplicate keys (rejected when the text is parsed), wrong
 * types, and runs mixing per-shot and summary fields are errors naming the
 * field as a path ("runs[2].energy_variance").
 */
#ifndef SWAPSPEC_API_REQUEST_H
#define SWAPSPEC_API_REQUEST_H

#include <jansson.h>

#include "swapspec.h"

typedef struct {
    ss_analysis_request req; /* runs point into `runs` below */
    ss_run *runs;            /* owned */
    double *energies;        /* owned; every per-shot run points into it */
    char label[128];         /* optional free-form label, "" when absent */
    /* "calibration": {"ref": NAME, "version"?: N} names a stored version
     * instead of giving the numbers: cal_ref is the name ("" for an inline
     * or absent calibration), cal_ref_version the pinned version (0 = the
     * version valid when the shots were taken).  req.calibration is then
     * the default until the caller resolves the reference
     * (api_calibration.h). */
    char cal_ref[72];
    unsigned cal_ref_version;
    int cal_inline; /* 1 when the numbers were given inline */
    /* "measured_at": when the shots were taken (RFC 3339), in the store's
     * record form "2026-12-02T03:50:12.345Z"; "" when absent. */
    char measured_at[32];
} api_request;

/* Parses a JSON text (duplicate keys rejected) into *out.  SS_EMALFORMED
 * for text that is not JSON or not an object; SS_EINVAL for content errors.
 * On failure *out is left empty (nothing to release). */
ss_status api_request_parse_text(const char *text, size_t len, api_request *out,
                                 ss_error *err);
/* The same from an already parsed object. */
ss_status api_request_from_json(const json_t *root, api_request *out,
                                ss_error *err);
void api_request_release(api_request *r);

#endif /* SWAPSPEC_API_REQUEST_H */
