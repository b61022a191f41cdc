/*
 * test_calibrations.c — named, versioned calibrations and analyses by
 * reference, end to end: `swapspec serve` on a loopback port (http_harness.h)
 * and `swapspec analyze` as a child process.
 *
 * Covers: PUT stores versions 1, 2, … and GET returns the latest or the
 * asked one (an old version is unchanged by a new one); every malformed
 * PUT is a 422 naming the body field (or the name) and stores nothing;
 * only admin tokens may PUT (and POST /v1/reprocessing); an analysis by
 * reference resolves the version valid at measured_at and records it; a
 * new version changes the result exactly as the energy model says, while
 * the earlier revision stays byte for byte what it was; the command line
 * resolves a reference only with --data.
 */
#include <math.h>

#include "calib_harness.h"

static hh_daemon hd;

static void cd_setup(void) { hh_tmpdir(hd.dir, sizeof hd.dir); }
static void cd_teardown(void) {
    if (hd.pid > 0)
        hh_stop(&hd, SIGKILL);
    hh_rmdir(hd.dir);
}

TestSuite(calibrations, .init = cd_setup, .fini = cd_teardown, .timeout = 90);

/* Trap A of the Quillfeather lab (samples/calibration-boxtrap-a.json). */
#define TRAP_A_OFFSET 12.5
#define TRAP_A_PAIR 0.8
#define TRAP_A_J -3.1
#define TRAP_A_SIGMA 0.6

static char *cd_calibration(double offset, const char *valid_from,
                            const char *note) {
    char *body = NULL;
    json_t *doc = json_pack("{s:f,s:f,s:f,s:f,s:s}", "offset", offset,
                            "pair_shift", TRAP_A_PAIR, "exchange", TRAP_A_J,
                            "noise_sd", TRAP_A_SIGMA, "unit", "Hz");
    if (valid_from)
        json_object_set_new(doc, "valid_from", json_string(valid_from));
    if (note)
        json_object_set_new(doc, "note", json_string(note));
    body = json_dumps(doc, JSON_COMPACT | JSON_REAL_PRECISION(17));
    json_decref(doc);
    return body;
}

static double cd_num(const json_t *doc, const char *key) {
    json_t *v = json_object_get(doc, key);
    cr_assert(json_is_number(v), "%s is not a number", key);
    return json_number_value(v);
}

