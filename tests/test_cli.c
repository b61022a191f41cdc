/*
 * test_cli.c — Criterion tests for the `swapspec` command line, run as a
 * separate process.
 *
 * Each test spawns the built binary (SWAPSPEC_BINARY) with posix_spawn,
 * sends its stdout and stderr to files in a per-test mkdtemp directory,
 * parses them with jansson and checks the documented contract: the
 * acceptance figures of predict, the degenerate diagrams of n = 6, the
 * energy window of diagrams, the reproducibility and summary of simulate,
 * and that every bad input gives exit code 2, nothing on stdout and one
 * JSON error object naming the right field.  Reference values are computed
 * here from textbook formulas, never copied from the program's output.
 */
#include <criterion/criterion.h>
#include <dirent.h>
#include <fcntl.h>
#include <jansson.h>
#include <math.h>
#include <spawn.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "swapspec.h"

#ifndef SWAPSPEC_BINARY
#error "SWAPSPEC_BINARY must name the built swapspec executable"
#endif

extern char **environ;

/* ------------------------------------------------------------------------ */
/* Scratch directory, one per test (Criterion runs each test in its own
 * process), removed with everything in it afterwards.                       */

static char tc_dir[64];

static void tc_setup(void) {
    snprintf(tc_dir, sizeof tc_dir, "/tmp/swapspec-cli-XXXXXX");
    cr_assert(mkdtemp(tc_dir) != NULL, "mkdtemp failed");
}

static void tc_teardown(void) {
    DIR *dir = opendir(tc_dir);
    if (dir == NULL)
        return;
    struct dirent *ent;
    char path[sizeof tc_dir + sizeof ent->d_name + 1];
    while ((ent = readdir(dir)) != NULL) {
        if (strcmp(ent->d_name, ".") == 0 || strcmp(ent->d_name, "..") == 0)
            continue;
        snprintf(path, sizeof path, "%s/%s", tc_dir, ent->d_name);
        unlink(path);
    }
    closedir(dir);
    rmdir(tc_dir);
}

TestSuite(cli, .init = tc_setup, .fini = tc_teardown);

/* Writes text to <tc_dir>/name and returns the path in a static buffer. */
static const char *tc_write_file(const char *name, const char *text) {
    static char path[192];
    snprintf(path, sizeof path, "%s/%s", tc_dir, name);
    FILE *f = fopen(path, "w");
    cr_assert(f != NULL, "cannot create %s", path);
    cr_assert(fputs(text, f) >= 0 && fclose(f) == 0, "cannot write %s", path);
    return path;
}

static char *tc_read_file(const char *path, size_t *len) {
    FILE *f = fopen(path, "rb");
    cr_assert(f != NULL, "cannot open %s", path);
    size_t cap = 4096, n = 0;
    char *buf = malloc(cap + 1);
    cr_assert(buf != NULL);
    size_t got;
    while ((got = fread(buf + n, 1, cap - n, f)) > 0) {
        n += got;
        if (n == cap) {
            cap *= 2;
            buf = realloc(buf, cap + 1);
            cr_assert(buf != NULL);
        }
    }
    fclose(f);
    buf[n] = '\0';
    *len = n;
    return buf;
}

/* ------------------------------------------------------------------------ */
/* Running the binary.                                                      */

typedef struct {
    int exit_code; /* -1 when the process died from a signal */
    int signal;
    char *out, *err;
    size_t out_len, err_len;
} tc_run;

#define TC_ARGS(...) ((const char *const[]){__VA_ARGS__, NULL})

static void tc_spawn(tc_run *r, const char *const *args) {
    char out_path[192], err_path[192];
    snprintf(out_path, sizeof out_path, "%s/stdout", tc_dir);
    snprintf(err_path, sizeof err_path, "%s/stderr", tc_dir);
    char *argv[48];
    size_t argc = 0;
    argv[argc++] = (char *)SWAPSPEC_BINARY;
    for (; args[argc - 1] != NULL; argc++) {
        cr_assert(argc + 1 < sizeof argv / sizeof argv[0]);
        argv[argc] = (char *)args[argc - 1];
    }
    argv[argc] = NULL;

    posix_spawn_file_actions_t fa;
    cr_assert(posix_spawn_file_actions_init(&fa) == 0);
    cr_assert(posix_spawn_file_actions_addopen(
                  &fa, 1, out_path, O_WRONLY | O_CREAT | O_TRUNC, 0600) == 0);
    cr_assert(posix_spawn_file_actions_addopen(
                  &fa, 2, err_path, O_WRONLY | O_CREAT | O_TRUNC, 0600) == 0);
    pid_t pid;
    int rc = posix_spawn(&pid, SWAPSPEC_BINARY, &fa, NULL, argv, environ);
    posix_spawn_file_actions_destroy(&fa);
    cr_assert(rc == 0, "posix_spawn(%s) failed: %s", SWAPSPEC_BINARY,
              strerror(rc));
    int status = 0;
    cr_assert(waitpid(pid, &status, 0) == pid, "waitpid failed");
    r->exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
    r->signal = WIFSIGNALED(status) ? WTERMSIG(status) : 0;
    r->out = tc_read_file(out_path, &r->out_len);
    r->err = tc_read_file(err_path, &r->err_len);
}

static void tc_run_free(tc_run *r) {
    free(r->out);
    free(r->err);
}

/* Joins the arguments for messages. */
static const char *tc_show(const char *const *args) {
    static char buf[512];
    size_t n = 0;
    buf[0] = '\0';
    for (size_t k = 0; args[k] != NULL && n + 1 < sizeof buf; k++)
        n += (size_t)snprintf(buf + n, sizeof buf - n, "%s%s", k ? " " : "",
                              args[k]);
    return buf;
}

/* Runs a command that must succeed: exit 0, nothing on stderr, one JSON
 * object on stdout (returned; caller decrefs). */
static json_t *tc_ok(const char *const *args) {
    tc_run r;
    tc_spawn(&r, args);
    cr_assert(r.exit_code == 0, "swapspec %s: exit %d (signal %d), stderr: %s",
              tc_show(args), r.exit_code, r.signal, r.err);
    cr_assert(r.err_len == 0, "swapspec %s: unexpected stderr: %s",
              tc_show(args), r.err);
    json_error_t jerr;
    json_t *doc = json_loadb(r.out, r.out_len, 0, &jerr);
    cr_assert(doc != NULL && json_is_object(doc),
              "swapspec %s: stdout is not one JSON object (%s)", tc_show(args),
              jerr.text);
    tc_run_free(&r);
    return doc;
}

