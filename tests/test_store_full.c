/*
 * test_store_full.c — the service on a full disk (issue 7): the real
 * `swapspec serve` runs with tests/faults/enospc_shim.c preloaded, which
 * makes every write to the store's files (store.db, -wal, -shm, -journal)
 * fail with ENOSPC while a switch file exists.  While the disk is full, a
 * POST /v1/analyses must be answered 507 with an RFC 9457 problem, reads
 * (/healthz, stored analyses, the list, /metrics) go on, the failures are
 * counted and the daemon stays up; once space returns, writes are stored
 * again, nothing acknowledged before has changed, the file passes
 * PRAGMA integrity_check, and an Idempotency-Key whose request failed
 * stores exactly one record when retried.  Uses tests/http_harness.h to run
 * the daemon; owns its scratch folder (removed after each test).
 */
#define _XOPEN_SOURCE 700 /* realpath */
#include <limits.h>
#include <pthread.h>
#include <sqlite3.h>

#include "calib_harness.h"

static hh_daemon hd;
static char switch_path[PATH_MAX]; /* exists = the disk is full */

static void sf_setup(void) {
    hh_tmpdir(hd.dir, sizeof hd.dir);
    snprintf(switch_path, sizeof switch_path, "%s/disk-full", hd.dir);
}
static void sf_teardown(void) {
    if (hd.pid > 0)
        hh_stop(&hd, SIGKILL);
    hh_rmdir(hd.dir);
}

/* An analysis of the Quillfeather Cold-Atom Lab's box trap (the request of
 * test_http.c with a label of its own). */
#define SF_ANALYSIS(label)                                                     \
    "{\"levels\":3,\"label\":\"quillfeather/" label "\",\"runs\":[{\"atoms\":" \
    "12,\"shots\":300,\"mean_energy\":27.0,\"energy_variance\":90.0}],"        \
    "\"method\":\"moments\"}"

/* Sets name to value, or removes it when value is NULL. */
static void sf_setenv(const char *name, const char *value) {
    if (value != NULL)
        setenv(name, value, 1);
    else
        unsetenv(name);
}

/* Starts the daemon with the shim preloaded and pointed at this test's
 * store; the test process's own environment is restored afterwards, so
 * nothing else it runs (sqlite3, a second daemon) sees the shim.
 * The sanitizer build's daemon links libasan dynamically (gcc), and ASan
 * refuses to start when a preloaded library comes before its runtime in
 * the initial library list; verify_asan_link_order=0 allows it.  The shim
 * defines no allocation functions and is not instrumented, so ASan still
 * intercepts malloc and free; the shim's write calls go on to ASan's
 * interceptors through dlsym(RTLD_NEXT).  A daemon without ASan ignores
 * ASAN_OPTIONS. */
static void sf_start(void) {
    char real[PATH_MAX], prefix[PATH_MAX + 16], preload[2 * PATH_MAX];
    char asan[1024];
    cr_assert(realpath(hd.dir, real) != NULL);
    /* /proc/self/fd shows resolved paths: match against the resolved one */
    snprintf(prefix, sizeof prefix, "%s/store.db", real);
    const char *old_preload = getenv("LD_PRELOAD");
    const char *old_asan = getenv("ASAN_OPTIONS");
    char *keep_preload = old_preload ? strdup(old_preload) : NULL;
    char *keep_asan = old_asan ? strdup(old_asan) : NULL;
    snprintf(preload, sizeof preload, "%s%s%s", old_preload ? old_preload : "",
             old_preload && old_preload[0] ? ":" : "", SWAPSPEC_ENOSPC_SHIM);
    snprintf(asan, sizeof asan, "%s%sverify_asan_link_order=0",
             old_asan ? old_asan : "", old_asan && old_asan[0] ? ":" : "");
    setenv("LD_PRELOAD", preload, 1);
    setenv("ASAN_OPTIONS", asan, 1);
    setenv("SWAPSPEC_FAULT_STORE", prefix, 1);
    setenv("SWAPSPEC_FAULT_SWITCH", switch_path, 1);
    int rc = hh_start(&hd, NULL);
    sf_setenv("LD_PRELOAD", keep_preload);
    sf_setenv("ASAN_OPTIONS", keep_asan);
    unsetenv("SWAPSPEC_FAULT_STORE");
    unsetenv("SWAPSPEC_FAULT_SWITCH");
    free(keep_preload);
    free(keep_asan);
    cr_assert(rc == 0, "the daemon did not start with the shim (exit %d)", rc);
}

