/*
 * test_store.c — Criterion tests of the service's store (server/store.h)
 * with its SQLite backend.
 *
 * Each test works in its own mkdtemp directory (removed afterwards) and
 * checks the contract of store.h: round trips, newest-first keyset
 * pagination (compared with an order the test computes itself by sorting),
 * filters, strict cursors and time bounds, idempotency records written with
 * their analysis, forward migrations and the refusal of foreign files, the
 * mapping of a held lock to SS_EBUSY and of a page limit to SS_ESTOREFULL,
 * durability of acknowledged puts across kill -9 (with PRAGMA
 * integrity_check), four threads writing at once, the migration of a
 * schema-1 file with data, and the ownership and once-only finishing of
 * reprocessing jobs (schema 2).  The files are
 * inspected through a separate raw sqlite3 connection where the contract
 * is about the file itself.  The calendar arithmetic is checked against
 * the C library's gmtime_r.
 */
#include <criterion/criterion.h>
#include <dirent.h>
#include <fcntl.h>
#include <pthread.h>
#include <signal.h>
#include <sqlite3.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "store.h"
#include "store_sqlite.h"

/* ------------------------------------------------------------------------ */
/* Scratch directory, one per test (Criterion runs each test in its own
 * process), removed with everything in it afterwards.                       */

static char ts_dir[64];

static void ts_setup(void) {
    snprintf(ts_dir, sizeof ts_dir, "/tmp/swapspec-store-XXXXXX");
    cr_assert(mkdtemp(ts_dir) != NULL, "mkdtemp failed");
}

static void ts_teardown(void) {
    DIR *dir = opendir(ts_dir);
    if (dir == NULL)
        return;
    struct dirent *ent;
    char path[sizeof ts_dir + sizeof ent->d_name + 1];
    while ((ent = readdir(dir)) != NULL) {
        if (strcmp(ent->d_name, ".") == 0 || strcmp(ent->d_name, "..") == 0)
            continue;
        snprintf(path, sizeof path, "%s/%s", ts_dir, ent->d_name);
        unlink(path);
    }
    closedir(dir);
    rmdir(ts_dir);
}

TestSuite(store, .init = ts_setup, .fini = ts_teardown, .timeout = 120);

static const char *ts_path(const char *name) {
    static char path[128];
    snprintf(path, sizeof path, "%s/%s", ts_dir, name);
    return path;
}

/* ------------------------------------------------------------------------ */
/* Records.                                                                  */

static const char ts_request[] = "{\"levels\":3,\"label\":\"secret-body\"}";
static const char ts_result[] =
    "{\"spectrum\":{\"values\":[0.6,0.3,0.1]},\"flags\":[]}";

/* A scrambled 64-bit value of i, so that id order differs from insertion
 * order (multiplication by an odd constant and xor-shifts are bijective). */
static uint64_t ts_mix(uint64_t i) {
    uint64_t x = (i + 1) * 0x9E3779B97F4A7C15ull;
    x ^= x >> 29;
    x *= 0xBF58476D1CE4E5B9ull;
    return x ^ (x >> 32);
}

static void ts_id(unsigned i, char out[32]) {
    uint64_t a = ts_mix(i), b = ts_mix(i + 1000003u);
    snprintf(out, 32, "an_%016llx%04llx", (unsigned long long)a,
             (unsigned long long)(b & 0xffff));
}

/* 2026-11-30T10:00:00.000Z plus ms milliseconds (ms < 1 h). */
static void ts_time(unsigned ms, char out[32]) {
    snprintf(out, 32, "2026-11-30T10:%02u:%02u.%03uZ", ms / 60000 % 60,
             ms / 1000 % 60, ms % 1000);
}

static store_record ts_rec(unsigned i, unsigned ms, const char *label) {
    store_record r;
    memset(&r, 0, sizeof r);
    ts_id(i, r.id);
    ts_time(ms, r.created_at);
    snprintf(r.label, sizeof r.label, "%s", label);
    r.levels = 3;
    snprintf(r.method, sizeof r.method, "moments");
    snprintf(r.software_version, sizeof r.software_version, "0.1.0");
    r.request_json = (char *)ts_request;
    r.result_json = (char *)ts_result;
    return r;
}

static void ts_fp(unsigned i, char out[65]) {
    snprintf(out, 65, "%016llx%016llx%016llx%016llx",
             (unsigned long long)ts_mix(i), (unsigned long long)ts_mix(i + 1),
             (unsigned long long)ts_mix(i + 2),
             (unsigned long long)ts_mix(i + 3));
}

typedef struct {
    store *s;
    store_conn *c;
} ts_handle;

static ts_handle ts_open_at(const char *path, int busy_ms) {
    ts_handle h = {NULL, NULL};
    ss_error e;
    ss_error_clear(&e);
    store_options o = {.busy_timeout_ms = busy_ms};
    cr_assert(store_open(path, &o, &h.s, &e) == SS_OK, "store_open: %s",
              e.message);
    cr_assert(store_conn_open(h.s, &h.c, &e) == SS_OK, "conn_open: %s",
              e.message);
    return h;
}

static ts_handle ts_open(void) { return ts_open_at(ts_path("s.db"), 0); }

static void ts_close(ts_handle *h) {
    store_conn_close(h->c);
    store_close(h->s);
}

static void ts_put_ok(store_conn *c, const store_record *r, const char *key,
                      const char *fp) {
    ss_error e;
    ss_error_clear(&e);
    ss_status st = store_put(c, r, key, fp, &e);
    cr_assert(st == SS_OK, "store_put %s: %s (%s)", r->id, ss_status_name(st),
              e.message);
}

static uint64_t ts_count(store_conn *c) {
    uint64_t n = 0;
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_count(c, &n, &e) == SS_OK, "%s", e.message);
    return n;
}

/* Raw connection for inspecting the file itself. */
static sqlite3 *ts_raw(const char *path) {
    sqlite3 *db = NULL;
    cr_assert(sqlite3_open_v2(path, &db, SQLITE_OPEN_READWRITE, NULL) ==
              SQLITE_OK);
    sqlite3_busy_timeout(db, 5000);
    return db;
}

static long long ts_raw_int(sqlite3 *db, const char *sql) {
    sqlite3_stmt *q = NULL;
    cr_assert(sqlite3_prepare_v2(db, sql, -1, &q, NULL) == SQLITE_OK, "%s: %s",
              sql, sqlite3_errmsg(db));
    cr_assert(sqlite3_step(q) == SQLITE_ROW, "%s: %s", sql, sqlite3_errmsg(db));
    long long v = sqlite3_column_int64(q, 0);
    sqlite3_finalize(q);
    return v;
}

static void ts_raw_text(sqlite3 *db, const char *sql, char *out, size_t cap) {
    sqlite3_stmt *q = NULL;
    cr_assert(sqlite3_prepare_v2(db, sql, -1, &q, NULL) == SQLITE_OK);
    cr_assert(sqlite3_step(q) == SQLITE_ROW, "%s: %s", sql, sqlite3_errmsg(db));
    snprintf(out, cap, "%s", (const char *)sqlite3_column_text(q, 0));
    sqlite3_finalize(q);
}

static void ts_raw_exec(sqlite3 *db, const char *sql) {
    cr_assert(sqlite3_exec(db, sql, NULL, NULL, NULL) == SQLITE_OK, "%s: %s",
              sql, sqlite3_errmsg(db));
}

static double ts_now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

/* ------------------------------------------------------------------------ */
/* Put and get.                                                              */

Test(store, put_get_round_trip) {
    ts_handle h = ts_open();
    store_record r = ts_rec(1, 12345, "cell-7 morning");
    r.levels = 4;
    ts_put_ok(h.c, &r, NULL, NULL);

    store_record got;
    memset(&got, 0, sizeof got);
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_get(h.c, r.id, &got, &e) == SS_OK, "%s", e.message);
    cr_expect_str_eq(got.id, r.id);
    cr_expect_str_eq(got.created_at, "2026-11-30T10:00:12.345Z");
    cr_expect_str_eq(got.label, "cell-7 morning");
    cr_expect_eq(got.levels, 4);
    cr_expect_str_eq(got.method, "moments");
    cr_expect_str_eq(got.software_version, "0.1.0");
    cr_assert(got.request_json != NULL && got.result_json != NULL);
    cr_expect_str_eq(got.request_json, ts_request);
    cr_expect_str_eq(got.result_json, ts_result);
    store_record_release(&got);
    cr_expect(got.request_json == NULL && got.result_json == NULL);
    store_record_release(&got); /* twice is harmless */
    store_record_release(NULL);

    cr_expect_eq(ts_count(h.c), 1);
    cr_expect(store_check(h.c, &e) == SS_OK, "%s", e.message);
    ts_close(&h);
}

