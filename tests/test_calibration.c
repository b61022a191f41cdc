/*
 * test_calibration.c — Criterion tests for the small modules around the
 * numbers: calibration (ss_calibration_default / _validate / _energy /
 * _content), spectrum helpers (ss_spectrum_validate, ss_spectrum_power_sum),
 * the moment closed forms ss_content_mean / ss_content_variance on
 * hand-computed cases, and the status table and error record
 * (ss_status_name / _message / _http, ss_error_set / _clear).
 */
#include <float.h>
#include <stdio.h>

#include "testutil.h"

TestSuite(calibration, .init = tu_quiet_gsl);

static void expect_rejected(ss_calibration cal, const char *field_part,
                            const char *what) {
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_calibration_validate(&cal, &err);
    tu_expect_error(st, &err, SS_EINVAL, field_part, what);
}

/* Header: SS_EINVAL naming the field for non-finite values, exchange == 0,
 * noise_sd < 0, unit not NUL-terminated.  Field names are checked loosely
 * (the field must contain the member name). */
Test(calibration, validate_rejects_each_field) {
    ss_calibration base = ss_calibration_default();
    ss_error err;
    ss_error_clear(&err);
    cr_assert(ss_calibration_validate(&base, &err) == SS_OK,
              "default calibration rejected: %s", err.message);

    ss_calibration c = base;
    c.exchange = 0.0;
    expect_rejected(c, "exchange", "exchange = 0");
    c = base;
    c.exchange = NAN;
    expect_rejected(c, "exchange", "exchange = NaN");
    c = base;
    c.offset = NAN;
    expect_rejected(c, "offset", "offset = NaN");
    c = base;
    c.pair_shift = INFINITY;
    expect_rejected(c, "pair_shift", "pair_shift = inf");
    c = base;
    c.noise_sd = -0.1;
    expect_rejected(c, "noise_sd", "noise_sd < 0");
    c = base;
    c.noise_sd = INFINITY;
    expect_rejected(c, "noise_sd", "noise_sd = inf");
    c = base;
    memset(c.unit, 'x', sizeof c.unit);
    expect_rejected(c, "unit", "unit without NUL");

    /* a negative exchange and a zero noise are legal */
    c = base;
    c.exchange = -3.0;
    c.noise_sd = 0.0;
    snprintf(c.unit, sizeof c.unit, "kHz");
    ss_error_clear(&err);
    cr_expect(ss_calibration_validate(&c, &err) == SS_OK,
              "J = −3, σ = 0 rejected: %s (%s)", err.field, err.message);
}

/* Default (header): offset 0, pair_shift 0, exchange 1, noise_sd 0, unit "". */
Test(calibration, default_values) {
    ss_calibration c = ss_calibration_default();
    cr_expect(c.offset == 0.0 && c.pair_shift == 0.0 && c.exchange == 1.0 &&
                  c.noise_sd == 0.0 && c.unit[0] == '\0',
              "default calibration: (%g, %g, %g, %g, \"%s\")", c.offset,
              c.pair_shift, c.exchange, c.noise_sd, c.unit);
    /* in units of J an energy reading equals the content sum */
    cr_expect(ss_calibration_energy(&c, 6, 3) == 3.0, "default E for c = 3: %g",
              ss_calibration_energy(&c, 6, 3));
}

/* E = offset + V·C(n,2) + J·c (domain.md §1), worked by hand:
 *   E0 = 10, V = 0.5, J = −2, n = 4, c = 2:   10 + 3 − 4 = 9
 *   E0 = 0,  V = 1,   J = 3,  n = 6, c = −3:  0 + 15 − 9 = 6
 *   E0 = −1.25, V = 0, J = 0.5, n = 2, c = 1: −0.75
 * Exact in binary floating point. */
Test(calibration, energy_hand_examples) {
    static const struct {
        double e0, v, j;
        unsigned n;
        int64_t c;
        double want;
    } cases[] = {
        {10.0, 0.5, -2.0, 4, 2, 9.0},
        {0.0, 1.0, 3.0, 6, -3, 6.0},
        {-1.25, 0.0, 0.5, 2, 1, -0.75},
    };
    for (size_t t = 0; t < TU_COUNT_OF(cases); ++t) {
        ss_calibration c = ss_calibration_default();
        c.offset = cases[t].e0;
        c.pair_shift = cases[t].v;
        c.exchange = cases[t].j;
        double got = ss_calibration_energy(&c, cases[t].n, cases[t].c);
        cr_expect(got == cases[t].want, "case %zu: E expected %g, got %.17g", t,
                  cases[t].want, got);
        double back = ss_calibration_content(&c, cases[t].n, cases[t].want);
        cr_expect(back == (double)cases[t].c,
                  "case %zu: content expected %" PRId64 ", got %.17g", t,
                  cases[t].c, back);
    }
    /* the content is returned as a real number, not rounded */
    ss_calibration c = ss_calibration_default();
    c.exchange = 2.0;
    cr_expect(ss_calibration_content(&c, 5, 3.0) == 1.5,
              "content of E = 3 with J = 2: %.17g",
              ss_calibration_content(&c, 5, 3.0));
}

