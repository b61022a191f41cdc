/*
 * budget.c — the clock behind ss_budget.max_seconds: deadlines of the
 * iterative phases (likelihood fit, bootstrap) on CLOCK_MONOTONIC, which
 * no change of the wall clock moves.  Owns nothing.
 */
#include "internal.h"

#include <time.h>

double ss__now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

double ss__deadline(const ss_budget *budget) {
    if (budget == NULL || !(budget->max_seconds > 0))
        return 0.0;
    return ss__now() + budget->max_seconds;
}