Test(store, get_unknown_is_not_found) {
    ts_handle h = ts_open();
    store_record r = ts_rec(1, 0, "a");
    ts_put_ok(h.c, &r, NULL, NULL);
    char other[32];
    ts_id(2, other);
    store_record got;
    memset(&got, 0, sizeof got);
    const char *ids[] = {other, "an_zz", "", "AN_0123456789abcdef0123"};
    for (size_t i = 0; i < sizeof ids / sizeof ids[0]; ++i) {
        ss_error e;
        ss_error_clear(&e);
        cr_expect_eq(store_get(h.c, ids[i], &got, &e), SS_ENOTFOUND, "%s",
                     ids[i]);
        cr_expect_str_eq(e.field, "id");
        cr_expect(strstr(e.message, ts_path("s.db")) != NULL, "%s", e.message);
    }
    cr_expect(got.request_json == NULL && got.id[0] == '\0',
              "nothing written on failure");
    ts_close(&h);
}

Test(store, put_rejects_malformed_records) {
    ts_handle h = ts_open();
    char fp[65];
    ts_fp(1, fp);
    struct {
        const char *what, *field;
        store_record r;
        const char *key, *fp;
    } cases[8];
    size_t n = 0;
    cases[n].what = "id";
    cases[n].field = "id";
    cases[n].r = ts_rec(1, 0, "x");
    snprintf(cases[n].r.id, sizeof cases[n].r.id, "an_0123456789ABCDEF0123");
    cases[n].key = NULL, cases[n].fp = NULL, ++n;
    cases[n].what = "created_at without milliseconds";
    cases[n].field = "created_at";
    cases[n].r = ts_rec(2, 0, "x");
    snprintf(cases[n].r.created_at, 32, "2026-11-30T10:00:00Z");
    cases[n].key = NULL, cases[n].fp = NULL, ++n;
    cases[n].what = "created_at with an offset";
    cases[n].field = "created_at";
    cases[n].r = ts_rec(3, 0, "x");
    snprintf(cases[n].r.created_at, 32, "2026-11-30T10:00:00.000+01:00");
    cases[n].key = NULL, cases[n].fp = NULL, ++n;
    cases[n].what = "no request";
    cases[n].field = "request";
    cases[n].r = ts_rec(4, 0, "x");
    cases[n].r.request_json = NULL;
    cases[n].key = NULL, cases[n].fp = NULL, ++n;
    cases[n].what = "result not JSON";
    cases[n].field = "result";
    cases[n].r = ts_rec(5, 0, "x");
    cases[n].r.result_json = (char *)"{\"spectrum\":";
    cases[n].key = NULL, cases[n].fp = NULL, ++n;
    cases[n].what = "key with a control character";
    cases[n].field = "idempotency_key";
    cases[n].r = ts_rec(6, 0, "x");
    cases[n].key = "abc\ndef", cases[n].fp = fp, ++n;
    cases[n].what = "key without fingerprint";
    cases[n].field = "fingerprint";
    cases[n].r = ts_rec(7, 0, "x");
    cases[n].key = "k1", cases[n].fp = NULL, ++n;
    cases[n].what = "upper-case fingerprint";
    cases[n].field = "fingerprint";
    cases[n].r = ts_rec(8, 0, "x");
    cases[n].key = "k2",
    cases[n].fp =
        "0123456789ABCDEF0123456789abcdef0123456789abcdef0123456789abcdef",
    ++n;
    for (size_t i = 0; i < n; ++i) {
        ss_error e;
        ss_error_clear(&e);
        ss_status st =
            store_put(h.c, &cases[i].r, cases[i].key, cases[i].fp, &e);
        cr_expect_eq(st, SS_EINVAL, "%s: got %s", cases[i].what,
                     ss_status_name(st));
        cr_expect_str_eq(e.field, cases[i].field, "%s", cases[i].what);
    }
    char key[STORE_IDEMPOTENCY_KEY_MAX + 2];
    memset(key, 'k', sizeof key - 1);
    key[sizeof key - 1] = '\0';
    store_record r = ts_rec(9, 0, "x");
    ss_error e;
    ss_error_clear(&e);
    cr_expect_eq(store_put(h.c, &r, key, fp, &e), SS_EINVAL, "129-byte key");
    key[STORE_IDEMPOTENCY_KEY_MAX] = '\0';
    ts_put_ok(h.c, &r, key, fp); /* 128 bytes is allowed */
    cr_expect_eq(ts_count(h.c), 1, "only the last record is stored");
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* Listing.                                                                  */

static int ts_newest_first(const void *a, const void *b) {
    const store_record *x = a, *y = b;
    int c = strcmp(y->created_at, x->created_at);
    return c != 0 ? c : strcmp(y->id, x->id);
}

static store_page ts_list(store_conn *c, const store_query *q) {
    store_page p;
    memset(&p, 0, sizeof p);
    ss_error e;
    ss_error_clear(&e);
    ss_status st = store_list(c, q, &p, &e);
    cr_assert(st == SS_OK, "store_list: %s (%s)", ss_status_name(st),
              e.message);
    return p;
}

Test(store, list_newest_first) {
    ts_handle h = ts_open();
    /* inserted out of time order */
    unsigned ms[6] = {3000, 1000, 5000, 2000, 4000, 999};
    store_record want[6];
    for (unsigned i = 0; i < 6; ++i) {
        want[i] = ts_rec(i, ms[i], "run");
        ts_put_ok(h.c, &want[i], NULL, NULL);
    }
    qsort(want, 6, sizeof want[0], ts_newest_first);
    store_query q = {.limit = 200};
    store_page p = ts_list(h.c, &q);
    cr_assert_eq(p.count, 6);
    for (size_t i = 0; i < 6; ++i) {
        cr_expect_str_eq(p.items[i].id, want[i].id, "item %zu", i);
        cr_expect_str_eq(p.items[i].created_at, want[i].created_at);
        cr_expect(p.items[i].request_json == NULL);
        cr_assert(p.items[i].result_json != NULL);
        cr_expect_str_eq(p.items[i].result_json, ts_result);
        cr_expect_eq(p.items[i].levels, 3);
        cr_expect_str_eq(p.items[i].method, "moments");
    }
    cr_expect_str_eq(p.next_cursor, "");
    store_page_release(&p);
    store_page_release(&p);
    store_page_release(NULL);

    store_query q1 = {.limit = 1};
    p = ts_list(h.c, &q1);
    cr_expect_eq(p.count, 1);
    cr_expect_str_eq(p.items[0].id, want[0].id);
    cr_expect_neq(p.next_cursor[0], '\0');
    store_page_release(&p);
    ts_close(&h);
}

Test(store, pagination_visits_every_record_once) {
    ts_handle h = ts_open();
    enum { N = 23 };
    store_record want[N];
    /* three records share each timestamp, so ties are broken by id across
     * page boundaries; inserted in a scrambled order */
    for (unsigned k = 0; k < N; ++k) {
        unsigned i = (k * 7) % N;
        want[k] = ts_rec(i, (i / 3) * 1000, i % 2 ? "beta" : "alpha");
    }
    for (unsigned k = 0; k < N; ++k)
        ts_put_ok(h.c, &want[k], NULL, NULL);
    qsort(want, N, sizeof want[0], ts_newest_first);

    char cursor[128] = "";
    size_t seen = 0, pages = 0;
    for (;;) {
        store_query q = {.limit = 5, .cursor = cursor};
        store_page p = ts_list(h.c, &q);
        ++pages;
        cr_assert(p.count <= 5 && seen + p.count <= N);
        for (size_t i = 0; i < p.count; ++i, ++seen)
            cr_expect_str_eq(p.items[i].id, want[seen].id, "position %zu",
                             seen);
        snprintf(cursor, sizeof cursor, "%s", p.next_cursor);
        store_page_release(&p);
        if (pages == 2) {
            /* a newer record arriving mid-walk does not shift later pages */
            store_record late = ts_rec(100, 3599000, "alpha");
            ts_put_ok(h.c, &late, NULL, NULL);
        }
        if (cursor[0] == '\0')
            break;
        cr_assert(pages < 10, "runaway pagination");
    }
    cr_expect_eq(seen, N);
    cr_expect_eq(pages, 5); /* 5 + 5 + 5 + 5 + 3 */
    ts_close(&h);
}

/* Lists everything matching q (limit 3 per page) into ids; returns count. */
static size_t ts_list_all(store_conn *c, store_query q, char ids[][32],
                          size_t cap) {
    char cursor[128] = "";
    size_t n = 0;
    q.limit = 3;
    do {
        q.cursor = cursor;
        store_page p = ts_list(c, &q);
        for (size_t i = 0; i < p.count; ++i) {
            cr_assert(n < cap);
            snprintf(ids[n++], 32, "%s", p.items[i].id);
        }
        snprintf(cursor, sizeof cursor, "%s", p.next_cursor);
        store_page_release(&p);
    } while (cursor[0] != '\0');
    return n;
}

/* Checks the store's answer against the test's own filter of recs. */
static void ts_expect_filter(store_conn *c, const store_record *recs, size_t n,
                             const char *label, const char *since,
                             const char *until, const char *since_text,
                             const char *until_text) {
    char want[32][32], got[32][32];
    size_t w = 0;
    for (size_t i = 0; i < n; ++i) { /* recs are sorted newest first */
        if (label != NULL && strcmp(recs[i].label, label) != 0)
            continue;
        if (since != NULL && strcmp(recs[i].created_at, since) < 0)
            continue;
        if (until != NULL && strcmp(recs[i].created_at, until) >= 0)
            continue;
        snprintf(want[w++], 32, "%s", recs[i].id);
    }
    store_query q = {.label = label, .since = since_text, .until = until_text};
    size_t g = ts_list_all(c, q, got, 32);
    cr_expect_eq(g, w, "label %s since %s until %s: %zu items, want %zu",
                 label ? label : "-", since_text ? since_text : "-",
                 until_text ? until_text : "-", g, w);
    for (size_t i = 0; i < g && i < w; ++i)
        cr_expect_str_eq(got[i], want[i]);
}

Test(store, label_since_until_filters) {
    ts_handle h = ts_open();
    enum { N = 12 };
    store_record recs[N];
    for (unsigned i = 0; i < N; ++i) {
        /* one per minute from 10:00, plus one at 10:05:00.001 */
        unsigned ms = i < 11 ? i * 60000 : 5 * 60000 + 1;
        recs[i] = ts_rec(i, ms, i % 3 == 0 ? "beta" : "alpha");
        ts_put_ok(h.c, &recs[i], NULL, NULL);
    }
    qsort(recs, N, sizeof recs[0], ts_newest_first);
    const char *t3 = "2026-11-30T10:03:00.000Z";
    const char *t8 = "2026-11-30T10:08:00.000Z";
    ts_expect_filter(h.c, recs, N, "alpha", NULL, NULL, NULL, NULL);
    ts_expect_filter(h.c, recs, N, "beta", NULL, NULL, NULL, NULL);
    ts_expect_filter(h.c, recs, N, "gamma", NULL, NULL, NULL, NULL);
    ts_expect_filter(h.c, recs, N, NULL, t3, NULL, t3, NULL);
    ts_expect_filter(h.c, recs, N, NULL, NULL, t8, NULL, t8);
    ts_expect_filter(h.c, recs, N, NULL, t3, t8, t3, t8);
    ts_expect_filter(h.c, recs, N, "alpha", t3, t8, t3, t8);
    /* the same instants written with an offset, without a fraction, and
     * with lower-case t and z (RFC 3339 §5.6) */
    ts_expect_filter(h.c, recs, N, "alpha", t3, t8, "2026-11-30T11:03:00+01:00",
                     "2026-11-30t07:08:00-03:00");
    ts_expect_filter(h.c, recs, N, NULL, t3, NULL, "2026-11-30t10:03:00z",
                     NULL);
    /* sub-millisecond bounds: 10:05:00.0005 lies between the records at
     * 10:05:00.000 and 10:05:00.001 */
    ts_expect_filter(h.c, recs, N, NULL, "2026-11-30T10:05:00.001Z", NULL,
                     "2026-11-30T10:05:00.0005Z", NULL);
    ts_expect_filter(h.c, recs, N, NULL, NULL, "2026-11-30T10:05:00.001Z", NULL,
                     "2026-11-30T10:05:00.0005Z");
    ts_close(&h);
}

static void ts_expect_bad_query(store_conn *c, store_query q,
                                const char *field) {
    store_page p;
    memset(&p, 0, sizeof p);
    ss_error e;
    ss_error_clear(&e);
    ss_status st = store_list(c, &q, &p, &e);
    cr_expect_eq(st, SS_EINVAL, "want EINVAL for %s, got %s", field,
                 ss_status_name(st));
    cr_expect_str_eq(e.field, field);
    cr_expect(p.items == NULL && p.count == 0, "nothing written on failure");
}

Test(store, bad_queries_are_refused) {
    ts_handle h = ts_open();
    for (unsigned i = 0; i < 4; ++i) {
        store_record r = ts_rec(i, i * 1000, "a");
        ts_put_ok(h.c, &r, NULL, NULL);
    }
    ts_expect_bad_query(h.c, (store_query){.limit = 0}, "limit");
    ts_expect_bad_query(h.c, (store_query){.limit = 201}, "limit");
    const char *bad_times[] = {
        "yesterday",
        "2026-11-30",                /* a date, not a date-time */
        "2026-11-30T10:00:00",       /* no offset */
        "2026-11-30 10:00:00Z",      /* space instead of T */
        "2026-13-01T00:00:00Z",      /* month 13 */
        "2026-02-29T00:00:00Z",      /* 2026 is not a leap year */
        "2100-02-29T00:00:00Z",      /* nor is 2100 */
        "2026-11-30T24:00:00Z",      /* hour 24 */
        "2026-11-30T10:00:00.Z",     /* empty fraction */
        "2026-11-30T10:00:00+0100",  /* offset without colon */
        "2026-11-30T10:00:00Zjunk",  /* trailing text */
        "0000-01-01T00:00:00+00:01", /* before year 0 in UTC */
    };
    for (size_t i = 0; i < sizeof bad_times / sizeof bad_times[0]; ++i) {
        ts_expect_bad_query(
            h.c, (store_query){.limit = 5, .since = bad_times[i]}, "since");
        ts_expect_bad_query(
            h.c, (store_query){.limit = 5, .until = bad_times[i]}, "until");
    }
    /* a real cursor, then damaged forms of it */
    store_page p = ts_list(h.c, &(store_query){.limit = 2});
    char good[128];
    snprintf(good, sizeof good, "%s", p.next_cursor);
    store_page_release(&p);
    cr_assert_neq(good[0], '\0');
    char shorter[128], longer[160], plus[128];
    snprintf(shorter, sizeof shorter, "%.*s", (int)strlen(good) - 1, good);
    snprintf(longer, sizeof longer, "%sA", good);
    snprintf(plus, sizeof plus, "%s", good);
    plus[5] = '+'; /* standard base64, not base64url */
    /* base64url of 48 'x' bytes: well-formed text, meaningless content */
    char junk[80] = "";
    for (int i = 0; i < 16; ++i)
        strcat(junk, "eHh4");
    const char *bad_cursors[] = {"abc", shorter, longer,
                                 plus,  junk,    "not a cursor at all"};
    for (size_t i = 0; i < sizeof bad_cursors / sizeof bad_cursors[0]; ++i)
        ts_expect_bad_query(
            h.c, (store_query){.limit = 2, .cursor = bad_cursors[i]}, "cursor");
    p = ts_list(h.c, &(store_query){.limit = 2, .cursor = good});
    cr_expect_eq(p.count, 2, "the undamaged cursor still works");
    store_page_release(&p);
    ts_close(&h);
}

Test(store, list_queries_use_an_index_for_the_order) {
    ts_handle h = ts_open();
    sqlite3 *db = ts_raw(ts_path("s.db"));
    for (unsigned v = 0; v < 16; ++v) {
        char sql[600] = "EXPLAIN QUERY PLAN ";
        cr_assert(store_sqlite_list_sql(v, sql + strlen(sql),
                                        sizeof sql - strlen(sql)) == 0);
        sqlite3_stmt *q = NULL;
        cr_assert(sqlite3_prepare_v2(db, sql, -1, &q, NULL) == SQLITE_OK,
                  "%s: %s", sql, sqlite3_errmsg(db));
        int uses_index = 0;
        while (sqlite3_step(q) == SQLITE_ROW) {
            const char *detail = (const char *)sqlite3_column_text(q, 3);
            cr_expect(strstr(detail, "TEMP B-TREE") == NULL,
                      "variant %u sorts: %s", v, detail);
            uses_index |= strstr(detail, "USING INDEX") != NULL;
        }
        cr_expect(uses_index, "variant %u uses no index", v);
        sqlite3_finalize(q);
    }
    sqlite3_close(db);
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* Idempotency.                                                              */

Test(store, idempotency_key_is_stored_with_its_analysis) {
    ts_handle h = ts_open();
    char fp[65], fp2[65];
    ts_fp(1, fp);
    ts_fp(2, fp2);
    store_record r = ts_rec(1, 0, "a");
    ts_put_ok(h.c, &r, "\"8e03978e-40d5-43e8-bc93-6894a57f9324\"", fp);

    char got_fp[65] = "", got_id[32] = "";
    int found = -1;
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_idempotency_find(h.c,
                                     "\"8e03978e-40d5-43e8-bc93-6894a57f9324\"",
                                     got_fp, got_id, &found, &e) == SS_OK);
    cr_expect_eq(found, 1);
    cr_expect_str_eq(got_fp, fp);
    cr_expect_str_eq(got_id, r.id);

    found = -1;
    cr_assert(store_idempotency_find(h.c, "other", got_fp, got_id, &found,
                                     &e) == SS_OK);
    cr_expect_eq(found, 0);

    /* the same key again (a retry that raced the first) */
    store_record r2 = ts_rec(2, 1000, "a");
    ss_status st = store_put(
        h.c, &r2, "\"8e03978e-40d5-43e8-bc93-6894a57f9324\"", fp2, &e);
    cr_expect_eq(st, SS_ECONFLICT, "got %s", ss_status_name(st));
    cr_expect_str_eq(e.field, "idempotency_key");
    cr_expect(strstr(e.message, "8e03978e") == NULL,
              "the message does not echo the key: %s", e.message);
    cr_expect_eq(ts_count(h.c), 1, "no second row");
    store_record none;
    memset(&none, 0, sizeof none);
    ss_error_clear(&e);
    cr_expect_eq(store_get(h.c, r2.id, &none, &e), SS_ENOTFOUND,
                 "the analysis of a refused key is not stored either");

    /* an id that is taken */
    store_record dup = ts_rec(1, 2000, "b");
    ss_error_clear(&e);
    cr_expect_eq(store_put(h.c, &dup, "fresh-key", fp2, &e), SS_ECONFLICT);
    cr_expect_str_eq(e.field, "id");
    found = -1;
    cr_assert(store_idempotency_find(h.c, "fresh-key", got_fp, got_id, &found,
                                     &e) == SS_OK);
    cr_expect_eq(found, 0, "the key of a refused record is not stored");
    ts_close(&h);
}

Test(store, idempotency_keys_expire_after_30_days) {
    ts_handle h = ts_open();
    char fp[65];
    ts_fp(1, fp);
    time_t now = time(NULL);
    struct tm tm;
    char when[3][32];
    const int days_ago[3] = {40, 31, 29};
    for (int i = 0; i < 3; ++i) {
        time_t t = now - (time_t)days_ago[i] * 86400;
        gmtime_r(&t, &tm);
        strftime(when[i], sizeof when[i], "%Y-%m-%dT%H:%M:%S.000Z", &tm);
        store_record r = ts_rec((unsigned)i, 0, "a");
        snprintf(r.created_at, sizeof r.created_at, "%s", when[i]);
        char key[16];
        snprintf(key, sizeof key, "key-%d", days_ago[i]);
        ts_put_ok(h.c, &r, key, fp);
    }
    uint64_t purged = 0;
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_purge_idempotency(h.c, now, &purged, &e) == SS_OK, "%s",
              e.message);
    cr_expect_eq(purged, 2);
    const char *keys[3] = {"key-40", "key-31", "key-29"};
    for (int i = 0; i < 3; ++i) {
        char f[65], id[32];
        int found = -1;
        cr_assert(store_idempotency_find(h.c, keys[i], f, id, &found, &e) ==
                  SS_OK);
        cr_expect_eq(found, i == 2, "%s", keys[i]);
    }
    cr_expect_eq(ts_count(h.c), 3, "the analyses stay");
    ts_close(&h);
}