Test(calibrations, versions_are_numbered_and_never_change) {
    cr_assert(hh_start(&hd, NULL) == 0);
    char *b1 = cd_calibration(TRAP_A_OFFSET, "2026-11-23T00:00:00Z", "Monday");
    json_t *v1 =
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b1, 201);
    cr_expect(json_integer_value(json_object_get(v1, "version")) == 1);
    cr_expect_str_eq(json_string_value(json_object_get(v1, "valid_from")),
                     "2026-11-23T00:00:00.000Z");
    cr_expect_str_eq(json_string_value(json_object_get(v1, "note")), "Monday");
    cr_expect(cd_num(v1, "offset") == TRAP_A_OFFSET);
    cr_expect(cd_num(v1, "exchange") == TRAP_A_J);
    /* the second version, valid from its creation (no valid_from) */
    char *b2 = cd_calibration(TRAP_A_OFFSET + 0.31, NULL, NULL);
    hh_response r;
    hh_request(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL,
               "application/json", NULL, b2, &r);
    cr_assert(r.status == 201, "%d %s", r.status, r.body);
    char loc[128];
    cr_expect(hh_header(&r, "Location", loc, sizeof loc) &&
                  strcmp(loc, "/v1/calibrations/boxtrap-a?version=2") == 0,
              "Location %s", loc);
    json_t *v2 = json_incref(r.json);
    hh_free(&r);
    cr_expect(json_integer_value(json_object_get(v2, "version")) == 2);
    cr_expect_str_eq(json_string_value(json_object_get(v2, "valid_from")),
                     json_string_value(json_object_get(v2, "created_at")));
    json_t *latest =
        ch_call(hd.port, "GET", "/v1/calibrations/boxtrap-a", NULL, NULL, 200);
    cr_expect(json_equal(latest, v2), "GET gives the latest version");
    json_t *first =
        ch_call(hd.port, "GET", "/v1/calibrations/boxtrap-a?version=1", NULL,
                NULL, 200);
    cr_expect(json_equal(first, v1), "version 1 changed after version 2");
    ch_problem(hd.port, "GET", "/v1/calibrations/boxtrap-a?version=3", NULL,
               NULL, 404, "not-found", NULL);
    ch_problem(hd.port, "GET", "/v1/calibrations/boxtrap-a?version=x", NULL,
               NULL, 422, "invalid-argument", "/version");
    ch_problem(hd.port, "GET", "/v1/calibrations/no-such-trap", NULL, NULL, 404,
               "not-found", NULL);
    /* another name counts its own versions */
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-b", NULL, b1, 201));
    json_t *list = ch_call(hd.port, "GET", "/v1/calibrations", NULL, NULL, 200);
    json_t *items = json_object_get(list, "items");
    cr_assert(json_array_size(items) == 2);
    json_t *a = json_array_get(items, 0), *b = json_array_get(items, 1);
    cr_expect_str_eq(json_string_value(json_object_get(a, "name")),
                     "boxtrap-a");
    cr_expect(json_integer_value(json_object_get(a, "latest_version")) == 2);
    cr_expect(json_integer_value(json_object_get(a, "count")) == 2);
    cr_expect(json_integer_value(json_object_get(b, "latest_version")) == 1);
    json_decref(list);
    json_decref(first);
    json_decref(latest);
    json_decref(v1);
    json_decref(v2);
    free(b1);
    free(b2);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    /* the store refuses to change a version even from outside the service
     * (schema triggers) */
    char path[128];
    snprintf(path, sizeof path, "%s/store.db", hd.dir);
    sqlite3 *db = NULL;
    cr_assert(sqlite3_open(path, &db) == SQLITE_OK);
    cr_expect(sqlite3_exec(db, "UPDATE calibrations SET energy_offset = 0",
                           NULL, NULL, NULL) != SQLITE_OK);
    cr_expect(sqlite3_exec(db, "DELETE FROM calibrations", NULL, NULL, NULL) !=
              SQLITE_OK);
    sqlite3_close(db);
}

Test(calibrations, malformed_versions_are_refused_naming_the_field) {
    cr_assert(hh_start(&hd, NULL) == 0);
    static const struct {
        const char *path, *body, *pointer;
    } bad[] = {
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":0,\"noise_sd\":0}",
         "/exchange"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":-1}",
         "/noise_sd"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
         "\"coupling_spread\":-0.1}",
         "/coupling_spread"},
        {"/v1/calibrations/boxtrap-a",
         "{\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0}", "/offset"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":\"12.5\",\"pair_shift\":0,\"exchange\":1,"
         "\"noise_sd\":0}",
         "/offset"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
         "\"gain\":2}",
         "/gain"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
         "\"valid_from\":\"2026-13-01T00:00:00Z\"}",
         "/valid_from"},
        {"/v1/calibrations/boxtrap-a",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
         "\"unit\":\"sixteen-bytes-xx\"}",
         "/unit"},
        {"/v1/calibrations/BoxTrap",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0}",
         "/name"},
        {"/v1/calibrations/box_trap",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0}",
         "/name"},
        {"/v1/calibrations/"
         "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa",
         "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0}",
         "/name"},
    };
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++)
        ch_problem(hd.port, "PUT", bad[k].path, NULL, bad[k].body, 422,
                   "invalid-argument", bad[k].pointer);
    /* a note of 501 bytes (the limit is 500) */
    char body[800];
    char note[502];
    memset(note, 'n', 501);
    note[501] = '\0';
    snprintf(body, sizeof body,
             "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
             "\"note\":\"%s\"}",
             note);
    ch_problem(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, body, 422,
               "invalid-argument", "/note");
    note[500] = '\0'; /* 500 bytes pass */
    snprintf(body, sizeof body,
             "{\"offset\":1,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0,"
             "\"note\":\"%s\"}",
             note);
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, body, 201));
    ch_problem(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL,
               "{\"offset\":1,", 400, "malformed-input", NULL);
    ch_problem(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL,
               "{\"offset\":1,\"offset\":2}", 400, "malformed-input", NULL);
    /* only the good PUT was stored */
    json_t *doc =
        ch_call(hd.port, "GET", "/v1/calibrations/boxtrap-a", NULL, NULL, 200);
    cr_expect(json_integer_value(json_object_get(doc, "version")) == 1);
    json_decref(doc);
    ch_problem(hd.port, "GET", "/v1/calibrations/boxtrap-a?version=2", NULL,
               NULL, 404, "not-found", NULL);
}