typedef enum { TC_EXACT, TC_PREFIX, TC_CONTAINS } tc_match;

/* Runs a command that must fail on bad input: exit code 2, empty stdout,
 * and exactly one JSON object {"error","field","code"} on stderr whose
 * field matches `field`.  Returns the error object (caller decrefs). */
static json_t *tc_fail(const char *const *args, const char *field,
                       tc_match how) {
    tc_run r;
    tc_spawn(&r, args);
    const char *shown = tc_show(args);
    cr_assert(r.exit_code == 2,
              "swapspec %s: expected exit 2, got %d (signal %d)", shown,
              r.exit_code, r.signal);
    cr_assert(r.out_len == 0, "swapspec %s: stdout must be empty, got: %s",
              shown, r.out);
    json_error_t jerr;
    json_t *obj = json_loadb(r.err, r.err_len, 0, &jerr);
    cr_assert(obj != NULL && json_is_object(obj),
              "swapspec %s: stderr is not one JSON object (%s): %s", shown,
              jerr.text, r.err);
    cr_assert(json_object_size(obj) == 3, "swapspec %s: error has %zu keys",
              shown, json_object_size(obj));
    const char *msg = json_string_value(json_object_get(obj, "error"));
    const char *got = json_string_value(json_object_get(obj, "field"));
    const char *code = json_string_value(json_object_get(obj, "code"));
    cr_assert(msg != NULL && msg[0] != '\0', "swapspec %s: empty message",
              shown);
    cr_assert(got != NULL && code != NULL, "swapspec %s: field/code missing",
              shown);
    int known = 0;
    for (int c = SS_OK + 1; c < SS_STATUS_COUNT; c++)
        known |= strcmp(code, ss_status_name((ss_status)c)) == 0;
    cr_assert(known, "swapspec %s: code '%s' is not in the status table", shown,
              code);
    int match = how == TC_EXACT    ? strcmp(got, field) == 0
                : how == TC_PREFIX ? strncmp(got, field, strlen(field)) == 0
                                   : strstr(got, field) != NULL;
    cr_assert(match, "swapspec %s: field expected %s'%s', got '%s' (%s)", shown,
              how == TC_EXACT ? "" : "to hold ", field, got, msg);
    tc_run_free(&r);
    return obj;
}

/* ------------------------------------------------------------------------ */
/* Reading documents.                                                       */

static json_t *tc_get(const json_t *obj, const char *key) {
    json_t *v = json_object_get(obj, key);
    cr_assert(v != NULL, "key '%s' missing", key);
    return v;
}

static double tc_num(const json_t *obj, const char *key) {
    json_t *v = tc_get(obj, key);
    cr_assert(json_is_number(v), "key '%s' is not a number", key);
    return json_number_value(v);
}

static int64_t tc_int(const json_t *obj, const char *key) {
    json_t *v = tc_get(obj, key);
    cr_assert(json_is_integer(v), "key '%s' is not an integer", key);
    return (int64_t)json_integer_value(v);
}

static int tc_close(double got, double want, double rel) {
    return fabs(got - want) <= rel * fmax(1.0, fabs(want));
}

/* Reads a printed diagram (non-zero rows only) into rows[0..levels-1],
 * zero-padded, asserting it is a diagram of `atoms` boxes. */
static void tc_rows(const json_t *arr, unsigned levels, unsigned atoms,
                    uint32_t *rows) {
    cr_assert(json_is_array(arr), "a diagram must be an array");
    size_t len = json_array_size(arr);
    cr_assert(len >= 1 && len <= levels, "diagram with %zu rows (d = %u)", len,
              levels);
    unsigned sum = 0;
    for (unsigned i = 0; i < levels; i++) {
        json_int_t v = i < len ? json_integer_value(json_array_get(arr, i)) : 0;
        cr_assert(i >= len || v >= 1,
                  "printed row %u is %lld (zero rows "
                  "must be dropped)",
                  i, (long long)v);
        cr_assert(i == 0 || (uint32_t)v <= rows[i - 1], "rows increase");
        rows[i] = (uint32_t)v;
        sum += rows[i];
    }
    cr_assert(sum == atoms, "diagram has %u boxes, expected %u", sum, atoms);
}

/* Content sum from the row form in domain.md §1:
 * c(λ) = Σ_i [λ_i(λ_i − 1)/2 − (i − 1)λ_i], rows counted from 1. */
static int64_t tc_content(const uint32_t *rows, unsigned levels) {
    int64_t c = 0;
    for (unsigned i = 0; i < levels; i++) {
        int64_t r = rows[i];
        c += r * (r - 1) / 2 - (int64_t)i * r;
    }
    return c;
}

static int tc_same_rows(const json_t *arr, const uint32_t *want,
                        unsigned levels) {
    uint32_t rows[SS_LEVELS_MAX] = {0};
    size_t len = json_array_size(arr);
    if (len > levels)
        return 0;
    for (size_t i = 0; i < len; i++)
        rows[i] = (uint32_t)json_integer_value(json_array_get(arr, i));
    return memcmp(rows, want, levels * sizeof *rows) == 0;
}

/* Closed forms of domain.md §2 (exact identities):
 * E[c] = C(n,2)·P2, Var[c] = C(n,2)·[1 + 2(n−2)P3 + C(n−2,2)P2²] − C(n,2)²P2².
 */
static double tc_mean_content(unsigned n, double p2) {
    return 0.5 * n * (n - 1.0) * p2;
}

static double tc_var_content(unsigned n, double p2, double p3) {
    double pairs = 0.5 * n * (n - 1.0), rest = 0.5 * (n - 2.0) * (n - 3.0);
    return pairs * (1.0 + 2.0 * (n - 2.0) * p3 + rest * p2 * p2) -
           pairs * pairs * p2 * p2;
}

/* The calibration used by the energy tests (the boxtrap-a sample values). */
#define TC_CAL_TEXT                                                            \
    "{\"offset\": 12.5, \"pair_shift\": 0.8, \"exchange\": -3.1, "             \
    "\"noise_sd\": 0.6, \"unit\": \"Hz\"}\n"
