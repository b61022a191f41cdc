/*
 * test_reprocess.c — reprocessing jobs survive kill -9, from the command
 * line (`swapspec reprocess`) and in the daemon (POST /v1/reprocessing).
 *
 * A daemon stores a calibration version and a few hundred analyses by
 * reference (per-shot runs of 400 readings with a parametric bootstrap, so
 * that each one takes some milliseconds and a stored row is a few KB), then
 * a second version valid from the middle of the week.  A job is killed
 * with SIGKILL when part of it is done; the test then checks, through
 * SQLite itself, that every finished item has exactly its revision and no
 * more; a rerun resumes the same job and completes it; at the end every
 * analysis measured after the new version's valid_from has exactly one new
 * revision with that version, every other one none, and PRAGMA
 * integrity_check is ok; a second run changes nothing.  The expected
 * version of each analysis is computed here from its measured time, not
 * read from the service.
 */
#include <pthread.h>

#include "calib_harness.h"

static hh_daemon hd;

static void rp_setup(void) { hh_tmpdir(hd.dir, sizeof hd.dir); }
static void rp_teardown(void) {
    if (hd.pid > 0)
        hh_stop(&hd, SIGKILL);
    hh_rmdir(hd.dir);
}

TestSuite(reprocess, .init = rp_setup, .fini = rp_teardown, .timeout = 240);

/* Version 2 applies from this instant on; analysis k is measured 20 k
 * minutes after Monday 2026-11-23 00:00Z, so it gets version 2 exactly when
 * k >= RP_V2_K (one day = 72 steps of 20 minutes). */
#define RP_V2_FROM "2026-11-24T00:00:00Z"
#define RP_V2_FROM_RECORD "2026-11-24T00:00:00.000Z"
#define RP_V2_K 72u

/* A per-shot run of 400 readings of 10 atoms (fixed pseudo-random data;
 * the values do not matter to the test, only that the analysis runs). */
static char *rp_body(unsigned k) {
    json_t *energies = json_array();
    unsigned x = 12345u + k;
    for (int i = 0; i < 400; i++) {
        x = x * 1103515245u + 12345u; /* a linear congruential sequence */
        double u = (double)((x >> 8) & 0xffff) / 65536.0;
        json_array_append_new(energies, json_real(-60.0 + 120.0 * u));
    }
    unsigned minutes = 20 * k; /* k < 240: within Monday..Thursday */
    char at[32];
    snprintf(at, sizeof at, "2026-11-%02uT%02u:%02u:00Z", 23 + minutes / 1440,
             minutes / 60 % 24, minutes % 60);
    char label[64];
    snprintf(label, sizeof label, "quillfeather/boxtrap-a/nightly/%03u", k);
    json_t *doc =
        json_pack("{s:i,s:s,s:{s:s},s:s,s:[{s:i,s:o}],s:s,s:i}", "levels", 3,
                  "label", label, "calibration", "ref", "boxtrap-a",
                  "measured_at", at, "runs", "atoms", 10, "energies", energies,
                  "method", "moments", "bootstrap", 300);
    char *text = json_dumps(doc, JSON_COMPACT);
    json_decref(doc);
    return text;
}

typedef struct {
    int port;
    unsigned first, step, count;
} rp_poster;

static void *rp_post_some(void *arg) {
    const rp_poster *p = arg;
    for (unsigned k = p->first; k < p->count; k += p->step) {
        char *body = rp_body(k);
        json_decref(ch_call(p->port, "POST", "/v1/analyses", NULL, body, 201));
        free(body);
    }
    return NULL;
}

/* Starts the daemon, stores version 1, `count` analyses (two clients at
 * once), then version 2 from RP_V2_FROM.  The daemon keeps running. */
static void rp_fill(unsigned count) {
    cr_assert(hh_start(&hd, NULL) == 0);
    json_decref(ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL,
                        "{\"offset\":12.5,\"pair_shift\":0.8,\"exchange\":-3.1,"
                        "\"noise_sd\":0.6,\"unit\":\"Hz\",\"valid_from\":"
                        "\"2026-11-01T00:00:00Z\"}",
                        201));
    rp_poster a = {hd.port, 0, 2, count}, b = {hd.port, 1, 2, count};
    pthread_t ta, tb;
    pthread_create(&ta, NULL, rp_post_some, &a);
    pthread_create(&tb, NULL, rp_post_some, &b);
    pthread_join(ta, NULL);
    pthread_join(tb, NULL);
    json_decref(ch_call(hd.port, "PUT", "/v1/calibrations/boxtrap-a", NULL,
                        "{\"offset\":12.81,\"pair_shift\":0.8,\"exchange\":"
                        "-3.1,\"noise_sd\":0.6,\"unit\":\"Hz\",\"valid_from\":"
                        "\"" RP_V2_FROM "\",\"note\":\"offset drift\"}",
                        201));
}