Test(store, batch_put_commits_the_good_items) {
    ts_handle h = ts_open();
    char fp[65];
    ts_fp(1, fp);
    store_record old = ts_rec(0, 0, "a");
    ts_put_ok(h.c, &old, "taken", fp);
    store_record r[5];
    for (unsigned i = 0; i < 5; ++i)
        r[i] = ts_rec(i + 1, (i + 1) * 1000, "b");
    r[3].created_at[0] = 'x'; /* malformed */
    store_put_item items[5] = {
        {.rec = &r[0], .idem_key = "k1", .fingerprint = fp},
        {.rec = &r[1], .idem_key = "taken", .fingerprint = fp},
        {.rec = &r[2], .idem_key = "k1", .fingerprint = fp}, /* repeated */
        {.rec = &r[3]},
        {.rec = &r[4]},
    };
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_put_batch(h.c, items, 5, &e) == SS_OK, "%s", e.message);
    const ss_status want[5] = {SS_OK, SS_ECONFLICT, SS_ECONFLICT, SS_EINVAL,
                               SS_OK};
    for (int i = 0; i < 5; ++i)
        cr_expect_eq(items[i].status, want[i], "item %d: %s", i,
                     ss_status_name(items[i].status));
    cr_expect_str_eq(items[3].error.field, "created_at");
    cr_expect_eq(ts_count(h.c), 3);
    for (int i = 0; i < 5; ++i) {
        store_record got;
        memset(&got, 0, sizeof got);
        ss_error_clear(&e);
        ss_status st = store_get(h.c, r[i].id, &got, &e);
        cr_expect_eq(st, want[i] == SS_OK ? SS_OK : SS_ENOTFOUND, "item %d", i);
        store_record_release(&got);
    }
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* Migrations.                                                               */