/* ss_calibration_content inverts ss_calibration_energy over a range of
 * calibrations, atom counts and contents, to the floating-point error of the
 * energy sum (a large V·C(n,2) cancels in the inversion; bound below). */
Test(calibration, content_inverts_energy) {
    static const double offsets[] = {0.0, 1234.5, -7.25};
    static const double shifts[] = {0.0, 0.3, -11.0};
    static const double exchanges[] = {1.0, -0.37, 2500.0};
    for (size_t a = 0; a < 3; ++a)
        for (size_t b = 0; b < 3; ++b)
            for (size_t e = 0; e < 3; ++e) {
                ss_calibration c = ss_calibration_default();
                c.offset = offsets[a];
                c.pair_shift = shifts[b];
                c.exchange = exchanges[e];
                for (unsigned n = 1; n <= 100; n += 11) {
                    int64_t top = (int64_t)(n * (n - 1) / 2);
                    for (int64_t k = -top; k <= top;
                         k += (top > 10 ? top / 7 : 1)) {
                        double energy = ss_calibration_energy(&c, n, k);
                        double back = ss_calibration_content(&c, n, energy);
                        /* E carries rounding of about eps·(|E0| + |V|·C(n,2) +
                         * |J·c|); dividing by J scales it: allow 8 eps of that,
                         * plus 1e-12. */
                        double mag = fabs(c.offset) +
                                     fabs(c.pair_shift) * tu_pairs(n) +
                                     fabs(c.exchange * (double)k);
                        double tol =
                            8.0 * DBL_EPSILON * mag / fabs(c.exchange) +
                            1e-12 * fmax(1.0, fabs((double)k));
                        cr_expect(fabs(back - (double)k) <= tol,
                                  "E0=%g V=%g J=%g n=%u c=%" PRId64
                                  ": round trip gives %.17g",
                                  c.offset, c.pair_shift, c.exchange, n, k,
                                  back);
                    }
                }
            }
}

/* Moment closed forms on hand-computed laws (domain.md §2):
 * n = 2: λ ∈ {(2), (1,1)}, c = ±1, P((2)) = h2(p) = (1 + P2)/2, so
 *        E[c] = P2 and Var[c] = 1 − P2²;
 * n = 3, p = (½,⅓,⅙): P = 5/12, 5/9, 1/36 for c = 3, 0, −3
 *        (statistics-sources.md §6), so E[c] = 7/6, Var[c] = 4 − 49/36 = 95/36,
 *        with P2 = 7/18, P3 = 1/6;
 * n = 3, p = (½,½): P = ½, ½ for c = 3, 0: E = 3/2, Var = 9/4.
 * 1e-12 relative. */
Test(calibration, content_moments_hand_cases) {
    static const double p2s[] = {1.0, 0.5, 0.37, 1.0 / 3.0};
    for (size_t t = 0; t < TU_COUNT_OF(p2s); ++t) {
        double p2 = p2s[t];
        cr_expect(tu_rel_err(ss_content_mean(2, p2), p2) <= 1e-12,
                  "n=2 mean at P2=%g: %.17g", p2, ss_content_mean(2, p2));
        double v =
            ss_content_variance(2, p2, 0.123); /* P3 must not matter at n = 2 */
        cr_expect(tu_close(v, 1.0 - p2 * p2, 1e-12),
                  "n=2 variance at P2=%g: expected %.17g, got %.17g", p2,
                  1.0 - p2 * p2, v);
    }
    cr_expect(tu_rel_err(ss_content_mean(3, 7.0 / 18.0), 7.0 / 6.0) <= 1e-12,
              "n=3 mean: %.17g", ss_content_mean(3, 7.0 / 18.0));
    cr_expect(tu_rel_err(ss_content_variance(3, 7.0 / 18.0, 1.0 / 6.0),
                         95.0 / 36.0) <= 1e-12,
              "n=3 variance: expected %.17g, got %.17g", 95.0 / 36.0,
              ss_content_variance(3, 7.0 / 18.0, 1.0 / 6.0));
    cr_expect(tu_rel_err(ss_content_mean(3, 0.5), 1.5) <= 1e-12,
              "n=3 mean (½,½): %.17g", ss_content_mean(3, 0.5));
    cr_expect(tu_rel_err(ss_content_variance(3, 0.5, 0.25), 2.25) <= 1e-12,
              "n=3 variance (½,½): %.17g", ss_content_variance(3, 0.5, 0.25));
    /* pure state: c = C(n,2) surely */
    cr_expect(ss_content_mean(10, 1.0) == 45.0, "pure n=10 mean %.17g",
              ss_content_mean(10, 1.0));
    cr_expect(fabs(ss_content_variance(10, 1.0, 1.0)) <= 1e-9,
              "pure n=10 variance %.17g", ss_content_variance(10, 1.0, 1.0));
}