/* The disk fills up after `writes` more write calls to the store's files
 * (0: at once; see tests/faults/enospc_shim.c).  The switch file appears
 * whole (written aside, then renamed), so the shim never reads it
 * half-written. */
static void sf_disk_full_after(int writes) {
    char aside[PATH_MAX + 8], text[32];
    snprintf(aside, sizeof aside, "%s.new", switch_path);
    snprintf(text, sizeof text, "%d\n", writes);
    hh_write(aside, text);
    cr_assert(rename(aside, switch_path) == 0);
}

/* The disk fills up (on = 1) or space returns (on = 0). */
static void sf_disk_full(int on) {
    if (on)
        sf_disk_full_after(0);
    else
        cr_assert(unlink(switch_path) == 0);
}

static void sf_post(const char *key, const char *body, hh_response *r) {
    char header[160];
    if (key != NULL)
        snprintf(header, sizeof header, "Idempotency-Key: \"%s\"", key);
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               key ? header : NULL, body, r);
}

static void sf_get(const char *path, hh_response *r) {
    hh_request(hd.port, "GET", path, NULL, NULL, NULL, NULL, r);
}

/* The value of one sample line "name value" of a /metrics body (name with
 * its labels, exactly as printed), or -1 when it is absent. */
static long long sf_metric(const char *body, const char *name) {
    size_t n = strlen(name);
    for (const char *p = body; p != NULL && *p; p = strchr(p, '\n')) {
        if (*p == '\n')
            p++;
        if (strncmp(p, name, n) == 0 && p[n] == ' ')
            return strtoll(p + n + 1, NULL, 10);
    }
    return -1;
}

typedef struct {
    long long store_errors; /* swapspec_store_errors_total */
    long long answered_507; /* requests to /v1/analyses answered 507 */
    long long stored;       /* swapspec_analyses_stored */
} sf_counts;

static sf_counts sf_scrape(void) {
    hh_response r;
    sf_get("/metrics", &r);
    cr_assert(r.status == 200, "/metrics: %d", r.status);
    sf_counts c = {
        sf_metric(r.body, "swapspec_store_errors_total"),
        sf_metric(r.body, "swapspec_http_requests_total{route=\"/v1/analyses\","
                          "status=\"507\"}"),
        sf_metric(r.body, "swapspec_analyses_stored"),
    };
    hh_free(&r);
    if (c.answered_507 < 0) /* no such request yet: the line is absent */
        c.answered_507 = 0;
    return c;
}

/* 1 when text contains word, ignoring ASCII case. */
static int sf_mentions(const char *text, const char *word) {
    size_t n = strlen(word);
    for (const char *p = text; *p; p++)
        if (strncasecmp(p, word, n) == 0)
            return 1;
    return 0;
}

/* The answer to a write while the disk is full.
 * - 507 Insufficient Storage, RFC 4918 §11.5: "the server is unable to
 *   store the representation needed to successfully complete the request"
 *   and the condition "is considered to be temporary" [from memory]; the
 *   service's status table maps SS_ESTOREFULL (SQLITE_FULL) to it.
 * - An RFC 9457 problem document: media type application/problem+json
 *   (§3), the "status" member equal to the status of the response
 *   (§3.1.2: it is advisory and MUST match), "type" a URI (here the
 *   service's URN for this class), "title" a short summary stable per type
 *   (§3.1.3; the constant api-spec/openapi.yaml gives for this type),
 *   "detail" about this occurrence (§3.1.4).
 * - The detail must let whoever reads it (a dashboard showing the error
 *   to the person at the experiment, who tells the operator) see that the
 *   store ran out of space, not just that something failed: it must name
 *   the condition ("full" or "space").
 * - No Location and no replay mark: nothing was created or replayed. */
