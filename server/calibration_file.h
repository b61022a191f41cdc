/*
 * calibration_file.h — reading a calibration from a JSON file.
 *
 * The file is one JSON object with the keys offset, pair_shift, exchange,
 * noise_sd (numbers, all required), coupling_spread (a number >= 0,
 * optional) and unit (a string of at most 15 bytes, optional).  Anything else
 * is an error naming the key.
 */
#ifndef SWAPSPEC_CALIBRATION_FILE_H
#define SWAPSPEC_CALIBRATION_FILE_H

#include "swapspec.h"

/* Fills *out from the file at path, or with ss_calibration_default() when
 * path is NULL.  Returns SS_OK, or an error with err->field set to
 * "calibration" (file missing or not JSON) or "calibration.<key>"
 * (duplicate, unknown, missing or mistyped key, or a value the core's
 * ss_calibration_validate rejects).  *out is untouched on failure. */
ss_status cli_calibration_load(const char *path, ss_calibration *out,
                               ss_error *err);

/* The same checks for a calibration given as a JSON object (inline in a
 * request).  `where` starts every message ("calibration file 'x.json'",
 * "request").  Fields are "calibration.<key>". */
#include <jansson.h>
ss_status cli_calibration_from_object(const json_t *obj, const char *where,
                                      ss_calibration *out, ss_error *err);

/* The calibration of a command: the inline object of a JSON body when
 * there is one (source "request"), else the file of option `path` (source
 * the file name), else the default (source "default").  *source points to
 * static text or into path. */
ss_status cli_calibration_resolve(const json_t *inline_obj, const char *path,
                                  ss_calibration *out, const char **source,
                                  ss_error *err);

#endif /* SWAPSPEC_CALIBRATION_FILE_H */