static const char *rp_store(void) {
    static char path[128];
    snprintf(path, sizeof path, "%s/store.db", hd.dir);
    return path;
}

/* Analyses measured at or after RP_V2_FROM among the first `count`. */
static long long rp_expected_revised(unsigned count) {
    return count > RP_V2_K ? (long long)(count - RP_V2_K) : 0;
}

/* The end state: each analysis measured from RP_V2_FROM on has exactly one
 * revision (2, with version 2); the others none; the job's counters agree
 * with its items. */
static void rp_check_final(unsigned count) {
    sqlite3 *db = ch_db(rp_store());
    long long want = rp_expected_revised(count);
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM analyses"), count);
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM revisions"), want,
                 "revisions");
    cr_expect_eq(ch_int(db, "SELECT count(DISTINCT analysis_id) FROM "
                            "revisions"),
                 want, "one revision per analysis");
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM revisions WHERE revision "
                            "<> 2 OR calibration_version <> 2"),
                 0);
    /* the analyses that got one are exactly those measured from v2 on */
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM revisions r JOIN analyses "
                            "a ON a.id = r.analysis_id WHERE a.measured_at < "
                            "'" RP_V2_FROM_RECORD "'"),
                 0);
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM jobs j WHERE revised <> "
                            "(SELECT count(*) FROM job_items i WHERE "
                            "i.job_id = j.id AND i.state = 'revised') OR "
                            "unchanged <> (SELECT count(*) FROM job_items i "
                            "WHERE i.job_id = j.id AND i.state = "
                            "'unchanged')"),
                 0, "job counters agree with the items");
    sqlite3_close(db);
    ch_integrity_ok(rp_store());
}

/* Polls the store until the newest job has at least `done` items done;
 * the count it saw. */
static long long rp_wait_progress(long long done, pid_t watched) {
    sqlite3 *db = ch_db(rp_store());
    long long seen = -1;
    for (int t = 0; t < 60000; t++) { /* up to 60 s */
        seen = ch_int(db, "SELECT coalesce((SELECT revised + unchanged + "
                          "failed FROM jobs ORDER BY created_at DESC LIMIT 1),"
                          " -1)");
        if (seen >= done)
            break;
        int status;
        cr_assert(watched <= 0 || waitpid(watched, &status, WNOHANG) == 0,
                  "the process ended before it was killed (%lld done)", seen);
        struct timespec nap = {0, 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    sqlite3_close(db);
    return seen;
}

/* Right after a kill: items done = revisions written, nothing half-done. */
static void rp_check_consistent(void) {
    sqlite3 *db = ch_db(rp_store());
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM revisions"),
                 ch_int(db, "SELECT count(*) FROM job_items WHERE state = "
                            "'revised'"),
                 "revisions and revised items differ after kill -9");
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM (SELECT analysis_id FROM "
                            "revisions GROUP BY analysis_id HAVING count(*) "
                            "> 1)"),
                 0, "an analysis got two revisions");
    sqlite3_close(db);
}

static json_t *rp_summary(const char *out) {
    char *text = ch_slurp(out);
    json_error_t jerr;
    json_t *doc = json_loads(text, 0, &jerr);
    cr_assert(doc != NULL, "summary is not JSON: %s", text);
    free(text);
    return doc;
}

static long long rp_get(const json_t *doc, const char *key) {
    json_t *v = json_object_get(doc, key);
    cr_assert(json_is_integer(v), "%s missing", key);
    return (long long)json_integer_value(v);
}