#define TC_E0 12.5
#define TC_V 0.8
#define TC_J (-3.1)
#define TC_SIGMA 0.6

static double tc_energy(unsigned n, int64_t c) {
    return TC_E0 + TC_V * 0.5 * n * (n - 1.0) + TC_J * (double)c;
}

/* ------------------------------------------------------------------------ */
/* predict                                                                  */

/* The acceptance figures for n = 24, p = (0.6, 0.3, 0.1):
 * P2 = 0.46, P3 = 0.244, so E[c] = 276·0.46 = 126.96 and
 * Var[c] = 276·(1 + 44·0.244 + 231·0.2116) − 276²·0.2116 = 611.064
 * (closed forms of domain.md §2, worked by hand).  Tolerance 1e-9 relative.
 * The number of diagrams of 24 with at most 3 rows is round(27²/12) = 61
 * (OEIS A001399 [from memory]; domain.md §3 quotes 61).  Exact. */
Test(cli, predict_acceptance_figures) {
    json_t *doc = tc_ok(TC_ARGS("predict", "--levels", "3", "--atoms", "24",
                                "--spectrum", "0.6,0.3,0.1"));
    double mean = tc_num(doc, "mean_content");
    double var = tc_num(doc, "content_variance");
    cr_expect(tc_close(mean, 126.96, 1e-9), "mean_content %.17g", mean);
    cr_expect(tc_close(var, 611.064, 1e-9), "content_variance %.17g", var);
    cr_expect(tc_close(mean, tc_mean_content(24, 0.46), 1e-9));
    cr_expect(tc_close(var, tc_var_content(24, 0.46, 0.244), 1e-9));
    cr_expect(tc_int(doc, "total_diagrams") == 61);
    cr_expect(tc_int(doc, "levels") == 3 && tc_int(doc, "atoms") == 24);
    json_t *ps = tc_get(doc, "power_sums");
    cr_expect(tc_close(tc_num(ps, "p2"), 0.46, 1e-12), "p2");
    cr_expect(tc_close(tc_num(ps, "p3"), 0.244, 1e-12), "p3");
    /* Default calibration: energies in units of J, no noise. */
    cr_expect(tc_close(tc_num(doc, "mean_energy"), 126.96, 1e-9));
    cr_expect(tc_close(tc_num(doc, "energy_variance"), 611.064, 1e-9));
    json_t *notes = tc_get(doc, "notes");
    cr_expect(json_is_string(notes) &&
              strstr(json_string_value(notes), "exact") != NULL);
    json_decref(doc);
}

/* Exact P_n for n = 3, p = (1/2, 1/3, 1/6): (3) 5/12, (2,1) 5/9,
 * (1,1,1) 1/36 (statistics-sources.md §6, exact rational arithmetic).
 * The decimal input differs from 1/3, 1/6 by < 1e-16, so 1e-12 relative. */
Test(cli, predict_exact_small_table) {
    json_t *doc =
        tc_ok(TC_ARGS("predict", "--levels", "3", "--atoms", "3", "--spectrum",
                      "0.5,0.3333333333333333,0.16666666666666667"));
    static const uint32_t shapes[3][3] = {{3, 0, 0}, {2, 1, 0}, {1, 1, 1}};
    const double want[3] = {5.0 / 12.0, 5.0 / 9.0, 1.0 / 36.0};
    json_t *list = tc_get(doc, "diagrams");
    cr_assert(json_array_size(list) == 3, "3 diagrams expected");
    for (int s = 0; s < 3; s++) {
        int found = 0;
        for (size_t k = 0; k < 3; k++) {
            json_t *e = json_array_get(list, k);
            if (!tc_same_rows(tc_get(e, "diagram"), shapes[s], 3))
                continue;
            found = 1;
            double p = tc_num(e, "probability");
            cr_expect(fabs(p - want[s]) <= 1e-12 * want[s],
                      "shape %d: P = %.17g, want %.17g", s, p, want[s]);
        }
        cr_expect(found, "shape %d not listed", s);
    }
    /* Most probable first: (2,1), (3), (1,1,1). */
    cr_expect(
        tc_same_rows(tc_get(json_array_get(list, 0), "diagram"), shapes[1], 3));
    json_decref(doc);
}

/* Counts diagrams of n with at most d rows per content value by our own
 * recursive enumeration (largest part first).  counts has n(n−1)+1 slots,
 * index c + C(n,2). */
static void tc_enumerate(unsigned left, unsigned max_part, unsigned row,
                         unsigned d, uint32_t *rows, unsigned n,
                         unsigned *counts) {
    if (left == 0) {
        counts[tc_content(rows, d) + (int64_t)(n * (n - 1) / 2)]++;
        return;
    }
    if (row == d)
        return;
    for (unsigned part = left < max_part ? left : max_part; part >= 1; part--) {
        rows[row] = part;
        tc_enumerate(left - part, part, row + 1, d, rows, n, counts);
        rows[row] = 0;
    }
}

/* Structure of energy_levels for n = 30, d = 6, where many diagrams share a
 * content: every distinct content appears once in increasing order, with
 * as many diagrams as our own enumeration finds (exact), at most 8 listed
 * and diagrams_truncated exactly when more exist; level probabilities sum
 * to 1 (1e-10: the header promises Σ P = 1 ± 1e-12 per table) and
 * Σ P·c over levels equals mean_content (1e-9 relative). */
