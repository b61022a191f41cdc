/*
 * fuzz_analysis_body.c — the libFuzzer program of the analysis_body target:
 * POST /v1/analyses bodies (entry_analysis_body.c).
 * Built by tests/fuzz/run.sh with clang; the same body is replayed by
 * tests/test_fuzz_regressions.c.  Owns nothing.
 */
#include "fuzz_driver.h"

FUZZ_DRIVER(fuzz_analysis_body_one)