Test(reprocess, the_command_line_resumes_after_kill_9) {
    const unsigned count = 240;
    rp_fill(count);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    char out[128], errp[128];
    snprintf(out, sizeof out, "%s/out.json", hd.dir);
    snprintf(errp, sizeof errp, "%s/err.txt", hd.dir);
    const char *args[] = {"reprocess",     "--data",    rp_store(),
                          "--calibration", "boxtrap-a", NULL};
    pid_t pid = ch_spawn(args, out, errp);
    long long seen = rp_wait_progress(count / 3, pid);
    cr_assert(kill(pid, SIGKILL) == 0);
    cr_expect(ch_wait(pid) == 128 + SIGKILL);
    cr_assert(seen >= count / 3 && seen < count,
              "killed at %lld of %u: not mid-job", seen, count);
    rp_check_consistent();
    sqlite3 *db = ch_db(rp_store());
    char job_id[32] = "";
    sqlite3_stmt *q = NULL;
    sqlite3_prepare_v2(db, "SELECT id FROM jobs", -1, &q, NULL);
    cr_assert(sqlite3_step(q) == SQLITE_ROW);
    snprintf(job_id, sizeof job_id, "%s", sqlite3_column_text(q, 0));
    sqlite3_finalize(q);
    sqlite3_close(db);
    /* plain progress lines (stderr is a file, not a terminal) */
    char *log = ch_slurp(errp);
    cr_expect(strstr(log, "reprocess job_") != NULL && strstr(log, "done (") &&
                  strchr(log, '\r') == NULL,
              "progress: %.300s", log);
    free(log);

    /* the rerun resumes the same job and completes it */
    pid = ch_spawn(args, out, errp);
    int rc = ch_wait(pid);
    log = ch_slurp(errp);
    cr_expect(rc == 0, "rerun failed: %s", log);
    free(log);
    ch_clean(errp);
    json_t *sum = rp_summary(out);
    cr_expect_str_eq(json_string_value(json_object_get(sum, "id")), job_id);
    cr_expect(json_is_true(json_object_get(sum, "resumed")));
    cr_expect_str_eq(json_string_value(json_object_get(sum, "state")), "done");
    cr_expect_eq(rp_get(sum, "total"), count);
    cr_expect_eq(rp_get(sum, "done"), count);
    cr_expect_eq(rp_get(sum, "revised"), rp_expected_revised(count));
    cr_expect_eq(rp_get(sum, "unchanged"), count - rp_expected_revised(count));
    cr_expect_eq(rp_get(sum, "failed"), 0);
    cr_expect(json_is_number(json_object_get(sum, "seconds")));
    json_decref(sum);
    rp_check_final(count);

    /* again, with the daemon running on the same file: a new job, every
     * analysis unchanged, nothing written */
    cr_assert(hh_start(&hd, NULL) == 0);
    pid = ch_spawn(args, out, errp);
    rc = ch_wait(pid);
    log = ch_slurp(errp);
    cr_expect(rc == 0, "third run failed: %s", log);
    free(log);
    ch_clean(errp);
    sum = rp_summary(out);
    cr_expect_str_neq(json_string_value(json_object_get(sum, "id")), job_id);
    cr_expect(json_is_false(json_object_get(sum, "resumed")));
    cr_expect_eq(rp_get(sum, "unchanged"), count);
    cr_expect_eq(rp_get(sum, "revised"), 0);
    json_decref(sum);
    json_t *health = ch_call(hd.port, "GET", "/healthz", NULL, NULL, 200);
    json_decref(health);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    rp_check_final(count);
}

