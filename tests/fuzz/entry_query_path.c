/*
 * entry_query_path.c — the body of the query_path fuzz target: what the
 * service reads from a request line and its headers before any JSON.  The
 * input is split at newlines into fields: method, path, label, since,
 * until, cursor, limit, Idempotency-Key, fingerprint (missing fields are
 * absent parameters).  Each piece of code is held against an oracle
 * written here from the published rule, independently of the code:
 *
 *  - http_route_match (method and path cut to the daemon's 16 and 256
 *    bytes, as http_server.c stores them) against a matcher that splits
 *    path and template at '/': the first route whose template fits and
 *    whose method matches (HEAD as GET, RFC 9110 §9.3.2), else the methods
 *    of the fitting routes for the Allow header;
 *  - store_time_normalize and store_time_canonical against RFC 3339 §5.6
 *    (the grammar, with the day ranges of §5.7) and glibc's timegm/gmtime_r
 *    for the arithmetic: the same instant, rounded up to the millisecond
 *    (a bound rounded up admits the same millisecond timestamps, inclusive
 *    or exclusive), within the years 0000..9999;
 *  - store_cursor_decode against a base64url decoder (RFC 4648 §5, no
 *    padding) of "1" + created_at + id, and encode ∘ decode = identity;
 *  - store_id_valid, store_job_id_valid, store_calibration_name_valid
 *    against their stated forms;
 *  - store_list on a scratch store of FZ_FIXTURES records against a
 *    filter-and-sort of the same records (label, since, until, cursor,
 *    limit; the first bad parameter named in the order store.h checks);
 *  - store_put_check's idempotency key (1..128 printable ASCII) and
 *    fingerprint (64 lowercase hex digits);
 *  - http_field_pointer (RFC 6901 escapes) on the label field as an error
 *    path.
 * Owns the scratch store (a mkdtemp directory) until fuzz_entry_cleanup.
 */
#define _DEFAULT_SOURCE /* timegm: the oracle of the calendar arithmetic */
#include "fuzz_entry.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "http.h"
#include "store.h"
#include "store_internal.h"

enum {
    F_METHOD,
    F_PATH,
    F_LABEL,
    F_SINCE,
    F_UNTIL,
    F_CURSOR,
    F_LIMIT,
    F_KEY,
    F_FPRINT,
    F_COUNT
};

/* ------------------------------------------------------------------------ */
/* Routes.                                                                   */

/* 1 when path fits template segment by segment ("{x}" takes one non-empty
 * segment, copied to id). */
static int fz_fits(const char *tmpl, const char *path, char *id, size_t cap) {
    id[0] = '\0';
    for (;;) {
        size_t tl = strcspn(tmpl, "/"), pl = strcspn(path, "/");
        if (tl >= 2 && tmpl[0] == '{' && tmpl[tl - 1] == '}') {
            if (pl == 0 || pl >= cap)
                return 0;
            memcpy(id, path, pl);
            id[pl] = '\0';
        } else if (tl != pl || memcmp(tmpl, path, tl) != 0) {
            return 0;
        }
        if (tmpl[tl] == '\0' || path[pl] == '\0')
            return tmpl[tl] == '\0' && path[pl] == '\0';
        tmpl += tl + 1;
        path += pl + 1;
    }
}

static int fz_check_route(const char *raw_method, const char *raw_path,
                          fuzz_verdict *v) {
    char method[16], path[256];
    snprintf(method, sizeof method, "%s", raw_method);
    snprintf(path, sizeof path, "%s", raw_path);
    const char *want_method = strcmp(method, "HEAD") == 0 ? "GET" : method;
    const http_route *want = NULL;
    char want_id[256] = "", want_allowed[256] = "";
    for (size_t i = 0; i < http_route_count && want == NULL; i++) {
        char id[256];
        if (!fz_fits(http_routes[i].path, path, id, sizeof id))
            continue;
        if (strcmp(http_routes[i].method, want_method) == 0) {
            want = &http_routes[i];
            snprintf(want_id, sizeof want_id, "%s", id);
        } else {
            size_t n = strlen(want_allowed);
            snprintf(want_allowed + n, sizeof want_allowed - n, "%s%s",
                     n ? ", " : "", http_routes[i].method);
        }
    }
    char id[256], allowed[64];
    const http_route *got =
        http_route_match(method, path, id, sizeof id, allowed, sizeof allowed);
    if (got != want)
        return fuzz_fail(v, "%s %s: matched %s, expected %s", method, path,
                         got ? got->path : "nothing",
                         want ? want->path : "nothing");
    if (got != NULL && strcmp(id, want_id) != 0)
        return fuzz_fail(v, "%s %s: id '%s', expected '%s'", method, path, id,
                         want_id);
    if (got == NULL && strcmp(allowed, want_allowed) != 0)
        return fuzz_fail(v, "%s %s: Allow '%s', expected '%s'", method, path,
                         allowed, want_allowed);
    return 0;
}

