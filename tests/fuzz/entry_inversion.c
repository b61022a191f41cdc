/*
 * entry_inversion.c — the body of the inversion fuzz target: an
 * ss_analysis_request decoded from raw bytes and run through
 * ss_analysis_run under the small fuzz budget.
 *
 * Byte layout (fuzz_bytes.h; missing bytes read as 0): levels (2..16),
 * method (the four names and one value past the enum), flags (default
 * calibration, a unit without its NUL, a tiny budget), the calibration
 * (offset, pair_shift, exchange, noise_sd, coupling_spread: any finite or
 * non-finite number, exchange 0 included), confidence, window, bootstrap
 * (0..8, 200, or past SS_BOOTSTRAP_MAX), seed, a spectrum that sets the
 * typical readings, then 0..5 runs, each summary (shots, mean, variance)
 * or per-shot (2..41 readings, or 0 or 1).  Typical readings are the exact
 * content mean and variance of that spectrum (ss_content_mean,
 * ss_content_variance: domain notes §2) turned into energies with the
 * calibration, so inputs reach past validation; each number can also be an
 * IEEE edge or any bit pattern.
 *
 * Checks: a failure carries a status the core may return (invalid,
 * budget, range, memory) and names its field, and leaves the output
 * untouched; a success passes fuzz_check_analysis.  Bootstrap replicates
 * are kept at 200 or fewer so that each input runs in milliseconds.
 */
#include "fuzz_bytes.h"
#include "fuzz_entry.h"

#include <stdlib.h>

#define FZ_RUNS 5
#define FZ_READINGS 41

static unsigned fz_atoms(fuzz_bytes *b) {
    unsigned sel = fuzz_bytes_u8(b);
    if (sel < 232)
        return 2 + sel % 28;
    switch (sel % 6) {
    case 0:
        return 0;
    case 1:
        return 1;
    case 2:
        return SS_ATOMS_MAX;
    case 3:
        return SS_ATOMS_MAX + 1;
    case 4:
        return UINT32_MAX;
    default:
        return 2 + fuzz_bytes_u32(b) % 200; /* mostly over the budget */
    }
}

static size_t fz_shots(fuzz_bytes *b) {
    unsigned sel = fuzz_bytes_u8(b);
    if (sel < 240)
        return 2 + (sel << 8 | fuzz_bytes_u8(b)) % 5000;
    static const size_t edge[] = {0, 1, SS_SHOTS_MAX, SS_SHOTS_MAX + 1,
                                  SIZE_MAX};
    return edge[sel % 5];
}

static unsigned fz_bootstrap(fuzz_bytes *b) {
    unsigned sel = fuzz_bytes_u8(b);
    if (sel < 160)
        return 0;
    if (sel < 240)
        return sel % 9;
    if (sel < 248)
        return 200;
    return sel % 2 ? SS_BOOTSTRAP_MAX + 1 : UINT32_MAX;
}

/* Typical readings of a run of n atoms: the energy mean and variance of
 * the content law at spectrum p under cal (domain notes §2). */
static void fz_typical(unsigned n, const double *p, unsigned d,
                       const ss_calibration *cal, double *mean, double *var) {
    double p2 = 0, p3 = 0;
    for (unsigned i = 0; i < d; i++) {
        p2 += p[i] * p[i];
        p3 += p[i] * p[i] * p[i];
    }
    double pairs = 0.5 * (double)n * ((double)n - 1.0);
    double mc = ss_content_mean(n, p2), vc = ss_content_variance(n, p2, p3);
    *mean = cal->offset + cal->pair_shift * pairs + cal->exchange * mc;
    *var = cal->exchange * cal->exchange * vc + cal->noise_sd * cal->noise_sd;
}

static void fz_calibration(fuzz_bytes *b, unsigned flags, ss_calibration *c) {
    *c = ss_calibration_default();
    if (flags & 1)
        return;
    c->offset = fuzz_bytes_real(b, 12.5);
    c->pair_shift = fuzz_bytes_real(b, 0.8);
    c->exchange = fuzz_bytes_real(b, -3.1); /* k = -64 gives exactly 0 */
    c->noise_sd = fuzz_bytes_real(b, 0.6);
    c->coupling_spread = fuzz_bytes_real(b, 0.01);
    size_t len = fuzz_bytes_u8(b) % sizeof c->unit;
    if (flags & 8)
        len = sizeof c->unit; /* no room left for the NUL */
    for (size_t i = 0; i < len; i++)
        c->unit[i] = (char)(' ' + fuzz_bytes_u8(b) % 95);
    if (len < sizeof c->unit)
        c->unit[len] = '\0';
}

