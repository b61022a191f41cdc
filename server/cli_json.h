/*
 * cli_json.h — JSON rendering helpers for the swapspec command line.
 *
 * The put/append helpers are "sticky": once err holds an error they only
 * release what they were given, so a command can build a whole document
 * and check err once at the end.  Non-finite numbers are refused (jansson
 * cannot represent them) with SS_ERANGE naming the key.  Every document is
 * built completely before anything is written, so a failed command prints
 * nothing on stdout.
 */
#ifndef SWAPSPEC_CLI_JSON_H
#define SWAPSPEC_CLI_JSON_H

#include <stdint.h>
#include <stdio.h>

#include <jansson.h>

#include "swapspec.h"

/* obj[key] = value; steals value (NULL value means allocation failed). */
void cli_json_put(json_t *obj, const char *key, json_t *value, ss_error *err);
/* obj[key] = x; SS_ERANGE naming key when x is NaN or infinite. */
void cli_json_put_real(json_t *obj, const char *key, double x, ss_error *err);
void cli_json_put_int(json_t *obj, const char *key, int64_t x, ss_error *err);
void cli_json_put_string(json_t *obj, const char *key, const char *s,
                         ss_error *err);
/* Appends value to arr; steals value. */
void cli_json_append(json_t *arr, json_t *value, ss_error *err);
/* Appends x to arr; SS_ERANGE naming field when x is not finite. */
void cli_json_append_real(json_t *arr, double x, const char *field,
                          ss_error *err);

/* New array of the non-zero rows of a diagram ((4,1,1) for {4,1,1} and
 * (3,3) for {3,3,0}); NULL when memory runs out. */
json_t *cli_json_diagram(const uint32_t *rows, unsigned levels);

/* New array of n reals; NULL (with err set) when memory runs out or an
 * entry is not finite. */
json_t *cli_json_reals(const double *x, size_t n, const char *field,
                       ss_error *err);

/* New object echoing a calibration: offset, pair_shift, exchange, noise_sd,
 * unit and source (the file name, or "default"). */
json_t *cli_json_calibration(const ss_calibration *cal, const char *source,
                             ss_error *err);

/* "an object", "an array", "a string", "a number", "a boolean", "null" (or
 * "nothing" for NULL): for messages about a value of the wrong type. */
const char *cli_json_type_name(const json_t *v);

/* The end of a command's run: on error (err set) releases doc and returns
 * the error; otherwise hands doc to *doc_out and returns SS_OK. */
ss_status cli_json_finish(json_t *doc, json_t **doc_out, ss_error *err);

/* Significant digits of printed reals: 15 keeps every computed value to
 * ~1e-15 relative (far below any tolerance the results carry) without the
 * binary noise of 17 digits (0.6 prints as 0.6, not 0.59999999999999998). */
#define CLI_JSON_DIGITS 15

/* Writes doc as one line to out.  SS_EINTERNAL when the write fails. */
ss_status cli_json_emit(const json_t *doc, FILE *out, ss_error *err);

/* Writes {"error": message, "field": field, "code": name} as one line to
 * out and returns the process exit code for err->code (see
 * cli_exit_code). */
int cli_json_report_error(const ss_error *err, FILE *out);

/* 0 for SS_OK; 2 for errors the caller can fix (statuses the table maps to
 * a 4xx HTTP status); 1 for internal failures (5xx). */
int cli_exit_code(ss_status code);

#endif /* SWAPSPEC_CLI_JSON_H */