static void sf_expect_full_problem(const hh_response *r) {
    char ct[128] = "", loc[160] = "";
    cr_expect(r->status == 507, "status %d while the disk is full: %s",
              r->status, r->body);
    cr_expect(hh_header(r, "Content-Type", ct, sizeof ct) &&
                  strcmp(ct, "application/problem+json") == 0,
              "problem media type (RFC 9457 §3), got %s", ct);
    cr_assert(r->json != NULL, "the problem is JSON: %s", r->body);
    const char *type = json_string_value(json_object_get(r->json, "type"));
    cr_expect(
        type && strcmp(type, "urn:swapspec:problem:insufficient-storage") == 0,
        "type %s", type ? type : "(none)");
    cr_expect(json_integer_value(json_object_get(r->json, "status")) ==
                  r->status,
              "the status member equals the HTTP status (RFC 9457 §3.1.2)");
    const char *title = json_string_value(json_object_get(r->json, "title"));
    cr_expect(title && strcmp(title, "the store has no space left") == 0,
              "title %s (api-spec: ProblemInsufficientStorage)",
              title ? title : "(none)");
    const char *detail = json_string_value(json_object_get(r->json, "detail"));
    cr_assert(detail != NULL, "a detail (RFC 9457 §3.1.4)");
    cr_expect(sf_mentions(detail, "full") || sf_mentions(detail, "space"),
              "the detail names the condition: %s", detail);
    cr_expect(!hh_header(r, "Location", loc, sizeof loc),
              "a refused write has no Location: %s", loc);
    cr_expect(!hh_header(r, "Idempotent-Replayed", loc, sizeof loc),
              "a refused write is no replay");
}

/* The daemon process is still running (not exited, not killed). */
static void sf_expect_alive(const char *when) {
    int status;
    cr_assert(waitpid(hd.pid, &status, WNOHANG) == 0,
              "the daemon stopped %s (see %s)", when, hd.log);
}

/* One acknowledged analysis: its id and the body of its 201. */
typedef struct {
    char id[32];
    char *body;
} sf_acked;

static void sf_ack(sf_acked *a, const hh_response *r) {
    cr_assert(r->status == 201, "expected 201, got %d: %s", r->status, r->body);
    const char *id = json_string_value(json_object_get(r->json, "id"));
    size_t n = id != NULL ? strlen(id) : sizeof a->id;
    cr_assert(n < sizeof a->id);
    memcpy(a->id, id, n + 1);
    a->body = strdup(r->body);
}

/* Every acknowledged analysis reads back byte for byte as acknowledged:
 * the 201 body and GET /v1/analyses/{id} are the same record at revision 1
 * (a client may keep either), so a failed write must not have touched it. */
static void sf_expect_unchanged(const sf_acked *acked, int n,
                                const char *when) {
    for (int k = 0; k < n; k++) {
        char path[256];
        snprintf(path, sizeof path, "/v1/analyses/%s", acked[k].id);
        hh_response r;
        sf_get(path, &r);
        cr_expect(r.status == 200, "%s: GET %s: %d", when, path, r.status);
        cr_expect(r.body && strcmp(r.body, acked[k].body) == 0,
                  "%s: %s changed:\n%s\nwas\n%s", when, acked[k].id, r.body,
                  acked[k].body);
        hh_free(&r);
    }
}

/* After the daemon stopped: the file passes PRAGMA integrity_check (every
 * page, index and constraint consistent; SQLite's own check, "ok" when
 * nothing is wrong), holds `analyses` records, and key maps to exactly one
 * analysis, key_id. */
static void sf_expect_file(int analyses, const char *key, const char *key_id) {
    char path[128];
    snprintf(path, sizeof path, "%s/store.db", hd.dir);
    ch_integrity_ok(path);
    sqlite3 *db = ch_db(path);
    long long stored = ch_int(db, "SELECT count(*) FROM analyses");
    cr_expect(stored == analyses, "%lld analyses in the file, expected %d",
              stored, analyses);
    sqlite3_stmt *q = NULL;
    if (key != NULL) {
        cr_assert(sqlite3_prepare_v2(db,
                                     "SELECT analysis_id FROM idempotency_keys"
                                     " WHERE key = ?1",
                                     -1, &q, NULL) == SQLITE_OK);
        sqlite3_bind_text(q, 1, key, -1, SQLITE_STATIC);
        int rows = 0;
        while (sqlite3_step(q) == SQLITE_ROW) {
            const char *id = (const char *)sqlite3_column_text(q, 0);
            cr_expect(id && strcmp(id, key_id) == 0, "key %s maps to %s", key,
                      id ? id : "(null)");
            rows++;
        }
        cr_expect(rows == 1, "key %s stored %d times", key, rows);
        sqlite3_finalize(q);
    }
    sqlite3_close(db);
}

