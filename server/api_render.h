/*
 * api_render.h — the JSON form of an analysis result, shared by
 * `swapspec analyze` and the HTTP service.  Numbers that do not exist
 * (a standard error where the Fisher information is singular, a p-value
 * with no degrees of freedom) are rendered as null, never as NaN.
 */
#ifndef SWAPSPEC_API_RENDER_H
#define SWAPSPEC_API_RENDER_H

#include <jansson.h>

#include "swapspec.h"

/* A new object for the analysis, or NULL with err set (SS_ENOMEM). */
json_t *api_render_analysis(const ss_analysis *a, const ss_calibration *cal,
                            ss_error *err);

#endif /* SWAPSPEC_API_RENDER_H */
