/*
 * api_render.h — the JSON form of an analysis result, shared by
 * `swapspec analyze` and the HTTP service.  Numbers that do not exist
 * (a standard error where the Fisher information is singular, a p-value
 * with no degrees of freedom) are rendered as null, never as NaN.
 *
 * The result is written straight to text (json_text.h): the service
 * renders one per request, and building a jansson tree first cost more
 * than the analysis.  api_render_analysis parses that text back for
 * callers that amend the document.
 */
#ifndef SWAPSPEC_API_RENDER_H
#define SWAPSPEC_API_RENDER_H

#include <jansson.h>

#include "swapspec.h"

/* The result text (compact, NUL-terminated; release with free), or NULL
 * with err set (SS_ENOMEM).  label: a trailing "label" member when not
 * NULL and not empty. */
char *api_render_analysis_text(const ss_analysis *a, const ss_calibration *cal,
                               const char *label, size_t *len, ss_error *err);

/* The same document as a new jansson object (no label), or NULL with err
 * set (SS_ENOMEM). */
json_t *api_render_analysis(const ss_analysis *a, const ss_calibration *cal,
                            ss_error *err);

#endif /* SWAPSPEC_API_RENDER_H */
