/*
 * bench_core.c — the core benchmark: prints a table of (n, d) → number of
 * diagrams, wall seconds and peak resident memory for the full exact
 * Schur–Weyl distribution, and the sampler's shots per second.
 *
 * Each distribution case runs in a forked child so that its peak memory
 * (ru_maxrss from wait4) is its own.  Figures are printed, never asserted:
 * performance targets are read off this table (README, issue notes).
 * Run: ./build/swapspec-bench   (Release build; `--quick` skips (100, 10)).
 */
#include "swapspec.h"

#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

static double bench_now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

/* A generic spectrum with distinct eigenvalues: p_i ∝ d − i. */
static void bench_spectrum(unsigned d, double *p) {
    double norm = 0.5 * d * (d + 1.0);
    for (unsigned i = 0; i < d; i++)
        p[i] = (double)(d - i) / norm;
}

/* Child: compute the distribution, write "count seconds" to fd. */
static int bench_child(unsigned n, unsigned d, int fd) {
    double p[SS_LEVELS_MAX];
    bench_spectrum(d, p);
    ss_error err;
    ss_error_clear(&err);
    ss_distribution *dist = NULL;
    double t0 = bench_now();
    ss_status st = ss_distribution_compute(n, d, p, d, NULL, &dist, &err);
    double secs = bench_now() - t0;
    char line[128];
    int len;
    if (st != SS_OK)
        len = snprintf(line, sizeof line, "error %s\n", err.message);
    else
        len = snprintf(line, sizeof line, "%zu %.3f %.2e\n",
                       dist->diagrams->count, secs, dist->total - 1.0);
    ss_distribution_free(dist);
    return write(fd, line, (size_t)len) == len ? 0 : 1;
}

static void bench_distribution(unsigned n, unsigned d) {
    int pipefd[2];
    if (pipe(pipefd) != 0)
        return;
    pid_t pid = fork();
    if (pid == 0) {
        close(pipefd[0]);
        _exit(bench_child(n, d, pipefd[1]));
    }
    close(pipefd[1]);
    char buf[256] = {0};
    ssize_t got = read(pipefd[0], buf, sizeof buf - 1);
    close(pipefd[0]);
    int status = 0;
    struct rusage ru;
    memset(&ru, 0, sizeof ru);
    wait4(pid, &status, 0, &ru);
    size_t count = 0;
    double secs = 0.0, dev = 0.0;
    if (got > 0 && sscanf(buf, "%zu %lf %lf", &count, &secs, &dev) == 3)
        printf("| %5u | %2u | %10zu | %8.3f | %9.1f | %9.1e |\n", n, d, count,
               secs, (double)ru.ru_maxrss / 1024.0, dev);
    else
        printf("| %5u | %2u | failed: %s", n, d, buf);
    fflush(stdout);
}

static void bench_sampler(unsigned n, unsigned d, unsigned long shots) {
    double p[SS_LEVELS_MAX];
    bench_spectrum(d, p);
    ss_sampler *s = NULL;
    ss_error err;
    ss_error_clear(&err);
    if (ss_sampler_alloc(d, p, d, &s, &err) != SS_OK) {
        printf("sampler: %s\n", err.message);
        return;
    }
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 7);
    uint32_t rows[SS_LEVELS_MAX];
    unsigned long long sink = 0;
    double t0 = bench_now();
    for (unsigned long k = 0; k < shots; k++) {
        ss_sampler_draw(s, rng, n, rows, &err);
        sink += rows[0];
    }
    double secs = bench_now() - t0;
    printf("sampler (n = %u, d = %u): %lu shots in %.3f s = %.0f shots/s "
           "(mean first row %.3f)\n",
           n, d, shots, secs, (double)shots / secs,
           (double)sink / (double)shots);
    gsl_rng_free(rng);
    ss_sampler_free(s);
}

/* Inversion timings: a 10-run moments request (summary runs at n = 8..26,
 * exact closed-form means and variances), the same with 1000 bootstrap
 * replicates, and the likelihood on 10 000 simulated shots. */