Test(cli, predict_energy_levels_structure) {
    const unsigned n = 30, d = 6;
    json_t *doc =
        tc_ok(TC_ARGS("predict", "--levels", "6", "--atoms", "30", "--spectrum",
                      "0.25,0.2,0.2,0.15,0.1,0.1", "--top", "0"));
    unsigned counts[30 * 29 + 1] = {0};
    uint32_t rows[SS_LEVELS_MAX] = {0};
    tc_enumerate(n, n, 0, d, rows, n, counts);
    size_t distinct = 0;
    for (size_t k = 0; k < sizeof counts / sizeof counts[0]; k++)
        distinct += counts[k] > 0;

    json_t *levels = tc_get(doc, "energy_levels");
    cr_assert(json_array_size(levels) == distinct, "%zu levels, want %zu",
              json_array_size(levels), distinct);
    cr_expect(json_array_size(tc_get(doc, "diagrams")) == 0, "--top 0");
    double total = 0.0, first_moment = 0.0;
    int64_t previous = INT64_MIN;
    int truncated_seen = 0;
    for (size_t l = 0; l < distinct; l++) {
        json_t *lv = json_array_get(levels, l);
        int64_t c = tc_int(lv, "content");
        cr_assert(c > previous, "contents must increase");
        previous = c;
        int64_t count = tc_int(lv, "diagram_count");
        cr_expect(count == counts[c + n * (n - 1) / 2],
                  "content %lld: %lld diagrams, enumeration finds %u",
                  (long long)c, (long long)count, counts[c + n * (n - 1) / 2]);
        json_t *listed = tc_get(lv, "diagrams");
        size_t shown = json_array_size(listed);
        cr_expect(shown == (size_t)(count < 8 ? count : 8));
        json_t *flag = json_object_get(lv, "diagrams_truncated");
        cr_expect(count > 8 ? json_is_true(flag) : flag == NULL,
                  "diagrams_truncated wrong at content %lld", (long long)c);
        truncated_seen |= count > 8;
        for (size_t k = 0; k < shown; k++) {
            tc_rows(json_array_get(listed, k), d, n, rows);
            cr_expect(tc_content(rows, d) == c);
        }
        double p = tc_num(lv, "probability");
        total += p;
        first_moment += p * (double)c;
    }
    cr_expect(truncated_seen, "this case must exercise truncation");
    cr_expect(fabs(total - 1.0) <= 1e-10, "level probabilities sum %.17g",
              total);
    cr_expect(tc_close(first_moment, tc_num(doc, "mean_content"), 1e-9));
    json_decref(doc);
}

/* The top-K list: sorted by decreasing probability, valid diagrams whose
 * content matches the row formula (domain.md §1, exact) and whose energy is
 * E0 + V·C(n,2) + J·c under the calibration file (1e-12 relative); the
 * moments of the energy follow from the closed forms:
 * mean = E0 + V·276 + J·126.96, variance = J²·611.064 + σ² (1e-9). */
Test(cli, predict_with_calibration) {
    const char *cal = tc_write_file("cal.json", TC_CAL_TEXT);
    json_t *doc =
        tc_ok(TC_ARGS("predict", "--levels", "3", "--atoms", "24", "--spectrum",
                      "0.1,0.6,0.3", "--top", "12", "--calibration", cal));
    cr_expect(tc_close(tc_num(doc, "mean_energy"),
                       TC_E0 + TC_V * 276.0 + TC_J * 126.96, 1e-9));
    cr_expect(tc_close(tc_num(doc, "energy_variance"),
                       TC_J * TC_J * 611.064 + TC_SIGMA * TC_SIGMA, 1e-9));
    json_t *list = tc_get(doc, "diagrams");
    cr_assert(json_array_size(list) == 12, "--top 12");
    double previous = 2.0;
    for (size_t k = 0; k < 12; k++) {
        json_t *e = json_array_get(list, k);
        uint32_t rows[3];
        tc_rows(tc_get(e, "diagram"), 3, 24, rows);
        int64_t c = tc_int(e, "content");
        cr_expect(c == tc_content(rows, 3));
        cr_expect(tc_close(tc_num(e, "energy"), tc_energy(24, c), 1e-12));
        double p = tc_num(e, "probability");
        cr_expect(p <= previous && p > 0.0, "probabilities must decrease");
        previous = p;
    }
    json_t *echo = tc_get(doc, "calibration");
    cr_expect(tc_num(echo, "exchange") == TC_J &&
              tc_num(echo, "noise_sd") == TC_SIGMA);
    cr_expect(strcmp(json_string_value(tc_get(echo, "unit")), "Hz") == 0);
    /* The spectrum is echoed sorted in decreasing order. */
    json_t *p = tc_get(doc, "spectrum");
    cr_expect(json_real_value(json_array_get(p, 0)) == 0.6 &&
              json_real_value(json_array_get(p, 2)) == 0.1);
    json_decref(doc);

    /* More than exist: all 61 listed. */
    doc = tc_ok(TC_ARGS("predict", "--levels", "3", "--atoms", "24",
                        "--spectrum", "0.6,0.3,0.1", "--top", "1000"));
    cr_expect(json_array_size(tc_get(doc, "diagrams")) == 61);
    json_decref(doc);
    /* Default K is 20. */
    doc = tc_ok(TC_ARGS("predict", "--levels", "3", "--atoms", "24",
                        "--spectrum", "0.6,0.3,0.1"));
    cr_expect(json_array_size(tc_get(doc, "diagrams")) == 20);
    json_decref(doc);
}

/* ------------------------------------------------------------------------ */
/* diagrams                                                                 */

/* c(4,1,1) = 6 − 1 − 2 = 3 and c(3,3) = 3 + 0 = 3 (domain.md §2, "check by
 * hand"); no other diagram of 6 with at most 3 rows has content 3. */
Test(cli, diagrams_content_three_at_six) {
    static const uint32_t a[3] = {4, 1, 1}, b[3] = {3, 3, 0};
    json_t *doc = tc_ok(
        TC_ARGS("diagrams", "--levels", "3", "--atoms", "6", "--content", "3"));
    json_t *list = tc_get(doc, "diagrams");
    cr_assert(json_array_size(list) == 2, "exactly two diagrams expected");
    int has_a = 0, has_b = 0;
    for (size_t k = 0; k < 2; k++) {
        json_t *e = json_array_get(list, k);
        has_a |= tc_same_rows(tc_get(e, "diagram"), a, 3);
        has_b |= tc_same_rows(tc_get(e, "diagram"), b, 3);
        cr_expect(tc_int(e, "content") == 3);
    }
    cr_expect(has_a && has_b, "(4,1,1) and (3,3) expected");
    json_t *groups = tc_get(doc, "degenerate_groups");
    cr_assert(json_array_size(groups) == 1, "one degenerate group");
    json_t *g = json_array_get(groups, 0);
    cr_assert(json_array_size(g) == 2);
    cr_expect((tc_same_rows(json_array_get(g, 0), a, 3) &&
               tc_same_rows(json_array_get(g, 1), b, 3)) ||
              (tc_same_rows(json_array_get(g, 0), b, 3) &&
               tc_same_rows(json_array_get(g, 1), a, 3)));
    json_decref(doc);
}

