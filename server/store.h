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
    /* The calibration by reference (schema 2): the name and the version
     * the analysis resolved, "" and 0 for an inline or default calibration
     * (store_put writes NULL then); when the shots were taken, in the
     * record form, "" when the request did not say.  store_get and
     * store_list do not fill these (store_get_revision does). */
    char calibration_name[72];
    unsigned calibration_version;
    char measured_at[32];
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

/* For a connection that commits continuously (the service's group-commit
 * writer): its commits no longer copy the log back into the database file
 * themselves; a thread with a connection of its own does that in the
 * background, and the writer only finishes each pass between two
 * transactions (SQLite: WAL checkpoints, store_sqlite_checkpoint.c).
 * Durability is unchanged.  Ended by store_conn_close. */
ss_status store_conn_background_checkpoints(store_conn *c, ss_error *err);
/* What the background checkpoints of c did so far (all 0 without them):
 * passes ended, passes that failed (the disk; the frames stay in the log
 * and the next commit asks again), and passes the writer finished with a
 * log restart.  Safe from any thread while c's writer runs. */
typedef struct {
    uint64_t passes, failed_passes, restarts;
} store_checkpoint_stats;
void store_checkpoint_counts(store_conn *c, store_checkpoint_stats *out);

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

/* A fresh analysis id, "an_" + 20 lowercase hex characters: 12 of the
 * milliseconds since 1970, 8 of a per-process counter started at a random
 * value (the kernel's random source; SS_EINTERNAL if it fails).  Ids of
 * one process never repeat, and a new id sorts after the older ones (while
 * the clock does not step back), so the primary-key index grows at its
 * right edge instead of dirtying a random page per record (strace: 15 %
 * fewer pwrite calls per record at 16 384 records than random ids). */
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

/* ------------------------------------------------------------------------ */
/* Calibrations (store_sqlite_calib.c): named, versioned, never changed.    */

/* A calibration name: 1..STORE_CALIBRATION_NAME_MAX of [a-z0-9-]. */
#define STORE_CALIBRATION_NAME_MAX 64
/* Longest note of a calibration version (bytes). */
#define STORE_CALIBRATION_NOTE_MAX 500

/* One version of a named calibration. */
typedef struct {
    char name[STORE_CALIBRATION_NAME_MAX + 8];
    unsigned version;    /* 1, 2, ... in the order they were stored */
    char created_at[32]; /* record form */
    char valid_from[32]; /* record form: valid for shots at or after it */
    char note[STORE_CALIBRATION_NOTE_MAX + 1];
    ss_calibration cal;
} store_calibration;

/* One name in the list of calibrations: its latest version. */
typedef struct {
    char name[STORE_CALIBRATION_NAME_MAX + 8];
    unsigned latest_version;
    unsigned count; /* versions stored (= latest_version) */
    char valid_from[32];
    char created_at[32];
} store_calibration_entry;

/* 1 when s is a calibration name of the form above. */
int store_calibration_name_valid(const char *s);
/* The one error for a bad calibration name (s may be NULL: not a string):
 * SS_EINVAL naming `field`, saying the rule and, for upper-case letters,
 * the lower-case name to use. */
ss_status store_calibration_name_error(const char *s, const char *field,
                                       ss_error *err);

/* Stores a new version of io->name (io->created_at, valid_from, note and
 * cal as given; the version number is the next one of that name, written
 * to io->version).  SS_EINVAL naming "name", "created_at", "valid_from",
 * "note" or "calibration.<key>" for a malformed argument. */
ss_status store_calibration_put(store_conn *c, store_calibration *io,
                                ss_error *err);
/* Version `version` of name (0 = the latest).  SS_ENOTFOUND naming "name"
 * (no such calibration) or "version" (the name exists, the version not). */
ss_status store_calibration_get(store_conn *c, const char *name,
                                unsigned version, store_calibration *out,
                                ss_error *err);
/* The version of name valid at `at` (record form): the greatest valid_from
 * <= at, ties to the higher version.  SS_ENOTFOUND naming "name" (no such
 * calibration) or "at" (no version valid yet at that time; the message
 * gives the earliest valid_from). */