Test(store_full, writes_get_507_reads_go_on_and_space_returning_recovers,
     .init = sf_setup, .fini = sf_teardown, .timeout = 120) {
    sf_start();
    hh_response r;
    sf_acked acked[5];
    int n_acked = 0;

    /* Before: three analyses acknowledged on a healthy disk. */
    for (int k = 0; k < 3; k++) {
        sf_post(NULL, SF_ANALYSIS("full-disk-before"), &r);
        sf_ack(&acked[n_acked++], &r);
        hh_free(&r);
    }
    sf_counts before = sf_scrape();
    cr_expect(before.stored == 3, "stored %lld", before.stored);

    /* The disk fills up. */
    sf_disk_full(1);

    /* A write is refused with 507 and a problem document. */
    sf_post(NULL, SF_ANALYSIS("full-disk-during"), &r);
    sf_expect_full_problem(&r);
    hh_free(&r);
    /* So is a write carrying an Idempotency-Key (retried below). */
    sf_post("qf-full-retry-1", SF_ANALYSIS("full-disk-keyed"), &r);
    sf_expect_full_problem(&r);
    hh_free(&r);
    /* The same key again while still full: still 507, not 409 (the failed
     * request must have released the key).  A 5xx is not kept as the key's
     * outcome: the draft leaves errors other than 400/409/422 to the
     * server's documentation, and api-spec says of 507 "nothing was
     * stored" — so a retry must be able to store the analysis later. */
    sf_post("qf-full-retry-1", SF_ANALYSIS("full-disk-keyed"), &r);
    sf_expect_full_problem(&r);
    hh_free(&r);

    /* Reads go on: the health check (the process answers and the store
     * reads, its documented meaning), every acknowledged analysis as it was
     * acknowledged, and the list, which shows no half-stored record. */
    sf_get("/healthz", &r);
    cr_expect(r.status == 200, "/healthz while full: %d %s", r.status, r.body);
    const char *store_state =
        json_string_value(json_object_get(r.json, "store"));
    cr_expect(store_state && strcmp(store_state, "ok") == 0, "%s", r.body);
    hh_free(&r);
    sf_expect_unchanged(acked, n_acked, "while full");
    sf_get("/v1/analyses?limit=200", &r);
    cr_expect(r.status == 200);
    cr_expect(json_array_size(json_object_get(r.json, "items")) == 3,
              "%zu listed while full",
              json_array_size(json_object_get(r.json, "items")));
    hh_free(&r);

    /* /metrics counts each refused write once as a store error and once as
     * a 507 answer of its route; the stored count has not moved.  Exact
     * deltas: each of the three requests met exactly one failed commit. */
    sf_counts during = sf_scrape();
    cr_expect(during.store_errors - before.store_errors == 3,
              "store errors %lld -> %lld, expected +3", before.store_errors,
              during.store_errors);
    cr_expect(during.answered_507 - before.answered_507 == 3,
              "507 answers %lld -> %lld, expected +3", before.answered_507,
              during.answered_507);
    cr_expect(during.stored == 3, "stored %lld while full", during.stored);
    sf_expect_alive("while the disk was full");

    /* Space returns. */
    sf_disk_full(0);

    /* The next write is stored: 201, and it reads back. */
    sf_post(NULL, SF_ANALYSIS("full-disk-after"), &r);
    sf_ack(&acked[n_acked++], &r);
    hh_free(&r);
    /* The retry of the key that met the full disk now stores its record
     * (201, a new record: nothing of the failed attempts was kept)... */
    sf_post("qf-full-retry-1", SF_ANALYSIS("full-disk-keyed"), &r);
    sf_ack(&acked[n_acked++], &r);
    hh_free(&r);
    const char *keyed_id = acked[n_acked - 1].id;
    /* ...and one more retry replays it (draft-ietf-httpapi-idempotency-
     * key-header-06, "Idempotency Enforcement Scenarios": a retry after
     * the original completed gets the result of that operation; the
     * service's policy in api-spec: 200 with Idempotent-Replayed: true):
     * the same id, and no second record. */
    sf_post("qf-full-retry-1", SF_ANALYSIS("full-disk-keyed"), &r);
    char replayed[16];
    cr_expect(r.status == 200, "replay after recovery: %d %s", r.status,
              r.body);
    cr_expect(hh_header(&r, "Idempotent-Replayed", replayed, sizeof replayed) &&
              strcmp(replayed, "true") == 0);
    const char *replay_id = json_string_value(json_object_get(r.json, "id"));
    cr_expect(replay_id && strcmp(replay_id, keyed_id) == 0,
              "replay id %s, stored %s", replay_id ? replay_id : "(none)",
              keyed_id);
    hh_free(&r);

    /* Everything acknowledged, before and after, reads back unchanged;
     * exactly five records exist (3 before + 2 after, none from the three
     * refused requests or the replay). */
    sf_expect_unchanged(acked, n_acked, "after recovery");
    sf_counts after = sf_scrape();
    cr_expect(after.stored == 5, "stored %lld after recovery", after.stored);
    cr_expect(after.store_errors == during.store_errors,
              "no store error after recovery (%lld -> %lld)",
              during.store_errors, after.store_errors);

    /* A clean stop (exit 0, no sanitizer report in the daemon's log), then
     * the file itself. */
    cr_expect(hh_stop(&hd, SIGTERM) == 0, "clean stop after a full disk");
    sf_expect_file(5, "qf-full-retry-1", keyed_id);
    for (int k = 0; k < n_acked; k++)
        free(acked[k].body);
}

