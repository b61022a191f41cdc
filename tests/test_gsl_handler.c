/*
 * test_gsl_handler.c — the core never reaches GSL's error handler.
 *
 * Every other test program switches GSL's abort-on-error handler off, as
 * the executable does.  This one deliberately keeps GSL's default handler
 * (which calls abort()) and drives the core through awkward inputs: data
 * outside the physical region, zero and negative excess variance, pure and
 * maximally mixed states, ties, per-shot readings that only a boundary
 * spectrum explains, and the likelihood where it vanishes.  A GSL error
 * anywhere would abort the process and Criterion would report a crash.
 */
#include <criterion/criterion.h>
#include <math.h>

#include "swapspec.h"

/* Runs one analysis; the status may be an error (bad data is allowed to
 * fail cleanly), but the call must return. */
static ss_status gh_run(unsigned d, const ss_run *runs, size_t n,
                        ss_method method, double noise) {
    ss_analysis_request req = ss_analysis_request_default();
    req.levels = d;
    req.runs = runs;
    req.run_count = n;
    req.method = method;
    req.calibration.noise_sd = noise;
    req.bootstrap = 20;
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *a = NULL;
    ss_status st = ss_analysis_run(&req, &a, &err);
    cr_assert((st == SS_OK) == (a != NULL));
    if (a != NULL) {
        for (unsigned i = 0; i < d; i++)
            cr_assert(isfinite(a->values[i]) && a->values[i] >= -1e-12,
                      "value %u not a probability", i);
    }
    ss_analysis_free(a);
    return st;
}

Test(gsl_handler, summary_runs_at_the_edges) {
    const double means[] = {-30.0, 0.0, 22.5, 45.0, 60.0, 1e6};
    const double vars[] = {0.0, 1e-9, 3.0, 45.0, 1e4};
    for (unsigned d = 2; d <= 5; d++)
        for (size_t m = 0; m < sizeof means / sizeof means[0]; m++)
            for (size_t v = 0; v < sizeof vars / sizeof vars[0]; v++) {
                ss_run run = {10, 400, means[m], vars[v], NULL, 0};
                cr_expect(gh_run(d, &run, 1, SS_METHOD_MOMENTS, 0.0) == SS_OK);
                cr_expect(gh_run(d, &run, 1, SS_METHOD_MOMENTS, 2.0) == SS_OK);
            }
}

Test(gsl_handler, per_shot_runs_at_the_edges) {
    /* all shots at the maximal content (pure-state data), all at the
     * minimal one for d = 3 and n = 6, and a mixture the interior cannot
     * explain well */
    double pure[40], low[40], mixed[40];
    for (int k = 0; k < 40; k++) {
        pure[k] = 15.0; /* c(6) = 15 */
        low[k] = -3.0;  /* c(2,2,2) = -3 */
        mixed[k] = k % 2 ? 15.0 : -3.0;
    }
    const double *sets[] = {pure, low, mixed};
    for (size_t s = 0; s < 3; s++) {
        ss_run run = {6, 0, 0, 0, sets[s], 40};
        cr_expect(gh_run(3, &run, 1, SS_METHOD_LIKELIHOOD, 0.0) == SS_OK);
        cr_expect(gh_run(3, &run, 1, SS_METHOD_MOMENTS, 0.0) == SS_OK);
        cr_expect(gh_run(4, &run, 1, SS_METHOD_LIKELIHOOD, 0.5) == SS_OK);
    }
}