ss_status store_calibration_valid_at(store_conn *c, const char *name,
                                     const char *at, store_calibration *out,
                                     ss_error *err);
/* Every name, sorted, with its latest version.  *items is malloc'd (free
 * it; NULL when *count is 0). */
ss_status store_calibration_list(store_conn *c, store_calibration_entry **items,
                                 size_t *count, ss_error *err);

/* ------------------------------------------------------------------------ */
/* Revisions (store_sqlite_revisions.c).  Revision 1 is the analysis as
 * first stored; each reprocessing run that changes the calibration adds
 * revision k+1.  Nothing is overwritten.                                    */

typedef struct {
    unsigned revision;         /* 1, 2, ... */
    unsigned revision_count;   /* revisions the analysis has */
    char created_at[32];       /* when this revision was computed */
    char calibration_name[72]; /* "" = inline or default calibration */
    unsigned calibration_version;
    char software_version[32];
    char job_id[32]; /* the job that wrote it; "" for revision 1 */
    char method[16];
} store_revision_info;

/* The analysis `id` with revision `revision` (0 = the latest): out holds
 * the record (request_json, and result_json of that revision; the other
 * fields are the analysis's, calibration_* of revision 1), info the
 * revision.  One read transaction, so both agree.  SS_ENOTFOUND naming "id"
 * or "revision". Release out with store_record_release. */
ss_status store_get_revision(store_conn *c, const char *id, unsigned revision,
                             store_record *out, store_revision_info *info,
                             ss_error *err);

/* Calls fn for each revision of `id`, oldest first, inside one read
 * transaction; result_json is valid during the call only.  A non-SS_OK
 * return of fn stops the walk and is returned.  SS_ENOTFOUND naming "id". */
typedef ss_status (*store_revision_fn)(void *ctx,
                                       const store_revision_info *info,
                                       const char *result_json, ss_error *err);
ss_status store_revisions_foreach(store_conn *c, const char *id,
                                  store_revision_fn fn, void *ctx,
                                  ss_error *err);

/* ------------------------------------------------------------------------ */
/* Reprocessing jobs (store_sqlite_jobs.c).  A job re-runs the analyses
 * whose calibration was given by reference to one name.  The analyses are
 * snapshotted into job items when the job is created; each item's new
 * revision and its done mark commit in one transaction, so an interrupted
 * job resumes without duplicates or losses.  One runner owns a job at a
 * time (jobs.owner, a compare-and-set claim; see reprocess_runner.c).      */

typedef struct {
    char calibration[STORE_CALIBRATION_NAME_MAX + 8];
    unsigned version; /* 0: each analysis gets the version valid at its
                         measured time (else its creation time) */
    char since[32];   /* record form; "" = no bound (created_at >= since) */
    char until[32];   /* record form; "" = no bound (created_at < until) */
    int has_label;
    char label[128];
} store_job_params;

typedef struct {
    char id[32]; /* "job_" + 20 lowercase hex characters */
    char created_at[32];
    char origin[8]; /* "http" or "cli" */
    char state[12]; /* queued, running, done, failed */
    store_job_params params;
    uint64_t total, revised, unchanged, failed; /* done = the three summed */
    char started_at[32];                        /* "" until first claimed */
    char finished_at[32];                       /* "" until done or failed */
    char owner[48];                             /* "" when no runner holds it */
    char heartbeat_at[32];
} store_job;

/* One job item still to do. */
typedef struct {
    uint64_t seq;
    char analysis_id[32];
    unsigned version; /* 0: no version was valid at the analysis's time */
} store_job_item;

/* The outcome of one item. */
typedef enum {
    STORE_ITEM_REVISED,   /* a new revision was written */
    STORE_ITEM_UNCHANGED, /* the latest revision already used that version */
    STORE_ITEM_FAILED     /* the analysis could not be re-run (detail) */
} store_item_outcome;

/* What the runner needs to re-run one analysis. */
typedef struct {
    char *request_json; /* owned; release with store_job_source_release */
    char created_at[32];
    char measured_at[32]; /* "" = not given */
    unsigned revision_count;
    char calibration_name[72]; /* of the latest revision */
    unsigned calibration_version;
} store_job_source;