static void bench_moments(void) {
    ss_run runs[10];
    for (unsigned r = 0; r < 10; r++) {
        unsigned n = 8 + 2 * r;
        double p2 = 0.46, p3 = 0.244; /* p = (0.6, 0.3, 0.1) */
        runs[r] = (ss_run){
            n,    400, ss_content_mean(n, p2), ss_content_variance(n, p2, p3),
            NULL, 0};
    }
    ss_analysis_request req = ss_analysis_request_default();
    req.levels = 3;
    req.runs = runs;
    req.run_count = 10;
    req.method = SS_METHOD_MOMENTS;
    ss_error err;
    ss_error_clear(&err);
    ss_analysis *a = NULL;
    /* five batches of 100: the fastest batch is the cost without other
     * jobs on the machine (common practice on shared machines), the mean
     * over all 500 what this run saw */
    int reps = 100;
    double per = HUGE_VAL, total = 0;
    for (int batch = 0; batch < 5; batch++) {
        double t0 = bench_now();
        for (int i = 0; i < reps; i++) {
            if (ss_analysis_run(&req, &a, &err) != SS_OK) {
                printf("moments: %s\n", err.message);
                return;
            }
            ss_analysis_free(a);
        }
        double t = bench_now() - t0;
        total += t;
        per = fmin(per, t / reps);
    }
    double mean = total / (5.0 * reps);
    req.bootstrap = 1000;
    double t0 = bench_now();
    ss_analysis_run(&req, &a, &err);
    double boot = bench_now() - t0;
    ss_analysis_free(a);
    printf("moments, 10 summary runs (d = 3): %.1f us per request (fastest "
           "batch of 100; mean of 500: %.1f us); with 1000 bootstrap "
           "replicates: %.1f ms\n",
           per * 1e6, mean * 1e6, boot * 1e3);
}

static void bench_likelihood(unsigned n, unsigned d, size_t shots) {
    double p[SS_LEVELS_MAX];
    bench_spectrum(d, p);
    ss_sampler *s = NULL;
    ss_error err;
    ss_error_clear(&err);
    if (ss_sampler_alloc(d, p, d, &s, &err) != SS_OK)
        return;
    gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(rng, 3);
    ss_calibration cal = ss_calibration_default();
    double *energies = malloc(shots * sizeof *energies);
    uint32_t rows[SS_LEVELS_MAX];
    for (size_t k = 0; energies && k < shots; k++)
        ss_sampler_shot(s, rng, n, &cal, rows, &energies[k], &err);
    ss_run run = {n, 0, 0, 0, energies, shots};
    ss_analysis_request req = ss_analysis_request_default();
    req.levels = d;
    req.runs = &run;
    req.run_count = 1;
    req.method = SS_METHOD_LIKELIHOOD;
    ss_analysis *a = NULL;
    double t0 = bench_now();
    ss_status st = ss_analysis_run(&req, &a, &err);
    double secs = bench_now() - t0;
    if (st == SS_OK)
        printf("likelihood, %zu shots at (n = %u, d = %u): %.3f s "
               "(%u simplex iterations; p1 = %.4f ± %.4f, truth %.4f)\n",
               shots, n, d, secs, a->diagnostics.iterations, a->values[0],
               a->stderr_[0], p[0]);
    else
        printf("likelihood (n = %u, d = %u): %s\n", n, d, err.message);
    ss_analysis_free(a);
    free(energies);
    gsl_rng_free(rng);
    ss_sampler_free(s);
}

int main(int argc, char **argv) {
    int quick = argc > 1 && strcmp(argv[1], "--quick") == 0;
    static const unsigned cases[][2] = {
        {1000, 2}, {300, 3}, {100, 4}, {60, 10}, {100, 10}};
    printf("Exact Schur–Weyl distribution, spectrum p_i ∝ d − i, one core\n");
    printf("|     n |  d |   diagrams |  seconds | peak MiB  | Σ P − 1   |\n");
    printf("|------:|---:|-----------:|---------:|----------:|----------:|\n");
    fflush(stdout);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        if (quick && cases[i][0] == 100 && cases[i][1] == 10)
            continue;
        bench_distribution(cases[i][0], cases[i][1]);
    }
    bench_sampler(30, 10, quick ? 200000ul : 2000000ul);
    bench_moments();
    bench_likelihood(12, 3, 10000);
    bench_likelihood(20, 6, 10000);
    return 0;
}
