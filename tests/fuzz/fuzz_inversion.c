/*
 * fuzz_inversion.c — the libFuzzer program of the inversion target:
 * the inversion on raw numbers (entry_inversion.c).
 * Built by tests/fuzz/run.sh with clang; the same body is replayed by
 * tests/test_fuzz_regressions.c.  Owns nothing.
 */
#include "fuzz_driver.h"

FUZZ_DRIVER(fuzz_inversion_one)