static int ts_has_index_on(sqlite3 *db, const char *column) {
    char sql[256];
    snprintf(sql, sizeof sql,
             "SELECT count(*) FROM pragma_index_list('analyses') AS il,"
             " pragma_index_info(il.name) AS ii"
             " WHERE ii.seqno = 0 AND ii.name = '%s'",
             column);
    return ts_raw_int(db, sql) > 0;
}

Test(store, migrates_an_empty_file_and_reopens_without_change) {
    const char *path = ts_path("empty.db");
    int fd = open(path, O_WRONLY | O_CREAT | O_EXCL, 0600);
    cr_assert(fd >= 0);
    close(fd);
    ts_handle h = ts_open_at(path, 0);
    store_record r = ts_rec(1, 0, "a");
    ts_put_ok(h.c, &r, NULL, NULL);
    ts_close(&h);

    sqlite3 *db = ts_raw(path);
    int latest = store_sqlite_schema_latest();
    cr_expect_geq(latest, 1);
    cr_expect_eq(ts_raw_int(db, "PRAGMA user_version"), latest);
    cr_expect_eq(ts_raw_int(db, "PRAGMA application_id"),
                 STORE_SQLITE_APPLICATION_ID);
    char mode[16];
    ts_raw_text(db, "PRAGMA journal_mode", mode, sizeof mode);
    cr_expect_str_eq(mode, "wal");
    cr_expect(ts_has_index_on(db, "id"), "id is indexed (primary key)");
    cr_expect(ts_has_index_on(db, "label"));
    cr_expect(ts_has_index_on(db, "created_at"));
    cr_expect(ts_has_index_on(db, "levels"));
    long long cookie = ts_raw_int(db, "PRAGMA schema_version");
    sqlite3_close(db);

    h = ts_open_at(path, 0); /* again: nothing to do */
    cr_expect_eq(ts_count(h.c), 1);
    ts_close(&h);
    db = ts_raw(path);
    cr_expect_eq(ts_raw_int(db, "PRAGMA schema_version"), cookie,
                 "reopening changed the schema");
    cr_expect_eq(ts_raw_int(db, "PRAGMA user_version"), latest);
    sqlite3_close(db);
}

static void ts_expect_refused(const char *path, const char *why) {
    store *s = NULL;
    ss_error e;
    ss_error_clear(&e);
    ss_status st = store_open(path, NULL, &s, &e);
    cr_expect_eq(st, SS_ESTORE, "%s: got %s (%s)", why, ss_status_name(st),
                 e.message);
    cr_expect(s == NULL);
    cr_expect(strstr(e.message, path) != NULL, "%s: message %s", why,
              e.message);
    store_close(s);
}