static void fz_run(fuzz_bytes *b, const ss_analysis_request *q, const double *p,
                   ss_run *r, double *readings) {
    r->atoms = fz_atoms(b);
    double mean = 0, var = 0;
    unsigned n = r->atoms > 2 && r->atoms <= 1000 ? r->atoms : 2;
    fz_typical(n, p, q->levels, &q->calibration, &mean, &var);
    if (fuzz_bytes_u8(b) % 2 == 0) {
        r->shots = fz_shots(b);
        r->mean_energy = fuzz_bytes_real(b, mean);
        r->energy_variance = fuzz_bytes_real(b, var);
        return;
    }
    unsigned sel = fuzz_bytes_u8(b);
    size_t count = sel < 248 ? 2 + sel % (FZ_READINGS - 1) : sel % 2;
    long pairs = (long)n * (long)(n - 1) / 2;
    const ss_calibration *cal = &q->calibration;
    for (size_t k = 0; k < count; k++) {
        if (fuzz_bytes_u8(b) < 224) { /* a content sum in range, plus noise */
            unsigned hi = fuzz_bytes_u8(b); /* two reads, in order */
            long c =
                (long)(hi << 8 | fuzz_bytes_u8(b)) % (2 * pairs + 1) - pairs;
            double noise = (double)((int)fuzz_bytes_u8(b) - 128) / 64.0;
            readings[k] = cal->offset + cal->pair_shift * (double)pairs +
                          cal->exchange * (double)c + cal->noise_sd * noise;
        } else {
            readings[k] = fuzz_bytes_real(b, mean);
        }
    }
    r->energies = readings;
    r->energy_count = count;
}

int fuzz_inversion_one(const uint8_t *data, size_t size, fuzz_verdict *v) {
    fuzz_bytes b = {data, size};
    ss_analysis_request q = ss_analysis_request_default();
    q.levels = 2 + fuzz_bytes_u8(&b) % 15;
    q.method = (ss_method)(fuzz_bytes_u8(&b) % 5);
    unsigned flags = fuzz_bytes_u8(&b);
    fz_calibration(&b, flags, &q.calibration);
    q.confidence = fuzz_bytes_real(&b, 0.95);
    q.window = fuzz_bytes_real(&b, 3.0);
    q.bootstrap = fz_bootstrap(&b);
    q.seed = fuzz_bytes_u64(&b);
    q.budget = fuzz_budget();
    if (flags & 4) { /* tiny: reach the budget checks deep in the pipeline */
        q.budget.max_diagrams = 1 + fuzz_bytes_u8(&b) * 4u;
        q.budget.max_table_cells = 1 + fuzz_bytes_u8(&b) * 64u;
        q.budget.max_work = 1 + fuzz_bytes_u8(&b) * 4096u;
    }
    double p[SS_LEVELS_MAX], total = 0;
    for (unsigned i = 0; i < q.levels; i++)
        total += p[i] = fuzz_bytes_u8(&b);
    for (unsigned i = 0; i < q.levels; i++)
        p[i] = total > 0 ? p[i] / total : 1.0 / q.levels;
    ss_run runs[FZ_RUNS];
    static double readings[FZ_RUNS][FZ_READINGS];
    q.run_count = fuzz_bytes_u8(&b) % (FZ_RUNS + 1);
    for (size_t r = 0; r < q.run_count; r++) {
        runs[r] = (ss_run){0};
        fz_run(&b, &q, p, &runs[r], readings[r]);
    }
    q.runs = q.run_count ? runs : NULL;

    static ss_analysis sentinel; /* never written: the output's old value */
    ss_analysis *a = &sentinel;
    ss_error err;
    ss_error_clear(&err);
    ss_status st = ss_analysis_run(&q, &a, &err);
    if (st == SS_OK) {
        int bad = fuzz_check_analysis(&q, a, v);
        ss_analysis_free(a);
        return bad;
    }
    if (a != &sentinel)
        return fuzz_fail(v, "ss_analysis_run wrote its output on failure (%s)",
                         ss_status_name(st));
    if (fuzz_check_failure(st, &err, "ss_analysis_run", v))
        return 1;
    if (!fuzz_field_among(err.field, fuzz_request_fields))
        return fuzz_fail(v,
                         "the error names '%s', not a member of the "
                         "request: %s",
                         err.field, err.message);
    if (st != SS_EINVAL && st != SS_EBUDGET && st != SS_ERANGE &&
        st != SS_ENOMEM && !(st == SS_EINTERNAL && fuzz_lenient("internal")))
        return fuzz_fail(v, "ss_analysis_run returned %s: %s",
                         ss_status_name(st), err.message);
    return 0;
}