/* Spectrum helpers: sorted output (header), power sums by hand:
 * p = (0.2, 0.5, 0.3): P2 = 0.38, P3 = 0.16; 1e-14 relative. */
Test(calibration, spectrum_validate_and_power_sums) {
    const double p[3] = {0.2, 0.5, 0.3};
    double sorted[3];
    ss_error err;
    ss_error_clear(&err);
    cr_assert(ss_spectrum_validate(p, 3, 3, sorted, &err) == SS_OK,
              "valid spectrum rejected: %s", err.message);
    cr_expect(sorted[0] == 0.5 && sorted[1] == 0.3 && sorted[2] == 0.2,
              "sorted: (%g, %g, %g), expected (0.5, 0.3, 0.2)", sorted[0],
              sorted[1], sorted[2]);
    double in_place[3] = {0.1, 0.6, 0.3};
    cr_assert(ss_spectrum_validate(in_place, 3, 3, in_place, &err) == SS_OK);
    cr_expect(in_place[0] == 0.6 && in_place[1] == 0.3 && in_place[2] == 0.1,
              "in-place sort: (%g, %g, %g)", in_place[0], in_place[1],
              in_place[2]);
    cr_expect(tu_rel_err(ss_spectrum_power_sum(p, 3, 2), 0.38) <= 1e-14,
              "P2 = %.17g", ss_spectrum_power_sum(p, 3, 2));
    cr_expect(tu_rel_err(ss_spectrum_power_sum(p, 3, 3), 0.16) <= 1e-14,
              "P3 = %.17g", ss_spectrum_power_sum(p, 3, 3));
    cr_expect(tu_rel_err(ss_spectrum_power_sum(p, 3, 1), 1.0) <= 1e-14,
              "P1 = %.17g", ss_spectrum_power_sum(p, 3, 1));

    double untouched[3] = {-1, -1, -1};
    const double bad[3] = {0.5, 0.5, 0.1};
    ss_error_clear(&err);
    ss_status st = ss_spectrum_validate(bad, 3, 3, untouched, &err);
    tu_expect_error(st, &err, SS_EINVAL, "spectrum", "sum 1.1");
    cr_expect(untouched[0] == -1 && untouched[1] == -1 && untouched[2] == -1,
              "sorted_out written on failure");
    cr_expect(tu_message_mentions(err.message, 0.1),
              "sum off by 0.1 not stated: \"%s\"", err.message);
}

/* Status table (header X-macro): HTTP codes per row, distinct stable names,
 * non-empty messages, "unknown"/500 outside the table. */