/* Decision: a file at version 0 that already holds tables is refused and
 * left exactly as it was; so is a file marked by another application or
 * with a newer schema. */
Test(store, refuses_foreign_and_newer_files) {
    const char *foreign = ts_path("foreign.db");
    sqlite3 *db = NULL;
    cr_assert(sqlite3_open(foreign, &db) == SQLITE_OK);
    ts_raw_exec(db, "CREATE TABLE samples (x); INSERT INTO samples VALUES (7)");
    long long cookie = ts_raw_int(db, "PRAGMA schema_version");
    sqlite3_close(db);
    ts_expect_refused(foreign, "version 0 with tables");
    db = ts_raw(foreign);
    cr_expect_eq(ts_raw_int(db, "PRAGMA user_version"), 0);
    cr_expect_eq(ts_raw_int(db, "PRAGMA schema_version"), cookie);
    cr_expect_eq(ts_raw_int(db, "SELECT x FROM samples"), 7);
    char mode[16];
    ts_raw_text(db, "PRAGMA journal_mode", mode, sizeof mode);
    cr_expect_str_eq(mode, "delete", "journal mode untouched");
    sqlite3_close(db);

    const char *marked = ts_path("marked.db");
    cr_assert(sqlite3_open(marked, &db) == SQLITE_OK);
    ts_raw_exec(db, "PRAGMA application_id = 1234");
    sqlite3_close(db);
    ts_expect_refused(marked, "another application_id");

    const char *newer = ts_path("newer.db");
    ts_handle h = ts_open_at(newer, 0);
    ts_close(&h);
    db = ts_raw(newer);
    char sql[64];
    snprintf(sql, sizeof sql, "PRAGMA user_version = %d",
             store_sqlite_schema_latest() + 1);
    ts_raw_exec(db, sql);
    sqlite3_close(db);
    ts_expect_refused(newer, "newer schema");

    const char *garbage = ts_path("garbage.db");
    FILE *f = fopen(garbage, "w");
    cr_assert(f != NULL);
    for (int i = 0; i < 200; ++i)
        fputs("this is not a database file at all. ", f);
    fclose(f);
    ts_expect_refused(garbage, "not a database");

    ts_expect_refused(ts_path("no-such-dir/s.db"), "missing directory");
}