Test(calibrations, only_admin_tokens_write) {
    char tokens[256];
    ch_tokens(hd.dir, tokens, sizeof tokens);
    const char *extra[] = {"--tokens", tokens, NULL};
    cr_assert(hh_start(&hd, extra) == 0);
    char *cal = cd_calibration(TRAP_A_OFFSET, NULL, NULL);
    const char *job = "{\"calibration\":\"boxtrap-a\"}";
    static const struct {
        const char *method, *path;
        int body_is_job;
        int status[4]; /* none, read, write, admin */
    } table[] = {
        {"PUT", "/v1/calibrations/boxtrap-a", 0, {401, 403, 403, 201}},
        {"GET", "/v1/calibrations/boxtrap-a", 0, {401, 200, 200, 200}},
        {"GET", "/v1/calibrations", 0, {401, 200, 200, 200}},
        {"POST", "/v1/reprocessing", 1, {401, 403, 403, 202}},
        {"GET", "/v1/jobs/job_00000000000000000000", 0, {401, 404, 404, 404}},
        {"GET",
         "/v1/analyses/an_00000000000000000000/revisions",
         0,
         {401, 404, 404, 404}},
    };
    const char *tok[4] = {NULL, "r-token", "w-token", "a-token"};
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
        for (int k = 0; k < 4; k++) {
            const char *body = NULL;
            if (strcmp(table[i].method, "GET") != 0)
                body = table[i].body_is_job ? job : cal;
            json_decref(ch_call(hd.port, table[i].method, table[i].path, tok[k],
                                body, table[i].status[k]));
        }
    /* the refused PUTs stored nothing: the admin's was version 1 */
    json_t *doc = ch_call(hd.port, "GET", "/v1/calibrations/boxtrap-a",
                          "r-token", NULL, 200);
    cr_expect(json_integer_value(json_object_get(doc, "version")) == 1);
    json_decref(doc);
    free(cal);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
}

/* One summary run of n = 4 atoms on d = 3 levels: the fit has two
 * observations (mean, variance) for two unknowns (P2, P3), so P2 is read
 * from the mean exactly: mean energy = offset + V·C(n,2) + J·C(n,2)·P2
 * (domain notes §2, E[c] = C(n,2)·P2).  With d = 2, P3 is a function of P2
 * and the variance pulls on the estimate as well, so the mean alone does
 * not fix it.  The data are the exact moments of p = (0.6, 0.3, 0.1):
 * P2 = 0.46, P3 = 0.244, Var[c] from the closed form of domain §2. */