Test(reprocess, sigterm_stops_between_items_and_the_job_resumes) {
    const unsigned count = 120;
    rp_fill(count);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    char out[128], errp[128];
    snprintf(out, sizeof out, "%s/out.json", hd.dir);
    snprintf(errp, sizeof errp, "%s/err.txt", hd.dir);
    const char *args[] = {"reprocess",
                          "--data",
                          rp_store(),
                          "--calibration",
                          "boxtrap-a",
                          "--since",
                          "2000-01-01T00:00:00Z",
                          NULL};
    pid_t pid = ch_spawn(args, out, errp);
    rp_wait_progress(10, pid);
    cr_assert(kill(pid, SIGTERM) == 0);
    cr_expect(ch_wait(pid) == 1, "an interrupted run exits with 1");
    ch_clean(errp);
    json_t *sum = rp_summary(out);
    cr_expect_str_eq(json_string_value(json_object_get(sum, "state")),
                     "running");
    long long done = rp_get(sum, "done");
    cr_expect(done >= 10 && done < count, "stopped at %lld", done);
    const char *id = json_string_value(json_object_get(sum, "id"));
    char job_id[32];
    snprintf(job_id, sizeof job_id, "%s", id);
    json_decref(sum);
    rp_check_consistent();
    /* the same parameters resume the job; this time on a terminal (a
     * pseudo-terminal from util-linux `script`, which also carries the
     * exit status): the bar is redrawn in place with carriage returns */
    char cmd[512];
    snprintf(cmd, sizeof cmd,
             "script -qec '%s reprocess --data %s --calibration boxtrap-a "
             "--since 2000-01-01T00:00:00Z' /dev/null > %s 2>&1",
             SWAPSPEC_BINARY, rp_store(), out);
    int rc = system(cmd);
    cr_expect(WIFEXITED(rc) && WEXITSTATUS(rc) == 0, "status %d", rc);
    ch_clean(out);
    char *tty = ch_slurp(out);
    cr_expect(strstr(tty, "\r[") != NULL && strstr(tty, "] 100% ") != NULL,
              "no progress bar: %.300s", tty);
    char want[64];
    snprintf(want, sizeof want, "\"id\": \"%s\"", job_id);
    cr_expect(strstr(tty, want) != NULL, "not resumed: %.600s", tty);
    free(tty);
    rp_check_final(count);
}