/* All diagrams of 6 with at most 3 rows: 7 of them (OEIS A026820, row 6:
 * 1, 4, 7, ...; statistics-sources.md §6), exactly one content collision
 * for d = 3 (§5.4).  For d = 4, (3,1,1,1) and (2,2,2) both have c = −3
 * (§5.4).  Exact. */
Test(cli, diagrams_all_at_six) {
    json_t *doc = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6"));
    json_t *list = tc_get(doc, "diagrams");
    cr_expect(json_array_size(list) == 7 && tc_int(doc, "total_diagrams") == 7);
    for (size_t k = 0; k < json_array_size(list); k++) {
        uint32_t rows[3];
        json_t *e = json_array_get(list, k);
        tc_rows(tc_get(e, "diagram"), 3, 6, rows);
        cr_expect(tc_int(e, "content") == tc_content(rows, 3));
        cr_expect(tc_num(e, "energy") == (double)tc_content(rows, 3),
                  "default calibration: energy = content");
    }
    cr_expect(json_array_size(tc_get(doc, "degenerate_groups")) == 1);
    json_decref(doc);

    static const uint32_t a[4] = {3, 1, 1, 1}, b[4] = {2, 2, 2, 0};
    doc = tc_ok(TC_ARGS("diagrams", "--levels", "4", "--atoms", "6"));
    json_t *groups = tc_get(doc, "degenerate_groups");
    int found = 0;
    for (size_t k = 0; k < json_array_size(groups); k++) {
        json_t *g = json_array_get(groups, k);
        int ha = 0, hb = 0;
        for (size_t m = 0; m < json_array_size(g); m++) {
            ha |= tc_same_rows(json_array_get(g, m), a, 4);
            hb |= tc_same_rows(json_array_get(g, m), b, 4);
        }
        found |= ha && hb;
    }
    cr_expect(found, "(3,1,1,1) and (2,2,2) must form a degenerate group");
    json_decref(doc);
}

/* Energy window: with the sample calibration E(λ) = 12.5 + 0.8·15 − 3.1·c
 * for n = 6.  A reading 0.5 above E(4,1,1) = 15.2 with σ = 0.6 keeps the
 * diagrams within 3σ = 1.8: here exactly those with c = 3 (the next
 * energies, c = 0 → 24.5 and c = 5 → 9.0, are far outside).  The listed
 * set is checked against every diagram's energy; z = (E(λ) − E)/σ to
 * 1e-12.  With --energy-sd 0 an exact match is required. */
Test(cli, diagrams_energy_window) {
    const char *cal = tc_write_file("cal.json", TC_CAL_TEXT);
    char reading[64];
    double e_read = tc_energy(6, 3) + 0.5;
    snprintf(reading, sizeof reading, "%.17g", e_read);
    json_t *all = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                "--calibration", cal));
    json_t *doc = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                "--energy", reading, "--calibration", cal));
    cr_expect(tc_int(doc, "window_sd") == 3);
    json_t *list = tc_get(doc, "diagrams");
    size_t expected = 0;
    json_t *every = tc_get(all, "diagrams");
    for (size_t k = 0; k < json_array_size(every); k++) {
        double e = tc_num(json_array_get(every, k), "energy");
        cr_expect(tc_close(
            e, tc_energy(6, tc_int(json_array_get(every, k), "content")),
            1e-12));
        expected += fabs(e - e_read) <= 3.0 * TC_SIGMA;
    }
    cr_expect(expected == 2, "the reading was chosen to match c = 3 only");
    cr_assert(json_array_size(list) == expected, "%zu listed, want %zu",
              json_array_size(list), expected);
    for (size_t k = 0; k < expected; k++) {
        json_t *e = json_array_get(list, k);
        cr_expect(tc_int(e, "content") == 3);
        double z = tc_num(e, "z");
        cr_expect(tc_close(z, (tc_energy(6, 3) - e_read) / TC_SIGMA, 1e-12),
                  "z = %.17g", z);
    }
    cr_expect(json_array_size(tc_get(doc, "degenerate_groups")) == 1);
    json_decref(doc);
    json_decref(all);

    /* Exact match (σ = 0): 15.2 matches c = 3 within 1e-9 relative; 15.3
     * matches nothing; no z is given. */
    doc = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6", "--energy",
                        "15.2", "--energy-sd", "0", "--calibration", cal));
    list = tc_get(doc, "diagrams");
    cr_expect(json_array_size(list) == 2);
    cr_expect(json_object_get(json_array_get(list, 0), "z") == NULL);
    json_decref(doc);
    doc = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6", "--energy",
                        "15.3", "--energy-sd", "0", "--calibration", cal));
    cr_expect(json_array_size(tc_get(doc, "diagrams")) == 0);
    json_decref(doc);
}

/* An empty selection says why.  Default calibration (energy = content, no
 * unit); the contents of 6 atoms on 3 levels, by hand from c = Σ_i
 * [λ_i(λ_i−1)/2 − (i−1)λ_i]: (6) 15, (5,1) 9, (4,2) 5, (4,1,1) 3, (3,3) 3,
 * (3,2,1) 0, (2,2,2) −3. */
static void tc_expect_note(const char *what, json_t *doc, const char *want) {
    json_t *note = json_object_get(doc, "note");
    cr_expect(json_is_string(note) &&
                  strstr(json_string_value(note), want) != NULL,
              "%s: note %s, want \"%s\"", what,
              json_is_string(note) ? json_string_value(note) : "(none)", want);
    json_decref(doc);
}

Test(cli, diagrams_say_why_nothing_is_listed) {
    tc_expect_note("content 4",
                   tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                 "--content", "4")),
                   "has content 4: their contents run from -3 to 15");
    tc_expect_note("reading 100",
                   tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                 "--energy", "100", "--energy-sd", "0.1")),
                   "have energies from -3 to 15 only, so the reading is "
                   "outside what the model allows");
    tc_expect_note("reading 7",
                   tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                 "--energy", "7", "--energy-sd", "0.1")),
                   "falls between the energy levels 5 and 9;");
    json_t *doc = tc_ok(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                "--energy", "9", "--energy-sd", "0.1"));
    cr_expect(tc_int(doc, "count") == 1);
    cr_expect(json_object_get(doc, "note") == NULL, "a note beside a listing");
    json_decref(doc);
}