#define CD_N 4
#define CD_PAIRS 6.0
static void cd_run(double *mean, double *variance) {
    double p2 = 0.46, p3 = 0.244, n = CD_N;
    double var_c = CD_PAIRS * (1 + 2 * (n - 2) * p3 + 1.0 * p2 * p2) -
                   CD_PAIRS * CD_PAIRS * p2 * p2; /* C(n-2,2) = 1 */
    *mean = TRAP_A_OFFSET + TRAP_A_PAIR * CD_PAIRS + TRAP_A_J * CD_PAIRS * p2;
    *variance = TRAP_A_J * TRAP_A_J * var_c + TRAP_A_SIGMA * TRAP_A_SIGMA;
}

static char *cd_analysis(const char *measured_at) {
    double mean, variance;
    cd_run(&mean, &variance);
    json_t *doc = json_pack(
        "{s:i,s:s,s:{s:s},s:s,s:[{s:i,s:i,s:f,s:f}],s:s}", "levels", 3, "label",
        "quillfeather/boxtrap-a/model-check", "calibration", "ref", "boxtrap-a",
        "measured_at", measured_at, "runs", "atoms", CD_N, "shots", 400,
        "mean_energy", mean, "energy_variance", variance, "method", "moments");
    char *text = json_dumps(doc, JSON_COMPACT | JSON_REAL_PRECISION(17));
    json_decref(doc);
    return text;
}

static double cd_p2(const json_t *record) {
    json_t *p2 = json_object_get(
        json_object_get(
            json_object_get(json_object_get(record, "result"), "power_sums"),
            "p2"),
        "value");
    cr_assert(json_is_number(p2), "no power_sums.p2.value");
    return json_number_value(p2);
}

/* The "result" member of a record, as the raw text the service sent: the
 * record's last member, spliced from the stored text. */
static char *cd_result_text(const hh_response *r) {
    const char *at = strstr(r->body, ",\"result\":");
    cr_assert(at != NULL, "no result in %.200s", r->body);
    at += strlen(",\"result\":");
    size_t n = strlen(at);
    cr_assert(n > 1 && at[n - 1] == '}');
    return strndup(at, n - 1);
}

