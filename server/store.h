/*
 * store.h — the storage interface of the swapspec service.
 *
 * Handlers see only this header.  Behind it sits SQLite today
 * (store_sqlite*.c); a PostgreSQL backend can implement the same functions
 * later without touching the handlers.
 *
 * Objects and threads:
 *  - one `store` per process: the location and the settings.  It holds no
 *    connection and is immutable after store_open, so store_conn_open may
 *    be called from any thread at any time;
 *  - one `store_conn` per worker thread: a connection with its prepared
 *    statements.  A store_conn must never be used by two threads at once
 *    nor across fork().  Close every store_conn before store_close.
 *
 * Errors: every function returns an ss_status from the one table in
 * swapspec.h and fills the caller's ss_error (first error wins):
 *   SS_EBUSY       the store stayed locked past the busy timeout (retry);
 *   SS_ESTOREFULL  no space left (disk full or size limit reached);
 *   SS_ESTORE      the file cannot be opened, read or written, is corrupt,
 *                  is not a swapspec store or has a newer schema;
 *   SS_ECONFLICT   store_put: the idempotency key (field "idempotency_key")
 *                  or the id (field "id") is already taken;
 *   SS_ENOTFOUND   store_get: no such id;
 *   SS_EINVAL      a malformed argument, the field names it ("cursor",
 *                  "since", "until", "limit", "id", "created_at", ...);
 *   SS_ENOMEM      memory could not be allocated.
 * Messages name the store path and the database's own message; they never
 * contain a token, a request body or a result.
 * Outputs are written only on success.
 */
#ifndef SWAPSPEC_STORE_H
#define SWAPSPEC_STORE_H

#include <stddef.h>
#include <stdint.h>
#include <time.h>

#include "swapspec.h"

/* Idempotency keys are kept this long (the published policy). */
#define STORE_IDEMPOTENCY_TTL_DAYS 30
/* Bounds of store_query.limit. */
#define STORE_LIST_LIMIT_MAX 200u
/* Longest idempotency key accepted (bytes). */
#define STORE_IDEMPOTENCY_KEY_MAX 128u

typedef struct store store;           /* one per process: path, settings */
typedef struct store_conn store_conn; /* one per thread; never shared */

/* One stored analysis.  Text fields are NUL-terminated within their arrays.
 * id: "an_" + 20 lowercase hex characters.  created_at: RFC 3339 UTC with
 * exactly three fraction digits, "2026-12-02T03:50:12.345Z" (this fixed
 * form sorts as text). */
typedef struct {
    char id[32];
    char created_at[32];
    char label[128];
    unsigned levels;
    char method[16];
    char software_version[32];
    char *request_json; /* owned by the record when filled by get/list
                           (NULL in list items) */
    char *result_json;  /* idem */
} store_record;

typedef struct {
    const char *label;  /* exact match, NULL = any */
    const char *since;  /* RFC 3339 date-time, inclusive, NULL = none */
    const char *until;  /* RFC 3339 date-time, exclusive, NULL = none */
    unsigned limit;     /* 1..STORE_LIST_LIMIT_MAX */
    const char *cursor; /* opaque next_cursor of a previous page, NULL or ""
                           = first page; a cursor is a position (the last
                           item seen), so it stays valid while newer
                           records arrive */
} store_query;

typedef struct {
    store_record *items; /* newest first; items carry result_json (the
                            handler extracts spectrum values and flag codes
                            from it) and no request_json */
    size_t count;
    char next_cursor[128]; /* "" when there is no further page */
} store_page;

typedef struct {
    int busy_timeout_ms; /* how long a write waits for the lock; <= 0 means
                            the default, 2000 */
} store_options;

/* Opens (creating if needed) the store at `path` and brings its schema up
 * to date (forward migrations).  opt may be NULL for the defaults.  Refuses
 * a file that is not a swapspec store (SS_ESTORE).  *out is released with
 * store_close. */
ss_status store_open(const char *path, const store_options *opt, store **out,
                     ss_error *err);
void store_close(store *s); /* accepts NULL */
/* The path given to store_open (for log lines). */
const char *store_path(const store *s);

/* A connection for the calling thread.  *out is released with
 * store_conn_close. */
ss_status store_conn_open(store *s, store_conn **out, ss_error *err);
void store_conn_close(store_conn *c); /* accepts NULL */