/* ------------------------------------------------------------------------ */
/* simulate                                                                 */

/* Sample mean and variance (K − 1 denominator) in long double. */
static void tc_moments(const json_t *energies, double *mean, double *var) {
    size_t k = json_array_size(energies);
    long double s = 0.0L, dev = 0.0L;
    for (size_t i = 0; i < k; i++)
        s += json_number_value(json_array_get(energies, i));
    long double m = s / (long double)k;
    for (size_t i = 0; i < k; i++) {
        long double x = json_number_value(json_array_get(energies, i));
        dev += (x - m) * (x - m);
    }
    *mean = (double)m;
    *var = (double)(dev / (long double)(k - 1));
}

/* Same seed, same output (byte for byte); another seed, other readings.
 * The summary equals the mean and K−1 variance of the printed energies
 * (1e-12 relative: both are two-pass sums of the same numbers).  With the
 * default calibration and no noise each energy equals the content of its
 * diagram (domain.md §1; exact).  The run's mean lies within 6 standard
 * errors of E[c] = 126.96, sd = sqrt(611.064) (domain.md §2 closed forms;
 * a correct sampler fails this with probability ~2e-9). */
Test(cli, simulate_reproducible_and_consistent) {
    const char *const *args =
        TC_ARGS("simulate", "--levels", "3", "--atoms", "24", "--spectrum",
                "0.6,0.3,0.1", "--shots", "2000", "--seed", "7");
    tc_run r1, r2, r3;
    tc_spawn(&r1, args);
    tc_spawn(&r2, args);
    tc_spawn(&r3,
             TC_ARGS("simulate", "--levels", "3", "--atoms", "24", "--spectrum",
                     "0.6,0.3,0.1", "--shots", "2000", "--seed", "8"));
    cr_assert(r1.exit_code == 0 && r2.exit_code == 0 && r3.exit_code == 0,
              "simulate failed: %s", r1.err);
    cr_expect(r1.out_len == r2.out_len &&
                  memcmp(r1.out, r2.out, r1.out_len) == 0,
              "same seed must reproduce the output");
    json_t *d1 = json_loadb(r1.out, r1.out_len, 0, NULL);
    json_t *d3 = json_loadb(r3.out, r3.out_len, 0, NULL);
    cr_assert(d1 != NULL && d3 != NULL);
    cr_expect(!json_equal(tc_get(d1, "energies"), tc_get(d3, "energies")),
              "seeds 7 and 8 gave identical readings");

    json_t *energies = tc_get(d1, "energies");
    json_t *diagrams = tc_get(d1, "diagrams");
    cr_assert(json_array_size(energies) == 2000 &&
              json_array_size(diagrams) == 2000);
    for (size_t k = 0; k < 2000; k++) {
        uint32_t rows[3];
        tc_rows(json_array_get(diagrams, k), 3, 24, rows);
        cr_expect(json_number_value(json_array_get(energies, k)) ==
                      (double)tc_content(rows, 3),
                  "shot %zu: energy != content", k);
    }
    double mean, var;
    tc_moments(energies, &mean, &var);
    json_t *summary = tc_get(d1, "summary");
    cr_expect(tc_int(summary, "shots") == 2000);
    cr_expect(tc_close(tc_num(summary, "mean_energy"), mean, 1e-12));
    cr_expect(tc_close(tc_num(summary, "energy_variance"), var, 1e-12));
    double se = sqrt(611.064 / 2000.0);
    cr_expect(fabs(mean - 126.96) <= 6.0 * se, "mean %.6f far from 126.96",
              mean);
    cr_expect(tc_int(d1, "seed") == 7);
    json_decref(d1);
    json_decref(d3);
    tc_run_free(&r1);
    tc_run_free(&r2);
    tc_run_free(&r3);
}

/* Detection noise: residuals E − E(λ) under the sample calibration have
 * mean 0 and variance σ² = 0.36.  Bands of 6 standard errors: for the mean
 * σ/√K; for the variance σ²·sqrt(2/(K−1)) (normal theory). */
Test(cli, simulate_noise_and_one_shot) {
    const char *cal = tc_write_file("cal.json", TC_CAL_TEXT);
    json_t *doc = tc_ok(TC_ARGS("simulate", "--levels", "3", "--atoms", "24",
                                "--spectrum", "0.6,0.3,0.1", "--shots", "2000",
                                "--calibration", cal));
    json_t *energies = tc_get(doc, "energies");
    json_t *diagrams = tc_get(doc, "diagrams");
    long double s = 0.0L, s2 = 0.0L;
    const size_t k = json_array_size(energies);
    cr_assert(k == 2000);
    for (size_t i = 0; i < k; i++) {
        uint32_t rows[3];
        tc_rows(json_array_get(diagrams, i), 3, 24, rows);
        double r = json_number_value(json_array_get(energies, i)) -
                   tc_energy(24, tc_content(rows, 3));
        s += r;
        s2 += (long double)r * r;
    }
    double m = (double)(s / k);
    double v = (double)((s2 - s * s / k) / (k - 1));
    cr_expect(fabs(m) <= 6.0 * TC_SIGMA / sqrt((double)k), "mean %g", m);
    cr_expect(fabs(v - 0.36) <= 6.0 * 0.36 * sqrt(2.0 / ((double)k - 1.0)),
              "noise variance %g", v);
    cr_expect(tc_int(doc, "seed") == 1, "default seed is 1");
    json_decref(doc);

    doc = tc_ok(TC_ARGS("simulate", "--levels", "3", "--atoms", "24",
                        "--spectrum", "0.6,0.3,0.1", "--shots", "1"));
    json_t *summary = tc_get(doc, "summary");
    cr_expect(json_is_null(tc_get(summary, "energy_variance")),
              "one shot has no sample variance");
    json_decref(doc);
}

/* ------------------------------------------------------------------------ */
/* Bad input                                                                */

#define P3 "--levels", "3", "--atoms", "24", "--spectrum"