/* Several writers at once: the group-commit writer stores whatever is
 * queued in one transaction, so concurrent requests share the failed
 * commit.  Each one must get its own 507 (none hangs, none is told 201),
 * and each key, retried once space returns, stores exactly one record. */
#define SF_WRITERS 4

typedef struct {
    int port;
    char key[32];
    int status;
    char type[96];
} sf_writer;

static void *sf_writer_main(void *arg) {
    sf_writer *w = arg;
    char header[96];
    snprintf(header, sizeof header, "Idempotency-Key: \"%s\"", w->key);
    hh_response r;
    hh_request(w->port, "POST", "/v1/analyses", NULL, "application/json",
               header, SF_ANALYSIS("full-disk-burst"), &r);
    w->status = r.status;
    const char *type = json_string_value(json_object_get(r.json, "type"));
    snprintf(w->type, sizeof w->type, "%s", type ? type : "");
    hh_free(&r);
    return NULL;
}

Test(store_full, concurrent_writers_each_get_507_and_each_retry_stores_once,
     .init = sf_setup, .fini = sf_teardown, .timeout = 120) {
    sf_start();
    hh_response r;
    sf_post(NULL, SF_ANALYSIS("full-disk-before"), &r);
    sf_acked first;
    sf_ack(&first, &r);
    hh_free(&r);

    sf_disk_full(1);
    sf_writer w[SF_WRITERS];
    pthread_t t[SF_WRITERS];
    for (int k = 0; k < SF_WRITERS; k++) {
        memset(&w[k], 0, sizeof w[k]);
        w[k].port = hd.port;
        snprintf(w[k].key, sizeof w[k].key, "qf-burst-%d", k);
        cr_assert(pthread_create(&t[k], NULL, sf_writer_main, &w[k]) == 0);
    }
    for (int k = 0; k < SF_WRITERS; k++)
        pthread_join(t[k], NULL);
    /* each its own 507 problem (RFC 4918 §11.5), whatever batch it was in */
    for (int k = 0; k < SF_WRITERS; k++) {
        cr_expect(w[k].status == 507, "writer %d: %d", k, w[k].status);
        cr_expect(
            strcmp(w[k].type, "urn:swapspec:problem:insufficient-storage") == 0,
            "writer %d: type %s", k, w[k].type);
    }
    sf_expect_alive("after concurrent writes on a full disk");
    sf_disk_full(0);

    /* each key retried once: 201 and a record of its own */
    sf_acked retried[SF_WRITERS];
    for (int k = 0; k < SF_WRITERS; k++) {
        sf_post(w[k].key, SF_ANALYSIS("full-disk-burst"), &r);
        sf_ack(&retried[k], &r);
        hh_free(&r);
        for (int j = 0; j < k; j++)
            cr_expect(strcmp(retried[j].id, retried[k].id) != 0,
                      "keys %d and %d share record %s", j, k, retried[k].id);
    }
    sf_expect_unchanged(&first, 1, "after the burst");
    sf_expect_unchanged(retried, SF_WRITERS, "after the retries");
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    /* 1 before + one per key; each key maps to its own record once */
    sf_expect_file(1 + SF_WRITERS, w[0].key, retried[0].id);
    for (int k = 1; k < SF_WRITERS; k++)
        sf_expect_file(1 + SF_WRITERS, w[k].key, retried[k].id);
    free(first.body);
    for (int k = 0; k < SF_WRITERS; k++)
        free(retried[k].body);
}