Test(store, check_notices_a_replaced_file) {
    ts_handle h = ts_open();
    ss_error e;
    ss_error_clear(&e);
    cr_expect(store_check(h.c, &e) == SS_OK);
    char moved[128];
    snprintf(moved, sizeof moved, "%s", ts_path("moved.db"));
    cr_assert(rename(ts_path("s.db"), moved) == 0);
    cr_expect_eq(store_check(h.c, &e), SS_ESTORE);
    cr_expect(strstr(e.message, ts_path("s.db")) != NULL, "%s", e.message);
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* Busy and full.                                                            */

Test(store, held_lock_gives_busy_then_put_succeeds) {
    ts_handle h = ts_open_at(ts_path("s.db"), 100);
    store_record first = ts_rec(1, 0, "a");
    ts_put_ok(h.c, &first, NULL, NULL);

    sqlite3 *other = ts_raw(ts_path("s.db"));
    ts_raw_exec(other, "BEGIN EXCLUSIVE");
    char fp[65];
    ts_fp(2, fp);
    store_record r = ts_rec(2, 1000, "a");
    ss_error e;
    ss_error_clear(&e);
    double t0 = ts_now();
    ss_status st = store_put(h.c, &r, "busy-key", fp, &e);
    double dt = ts_now() - t0;
    cr_expect_eq(st, SS_EBUSY, "got %s (%s)", ss_status_name(st), e.message);
    cr_expect(dt >= 0.09 && dt < 1.0, "gave up after %.3f s", dt);
    cr_expect(strstr(e.message, ts_path("s.db")) != NULL, "%s", e.message);
    cr_expect(strstr(e.message, "locked") != NULL, "%s", e.message);
    cr_expect(strstr(e.message, "secret-body") == NULL, "%s", e.message);
    /* WAL: readers are not blocked by the writer */
    cr_expect_eq(ts_count(h.c), 1);

    ts_raw_exec(other, "COMMIT");
    sqlite3_close(other);
    ts_put_ok(h.c, &r, "busy-key", fp); /* the failed try burned nothing */
    cr_expect_eq(ts_count(h.c), 2);
    ts_close(&h);
}

Test(store, page_limit_gives_full_then_writes_resume) {
    ts_handle h = ts_open();
    for (unsigned i = 0; i < 3; ++i) {
        store_record r = ts_rec(i, i * 1000, "a");
        ts_put_ok(h.c, &r, NULL, NULL);
    }
    /* A limit on the store's own connection: SQLite itself then answers
     * SQLITE_FULL as soon as the file would grow. */
    sqlite3 *db = store_sqlite_handle(h.c);
    long long pages = ts_raw_int(db, "PRAGMA page_count");
    char sql[64];
    snprintf(sql, sizeof sql, "PRAGMA max_page_count = %lld", pages);
    cr_assert_eq(ts_raw_int(db, sql), pages);

    size_t big = 64 * 1024;
    char *json = malloc(big + 16);
    cr_assert(json != NULL);
    strcpy(json, "{\"pad\":\"");
    memset(json + 8, 'p', big);
    strcpy(json + 8 + big, "\"}");
    store_record r = ts_rec(10, 10000, "a");
    r.result_json = json;
    char fp[65];
    ts_fp(3, fp);
    ss_error e;
    ss_error_clear(&e);
    ss_status st = store_put(h.c, &r, "full-key", fp, &e);
    cr_expect_eq(st, SS_ESTOREFULL, "got %s (%s)", ss_status_name(st),
                 e.message);
    cr_expect(strstr(e.message, ts_path("s.db")) != NULL, "%s", e.message);
    cr_expect(strstr(e.message, "full") != NULL, "%s", e.message);
    cr_expect(strstr(e.message, "ppppp") == NULL, "no body in the message");
    cr_expect_eq(ts_count(h.c), 3, "nothing half-written");
    char f[65], id[32];
    int found = -1;
    cr_assert(store_idempotency_find(h.c, "full-key", f, id, &found, &e) ==
              SS_OK);
    cr_expect_eq(found, 0);

    cr_assert_gt(ts_raw_int(db, "PRAGMA max_page_count = 1000000"), pages);
    ts_put_ok(h.c, &r, "full-key", fp);
    cr_expect_eq(ts_count(h.c), 4);
    free(json);
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* kill -9 durability.                                                       */

/* The child: puts records forever and reports each acknowledged id (23
 * bytes) on fd.  Never returns; runs no test code. */
#define TS_BIG 9000 /* a result text the size of a real one (~9.3 KB) */
#define TS_BATCH 30 /* the group commit's batch under load */

/* A JSON text of TS_BIG bytes. */
static char *ts_big_text(void) {
    static char big[TS_BIG + 32];
    if (big[0] == '\0') {
        memset(big, 'x', sizeof big);
        memcpy(big, "{\"pad\":\"", 8);
        memcpy(big + TS_BIG - 2, "\"}", 3);
    }
    return big;
}

/* The group commit's shape in a child process: background checkpoints,
 * batches of TS_BATCH records of TS_BIG bytes, each id written to fd once
 * its batch has committed. */
static void ts_batch_writer_child(const char *path, int fd) {
    store *s = NULL;
    store_conn *c = NULL;
    ss_error e;
    ss_error_clear(&e);
    if (store_open(path, NULL, &s, &e) != SS_OK ||
        store_conn_open(s, &c, &e) != SS_OK ||
        store_conn_background_checkpoints(c, &e) != SS_OK)
        _exit(3);
    char fp[65];
    ts_fp(9, fp);
    for (;;) {
        store_record r[TS_BATCH];
        store_put_item items[TS_BATCH];
        char keys[TS_BATCH][40];
        memset(items, 0, sizeof items);
        for (unsigned i = 0; i < TS_BATCH; ++i) {
            r[i] = ts_rec(0, 0, "crash");
            r[i].result_json = ts_big_text();
            if (store_id_generate(r[i].id, &e) != SS_OK)
                _exit(4);
            store_time_now(r[i].created_at);
            snprintf(keys[i], sizeof keys[i], "key-%s", r[i].id);
            items[i] = (store_put_item){
                .rec = &r[i], .idem_key = keys[i], .fingerprint = fp};
        }
        if (store_put_batch(c, items, TS_BATCH, &e) != SS_OK)
            _exit(5);
        for (unsigned i = 0; i < TS_BATCH; ++i)
            if (items[i].status != SS_OK || write(fd, r[i].id, 23) != 23)
                _exit(6);
    }
}

static void ts_writer_child(const char *path, int fd) {
    store *s = NULL;
    store_conn *c = NULL;
    ss_error e;
    ss_error_clear(&e);
    if (store_open(path, NULL, &s, &e) != SS_OK ||
        store_conn_open(s, &c, &e) != SS_OK)
        _exit(3);
    char fp[65];
    ts_fp(9, fp);
    for (;;) {
        store_record r = ts_rec(0, 0, "crash");
        if (store_id_generate(r.id, &e) != SS_OK)
            _exit(4);
        store_time_now(r.created_at);
        char key[40];
        snprintf(key, sizeof key, "key-%s", r.id);
        if (store_put(c, &r, key, fp, &e) != SS_OK)
            _exit(5);
        if (write(fd, r.id, 23) != 23) /* < PIPE_BUF: atomic */
            _exit(6);
    }
}

/* Rounds of: a child writes (store_put one by one, or batches of big
 * records with background checkpoints), the parent reads the acknowledged
 * ids until at least `least` more arrived, kills it with SIGKILL at an
 * arbitrary moment, and checks every acknowledged id, its idempotency key
 * and the file's integrity. */
static void ts_kill9_rounds(const char *file, int batches, int least) {
    const char *path = ts_path(file);
    size_t cap = 16384, total = 0;
    char(*acked)[32] = calloc(cap, sizeof *acked);
    cr_assert(acked != NULL);
    srand((unsigned)time(NULL) ^ (unsigned)getpid());
    for (int round = 0; round < 3; ++round) {
        int fds[2];
        cr_assert(pipe(fds) == 0);
        pid_t pid = fork();
        cr_assert(pid >= 0);
        if (pid == 0) {
            close(fds[0]);
            if (batches)
                ts_batch_writer_child(path, fds[1]);
            else
                ts_writer_child(path, fds[1]);
        }
        close(fds[1]);
        int want = least + rand() % least; /* then kill */
        char id[24];
        for (int got = 0; got < want; ++got) {
            ssize_t n = read(fds[0], id, 23);
            cr_assert_eq(n, 23, "the writer stopped early");
            id[23] = '\0';
            cr_assert(total < cap);
            snprintf(acked[total++], 32, "%s", id);
        }
        struct timespec pause = {0, (long)(rand() % 5000) * 1000L};
        nanosleep(&pause, NULL); /* an arbitrary moment */
        cr_assert(kill(pid, SIGKILL) == 0);
        int status = 0;
        cr_assert(waitpid(pid, &status, 0) == pid);
        cr_expect(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL,
                  "the writer exited by itself (status %d)", status);
        /* ids acknowledged just before the kill are still in the pipe */
        ssize_t n;
        while ((n = read(fds[0], id, 23)) == 23) {
            id[23] = '\0';
            cr_assert(total < cap);
            snprintf(acked[total++], 32, "%s", id);
        }
        cr_expect_eq(n, 0, "partial id in the pipe");
        close(fds[0]);

        ts_handle h = ts_open_at(path, 0);
        for (size_t i = 0; i < total; ++i) {
            store_record got;
            memset(&got, 0, sizeof got);
            ss_error e;
            ss_error_clear(&e);
            cr_expect_eq(store_get(h.c, acked[i], &got, &e), SS_OK,
                         "round %d: acknowledged %s is missing", round,
                         acked[i]);
            store_record_release(&got);
            char key[40], fp[65], aid[32];
            snprintf(key, sizeof key, "key-%s", acked[i]);
            int found = 0;
            cr_expect(store_idempotency_find(h.c, key, fp, aid, &found, &e) ==
                          SS_OK &&
                      found && strcmp(aid, acked[i]) == 0);
        }
        cr_expect_geq(ts_count(h.c), total);
        ts_close(&h);
        sqlite3 *db = ts_raw(path);
        char verdict[64];
        ts_raw_text(db, "PRAGMA integrity_check", verdict, sizeof verdict);
        cr_expect_str_eq(verdict, "ok", "round %d", round);
        sqlite3_close(db);
    }
    free(acked);
}

Test(store, acknowledged_puts_survive_kill_9) {
    ts_kill9_rounds("crash.db", 0, 24); /* a few dozen, then kill */
}

/* With background checkpoints: 1 500–3 000 records of 9 KB per round are
 * 1 800–3 600 WAL frames, so the kill lands while passes and restarts are
 * going on (the first pass starts at 1 000 frames). */
Test(store, acknowledged_batches_survive_kill_9_during_checkpoints) {
    ts_kill9_rounds("crash-big.db", 1, 1500);
}

/* ------------------------------------------------------------------------ */
/* Threads.                                                                  */

enum { TS_THREADS = 4, TS_PER_THREAD = 50 };

typedef struct {
    store *s;
    unsigned index;
    ss_status open_status;
    ss_status status[TS_PER_THREAD];
    char ids[TS_PER_THREAD][32];
} ts_worker;

static void *ts_worker_run(void *arg) {
    ts_worker *w = arg;
    store_conn *c = NULL;
    ss_error e;
    ss_error_clear(&e);
    w->open_status = store_conn_open(w->s, &c, &e); /* on this thread */
    if (w->open_status != SS_OK)
        return NULL;
    char fp[65];
    ts_fp(w->index, fp);
    for (unsigned i = 0; i < TS_PER_THREAD; ++i) {
        unsigned n = w->index * TS_PER_THREAD + i;
        store_record r = ts_rec(n, n, "threads");
        char key[32];
        snprintf(key, sizeof key, "thread-key-%u", n);
        ss_error_clear(&e);
        w->status[i] = store_put(c, &r, key, fp, &e);
        snprintf(w->ids[i], 32, "%s", r.id);
    }
    store_conn_close(c);
    return NULL;
}

Test(store, four_threads_write_without_busy) {
    store *s = NULL;
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_open(ts_path("s.db"), NULL, &s, &e) == SS_OK); /* 2 s */
    static ts_worker w[TS_THREADS];
    pthread_t tid[TS_THREADS];
    for (unsigned t = 0; t < TS_THREADS; ++t) {
        w[t].s = s;
        w[t].index = t;
        cr_assert(pthread_create(&tid[t], NULL, ts_worker_run, &w[t]) == 0);
    }
    for (unsigned t = 0; t < TS_THREADS; ++t)
        pthread_join(tid[t], NULL);
    store_conn *c = NULL;
    cr_assert(store_conn_open(s, &c, &e) == SS_OK);
    for (unsigned t = 0; t < TS_THREADS; ++t) {
        cr_assert_eq(w[t].open_status, SS_OK);
        for (unsigned i = 0; i < TS_PER_THREAD; ++i) {
            cr_expect_eq(w[t].status[i], SS_OK, "thread %u put %u: %s", t, i,
                         ss_status_name(w[t].status[i]));
            store_record got;
            memset(&got, 0, sizeof got);
            cr_expect_eq(store_get(c, w[t].ids[i], &got, &e), SS_OK);
            store_record_release(&got);
        }
    }
    cr_expect_eq(ts_count(c), TS_THREADS * TS_PER_THREAD);
    store_conn_close(c);
    store_close(s);
}

/* ------------------------------------------------------------------------ */
/* Background checkpoints (store_sqlite_checkpoint.c).                      */

/* Writes batches of TS_BATCH records of ~TS_BIG bytes, numbered from
 * *next; returns the longest batch in seconds. */
static double ts_write_batches(store_conn *c, unsigned batches,
                               unsigned *next) {
    char *big = ts_big_text();
    double longest = 0;
    for (unsigned b = 0; b < batches; ++b) {
        store_record r[TS_BATCH];
        store_put_item items[TS_BATCH];
        memset(items, 0, sizeof items);
        for (unsigned i = 0; i < TS_BATCH; ++i) {
            r[i] = ts_rec(*next, *next % 3600000u, "ckpt");
            r[i].result_json = big;
            items[i].rec = &r[i];
            ++*next;
        }
        ss_error e;
        ss_error_clear(&e);
        double t0 = ts_now();
        cr_assert(store_put_batch(c, items, TS_BATCH, &e) == SS_OK, "%s",
                  e.message);
        double dt = ts_now() - t0;
        longest = dt > longest ? dt : longest;
        for (unsigned i = 0; i < TS_BATCH; ++i)
            cr_assert_eq(items[i].status, SS_OK);
    }
    return longest;
}

/* s.db with a writer's connection: background checkpoints on. */
static ts_handle ts_open_writer(int busy_ms) {
    ts_handle h = ts_open_at(ts_path("s.db"), busy_ms);
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_conn_background_checkpoints(h.c, &e) == SS_OK, "%s",
              e.message);
    return h;
}