static const struct {
    const char *args[16];
    const char *field;
    tc_match how;
} tc_bad[] = {
    {{"predict", "--levels", "1", "--atoms", "24", "--spectrum", "0.5,0.5"},
     "levels",
     TC_EXACT},
    {{"predict", "--levels", "17", "--atoms", "24", "--spectrum", "1"},
     "levels",
     TC_EXACT},
    {{"predict", "--levels", "3.5", "--atoms", "24", "--spectrum", "1"},
     "levels",
     TC_EXACT},
    {{"predict", "--levels", "3", "--atoms", "0", "--spectrum", "0.6,0.3,0.1"},
     "atoms",
     TC_EXACT},
    {{"predict", "--levels", "3", "--atoms", "-4", "--spectrum", "0.6,0.3,0.1"},
     "atoms",
     TC_EXACT},
    {{"predict", "--levels", "3", "--atoms", "2x", "--spectrum", "0.6,0.3,0.1"},
     "atoms",
     TC_EXACT},
    {{"predict", P3, "0.6,0.5,-0.1"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "nan,0.5,0.5"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.5,inf,0.5"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.6,0.4"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.2,0.2,0.2,0.4"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.6,0.3,0.2"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.6,0.3,0.100001"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.6,,0.4"}, "spectrum", TC_PREFIX},
    {{"predict", P3, "0.6,0.3,0.1", "--frobnicate", "2"},
     "frobnicate",
     TC_EXACT},
    {{"predict", P3, "0.6,0.3,0.1", "--top"}, "top", TC_EXACT},
    {{"predict", "--levels", "3", "--atoms", "--spectrum", "0.6,0.3,0.1"},
     "atoms",
     TC_EXACT},
    {{"predict", "--levels", "3", "--spectrum", "0.6,0.3,0.1"},
     "atoms",
     TC_EXACT},
    {{"predict", P3, "0.6,0.3,0.1", "--levels", "3"}, "levels", TC_EXACT},
    {{"predict", P3, "0.6,0.3,0.1", "--top", "-1"}, "top", TC_EXACT},
    {{"diagrams", "--levels", "3", "--atoms", "6", "--content", "3", "--energy",
      "1"},
     "content",
     TC_EXACT},
    {{"diagrams", "--levels", "3", "--atoms", "6", "--energy", "1",
      "--energy-sd", "-1"},
     "energy-sd",
     TC_EXACT},
    {{"diagrams", "--levels", "3", "--atoms", "6", "--energy", "inf"},
     "energy",
     TC_EXACT},
    {{"diagrams", "--levels", "3", "--atoms", "6", "--content", "1.5"},
     "content",
     TC_EXACT},
    {{"simulate", P3, "0.6,0.3,0.1", "--shots", "0"}, "shots", TC_EXACT},
    {{"simulate", P3, "0.6,0.3,0.1", "--shots", "1000001"}, "shots", TC_EXACT},
    {{"simulate", P3, "0.6,0.3,0.1"}, "shots", TC_EXACT},
    {{"simulate", P3, "0.6,0.3,0.1", "--shots", "10", "--seed", "x"},
     "seed",
     TC_EXACT},
    {{"simulate", P3, "0.7,0.3,0.1", "--shots", "10"}, "spectrum", TC_PREFIX},
    {{"frobnicate"}, "command", TC_EXACT},
};

Test(cli, bad_inputs_give_json_errors) {
    for (size_t t = 0; t < sizeof tc_bad / sizeof tc_bad[0]; t++)
        json_decref(tc_fail(tc_bad[t].args, tc_bad[t].field, tc_bad[t].how));
}

/* The core says by how much the sum is off: 1.1 is off by 0.1. */
Test(cli, spectrum_sum_error_says_by_how_much) {
    json_t *e =
        tc_fail(TC_ARGS("predict", P3, "0.6,0.3,0.2"), "spectrum", TC_PREFIX);
    const char *msg = json_string_value(tc_get(e, "error"));
    cr_expect(strstr(msg, "0.1") != NULL, "message: %s", msg);
    json_decref(e);
}

static const struct {
    const char *text;
    const char *field;
} tc_bad_cal[] = {
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": 1, \"noise_sd\": 0, "
     "\"colour\": \"blue\"}",
     "colour"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": 1, \"exchange\": 2, "
     "\"noise_sd\": 0}",
     "exchange"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": \"-3.1\", "
     "\"noise_sd\": 0}",
     "exchange"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": 0, \"noise_sd\": 0}",
     "exchange"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": 1, \"noise_sd\": -1}",
     "noise_sd"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"noise_sd\": 0}", "exchange"},
    {"{\"offset\": 1, \"pair_shift\": 0, \"exchange\": 1, \"noise_sd\": 0, "
     "\"unit\": 5}",
     "unit"},
    {"{\"offset\": 1, \"pair_shift\": true, \"exchange\": 1, "
     "\"noise_sd\": 0}",
     "pair_shift"},
    {"{\"offset\": 1, \"pair_shift\": 0,", "calibration"},
    {"[12.5, 0.8, -3.1, 0.6]", "calibration"},
};

/* A malformed calibration file fails every command, naming the key. */
Test(cli, calibration_file_errors_name_the_key) {
    for (size_t t = 0; t < sizeof tc_bad_cal / sizeof tc_bad_cal[0]; t++) {
        const char *path = tc_write_file("bad.json", tc_bad_cal[t].text);
        json_decref(tc_fail(
            TC_ARGS("predict", P3, "0.6,0.3,0.1", "--calibration", path),
            tc_bad_cal[t].field, TC_CONTAINS));
        json_decref(tc_fail(TC_ARGS("diagrams", "--levels", "3", "--atoms", "6",
                                    "--calibration", path),
                            tc_bad_cal[t].field, TC_CONTAINS));
    }
    char missing[192];
    snprintf(missing, sizeof missing, "%s/no-such-file.json", tc_dir);
    json_decref(tc_fail(TC_ARGS("simulate", P3, "0.6,0.3,0.1", "--shots", "3",
                                "--calibration", missing),
                        "calibration", TC_EXACT));
}

/* ------------------------------------------------------------------------ */
/* Help, version, reserved commands                                          */