/* The disk fills up in the middle of a commit: the first three writes of
 * the commit reach the WAL (a frame header, its page, the next header) and
 * the rest fail, so the WAL ends in a torn append — what an ordinary file
 * system does when its last blocks go.  One analysis touches the analyses
 * table, its indexes and the key table (at least five pages, two writes
 * each; seven frames under strace), so three writes always stop short of
 * the commit frame.  SQLite's WAL only counts frames up to a valid commit
 * frame (the WAL format: salts and running checksums), so the torn frames
 * must vanish: after in-process recovery, and after kill -9 while the disk
 * is still full followed by a restart (the first open replays the WAL). */
Test(store_full, a_commit_torn_by_the_full_disk_leaves_no_trace,
     .init = sf_setup, .fini = sf_teardown, .timeout = 120) {
    sf_start();
    hh_response r;
    sf_acked acked[5];
    int n_acked = 0;
    for (int k = 0; k < 2; k++) {
        sf_post(NULL, SF_ANALYSIS("torn-before"), &r);
        sf_ack(&acked[n_acked++], &r);
        hh_free(&r);
    }

    /* torn once: 507, then space returns and the same connection stores */
    sf_disk_full_after(3);
    sf_post("qf-torn-1", SF_ANALYSIS("torn-keyed-1"), &r);
    sf_expect_full_problem(&r);
    hh_free(&r);
    sf_disk_full(0);
    sf_post("qf-torn-2", SF_ANALYSIS("torn-keyed-2"), &r);
    sf_ack(&acked[n_acked++], &r);
    hh_free(&r);
    sf_expect_unchanged(acked, n_acked, "after a torn commit");

    /* torn again, and the daemon is killed while the disk is still full */
    sf_disk_full_after(3);
    sf_post("qf-torn-3", SF_ANALYSIS("torn-keyed-3"), &r);
    sf_expect_full_problem(&r);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGKILL) == 128 + SIGKILL);
    sf_disk_full(0);

    /* the restart recovers the WAL: exactly the acknowledged analyses */
    sf_start();
    sf_expect_unchanged(acked, n_acked, "after kill -9 on a full disk");
    sf_get("/v1/analyses?limit=200", &r);
    cr_expect(json_array_size(json_object_get(r.json, "items")) ==
                  (size_t)n_acked,
              "%zu listed, %d acknowledged",
              json_array_size(json_object_get(r.json, "items")), n_acked);
    hh_free(&r);
    /* both refused keys store now, once each */
    sf_post("qf-torn-1", SF_ANALYSIS("torn-keyed-1"), &r);
    sf_ack(&acked[n_acked++], &r);
    hh_free(&r);
    sf_post("qf-torn-3", SF_ANALYSIS("torn-keyed-3"), &r);
    sf_ack(&acked[n_acked++], &r);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    sf_expect_file(n_acked, "qf-torn-1", acked[3].id);
    sf_expect_file(n_acked, "qf-torn-2", acked[2].id);
    sf_expect_file(n_acked, "qf-torn-3", acked[4].id);
    for (int k = 0; k < n_acked; k++)
        free(acked[k].body);
}