Test(calibrations, a_new_version_moves_p2_as_the_model_says) {
    cr_assert(hh_start(&hd, NULL) == 0);
    const double delta = 0.31; /* the offset change of version 2, in Hz */
    char *b1 = cd_calibration(TRAP_A_OFFSET, "2026-11-23T00:00:00Z", NULL);
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b1, 201));
    char *req = cd_analysis("2026-11-25T14:00:00+01:00");
    hh_response r;
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json", NULL,
               req, &r);
    cr_assert(r.status == 201, "%d %s", r.status, r.body);
    char *first_text = cd_result_text(&r);
    json_t *first = json_incref(r.json);
    hh_free(&r);
    const char *id = json_string_value(json_object_get(first, "id"));
    json_t *used =
        json_object_get(json_object_get(first, "result"), "calibration");
    cr_expect_str_eq(json_string_value(json_object_get(used, "source")), "ref");
    cr_expect_str_eq(json_string_value(json_object_get(used, "name")),
                     "boxtrap-a");
    cr_expect(json_integer_value(json_object_get(used, "version")) == 1);
    double mean, variance;
    cd_run(&mean, &variance);
    double p2_v1 =
        (mean - TRAP_A_OFFSET - TRAP_A_PAIR * CD_PAIRS) / (TRAP_A_J * CD_PAIRS);
    /* tolerance 1e-9 relative: the fit solves two equations in two
     * unknowns; only rounding separates it from the closed form */
    cr_expect(fabs(cd_p2(first) - p2_v1) <= 1e-9 * fabs(p2_v1),
              "P2 %.17g, model %.17g", cd_p2(first), p2_v1);
    /* version 2: offset + Δ, valid from Monday noon (covers Tuesday) */
    char *b2 =
        cd_calibration(TRAP_A_OFFSET + delta, "2026-11-23T12:00:00Z", NULL);
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b2, 201));
    json_t *job = ch_call(hd.port, "POST", "/v1/reprocessing", NULL,
                          "{\"calibration\":\"boxtrap-a\"}", 202);
    char path[160];
    snprintf(path, sizeof path, "/v1/jobs/%s",
             json_string_value(json_object_get(job, "id")));
    json_t *state = NULL;
    for (int t = 0; t < 300; t++) { /* up to 30 s */
        json_decref(state);
        state = ch_call(hd.port, "GET", path, NULL, NULL, 200);
        const char *s = json_string_value(json_object_get(state, "state"));
        if (strcmp(s, "done") == 0 || strcmp(s, "failed") == 0)
            break;
        struct timespec nap = {0, 100 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    cr_assert_str_eq(json_string_value(json_object_get(state, "state")),
                     "done");
    cr_expect(json_integer_value(json_object_get(state, "revised")) == 1);
    snprintf(path, sizeof path, "/v1/analyses/%s", id);
    json_t *now = ch_call(hd.port, "GET", path, NULL, NULL, 200);
    cr_expect(json_integer_value(json_object_get(now, "revision")) == 2);
    used = json_object_get(json_object_get(now, "result"), "calibration");
    cr_expect(json_integer_value(json_object_get(used, "version")) == 2);
    /* an offset change Δ shifts the mean-derived P2 by −Δ/(J·C(n,2))
     * (from the mean-energy identity above; J < 0 here, so P2 grows) */
    double shift = cd_p2(now) - cd_p2(first);
    double model = -delta / (TRAP_A_J * CD_PAIRS);
    cr_expect(fabs(shift - model) <= 1e-9 * fabs(model),
              "P2 moved by %.17g, the model says %.17g", shift, model);
    /* revision 1 is byte for byte what the POST answered */
    snprintf(path, sizeof path, "/v1/analyses/%s?revision=1", id);
    hh_request(hd.port, "GET", path, NULL, NULL, NULL, NULL, &r);
    cr_assert(r.status == 200);
    char *old_text = cd_result_text(&r);
    hh_free(&r);
    cr_expect_str_eq(old_text, first_text, "revision 1 changed");
    free(old_text);
    free(first_text);
    json_decref(now);
    json_decref(state);
    json_decref(job);
    json_decref(first);
    free(req);
    free(b1);
    free(b2);
}

Test(calibrations, references_resolve_by_time_or_are_refused) {
    cr_assert(hh_start(&hd, NULL) == 0);
    char *b1 = cd_calibration(TRAP_A_OFFSET, "2026-11-23T00:00:00Z", NULL);
    char *b2 = cd_calibration(13.0, "2026-11-27T00:00:00Z", NULL);
    char *b3 = cd_calibration(14.0, "2026-11-27T00:00:00Z", NULL);
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b1, 201));
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b2, 201));
    json_decref(
        ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL, b3, 201));
    static const struct {
        const char *measured_at;
        int version;
    } cases[] = {
        {"2026-11-23T00:00:00Z", 1},      /* valid_from itself counts */
        {"2026-11-26T23:59:59.999Z", 1},  /* just before version 2 */
        {"2026-11-27T01:00:00+01:00", 3}, /* 00:00Z: the tie goes to 3 */
        {"2026-12-01T00:00:00Z", 3},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        char *req = cd_analysis(cases[k].measured_at);
        json_t *rec = ch_call(hd.port, "POST", "/v1/analyses", NULL, req, 201);
        json_t *used =
            json_object_get(json_object_get(rec, "result"), "calibration");
        cr_expect(
            json_integer_value(json_object_get(used, "version")) ==
                cases[k].version,
            "measured %s: version %lld, expected %d", cases[k].measured_at,
            (long long)json_integer_value(json_object_get(used, "version")),
            cases[k].version);
        json_decref(rec);
        free(req);
    }
    char *early = cd_analysis("2026-11-22T23:59:59Z");
    ch_problem(hd.port, "POST", "/v1/analyses", NULL, early, 422,
               "invalid-argument", "/calibration/ref");
    static const char *const bad[][2] = {
        {"{\"levels\":3,\"calibration\":{\"ref\":\"boxtrap-z\"},\"runs\":[{"
         "\"atoms\":4,\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "/calibration/ref"},
        {"{\"levels\":3,\"calibration\":{\"ref\":7},\"runs\":[{"
         "\"atoms\":4,\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "/calibration/ref"},
        {"{\"levels\":3,\"calibration\":{\"ref\":\"boxtrap-a\",\"version\":4},"
         "\"runs\":[{\"atoms\":4,\"shots\":10,\"mean_energy\":3,"
         "\"energy_variance\":1}]}",
         "/calibration/version"},
        {"{\"levels\":3,\"calibration\":{\"ref\":\"boxtrap-a\",\"version\":0},"
         "\"runs\":[{\"atoms\":4,\"shots\":10,\"mean_energy\":3,"
         "\"energy_variance\":1}]}",
         "/calibration/version"},
        {"{\"levels\":3,\"calibration\":{\"ref\":\"boxtrap-a\",\"offset\":1},"
         "\"runs\":[{\"atoms\":4,\"shots\":10,\"mean_energy\":3,"
         "\"energy_variance\":1}]}",
         "/calibration/offset"},
        {"{\"levels\":3,\"measured_at\":\"yesterday\",\"runs\":[{\"atoms\":4,"
         "\"shots\":10,\"mean_energy\":3,\"energy_variance\":1}]}",
         "/measured_at"},
    };
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++)
        ch_problem(hd.port, "POST", "/v1/analyses", NULL, bad[k][0], 422,
                   "invalid-argument", bad[k][1]);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);

    /* the command line: a reference needs --data; with it, the same
     * resolution (and nothing is written to the store) */
    char req_path[128], out[128], errp[128], data[128];
    snprintf(req_path, sizeof req_path, "%s/req.json", hd.dir);
    snprintf(out, sizeof out, "%s/out.txt", hd.dir);
    snprintf(errp, sizeof errp, "%s/err.txt", hd.dir);
    snprintf(data, sizeof data, "%s/store.db", hd.dir);
    char *req = cd_analysis("2026-11-24T10:00:00Z");
    hh_write(req_path, req);
    free(req);
    const char *no_data[] = {"analyze", req_path, NULL};
    cr_expect(ch_wait(ch_spawn(no_data, out, errp)) == 2);
    char *text = ch_slurp(errp);
    json_error_t jerr;
    json_t *e = json_loads(text, 0, &jerr);
    cr_expect_str_eq(json_string_value(json_object_get(e, "field")),
                     "calibration.ref", "%s", text);
    json_decref(e);
    free(text);
    sqlite3 *db = ch_db(data);
    long long before = ch_int(db, "SELECT count(*) FROM analyses");
    sqlite3_close(db);
    const char *with_data[] = {"analyze", req_path, "--data", data, NULL};
    cr_expect(ch_wait(ch_spawn(with_data, out, errp)) == 0);
    ch_clean(errp);
    text = ch_slurp(out);
    json_t *doc = json_loads(text, 0, &jerr);
    json_t *used = json_object_get(doc, "calibration");
    cr_expect_str_eq(json_string_value(json_object_get(used, "source")), "ref",
                     "%s", text);
    cr_expect(json_integer_value(json_object_get(used, "version")) == 1);
    json_decref(doc);
    free(text);
    db = ch_db(data);
    cr_expect(ch_int(db, "SELECT count(*) FROM analyses") == before);
    sqlite3_close(db);
    const char *missing[] = {"analyze", req_path, "--data", "/nonexistent.db",
                             NULL};
    cr_expect(ch_wait(ch_spawn(missing, out, errp)) == 2);
    free(early);
    free(b1);
    free(b2);
    free(b3);
}
