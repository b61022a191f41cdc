/*
 * fuzz_entry.h — the bodies of swapspec's fuzz targets, shared by the
 * libFuzzer programs (tests/fuzz/fuzz_<target>.c, built with clang by
 * tests/fuzz/run.sh) and the Criterion replay of saved inputs
 * (tests/test_fuzz_regressions.c, built with the normal tree).
 *
 * Each body takes arbitrary bytes, feeds them through the code under test
 * exactly as the service would, and checks invariants beyond "no crash".
 * It returns 0 when every invariant held, or 1 with a sentence in the
 * verdict saying which one failed.  Bodies are deterministic, allocate
 * nothing that outlives the call (except the scratch store of the query
 * target, created on first use and removed by fuzz_entry_cleanup), and
 * never exit.
 */
#ifndef SWAPSPEC_FUZZ_ENTRY_H
#define SWAPSPEC_FUZZ_ENTRY_H

#include <jansson.h>
#include <stddef.h>
#include <stdint.h>

#include "swapspec.h"

typedef struct {
    char message[1024];
} fuzz_verdict;

/* POST /v1/analyses bodies: JSON text → api_request_from_json (the daemon's
 * parse flags), compared with api_request_parse_text (the CLI's), then an
 * inline request runs through ss_analysis_run under the fuzz budget, its
 * calibration resolved as analysis_execute resolves it. */
int fuzz_analysis_body_one(const uint8_t *data, size_t size, fuzz_verdict *v);

/* POST /v1/predictions, /v1/candidates, /v1/simulations bodies: the first
 * byte picks the command, the rest is JSON text → cli_args_from_json, then
 * the command's run under a small budget. */
int fuzz_compute_body_one(const uint8_t *data, size_t size, fuzz_verdict *v);

/* Paths and query strings: the route matcher, timestamps, ids, calibration
 * names, page cursors, list queries (store_list on a scratch store), the
 * idempotency-key check of a put, field paths to JSON pointers. */
int fuzz_query_path_one(const uint8_t *data, size_t size, fuzz_verdict *v);

/* The inversion: an ss_analysis_request decoded from bytes (levels 2..16,
 * finite and non-finite numbers) → ss_analysis_run under a small budget. */
int fuzz_inversion_one(const uint8_t *data, size_t size, fuzz_verdict *v);

typedef struct {
    const char *name; /* also the directory name under corpus/, regressions/ */
    int (*one)(const uint8_t *data, size_t size, fuzz_verdict *v);
} fuzz_target;

extern const fuzz_target fuzz_targets[];
extern const size_t fuzz_target_count;

/* The work budget every body runs the core with: small, so that one input
 * takes milliseconds (the service's own budget is far larger). */
ss_budget fuzz_budget(void);

/* 1 when tag is in the comma-separated list of the environment variable
 * FUZZ_LENIENT: a check that a known, reported finding fails, relaxed so
 * that fuzzing can look past it until the fix lands.  Tags: order (a
 * spectrum out of order by at most 4 ulp), internal (an internal error on
 * client input), region (the intervals of a confidence region), names (an
 * error naming something the client did not send).  Never set in CI. */
int fuzz_lenient(const char *tag);

/* Records a failed invariant (printf-style) in v; returns 1. */
int fuzz_fail(fuzz_verdict *v, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

/* Checks an analysis result against the request it answered: spectrum
 * finite, in [0,1], descending, summing to 1 within 1e-9, lower <= value <=
 * upper within [0,1]; candidates valid diagrams; flags well formed; the
 * rendered JSON text parses.  0 or 1 with v set. */
int fuzz_check_analysis(const ss_analysis_request *req, const ss_analysis *a,
                        fuzz_verdict *v);

/* Checks a failed call: code in the status table and equal to err->code,
 * a message, and a field when the code says a field is at fault. */
int fuzz_check_failure(ss_status st, const ss_error *err, const char *where,
                       fuzz_verdict *v);

/* 1 when field (an error record's path) resolves in the JSON document
 * doc: every segment of its JSON pointer (http_field_pointer, as the
 * problem document shows it) but the last exists, and the last too when
 * must_exist.  "" always resolves. */
int fuzz_field_resolves(const json_t *doc, const char *field, int must_exist);

/* Checks that err names a field of doc (fuzz_field_resolves; an unknown
 * field must exist itself), unless doc has a key that a path cannot name
 * (empty, holding '.', '[' or ']', or over 60 bytes).  0 or 1 with v set. */
int fuzz_check_field(const json_t *doc, const ss_error *err, const char *where,
                     fuzz_verdict *v);

/* The members of an analysis request (api_request.h), NULL-terminated. */
extern const char *const fuzz_request_fields[];

/* 1 when the first segment of field (up to '.' or '[') is one of names
 * (NULL-terminated) or a field of ss_budget, or field is "": an error
 * names something the client sent or a limit, not an internal quantity. */
int fuzz_field_among(const char *field, const char *const *names);

/* Removes the scratch store of the query target, if it was created. */
void fuzz_entry_cleanup(void);

#endif /* SWAPSPEC_FUZZ_ENTRY_H */