static long long ts_file_size(const char *path) {
    struct stat st;
    return stat(path, &st) == 0 ? (long long)st.st_size : -1;
}

/* The writer's commits no longer checkpoint; the background passes and the
 * writer's RESTARTs keep the WAL from growing with the data: 6000 records
 * of ~9 KB are ~7 000 frames (~57 MB); SQLite's own checkpoints would
 * leave a WAL of ~1000 frames (8 MiB).  Nothing is lost, and the file
 * passes integrity_check. */
Test(store, background_checkpoints_keep_the_wal_bounded) {
    ts_handle h = ts_open_writer(0);
    unsigned next = 0;
    ts_write_batches(h.c, 200, &next);
    store_checkpoint_stats ck;
    store_checkpoint_counts(h.c, &ck);
    long long wal = ts_file_size(ts_path("s.db-wal"));
    cr_expect_geq(ck.passes, 2, "background passes: %llu",
                  (unsigned long long)ck.passes);
    cr_expect_eq(ck.failed_passes, 0);
    cr_expect_geq(ck.restarts, 2, "restarts: %llu",
                  (unsigned long long)ck.restarts);
    /* frames are 8 KiB + 24 bytes: 6000 records wrote > 48 MB of them */
    cr_expect_lt(wal, 24LL << 20, "WAL of %lld bytes", wal);
    sqlite3 *raw = ts_raw(ts_path("s.db"));
    cr_expect_eq(ts_raw_int(raw, "SELECT count(*) FROM analyses"), 6000);
    char ok[32];
    ts_raw_text(raw, "PRAGMA integrity_check", ok, sizeof ok);
    cr_expect_str_eq(ok, "ok");
    sqlite3_close(raw);
    ts_close(&h); /* ends the checkpoint thread */
}

/* A reader that keeps an old snapshot blocks the writer's RESTART; the
 * writer gives up after a short wait instead of the store's busy timeout
 * (10 s here), and once the reader is gone the WAL is reset again. */
Test(store, a_long_reader_does_not_stall_the_writer) {
    ts_handle h = ts_open_writer(10000);
    unsigned next = 0;
    ts_write_batches(h.c, 10, &next);
    sqlite3 *reader = ts_raw(ts_path("s.db"));
    ts_raw_exec(reader, "BEGIN");
    cr_assert_eq(ts_raw_int(reader, "SELECT count(*) FROM analyses"), 300);
    double longest = ts_write_batches(h.c, 100, &next);
    cr_expect_lt(longest, 5.0, "a batch took %.2f s behind the reader",
                 longest);
    ts_raw_exec(reader, "COMMIT");
    sqlite3_close(reader);
    store_checkpoint_stats before, after;
    store_checkpoint_counts(h.c, &before);
    ts_write_batches(h.c, 150, &next);
    store_checkpoint_counts(h.c, &after);
    cr_expect_gt(after.restarts, before.restarts,
                 "no RESTART after the reader");
    cr_expect_eq(ts_count(h.c), next);
    ts_close(&h);
}

/* A connection without background checkpoints reports none. */
Test(store, plain_connections_report_no_checkpoints) {
    ts_handle h = ts_open();
    unsigned next = 0;
    ts_write_batches(h.c, 2, &next);
    store_checkpoint_stats ck = {1, 1, 1};
    store_checkpoint_counts(h.c, &ck);
    cr_expect(ck.passes == 0 && ck.failed_passes == 0 && ck.restarts == 0);
    ts_close(&h);
}

/* ------------------------------------------------------------------------ */
/* Formats.                                                                  */

Test(store, time_forms) {
    struct {
        const char *in, *want;
    } ok[] = {
        {"2026-12-02T04:50:12.345+01:00", "2026-12-02T03:50:12.345Z"},
        {"2026-12-31T23:30:00-01:00", "2027-01-01T00:30:00.000Z"},
        {"2024-02-29T12:00:00Z", "2024-02-29T12:00:00.000Z"},
        {"2000-02-29T00:00:00z", "2000-02-29T00:00:00.000Z"},
        {"2024-03-01T00:30:00+01:00", "2024-02-29T23:30:00.000Z"},
        /* RFC 3339 §5.7 allows a leap second; it is the next second's start
         * for our inclusive/exclusive bounds */
        {"2016-12-31T23:59:60Z", "2017-01-01T00:00:00.000Z"},
        {"2026-11-30T10:00:00.1Z", "2026-11-30T10:00:00.100Z"},
        {"2026-11-30T10:00:00.0001Z", "2026-11-30T10:00:00.001Z"},
        {"2026-11-30T10:00:00.1230000Z", "2026-11-30T10:00:00.123Z"},
        {"2026-12-31T23:59:59.9999Z", "2027-01-01T00:00:00.000Z"},
        {"9999-12-31T23:59:59.999Z", "9999-12-31T23:59:59.999Z"},
    };
    for (size_t i = 0; i < sizeof ok / sizeof ok[0]; ++i) {
        char out[32] = "";
        cr_expect_eq(store_time_normalize(ok[i].in, out), 0, "%s", ok[i].in);
        cr_expect_str_eq(out, ok[i].want, "%s", ok[i].in);
    }
    char out[32];
    cr_expect_eq(store_time_normalize("9999-12-31T23:30:00-01:00", out), -1);
    cr_expect(store_time_canonical("2026-11-30T10:00:00.000Z"));
    cr_expect(!store_time_canonical("2026-11-30T10:00:00.000z"));
    cr_expect(!store_time_canonical("2016-12-31T23:59:60.000Z"));

    /* the calendar arithmetic against the C library, over 1970..2200 */
    for (int k = 0; k < 2000; ++k) {
        time_t t = (time_t)(((long long)k * 3623878651LL) % 7258118400LL);
        struct tm tm;
        gmtime_r(&t, &tm);
        char want[40];
        strftime(want, sizeof want, "%Y-%m-%dT%H:%M:%S.000Z", &tm);
        cr_assert_eq(store_time_from_unix(t, out), 0);
        cr_assert_str_eq(out, want, "unix time %lld", (long long)t);
    }
    char now[32];
    store_time_now(now);
    cr_expect(store_time_canonical(now), "%s", now);
    time_t t = time(NULL);
    struct tm tm;
    gmtime_r(&t, &tm);
    char year[8];
    strftime(year, sizeof year, "%Y-", &tm);
    cr_expect(strncmp(now, year, 5) == 0, "%s", now);
}

Test(store, generated_ids) {
    char a[32], b[32];
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_id_generate(a, &e) == SS_OK);
    cr_assert(store_id_generate(b, &e) == SS_OK);
    cr_expect(store_id_valid(a) && store_id_valid(b), "%s %s", a, b);
    cr_expect_eq(strlen(a), 23);
    cr_expect_str_neq(a, b);
    cr_expect(!store_id_valid("an_0123456789abcdef012"));
    cr_expect(!store_id_valid("an_0123456789abcdef01234"));
    cr_expect(!store_id_valid("an_0123456789abcdeg0123"));
    cr_expect(!store_id_valid("bn_0123456789abcdef0123"));
}

/* ------------------------------------------------------------------------ */
/* Schema 2 (issue 5): calibrations, revisions, jobs.                        */

/* A file as a schema-1 build left it: step 1's SQL as it shipped, one
 * analysis, user_version 1.  Opening it migrates it to the latest schema
 * in place; the analysis is revision 1 of 1 with no calibration. */
