/*
 * fuzz_query_path.c — the libFuzzer program of the query_path target:
 * paths, query strings, cursors, timestamps and idempotency keys
 * (entry_query_path.c). Built by tests/fuzz/run.sh with clang; the same body is
 * replayed by tests/test_fuzz_regressions.c.  Owns nothing.
 */
#include "fuzz_driver.h"

FUZZ_DRIVER(fuzz_query_path_one)