/* Stores one analysis durably: SS_OK means the record (and, when idem_key is
 * not NULL, the idempotency record {idem_key, fingerprint, rec->id,
 * rec->created_at}) committed in one transaction and survives a crash of the
 * process.  fingerprint: 64 lowercase hex characters (SHA-256 of the body),
 * required with idem_key.  request_json and result_json must be JSON texts.
 * SS_ECONFLICT when the key or the id exists (nothing is written). */
ss_status store_put(store_conn *c, const store_record *rec,
                    const char *idem_key, const char *fingerprint,
                    ss_error *err);

/* One put request of store_put_batch, with its own outcome. */
typedef struct {
    const store_record *rec;
    const char *idem_key;    /* may be NULL */
    const char *fingerprint; /* required with idem_key */
    ss_status status;        /* out: SS_OK, SS_EINVAL or SS_ECONFLICT */
    ss_error error;          /* out: why this item was refused */
} store_put_item;

/* Group commit: stores several analyses in one transaction (one sync).
 * Returns SS_OK when the transaction committed; then each item with status
 * SS_OK is stored durably, and items refused on their own (SS_EINVAL,
 * SS_ECONFLICT, also a key repeated within the batch) were left out.  Any
 * other failure (SS_EBUSY, SS_ESTOREFULL, SS_ESTORE, SS_ENOMEM) rolls the
 * whole batch back, stores nothing and is returned (every item then carries
 * it too). */
ss_status store_put_batch(store_conn *c, store_put_item *items, size_t n,
                          ss_error *err);

/* Fills *out with the record (request_json and result_json allocated;
 * release with store_record_release).  SS_ENOTFOUND for an unknown id. */
ss_status store_get(store_conn *c, const char *id, store_record *out,
                    ss_error *err);

/* Looks an idempotency key up: *found = 1 and the stored fingerprint and
 * analysis id when present, *found = 0 (and the arrays untouched) when not. */
ss_status store_idempotency_find(store_conn *c, const char *key,
                                 char fingerprint[65], char id[32], int *found,
                                 ss_error *err);

/* Deletes idempotency records created more than STORE_IDEMPOTENCY_TTL_DAYS
 * before `now`; *purged (may be NULL) receives how many.  The analyses
 * stay. */
ss_status store_purge_idempotency(store_conn *c, time_t now, uint64_t *purged,
                                  ss_error *err);

/* One page of analyses, newest first by (created_at, id), filtered by q.
 * Release with store_page_release.  SS_EINVAL with field "limit", "since",
 * "until" or "cursor" for a bad query. */
ss_status store_list(store_conn *c, const store_query *q, store_page *out,
                     ss_error *err);

/* Number of stored analyses. */
ss_status store_count(store_conn *c, uint64_t *out, ss_error *err);

/* Health: SS_OK when the file answers a read and has the expected schema. */
ss_status store_check(store_conn *c, ss_error *err);

void store_record_release(store_record *r); /* frees the JSON texts; accepts
                                               a zeroed record and NULL */
void store_page_release(store_page *p);     /* accepts a zeroed page, NULL */

/* ------------------------------------------------------------------------ */
/* Formats shared by every backend (store_format.c).                        */

/* A fresh analysis id, "an_" + 20 lowercase hex characters from the
 * kernel's random source.  SS_EINTERNAL if that source fails. */
ss_status store_id_generate(char out[32], ss_error *err);
/* 1 when s is an analysis id of the form above. */
int store_id_valid(const char *s);
/* The current time (CLOCK_REALTIME) in the record form,
 * "2026-12-02T03:50:12.345Z". */
void store_time_now(char out[32]);
/* 1 when s is a timestamp in exactly the record form. */
int store_time_canonical(const char *s);
/* Converts an RFC 3339 date-time ("T" or "t", a fraction of any length,
 * "Z", "z" or a numeric offset; second 60 allowed) to the record form,
 * rounding a finer fraction up to the next millisecond, so that for a
 * millisecond timestamp t: t >= s exactly when t >= out, and t < s exactly
 * when t < out.  Returns 0, or -1 for anything else (also a date outside
 * the years 0000..9999 after conversion to UTC). */
int store_time_normalize(const char *s, char out[32]);

#endif /* SWAPSPEC_STORE_H */
