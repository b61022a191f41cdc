/*
 * fuzz_compute_body.c — the libFuzzer program of the compute_body target:
 * POST /v1/predictions, /v1/candidates and /v1/simulations bodies
 * (entry_compute_body.c). Built by tests/fuzz/run.sh with clang; the same body
 * is replayed by tests/test_fuzz_regressions.c.  Owns nothing.
 */
#include "fuzz_driver.h"

FUZZ_DRIVER(fuzz_compute_body_one)