Test(reprocess, the_daemon_resumes_its_job_after_kill_9) {
    const unsigned count = 160;
    rp_fill(count);
    json_t *job = ch_call(hd.port, "POST", "/v1/reprocessing", NULL,
                          "{\"calibration\":\"boxtrap-a\"}", 202);
    char path[128];
    snprintf(path, sizeof path, "/v1/jobs/%s",
             json_string_value(json_object_get(job, "id")));
    cr_expect_eq(rp_get(job, "total"), count);
    json_decref(job);
    long long seen = rp_wait_progress(count / 4, hd.pid);
    cr_expect(hh_stop(&hd, SIGKILL) == 128 + SIGKILL);
    cr_assert(seen >= count / 4 && seen < count,
              "killed at %lld of %u: not mid-job", seen, count);
    rp_check_consistent();
    /* a new daemon takes the job up by itself */
    cr_assert(hh_start(&hd, NULL) == 0);
    json_t *state = NULL;
    for (int t = 0; t < 600; t++) { /* up to 60 s */
        json_decref(state);
        state = ch_call(hd.port, "GET", path, NULL, NULL, 200);
        if (strcmp(json_string_value(json_object_get(state, "state")),
                   "done") == 0)
            break;
        struct timespec nap = {0, 100 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    cr_assert_str_eq(json_string_value(json_object_get(state, "state")),
                     "done");
    cr_expect_eq(rp_get(state, "done"), count);
    cr_expect_eq(rp_get(state, "revised"), rp_expected_revised(count));
    cr_expect(json_array_size(json_object_get(state, "errors")) == 0);
    json_decref(state);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    rp_check_final(count);
}

Test(reprocess, the_command_line_follows_a_job_the_daemon_runs) {
    const unsigned count = 160;
    rp_fill(count);
    json_t *job = ch_call(hd.port, "POST", "/v1/reprocessing", NULL,
                          "{\"calibration\":\"boxtrap-a\"}", 202);
    char job_id[32];
    snprintf(job_id, sizeof job_id, "%s",
             json_string_value(json_object_get(job, "id")));
    json_decref(job);
    long long seen = rp_wait_progress(5, hd.pid);
    cr_assert(seen < count, "the daemon finished before the command ran");
    /* the same parameters: the command finds the daemon's job, sees a live
     * owner, and follows it to the end instead of working it twice */
    char out[128], errp[128];
    snprintf(out, sizeof out, "%s/out.json", hd.dir);
    snprintf(errp, sizeof errp, "%s/err.txt", hd.dir);
    const char *args[] = {"reprocess",     "--data",    rp_store(),
                          "--calibration", "boxtrap-a", NULL};
    pid_t pid = ch_spawn(args, out, errp);
    cr_expect(ch_wait(pid) == 0);
    ch_clean(errp);
    char *log = ch_slurp(errp);
    cr_expect(strstr(log, "following") != NULL, "%.400s", log);
    free(log);
    json_t *sum = rp_summary(out);
    cr_expect_str_eq(json_string_value(json_object_get(sum, "id")), job_id);
    cr_expect_str_eq(json_string_value(json_object_get(sum, "origin")), "http");
    cr_expect_eq(rp_get(sum, "done"), count);
    json_decref(sum);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    rp_check_final(count);
}

Test(reprocess, sigterm_pauses_the_daemon_job_until_the_next_start) {
    const unsigned count = 120;
    rp_fill(count);
    json_t *job = ch_call(hd.port, "POST", "/v1/reprocessing", NULL,
                          "{\"calibration\":\"boxtrap-a\"}", 202);
    char path[128];
    snprintf(path, sizeof path, "/v1/jobs/%s",
             json_string_value(json_object_get(job, "id")));
    json_decref(job);
    rp_wait_progress(10, hd.pid);
    cr_expect(hh_stop(&hd, SIGTERM) == 0, "a clean stop mid-job");
    sqlite3 *db = ch_db(rp_store());
    long long done =
        ch_int(db, "SELECT revised + unchanged + failed FROM jobs");
    cr_expect(done >= 10 && done < count, "stopped at %lld", done);
    cr_expect_eq(ch_int(db, "SELECT count(*) FROM jobs WHERE owner IS NULL "
                            "AND state = 'running'"),
                 1, "the job is let go, unfinished");
    sqlite3_close(db);
    rp_check_consistent();
    cr_assert(hh_start(&hd, NULL) == 0);
    json_t *state = NULL;
    for (int t = 0; t < 600; t++) {
        json_decref(state);
        state = ch_call(hd.port, "GET", path, NULL, NULL, 200);
        if (strcmp(json_string_value(json_object_get(state, "state")),
                   "done") == 0)
            break;
        struct timespec nap = {0, 100 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    cr_expect_str_eq(json_string_value(json_object_get(state, "state")),
                     "done");
    json_decref(state);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    rp_check_final(count);
}

/* An analysis that pinned version 1 for shots taken before version 1's
 * valid_from has no version valid at its time: a job without a version
 * cannot re-run it.  The item fails with its reason, the others go on, the
 * job ends `failed`, and the command exits 1 with the summary on stdout. */
Test(reprocess, an_analysis_that_cannot_be_rerun_fails_alone) {
    rp_fill(4);
    char *body = rp_body(0);
    json_t *doc = json_loads(body, 0, NULL);
    free(body);
    json_object_set_new(json_object_get(doc, "calibration"), "version",
                        json_integer(1));
    json_object_set_new(doc, "measured_at",
                        json_string("2026-10-01T00:00:00Z"));
    body = json_dumps(doc, JSON_COMPACT);
    json_decref(doc);
    json_t *rec = ch_call(hd.port, "POST", "/v1/analyses", NULL, body, 201);
    free(body);
    char id[32];
    snprintf(id, sizeof id, "%s",
             json_string_value(json_object_get(rec, "id")));
    json_decref(rec);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    char out[128], errp[128];
    snprintf(out, sizeof out, "%s/out.json", hd.dir);
    snprintf(errp, sizeof errp, "%s/err.txt", hd.dir);
    const char *args[] = {"reprocess",     "--data",    rp_store(),
                          "--calibration", "boxtrap-a", NULL};
    cr_expect(ch_wait(ch_spawn(args, out, errp)) == 1);
    ch_clean(errp);
    json_t *sum = rp_summary(out);
    cr_expect_str_eq(json_string_value(json_object_get(sum, "state")),
                     "failed");
    cr_expect_eq(rp_get(sum, "total"), 5);
    cr_expect_eq(rp_get(sum, "failed"), 1);
    cr_expect_eq(rp_get(sum, "done"), 5);
    json_t *e = json_array_get(json_object_get(sum, "errors"), 0);
    cr_expect_str_eq(json_string_value(json_object_get(e, "analysis_id")), id);
    const char *why = json_string_value(json_object_get(e, "detail"));
    cr_expect(why && strstr(why, "no version") && strstr(why, "2026-10-01"),
              "detail: %s", why ? why : "(none)");
    json_decref(sum);
    char *err_text = ch_slurp(errp);
    cr_expect(strstr(err_text, "\"field\": \"job\"") != NULL, "%s", err_text);
    free(err_text);
}