Test(calibration, status_table) {
    static const struct {
        ss_status code;
        int http;
        const char *name;
    } rows[] = {
        {SS_OK, 200, "ok"},
        {SS_EINVAL, 422, "invalid-argument"},
        {SS_EBUDGET, 422, "work-budget-exceeded"},
        {SS_ERANGE, 422, "numeric-range"},
        {SS_ENOMEM, 503, "out-of-memory"},
        {SS_EMALFORMED, 400, "malformed-input"},
        {SS_ENOTFOUND, 404, "not-found"},
        {SS_EINTERNAL, 500, "internal-error"},
        {SS_EUNAUTHORIZED, 401, "unauthorized"},
        {SS_EFORBIDDEN, 403, "forbidden"},
        {SS_EMETHOD, 405, "method-not-allowed"},
        {SS_ECONFLICT, 409, "conflict"},
        {SS_ETOOLARGE, 413, "content-too-large"},
        {SS_EMEDIATYPE, 415, "unsupported-media-type"},
        {SS_EIDEMPOTENCY, 422, "idempotency-key-reused"},
        {SS_EBUSY, 503, "store-busy"},
        {SS_ESTORE, 503, "store-unavailable"},
        {SS_ESTOREFULL, 507, "insufficient-storage"},
        {SS_EUNAVAILABLE, 503, "unavailable"},
        {SS_EDEADLINE, 503, "deadline-exceeded"},
    };
    cr_assert(TU_COUNT_OF(rows) == SS_STATUS_COUNT, "status table has %d rows",
              SS_STATUS_COUNT);
    for (size_t t = 0; t < TU_COUNT_OF(rows); ++t) {
        cr_expect(ss_status_http(rows[t].code) == rows[t].http,
                  "http(%s): expected %d, got %d", rows[t].name, rows[t].http,
                  ss_status_http(rows[t].code));
        cr_expect(strcmp(ss_status_name(rows[t].code), rows[t].name) == 0,
                  "name of code %d: expected \"%s\", got \"%s\"",
                  (int)rows[t].code, rows[t].name,
                  ss_status_name(rows[t].code));
        const char *msg = ss_status_message(rows[t].code);
        cr_expect(msg != NULL && msg[0] != '\0', "empty message for %s",
                  rows[t].name);
        for (size_t u = 0; u < t; ++u)
            cr_expect(strcmp(ss_status_name(rows[t].code),
                             ss_status_name(rows[u].code)) != 0,
                      "names of %zu and %zu coincide", t, u);
    }
    cr_expect(strcmp(ss_status_name(SS_STATUS_COUNT), "unknown") == 0,
              "name out of range: %s", ss_status_name(SS_STATUS_COUNT));
    cr_expect(ss_status_http(SS_STATUS_COUNT) == 500, "http out of range: %d",
              ss_status_http(SS_STATUS_COUNT));
    cr_expect(strcmp(ss_status_name((ss_status)-1), "unknown") == 0,
              "name of −1: %s", ss_status_name((ss_status)-1));
}

/* Error record (header): first error wins until cleared; ss_error_set
 * returns its code, accepts NULL, formats printf-style and truncates
 * long fields and messages safely. */
Test(calibration, error_record_keeps_first) {
    ss_error err;
    ss_error_clear(&err);
    cr_expect(err.code == SS_OK && err.field[0] == '\0' &&
                  err.message[0] == '\0',
              "cleared record not empty");
    ss_status r =
        ss_error_set(&err, SS_EINVAL, "spectrum[2]", "value %d is bad", 7);
    cr_expect(r == SS_EINVAL, "ss_error_set returned %s", ss_status_name(r));
    r = ss_error_set(&err, SS_EBUDGET, "max_diagrams", "second");
    cr_expect(r == SS_EBUDGET, "ss_error_set (ignored) returned %s",
              ss_status_name(r));
    cr_expect(err.code == SS_EINVAL && strcmp(err.field, "spectrum[2]") == 0 &&
                  strcmp(err.message, "value 7 is bad") == 0,
              "first error not kept: (%s, \"%s\", \"%s\")",
              ss_status_name(err.code), err.field, err.message);
    ss_error_clear(&err);
    cr_expect(err.code == SS_OK && err.field[0] == '\0',
              "clear did not reset the record");
    r = ss_error_set(&err, SS_ERANGE, "runs[1].energy_variance", "x");
    cr_expect(r == SS_ERANGE && err.code == SS_ERANGE &&
                  strcmp(err.field, "runs[1].energy_variance") == 0,
              "record after clear: (%s, \"%s\")", ss_status_name(err.code),
              err.field);
    cr_expect(ss_error_set(NULL, SS_ENOMEM, "", "ignored") == SS_ENOMEM,
              "NULL record");

    char longfield[300], longmsg[1000];
    memset(longfield, 'f', sizeof longfield - 1);
    longfield[sizeof longfield - 1] = '\0';
    memset(longmsg, 'm', sizeof longmsg - 1);
    longmsg[sizeof longmsg - 1] = '\0';
    ss_error_clear(&err);
    ss_error_set(&err, SS_EINVAL, longfield, "%s", longmsg);
    cr_expect(memchr(err.field, '\0', sizeof err.field) != NULL,
              "field not NUL-terminated");
    cr_expect(memchr(err.message, '\0', sizeof err.message) != NULL,
              "message not NUL-terminated");
    cr_expect(err.field[0] == 'f' && err.message[0] == 'm',
              "truncated record lost its start");
}
