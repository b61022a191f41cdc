/*
 * fuzz_driver.h — the libFuzzer entry points, shared by the four
 * fuzz_<target>.c programs: FUZZ_DRIVER(body) defines
 * LLVMFuzzerInitialize (GSL's abort-on-error handler off, as the daemon
 * does at start-up; the scratch store removed at exit) and
 * LLVMFuzzerTestOneInput, which runs the body and aborts with the verdict
 * on stderr when an invariant fails, so that libFuzzer saves the input as
 * a crash artifact.  Owns nothing.
 */
#ifndef SWAPSPEC_FUZZ_DRIVER_H
#define SWAPSPEC_FUZZ_DRIVER_H

#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>

#include "fuzz_entry.h"

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define FUZZ_DRIVER(body)                                                      \
    int LLVMFuzzerInitialize(int *argc, char ***argv) {                        \
        (void)argc;                                                            \
        (void)argv;                                                            \
        gsl_set_error_handler_off();                                           \
        atexit(fuzz_entry_cleanup);                                            \
        return 0;                                                              \
    }                                                                          \
    int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {             \
        fuzz_verdict verdict;                                                  \
        verdict.message[0] = '\0';                                             \
        if (body(data, size, &verdict) != 0) {                                 \
            fprintf(stderr, "INVARIANT VIOLATED (%s): %s\n", #body,            \
                    verdict.message);                                          \
            abort();                                                           \
        }                                                                      \
        return 0;                                                              \
    }

#endif /* SWAPSPEC_FUZZ_DRIVER_H */