/* ------------------------------------------------------------------------ */
/* Identifiers.                                                              */

static int fz_hex_run(const char *s, size_t n) {
    for (size_t i = 0; i < n; i++)
        if (!((s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f')))
            return 0;
    return 1;
}

/* prefix + exactly 20 lowercase hex digits (store.h). */
static int fz_prefixed_id(const char *s, const char *prefix) {
    size_t p = strlen(prefix);
    return strlen(s) == p + 20 && strncmp(s, prefix, p) == 0 &&
           fz_hex_run(s + p, 20);
}

static int fz_name_ok(const char *s) {
    size_t n = strlen(s);
    if (n < 1 || n > STORE_CALIBRATION_NAME_MAX)
        return 0;
    return strspn(s, "abcdefghijklmnopqrstuvwxyz0123456789-") == n;
}

static int fz_check_ids(const char *s, fuzz_verdict *v) {
    if (store_id_valid(s) != fz_prefixed_id(s, "an_"))
        return fuzz_fail(v, "store_id_valid('%s') = %d", s, store_id_valid(s));
    if (store_job_id_valid(s) != fz_prefixed_id(s, "job_"))
        return fuzz_fail(v, "store_job_id_valid('%s') = %d", s,
                         store_job_id_valid(s));
    if (store_calibration_name_valid(s) != fz_name_ok(s))
        return fuzz_fail(v, "store_calibration_name_valid('%s') = %d", s,
                         store_calibration_name_valid(s));
    return 0;
}

/* ------------------------------------------------------------------------ */
/* Timestamps.                                                               */

static int fz_digits(const char *s, int n, int *out) {
    int x = 0;
    for (int i = 0; i < n; i++) {
        if (s[i] < '0' || s[i] > '9')
            return 0;
        x = x * 10 + (s[i] - '0');
    }
    *out = x;
    return 1;
}

static int fz_mday_max(int y, int m) {
    static const int len[12] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    return m == 2 && leap ? 29 : len[m - 1];
}

/* RFC 3339 §5.6 date-time → milliseconds since 1970 (UTC), rounded up;
 * 0 when s is not one, or falls outside 0000-01-01 .. 9999-12-31. */
static int fz_time_ms(const char *s, long long *ms) {
    int y, mo, d, h, mi, sec;
    if (!fz_digits(s, 4, &y) || s[4] != '-' || !fz_digits(s + 5, 2, &mo) ||
        s[7] != '-' || !fz_digits(s + 8, 2, &d) ||
        (s[10] != 'T' && s[10] != 't') || !fz_digits(s + 11, 2, &h) ||
        s[13] != ':' || !fz_digits(s + 14, 2, &mi) || s[16] != ':' ||
        !fz_digits(s + 17, 2, &sec))
        return 0;
    if (mo < 1 || mo > 12 || d < 1 || d > fz_mday_max(y, mo) || h > 23 ||
        mi > 59 || sec > 60)
        return 0;
    const char *p = s + 19;
    int milli = 0, extra = 0;
    if (*p == '.') {
        size_t n = strspn(++p, "0123456789");
        if (n == 0)
            return 0;
        for (size_t i = 0; i < 3; i++)
            milli = milli * 10 + (i < n ? p[i] - '0' : 0);
        for (size_t i = 3; i < n; i++)
            extra |= p[i] != '0';
        p += n;
    }
    int offset = 0;
    if (*p == 'Z' || *p == 'z') {
        p++;
    } else if (*p == '+' || *p == '-') {
        int oh, om;
        if (!fz_digits(p + 1, 2, &oh) || p[3] != ':' ||
            !fz_digits(p + 4, 2, &om) || oh > 23 || om > 59)
            return 0;
        offset = (*p == '-' ? -1 : 1) * (oh * 60 + om);
        p += 6;
    } else {
        return 0;
    }
    if (*p != '\0')
        return 0;
    struct tm t = {0};
    t.tm_year = y - 1900;
    t.tm_mon = mo - 1;
    t.tm_mday = d;
    t.tm_hour = h;
    t.tm_min = mi;
    t.tm_sec = sec; /* 60 carries into the next minute */
    long long x = (long long)timegm(&t) * 1000 + milli + extra -
                  (long long)offset * 60000;
    /* 0000-01-01T00:00Z and 10000-01-01T00:00Z in ms since 1970 */
    if (x < -62167219200000LL || x >= 253402300800000LL)
        return 0;
    *ms = x;
    return 1;
}

static void fz_time_format(long long ms, char out[32]) {
    long long q = ms / 1000, r = ms % 1000;
    if (r < 0) {
        r += 1000;
        q -= 1;
    }
    time_t t = (time_t)q;
    struct tm g;
    gmtime_r(&t, &g);
    char text[96]; /* roomy: the compiler cannot see the ranges */
    snprintf(text, sizeof text, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ",
             g.tm_year + 1900, g.tm_mon + 1, g.tm_mday, g.tm_hour, g.tm_min,
             g.tm_sec, (int)r);
    snprintf(out, 32, "%.31s", text);
}

/* The oracle's record form of s, or "" when s is not a date-time. */
static void fz_time_expect(const char *s, char out[32]) {
    long long ms;
    out[0] = '\0';
    if (fz_time_ms(s, &ms))
        fz_time_format(ms, out);
}

static int fz_check_time(const char *s, fuzz_verdict *v) {
    char want[32], got[32] = "";
    fz_time_expect(s, want);
    int rc = store_time_normalize(s, got);
    if ((rc == 0) != (want[0] != '\0'))
        return fuzz_fail(v, "store_time_normalize('%s') = %d, expected %s", s,
                         rc, want[0] ? want : "a refusal");
    if (rc == 0 && strcmp(got, want) != 0)
        return fuzz_fail(v, "store_time_normalize('%s') = '%s', expected '%s'",
                         s, got, want);
    int canonical = want[0] != '\0' && strcmp(want, s) == 0;
    if (store_time_canonical(s) != canonical)
        return fuzz_fail(v, "store_time_canonical('%s') = %d", s,
                         store_time_canonical(s));
    return 0;
}

/* ------------------------------------------------------------------------ */
/* Cursors.                                                                  */

static int fz_b64_value(char c) {
    const char *alphabet =
        "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_";
    const char *hit = c ? strchr(alphabet, c) : NULL;
    return hit ? (int)(hit - alphabet) : -1;
}

/* 1 and *pos when text is 64 base64url characters of "1" + a record-form
 * created_at + an analysis id. */
static int fz_cursor_expect(const char *text, store_position *pos) {
    if (strlen(text) != 64)
        return 0;
    unsigned char raw[48];
    for (int i = 0; i < 16; i++) {
        unsigned long x = 0;
        for (int k = 0; k < 4; k++) {
            int c = fz_b64_value(text[4 * i + k]);
            if (c < 0)
                return 0;
            x = x << 6 | (unsigned long)c;
        }
        raw[3 * i] = (unsigned char)(x >> 16);
        raw[3 * i + 1] = (unsigned char)(x >> 8);
        raw[3 * i + 2] = (unsigned char)x;
    }
    memset(pos, 0, sizeof *pos);
    memcpy(pos->created_at, raw + 1, 24);
    memcpy(pos->id, raw + 25, 23);
    char want[32];
    if (raw[0] != '1' || memchr(raw, 0, sizeof raw) != NULL)
        return 0;
    fz_time_expect(pos->created_at, want);
    return strcmp(want, pos->created_at) == 0 && fz_prefixed_id(pos->id, "an_");
}

static int fz_check_cursor(const char *text, fuzz_verdict *v) {
    store_position want, got;
    int ok = fz_cursor_expect(text, &want);
    int rc = store_cursor_decode(text, &got);
    if ((rc == 0) != ok)
        return fuzz_fail(v, "store_cursor_decode('%s') = %d, expected %s", text,
                         rc, ok ? "success" : "a refusal");
    if (!ok)
        return 0;
    if (strcmp(got.created_at, want.created_at) != 0 ||
        strcmp(got.id, want.id) != 0)
        return fuzz_fail(v, "cursor '%s' decoded as (%s, %s)", text,
                         got.created_at, got.id);
    char again[128];
    store_cursor_encode(&got, again);
    if (strcmp(again, text) != 0)
        return fuzz_fail(v, "cursor '%s' encodes back as '%s'", text, again);
    return 0;
}

/* ------------------------------------------------------------------------ */
/* The scratch store and its list oracle.                                    */

#define FZ_FIXTURES 12
static const struct {
    const char *id, *created_at, *label;
} fz_fixtures[FZ_FIXTURES] = {
    {"an_00000000000000000001", "2026-11-23T08:00:00.000Z", "trap-a"},
    {"an_00000000000000000002", "2026-11-23T08:00:00.000Z", "trap-a"},
    {"an_0000000000000000000a", "2026-11-23T08:00:00.000Z", "trap-b"},
    {"an_1000000000000000000f", "2026-11-24T23:59:59.999Z", ""},
    {"an_20000000000000000000", "2026-11-25T00:00:00.000Z", "trap-a"},
    {"an_ffffffffffffffffffff", "2026-12-02T03:50:12.345Z", "trap-b"},
    {"an_0123456789abcdef0123", "0000-01-01T00:00:00.000Z", "edge"},
    {"an_fedcba9876543210fedc", "9999-12-31T23:59:59.999Z", "edge"},
    {"an_00000000000000000003", "2016-12-31T23:59:59.999Z", "quillfeather"},
    {"an_00000000000000000004", "2017-01-01T00:00:00.000Z", "quillfeather"},
    {"an_00000000000000000005", "2026-11-23T07:59:59.999Z", "trap-a"},
    {"an_00000000000000000006", "1970-01-01T00:00:00.000Z", ""},
};

static char fz_dir[256];
static store *fz_store;
static store_conn *fz_conn;

void fuzz_entry_cleanup(void) {
    store_conn_close(fz_conn);
    store_close(fz_store);
    fz_conn = NULL;
    fz_store = NULL;
    if (fz_dir[0] == '\0')
        return;
    static const char *const files[] = {"fuzz.db", "fuzz.db-wal",
                                        "fuzz.db-shm"};
    for (size_t i = 0; i < 3; i++) {
        char path[300];
        snprintf(path, sizeof path, "%s/%s", fz_dir, files[i]);
        unlink(path);
    }
    rmdir(fz_dir);
    fz_dir[0] = '\0';
}

static void fz_record(size_t i, store_record *r) {
    memset(r, 0, sizeof *r);
    snprintf(r->id, sizeof r->id, "%s", fz_fixtures[i].id);
    snprintf(r->created_at, sizeof r->created_at, "%s",
             fz_fixtures[i].created_at);
    snprintf(r->label, sizeof r->label, "%s", fz_fixtures[i].label);
    r->levels = 3;
    snprintf(r->method, sizeof r->method, "moments");
    snprintf(r->software_version, sizeof r->software_version, "fuzz");
    r->request_json = (char *)"{\"levels\":3}";
    r->result_json = (char *)"{\"levels\":3}";
}

/* The store, created and filled on first use; NULL with v set on failure. */
static store_conn *fz_scratch(fuzz_verdict *v) {
    if (fz_conn != NULL)
        return fz_conn;
    const char *tmp = getenv("TMPDIR");
    snprintf(fz_dir, sizeof fz_dir, "%s/swapspec-fuzz-XXXXXX",
             tmp && tmp[0] && strlen(tmp) < 200 ? tmp : "/tmp");
    ss_error err;
    ss_error_clear(&err);
    char path[300];
    if (mkdtemp(fz_dir) == NULL) {
        fz_dir[0] = '\0';
        fuzz_fail(v, "mkdtemp failed");
        return NULL;
    }
    snprintf(path, sizeof path, "%s/fuzz.db", fz_dir);
    store_record recs[FZ_FIXTURES];
    store_put_item items[FZ_FIXTURES];
    memset(items, 0, sizeof items);
    for (size_t i = 0; i < FZ_FIXTURES; i++) {
        fz_record(i, &recs[i]);
        items[i].rec = &recs[i];
    }
    if (store_open(path, NULL, &fz_store, &err) != SS_OK ||
        store_conn_open(fz_store, &fz_conn, &err) != SS_OK ||
        store_put_batch(fz_conn, items, FZ_FIXTURES, &err) != SS_OK) {
        fuzz_fail(v, "scratch store %s: %s", path, err.message);
        fuzz_entry_cleanup();
        return NULL;
    }
    for (size_t i = 0; i < FZ_FIXTURES; i++)
        if (items[i].status != SS_OK) {
            fuzz_fail(v, "scratch record %zu: %s", i, items[i].error.message);
            fuzz_entry_cleanup();
            return NULL;
        }
    return fz_conn;
}

/* (created_at, id) order, as text (store.h: the record form sorts). */
static int fz_before(size_t a, size_t b) {
    int c = strcmp(fz_fixtures[a].created_at, fz_fixtures[b].created_at);
    return c != 0 ? c < 0 : strcmp(fz_fixtures[a].id, fz_fixtures[b].id) < 0;
}

/* The expected outcome of store_list: the bad parameter ("" when none),
 * or the page's ids, newest first, and whether more follow. */
static const char *fz_list_expect(const store_query *q, size_t *ids,
                                  size_t *count, int *more) {
    char since[32] = "", until[32] = "";
    store_position after;
    int has_after = q->cursor != NULL && q->cursor[0] != '\0';
    if (q->limit < 1 || q->limit > STORE_LIST_LIMIT_MAX)
        return "limit";
    if (q->label != NULL &&
        strlen(q->label) >= sizeof((store_record *)0)->label)
        return "label";
    if (q->since != NULL && (fz_time_expect(q->since, since), !since[0]))
        return "since";
    if (q->until != NULL && (fz_time_expect(q->until, until), !until[0]))
        return "until";
    if (has_after && !fz_cursor_expect(q->cursor, &after))
        return "cursor";
    size_t order[FZ_FIXTURES], n = 0;
    for (size_t i = 0; i < FZ_FIXTURES; i++) {
        const char *t = fz_fixtures[i].created_at;
        if ((q->label && strcmp(q->label, fz_fixtures[i].label) != 0) ||
            (since[0] && strcmp(t, since) < 0) ||
            (until[0] && strcmp(t, until) >= 0))
            continue;
        if (has_after) {
            int c = strcmp(t, after.created_at);
            if (c > 0 || (c == 0 && strcmp(fz_fixtures[i].id, after.id) >= 0))
                continue;
        }
        order[n++] = i;
    }
    for (size_t i = 1; i < n; i++) /* insertion sort, newest first */
        for (size_t k = i; k > 0 && fz_before(order[k - 1], order[k]); k--) {
            size_t t = order[k];
            order[k] = order[k - 1];
            order[k - 1] = t;
        }
    *more = n > q->limit;
    *count = n > q->limit ? q->limit : n;
    memcpy(ids, order, *count * sizeof *ids);
    return "";
}

static int fz_check_list(const store_query *q, fuzz_verdict *v) {
    store_conn *c = fz_scratch(v);
    if (c == NULL)
        return 1;
    size_t ids[FZ_FIXTURES], count = 0;
    int more = 0;
    const char *bad = fz_list_expect(q, ids, &count, &more);
    store_page page;
    memset(&page, 0, sizeof page);
    ss_error err;
    ss_error_clear(&err);
    ss_status st = store_list(c, q, &page, &err);
    int fail = 0;
    if (bad[0] != '\0') {
        if (st != SS_EINVAL || strcmp(err.field, bad) != 0)
            fail = fuzz_fail(v, "store_list: %s '%s' (%s), expected %s",
                             ss_status_name(st), err.field, err.message, bad);
    } else if (st != SS_OK) {
        fail = fuzz_fail(v, "store_list refused a good query: %s '%s': %s",
                         ss_status_name(st), err.field, err.message);
    } else if (page.count != count || (page.next_cursor[0] != '\0') != more) {
        fail = fuzz_fail(v,
                         "store_list: %zu items (more: %d), expected %zu "
                         "(more: %d)",
                         page.count, page.next_cursor[0] != '\0', count, more);
    } else {
        for (size_t k = 0; k < count && !fail; k++)
            if (strcmp(page.items[k].id, fz_fixtures[ids[k]].id) != 0)
                fail = fuzz_fail(v, "store_list item %zu is %s, expected %s", k,
                                 page.items[k].id, fz_fixtures[ids[k]].id);
        store_position last;
        if (!fail && more &&
            (!fz_cursor_expect(page.next_cursor, &last) ||
             strcmp(last.id, fz_fixtures[ids[count - 1]].id) != 0))
            fail = fuzz_fail(v, "next_cursor '%s' is not the last item",
                             page.next_cursor);
    }
    store_page_release(&page);
    return fail;
}

/* ------------------------------------------------------------------------ */
/* Idempotency key and fingerprint; field paths.                             */

static int fz_check_put(const char *key, const char *fp, fuzz_verdict *v) {
    store_record rec;
    fz_record(0, &rec);
    const char *want = "";
    if (key != NULL) {
        size_t n = strlen(key);
        int printable = n >= 1 && n <= STORE_IDEMPOTENCY_KEY_MAX;
        for (size_t i = 0; i < n; i++)
            printable &= key[i] >= 0x20 && key[i] <= 0x7e;
        if (!printable)
            want = "idempotency_key";
        else if (fp == NULL || strlen(fp) != 64 || !fz_hex_run(fp, 64))
            want = "fingerprint";
    }
    ss_error err;
    ss_error_clear(&err);
    ss_status st = store_put_check(&rec, key, fp, &err);
    if (want[0] == '\0' ? st != SS_OK
                        : st != SS_EINVAL || strcmp(err.field, want) != 0)
        return fuzz_fail(v,
                         "store_put_check(key '%s', fingerprint '%s'): %s "
                         "'%s', expected %s",
                         key ? key : "(none)", fp ? fp : "(none)",
                         ss_status_name(st), err.field,
                         want[0] ? want : "success");
    return 0;
}

static int fz_check_pointer(const char *field, fuzz_verdict *v) {
    char want[1024], got[128];
    size_t n = 0;
    int start = 1;
    for (const char *c = field; *c && n + 3 < sizeof want; c++) {
        if (strchr(".[]", *c) != NULL) {
            start = 1;
            continue;
        }
        if (start)
            want[n++] = '/';
        start = 0;
        if (*c == '~' || *c == '/') {
            want[n++] = '~';
            want[n++] = *c == '~' ? '0' : '1';
        } else {
            want[n++] = *c;
        }
    }
    want[n] = '\0';
    http_field_pointer(field, got, sizeof got);
    size_t g = strlen(got);
    if (g >= sizeof got || strncmp(got, want, g) != 0 ||
        (n + 3 < sizeof got && g != n))
        return fuzz_fail(v, "http_field_pointer('%s') = '%s', expected '%s'",
                         field, got, want);
    for (size_t i = 0; i < g; i++)
        if (got[i] == '~' && got[i + 1] != '0' && got[i + 1] != '1')
            return fuzz_fail(v, "http_field_pointer('%s') = '%s': bare '~'",
                             field, got);
    return 0;
}

/* ------------------------------------------------------------------------ */

int fuzz_query_path_one(const uint8_t *data, size_t size, fuzz_verdict *v) {
    static char text[F_COUNT][320];
    const char *f[F_COUNT] = {NULL};
    size_t pos = 0;
    for (int k = 0; k < F_COUNT && pos <= size; k++) {
        size_t end = pos;
        while (end < size && data[end] != '\n')
            end++;
        if (pos == size && k > 0)
            break;
        size_t len =
            end - pos < sizeof text[k] ? end - pos : sizeof text[k] - 1;
        memcpy(text[k], data + pos, len);
        text[k][len] = '\0'; /* an embedded NUL ends the field early */
        f[k] = text[k];
        pos = end + 1;
    }
    const char *method = f[F_METHOD] ? f[F_METHOD] : "";
    if (fz_check_route(method, f[F_PATH] ? f[F_PATH] : "", v))
        return 1;
    for (int k = F_PATH; k <= F_CURSOR; k++)
        if (f[k] && fz_check_ids(f[k], v))
            return 1;
    for (int k = F_LABEL; k <= F_UNTIL; k++)
        if (f[k] && fz_check_time(f[k], v))
            return 1;
    if (f[F_CURSOR] && fz_check_cursor(f[F_CURSOR], v))
        return 1;
    unsigned limit = 50;
    if (f[F_LIMIT]) { /* any 32-bit value, so that the range check is met */
        limit = 0;
        for (const char *c = f[F_LIMIT]; *c >= '0' && *c <= '9'; c++)
            limit = limit * 10u + (unsigned)(*c - '0');
    }
    store_query q = {f[F_LABEL], f[F_SINCE], f[F_UNTIL], limit, f[F_CURSOR]};
    if (fz_check_list(&q, v))
        return 1;
    if (fz_check_put(f[F_KEY], f[F_FPRINT], v))
        return 1;
    return f[F_LABEL] ? fz_check_pointer(f[F_LABEL], v) : 0;
}
