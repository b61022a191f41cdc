/*
 * store_sqlite.h — internals of the SQLite backend of the store, shared by
 * store_sqlite.c, store_sqlite_read.c, store_sqlite_list.c,
 * store_sqlite_schema.c, store_sqlite_checkpoint.c and the schema-2 files
 * store_sqlite_calib.c, store_sqlite_revisions.c and store_sqlite_jobs.c.
 *
 * Handlers include store.h only.  Tests and diagnostics may use
 * store_sqlite_handle() to reach the connection's own sqlite3 handle (for
 * example to set PRAGMA max_page_count and meet a real SQLITE_FULL).
 */
#ifndef SWAPSPEC_STORE_SQLITE_H
#define SWAPSPEC_STORE_SQLITE_H

#include <sqlite3.h>

#include "store_internal.h"

/* PRAGMA application_id of a swapspec store: "SwSp". */
#define STORE_SQLITE_APPLICATION_ID 0x53775370

/* Statements prepared once per connection. */
enum {
    SQ_BEGIN,
    SQ_COMMIT,
    SQ_ROLLBACK,
    SQ_SAVEPOINT,
    SQ_RELEASE,
    SQ_ROLLBACK_TO,
    SQ_PUT_ANALYSIS,
    SQ_PUT_KEY,
    SQ_GET,
    SQ_KEY_FIND,
    SQ_KEY_PURGE,
    SQ_COUNT,
    SQ_CHECK,
    SQ_FIXED_COUNT
};

/* One list statement per combination of filters: label, since, until,
 * cursor (bit 0..3). */
#define SQ_LIST_VARIANTS 16

struct store {
    char *path;
    int busy_timeout_ms;
    unsigned long long dev, ino; /* the file opened (see store_check) */
};

/* Statements of the schema-2 files (calibrations, revisions, jobs),
 * prepared on first use by store__stmt; each file owns its slots. */
enum {
    SQL_CAL_FIRST = 0,
    SQL_CAL_COUNT = 6,
    SQL_REV_FIRST = SQL_CAL_FIRST + SQL_CAL_COUNT,
    SQL_REV_COUNT = 6,
    SQL_JOB_FIRST = SQL_REV_FIRST + SQL_REV_COUNT,
    SQL_JOB_COUNT = 20,
    SQL_LAZY_COUNT = SQL_JOB_FIRST + SQL_JOB_COUNT
};

/* The background checkpoints of a writer's connection
 * (store_sqlite_checkpoint.c). */
typedef struct store_checkpointer store_checkpointer;

struct store_conn {
    const store *owner;
    sqlite3 *db;
    sqlite3_stmt *fixed[SQ_FIXED_COUNT];
    sqlite3_stmt *list[SQ_LIST_VARIANTS]; /* prepared on first use */
    sqlite3_stmt *lazy[SQL_LAZY_COUNT];   /* prepared on first use */
    store_checkpointer *ckpt; /* NULL unless background checkpoints */
};

/* After a commit on a connection with background checkpoints: when a pass
 * has ended, a RESTART checkpoint of the frames committed meanwhile. */
void store__checkpoint_after_commit(store_conn *c);
/* Ends the checkpoint thread of c, if any (store_conn_close). */
void store__checkpointer_stop(store_conn *c);

/* Maps an SQLite result code to a status: BUSY/LOCKED -> SS_EBUSY, FULL ->
 * SS_ESTOREFULL, NOMEM -> SS_ENOMEM, anything else -> SS_ESTORE. */
ss_status store_sqlite_status(int rc);

/* Records the failure rc of `doing` on db (may be NULL) as
 * "store PATH: DOING: sqlite message" and returns its status. */
ss_status store_sqlite_fail(sqlite3 *db, const char *path, int rc,
                            const char *doing, ss_error *err);

/* Opens a connection with the per-connection settings (NOMUTEX, busy
 * timeout, synchronous=FULL, foreign keys, extended result codes). */
ss_status store_sqlite_connect(const char *path, int busy_timeout_ms,
                               int create, sqlite3 **out, ss_error *err);

/* Brings the schema of db to the latest version (one transaction per
 * migration step) and switches the file to WAL.  Refuses a file of another
 * application or of a newer schema with SS_ESTORE. */
ss_status store_sqlite_migrate(sqlite3 *db, const char *path, ss_error *err);

/* The schema version store_sqlite_migrate brings a file to. */
int store_sqlite_schema_latest(void);

/* Fills *out from a row (id, created_at, label, levels, method,
 * software_version, [request_json,] result_json); the JSON texts are
 * copied.  SS_ESTORE when a stored field does not fit the record. */
ss_status store__read_row(store_conn *c, sqlite3_stmt *q, int with_request,
                          store_record *out, ss_error *err);

/* The SQL of list variant `variant` (bits: label, since, until, cursor)
 * written into buf; -1 when it does not fit.  Parameters: :label, :since,
 * :until, :after_t, :after_id, :limit. */
int store_sqlite_list_sql(unsigned variant, char *buf, size_t cap);

/* Statement slot `which` of c, prepared from sql on first use (the same
 * slot must always get the same text).  NULL with err set on failure. */
sqlite3_stmt *store__stmt(store_conn *c, int which, const char *sql,
                          ss_error *err);
/* Resets a statement and clears its bindings (after every use, so that no
 * read transaction stays open). */
void store__done(sqlite3_stmt *q);
/* BEGIN IMMEDIATE / COMMIT / ROLLBACK (a no-op when SQLite already rolled
 * back) on c; begin and commit record a failure in err. */
ss_status store__begin(store_conn *c, ss_error *err);
ss_status store__commit(store_conn *c, ss_error *err);
void store__rollback(store_conn *c);
/* A deferred read transaction, so that several reads see one snapshot. */
ss_status store__begin_read(store_conn *c, ss_error *err);
/* Binds text (SQLITE_STATIC), or NULL for an empty string. */
void store__bind_text(sqlite3_stmt *q, int i, const char *text);
void store__bind_text_or_null(sqlite3_stmt *q, int i, const char *text);
/* Copies column i into a fixed array ("" for NULL); 0 when it does not
 * fit. */
int store__copy(sqlite3_stmt *q, int i, char *dst, size_t cap);

/* The connection's sqlite3 handle (tests and diagnostics only). */
sqlite3 *store_sqlite_handle(store_conn *c);

#endif /* SWAPSPEC_STORE_SQLITE_H */