Test(store, migrates_a_schema_1_file_with_its_analyses) {
    const char *path = ts_path("v1.db");
    sqlite3 *db = NULL;
    cr_assert(sqlite3_open(path, &db) == SQLITE_OK);
    ts_raw_exec(
        db,
        "CREATE TABLE analyses (id TEXT PRIMARY KEY NOT NULL CONSTRAINT "
        "id_form CHECK (length(id) = 23 AND id GLOB 'an_*'), created_at TEXT "
        "NOT NULL CONSTRAINT created_at_form CHECK (length(created_at) = "
        "24), label TEXT NOT NULL, levels INTEGER NOT NULL CONSTRAINT "
        "levels_range CHECK (levels >= 0), method TEXT NOT NULL, "
        "software_version TEXT NOT NULL, request_json TEXT NOT NULL "
        "CONSTRAINT request_is_json CHECK (json_valid(request_json)), "
        "result_json TEXT NOT NULL CONSTRAINT result_is_json CHECK "
        "(json_valid(result_json)));"
        "CREATE INDEX analyses_by_time ON analyses (created_at, id);"
        "CREATE INDEX analyses_by_label ON analyses (label, created_at, id);"
        "CREATE INDEX analyses_by_levels ON analyses (levels, created_at, "
        "id);"
        "CREATE TABLE idempotency_keys (key TEXT PRIMARY KEY NOT NULL, "
        "fingerprint TEXT NOT NULL CONSTRAINT fingerprint_form CHECK "
        "(length(fingerprint) = 64), analysis_id TEXT NOT NULL REFERENCES "
        "analyses (id) ON DELETE CASCADE, created_at TEXT NOT NULL);"
        "CREATE INDEX idempotency_keys_by_time ON idempotency_keys "
        "(created_at);"
        "INSERT INTO analyses VALUES ('an_00112233445566778899', "
        "'2026-11-30T10:00:00.000Z', 'old', 3, 'moments', '0.1.0', "
        "'{\"levels\":3}', '{\"flags\":[]}');"
        "PRAGMA user_version = 1; PRAGMA journal_mode = WAL");
    char mark[64];
    snprintf(mark, sizeof mark, "PRAGMA application_id = %d",
             STORE_SQLITE_APPLICATION_ID);
    ts_raw_exec(db, mark);
    sqlite3_close(db);
    ts_handle h = ts_open_at(path, 0);
    ss_error e;
    ss_error_clear(&e);
    store_record rec;
    store_revision_info info;
    cr_assert(store_get_revision(h.c, "an_00112233445566778899", 0, &rec, &info,
                                 &e) == SS_OK,
              "%s", e.message);
    cr_expect_eq(info.revision, 1);
    cr_expect_eq(info.revision_count, 1);
    cr_expect_str_eq(info.calibration_name, "");
    cr_expect_str_eq(rec.result_json, "{\"flags\":[]}");
    cr_expect_str_eq(rec.request_json, "{\"levels\":3}");
    store_record_release(&rec);
    store_page p;
    cr_assert(store_list(h.c, &(store_query){.limit = 5}, &p, &e) == SS_OK);
    cr_expect_eq(p.count, 1);
    store_page_release(&p);
    ts_close(&h);
    db = ts_raw(path);
    cr_expect_eq(ts_raw_int(db, "PRAGMA user_version"),
                 store_sqlite_schema_latest());
    cr_expect_eq(ts_raw_int(db, "SELECT count(*) FROM calibrations"), 0);
    sqlite3_close(db);
}

static void ts_calibration(store_conn *c, const char *name, double offset,
                           const char *valid_from) {
    store_calibration k;
    memset(&k, 0, sizeof k);
    snprintf(k.name, sizeof k.name, "%s", name);
    store_time_now(k.created_at);
    snprintf(k.valid_from, sizeof k.valid_from, "%s", valid_from);
    k.cal = ss_calibration_default();
    k.cal.offset = offset;
    ss_error e;
    ss_error_clear(&e);
    cr_assert(store_calibration_put(c, &k, &e) == SS_OK, "%s", e.message);
}

/* Ownership is a compare-and-set: one claim wins; an item finishes once,
 * only by the owner; the latest revision decides "unchanged". */
Test(store, jobs_are_claimed_once_and_items_finish_once) {
    ts_handle h = ts_open();
    ts_calibration(h.c, "trap-q", 1.0, "2026-11-01T00:00:00.000Z");
    ts_calibration(h.c, "trap-q", 2.0, "2026-11-01T00:00:00.000Z");
    for (unsigned i = 0; i < 3; ++i) {
        store_record r = ts_rec(i, i * 1000, "jobs");
        snprintf(r.calibration_name, sizeof r.calibration_name, "trap-q");
        r.calibration_version = 1;
        ts_put_ok(h.c, &r, NULL, NULL);
    }
    ss_error e;
    ss_error_clear(&e);
    store_job_params p;
    memset(&p, 0, sizeof p);
    snprintf(p.calibration, sizeof p.calibration, "trap-q");
    store_job job;
    cr_assert(store_job_create(h.c, &p, "cli", NULL, &job, &e) == SS_OK, "%s",
              e.message);
    cr_expect_eq(job.total, 3);
    cr_expect_str_eq(job.state, "queued");
    int claimed = 0;
    cr_assert(store_job_claim(h.c, job.id, "", "1:1", &claimed, &e) == SS_OK);
    cr_expect(claimed);
    cr_assert(store_job_claim(h.c, job.id, "", "2:2", &claimed, &e) == SS_OK);
    cr_expect(!claimed, "a second claim on the old owner must lose");
    store_job_item items[4];
    size_t n = 0;
    cr_assert(store_job_pending(h.c, job.id, 0, items, 4, &n, &e) == SS_OK);
    cr_assert_eq(n, 3);
    /* both versions valid from the same instant: the tie goes to 2 */
    cr_expect_eq(items[0].version, 2);
    store_revision_new rev = {.calibration_name = "trap-q",
                              .calibration_version = 2,
                              .software_version = "test",
                              .method = "moments",
                              .result_json = "{\"flags\":[]}"};
    store_time_now(rev.created_at);
    store_item_outcome what;
    ss_status st =
        store_job_item_finish(h.c, job.id, "2:2", items[0].seq,
                              items[0].analysis_id, &rev, NULL, &what, &e);
    cr_expect_eq(st, SS_ECONFLICT, "a runner that does not hold the job");
    ss_error_clear(&e);
    cr_assert(store_job_item_finish(h.c, job.id, "1:1", items[0].seq,
                                    items[0].analysis_id, &rev, NULL, &what,
                                    &e) == SS_OK,
              "%s", e.message);
    cr_expect_eq(what, STORE_ITEM_REVISED);
    st = store_job_item_finish(h.c, job.id, "1:1", items[0].seq,
                               items[0].analysis_id, &rev, NULL, &what, &e);
    cr_expect_eq(st, SS_ECONFLICT, "an item finishes once");
    ss_error_clear(&e);
    /* the same version on an analysis whose latest revision has it:
     * unchanged, nothing written (checked inside the transaction) */
    cr_assert(store_job_item_finish(h.c, job.id, "1:1", items[1].seq,
                                    items[1].analysis_id, &rev, NULL, &what,
                                    &e) == SS_OK);
    cr_expect_eq(what, STORE_ITEM_REVISED);
    cr_assert(store_job_item_finish(h.c, job.id, "1:1", items[2].seq,
                                    items[2].analysis_id, NULL, "broken", &what,
                                    &e) == SS_OK);
    cr_expect_eq(what, STORE_ITEM_FAILED);
    cr_assert(store_job_finish(h.c, job.id, "1:1", &e) == SS_OK, "%s",
              e.message);
    cr_assert(store_job_get(h.c, job.id, &job, &e) == SS_OK);
    cr_expect_str_eq(job.state, "failed");
    cr_expect_eq(job.revised, 2);
    cr_expect_eq(job.failed, 1);
    /* a second job: the revised analyses are now unchanged */
    store_job again;
    cr_assert(store_job_create(h.c, &p, "cli", NULL, &again, &e) == SS_OK);
    cr_assert(store_job_claim(h.c, again.id, "", "1:1", &claimed, &e) == SS_OK);
    cr_assert(store_job_pending(h.c, again.id, 0, items, 4, &n, &e) == SS_OK);
    cr_assert(store_job_item_finish(h.c, again.id, "1:1", items[0].seq,
                                    items[0].analysis_id, &rev, NULL, &what,
                                    &e) == SS_OK);
    cr_expect_eq(what, STORE_ITEM_UNCHANGED);
    store_record rec;
    store_revision_info info;
    cr_assert(store_get_revision(h.c, items[0].analysis_id, 0, &rec, &info,
                                 &e) == SS_OK);
    cr_expect_eq(info.revision, 2);
    cr_expect_eq(info.calibration_version, 2);
    cr_expect_str_eq(info.job_id, job.id);
    store_record_release(&rec);
    ts_close(&h);
}