/* A job id "job_" + 20 lowercase hex characters; 1 when s is one. */
ss_status store_job_id_generate(char out[32], ss_error *err);
int store_job_id_valid(const char *s);

/* Creates a job and snapshots its items in one transaction: queued, or,
 * with an owner (NULL or "" = none), running and held by it from the
 * start, so that no other runner takes it first.  A job without items is
 * done at once.  SS_EINVAL naming "calibration" (no such name) or
 * "version" (no such version).  out receives the job. */
ss_status store_job_create(store_conn *c, const store_job_params *p,
                           const char *origin, const char *owner,
                           store_job *out, ss_error *err);
/* SS_ENOTFOUND naming "id". */
ss_status store_job_get(store_conn *c, const char *id, store_job *out,
                        ss_error *err);
/* The newest unfinished (queued or running) job with exactly these
 * parameters: *found = 1 and id filled, or *found = 0. */
ss_status store_job_find_unfinished(store_conn *c, const store_job_params *p,
                                    char id[32], int *found, ss_error *err);
/* Up to cap unfinished jobs, oldest first. */
ss_status store_job_unfinished(store_conn *c, store_job *out, size_t cap,
                               size_t *count, ss_error *err);
/* Compare-and-set ownership: takes the job for `me` when its owner is
 * still `expected` ("" = none) and it is unfinished; a queued job becomes
 * running (started_at set once).  *claimed = 1 on success. */
ss_status store_job_claim(store_conn *c, const char *id, const char *expected,
                          const char *me, int *claimed, ss_error *err);
/* Gives the job up (owner cleared) when `me` holds it. */
ss_status store_job_release(store_conn *c, const char *id, const char *me,
                            ss_error *err);
/* Marks a job whose items are all done as done (no failed item) or failed;
 * SS_ECONFLICT naming "job" when `me` does not hold it or items remain. */
ss_status store_job_finish(store_conn *c, const char *id, const char *me,
                           ss_error *err);
/* Up to cap pending items with seq > after, in seq order. */
ss_status store_job_pending(store_conn *c, const char *id, uint64_t after,
                            store_job_item *items, size_t cap, size_t *count,
                            ss_error *err);
/* Failed items, first cap in seq order: fn(ctx, analysis_id, detail). */
typedef void (*store_job_error_fn)(void *ctx, const char *analysis_id,
                                   const char *detail);
ss_status store_job_errors(store_conn *c, const char *id, size_t cap,
                           store_job_error_fn fn, void *ctx, ss_error *err);
/* The request and latest revision of an analysis. */
ss_status store_job_source_get(store_conn *c, const char *analysis_id,
                               store_job_source *out, ss_error *err);
void store_job_source_release(store_job_source *s); /* accepts NULL */

/* A new revision to write for an item (NULL for a failed item; with
 * result_json NULL the item is marked unchanged without a check: the
 * runner saw that the latest revision already uses that version). */
typedef struct {
    char created_at[32];
    const char *calibration_name;
    unsigned calibration_version;
    const char *software_version;
    const char *method;
    const char *result_json;
} store_revision_new;

/* Finishes one item in one transaction: renews the heartbeat of `me`
 * (SS_ECONFLICT naming "job" when another runner took the job over);
 * with rev, writes revision k+1 unless the latest revision already used
 * rev's calibration (then the item is unchanged); without rev, marks the
 * item failed with `detail`; counts the outcome on the job.  *outcome
 * receives what was done.  Nothing is written on failure. */
ss_status store_job_item_finish(store_conn *c, const char *job_id,
                                const char *me, uint64_t seq,
                                const char *analysis_id,
                                const store_revision_new *rev,
                                const char *detail, store_item_outcome *outcome,
                                ss_error *err);

/* Bulk connections (reprocessing): synchronous=NORMAL.  In WAL mode a
 * commit is still atomic and survives a crash of the process; a power
 * loss may roll back the last commits, and since each item's revision and
 * its done mark share one transaction such an item is simply done again. */
ss_status store_conn_set_bulk(store_conn *c, ss_error *err);

#endif /* SWAPSPEC_STORE_H */