Test(cli, help_version_and_reserved_commands) {
    tc_run r;
    tc_spawn(&r, TC_ARGS("--help"));
    cr_expect(r.exit_code == 0 && strstr(r.out, "predict") &&
              strstr(r.out, "diagrams") && strstr(r.out, "simulate"));
    tc_run_free(&r);
    tc_spawn(&r, TC_ARGS("predict", "--help"));
    cr_expect(r.exit_code == 0 && strstr(r.out, "--spectrum") &&
              strstr(r.out, "--top") && strstr(r.out, "--calibration"));
    tc_run_free(&r);
    tc_spawn(&r, TC_ARGS("simulate", "--levels", "3", "--help"));
    cr_expect(r.exit_code == 0 && strstr(r.out, "--seed") && r.err_len == 0);
    tc_run_free(&r);
    tc_spawn(&r, TC_ARGS("--version"));
    cr_expect(r.exit_code == 0 && strncmp(r.out, "swapspec ", 9) == 0);
    tc_run_free(&r);
    /* serve with settings it cannot use fails before listening, naming
     * the setting (the daemon itself is tested in test_http.c) */
    json_decref(
        tc_fail(TC_ARGS("serve", "--listen", "nowhere"), "listen", TC_EXACT));
    json_decref(
        tc_fail(TC_ARGS("serve", "--threads", "0"), "threads", TC_EXACT));
    json_decref(tc_fail(TC_ARGS("frobnicate"), "command", TC_EXACT));
    /* analyze needs its input */
    json_decref(tc_fail(TC_ARGS("analyze"), "input", TC_EXACT));
}

/* ------------------------------------------------------------------------ */
/* analyze: the request document from the command line                      */

Test(cli, analyze_sample_request) {
    /* samples/analysis-request.json is simulated from the stated true
     * spectrum (0.55, 0.30, 0.15) (samples/make-analysis-request.sh); the
     * estimate is statistical, so only its shape and self-consistency are
     * asserted here (coverage is tested in test_coverage.c). */
    json_t *doc = tc_ok(TC_ARGS("analyze", SWAPSPEC_SOURCE_DIR
                                "/samples/analysis-request.json"));
    json_t *sp = tc_get(doc, "spectrum");
    json_t *v = tc_get(sp, "values"), *lo = tc_get(sp, "lower"),
           *hi = tc_get(sp, "upper");
    cr_assert(json_array_size(v) == 3);
    double sum = 0;
    for (size_t i = 0; i < 3; i++) {
        double x = json_number_value(json_array_get(v, i));
        sum += x;
        cr_expect(json_number_value(json_array_get(lo, i)) <= x &&
                  x <= json_number_value(json_array_get(hi, i)));
        if (i > 0)
            cr_expect(x <= json_number_value(json_array_get(v, i - 1)),
                      "values must be descending");
    }
    cr_expect(fabs(sum - 1.0) < 1e-9, "values sum to %.17g", sum);
    cr_expect(json_array_size(tc_get(doc, "runs")) == 2);
    cr_expect(json_is_string(tc_get(doc, "note")));
    cr_expect(strcmp(json_string_value(tc_get(doc, "label")),
                     "quillfeather/boxtrap-a/2026-11-30/demo") == 0);
    json_decref(doc);
}

Test(cli, analyze_bad_requests_name_the_field) {
    static const struct {
        const char *body, *field;
    } cases[] = {
        {"{\"levels\":3,\"runs\":[{\"atoms\":6,\"shots\":10,"
         "\"mean_energy\":3,\"energy_variance\":-1}]}",
         "runs[0].energy_variance"},
        {"{\"levels\":3,\"runs\":[{\"atoms\":6,\"shots\":10,"
         "\"mean_energy\":3,\"energy_variance\":1,\"colour\":1}]}",
         "runs[0].colour"},
        {"{\"levels\":3,\"runs\":[{\"atoms\":6,\"energies\":[]}]}",
         "runs[0].energies"},
        {"{\"levels\":3,\"runs\":[{\"atoms\":6,\"energies\":[1,\"x\"]}]}",
         "runs[0].energies[1]"},
        {"{\"levels\":3,\"confidence\":1.5,\"runs\":[{\"atoms\":6,"
         "\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "confidence"},
        {"{\"levels\":3,\"calibration\":{\"offset\":0,\"pair_shift\":0,"
         "\"exchange\":0,\"noise_sd\":0},\"runs\":[{\"atoms\":6,"
         "\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "calibration.exchange"},
        {"{\"levels\":3,\"runs\":[{\"atoms\":6,\"shots\":1,"
         "\"mean_energy\":3,\"energy_variance\":1}]}",
         "runs[0].shots"},
        {"{\"levels\":3,\"method\":\"guess\",\"runs\":[{\"atoms\":6,"
         "\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "method"},
        {"{\"levels\":3,\"levels\":4,\"runs\":[]}", ""},
        {"[1,2]", ""},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        char name[32];
        snprintf(name, sizeof name, "req%zu.json", k);
        const char *path = tc_write_file(name, cases[k].body);
        json_decref(
            tc_fail(TC_ARGS("analyze", path), cases[k].field, TC_EXACT));
    }
}

/* The command line's compute limits (issue 7).  simulate keeps its own cap
 * of 10^9 simulated atoms (shots × atoms, server/cmd_simulate.c), checked
 * before any drawing: 10^6 shots of 1001 atoms (1.001·10^9; about 30 s of
 * drawing at the measured 30 ns an atom) are refused at once, naming
 * shots and the product.  The service's tighter per-request limits are not
 * applied here: the prediction of 100 000 atoms on 2 levels with top 0
 * lists 50 001 energy levels (floor(n/2) + 1 diagrams with at most two
 * rows, OEIS A026820, each its own level since c is strictly monotone in
 * the second row, domain.md §2) and as many diagrams under them, 100 002
 * entries, over the 100 000 a served document may hold. */
Test(cli, compute_limits_of_the_command_line) {
    json_t *e =
        tc_fail(TC_ARGS("simulate", "--levels", "3", "--atoms", "1001",
                        "--spectrum", "0.6,0.3,0.1", "--shots", "1000000"),
                "shots", TC_EXACT);
    const char *msg = json_string_value(tc_get(e, "error"));
    cr_expect(strstr(msg, "1001000000") && strstr(msg, "1000000000"),
              "message: %s", msg);
    cr_expect(strcmp(json_string_value(tc_get(e, "code")),
                     "work-budget-exceeded") == 0);
    json_decref(e);
    json_t *doc = tc_ok(TC_ARGS("predict", "--levels", "2", "--atoms", "100000",
                                "--spectrum", "0.5,0.5", "--top", "0"));
    cr_expect(tc_int(doc, "total_diagrams") == 50001);
    cr_expect(json_array_size(tc_get(doc, "energy_levels")) == 50001);
    json_decref(doc);
}
