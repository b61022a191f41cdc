/*
 * api_render.h — the JSON form of an analysis result, shared by
 * `swapspec analyze` and the HTTP service.  Numbers that do not exist
 * (a standard error where the Fisher information is singular, a p-value
 * with no degrees of freedom) are rendered as null, never as NaN.
 *
 * The result is written straight to text (json_text.h): the service
 * renders one per request, and building a jansson tree first cost more
 * than the analysis.
 */
#ifndef SWAPSPEC_API_RENDER_H
#define SWAPSPEC_API_RENDER_H

#include <jansson.h>

#include "swapspec.h"

#include "json_text.h"

/* Writes members of the caller's own (jt_key + value, any number) at the
 * end of the result object. */
typedef void (*api_render_more)(jt_writer *w, const void *ctx);

/* The result text (compact, NUL-terminated; release with free), or NULL
 * with err set (SS_ENOMEM).  label: a "label" member when not NULL and not
 * empty; more (may be NULL): further members, written last. */
char *api_render_analysis_text(const ss_analysis *a, const ss_calibration *cal,
                               const char *label, api_render_more more,
                               const void *more_ctx, size_t *len,
                               ss_error *err);

#endif /* SWAPSPEC_API_RENDER_H */
