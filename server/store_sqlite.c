/*
 * store_sqlite.c — the SQLite backend of the store (store.h): opening the
 * file, per-thread connections, error mapping, and the writes (put, group
 * put, purge of expired idempotency keys).
 *
 * Durability and concurrency (service-practices §4): the file is in WAL mode
 * (set once, it persists), every connection runs synchronous=FULL (the WAL
 * is synced at each commit, so an acknowledged put survives kill -9 and
 * power loss on honest disks), waits up to busy_timeout_ms for the write
 * lock, and starts every write with BEGIN IMMEDIATE so that a write never
 * fails half-way on a lock upgrade.  Connections are opened with
 * SQLITE_OPEN_NOMUTEX (multi-thread mode): one per worker thread.  The
 * `store` object only holds the path and settings, so any thread may open
 * a connection from it.  The point reads live in store_sqlite_read.c, the
 * list query in store_sqlite_list.c, the schema and migrations in
 * store_sqlite_schema.c.
 *
 * Also the small helpers the schema-2 files share (store_sqlite.h:
 * statements prepared on first use, transactions, binding and copying).
 *
 * Owns: the store (its path copy), each connection's sqlite3 handle and
 * prepared statements.
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "store_sqlite.h"

static const char *const sq_fixed_sql[SQ_FIXED_COUNT] = {
    [SQ_BEGIN] = "BEGIN IMMEDIATE",
    [SQ_COMMIT] = "COMMIT",
    [SQ_ROLLBACK] = "ROLLBACK",
    [SQ_SAVEPOINT] = "SAVEPOINT put_item",
    [SQ_RELEASE] = "RELEASE put_item",
    [SQ_ROLLBACK_TO] = "ROLLBACK TO put_item",
    [SQ_PUT_ANALYSIS] =
        "INSERT INTO analyses (id, created_at, label, levels, method,"
        " software_version, request_json, result_json, calibration_name,"
        " calibration_version, measured_at)"
        " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
    [SQ_PUT_KEY] = "INSERT INTO idempotency_keys (key, fingerprint,"
                   " analysis_id, created_at) VALUES (?1, ?2, ?3, ?4)",
    [SQ_GET] = "SELECT id, created_at, label, levels, method,"
               " software_version, request_json, result_json"
               " FROM analyses WHERE id = ?1",
    [SQ_KEY_FIND] = "SELECT fingerprint, analysis_id FROM idempotency_keys"
                    " WHERE key = ?1",
    [SQ_KEY_PURGE] = "DELETE FROM idempotency_keys WHERE created_at < ?1",
    [SQ_COUNT] = "SELECT count(*) FROM analyses",
    [SQ_CHECK] = "SELECT (SELECT user_version FROM pragma_user_version),"
                 " (SELECT application_id FROM pragma_application_id),"
                 " EXISTS (SELECT 1 FROM analyses)",
};

/* ------------------------------------------------------------------------ */
/* Errors and connections.                                                   */

ss_status store_sqlite_status(int rc) {
    switch (rc & 0xff) {
    case SQLITE_BUSY:
    case SQLITE_LOCKED:
        return SS_EBUSY;
    case SQLITE_FULL:
        return SS_ESTOREFULL;
    case SQLITE_NOMEM:
        return SS_ENOMEM;
    default: /* IOERR, CANTOPEN, CORRUPT, NOTADB, READONLY, ... */
        return SS_ESTORE;
    }
}

ss_status store_sqlite_fail(sqlite3 *db, const char *path, int rc,
                            const char *doing, ss_error *err) {
    const char *msg = db != NULL ? sqlite3_errmsg(db) : sqlite3_errstr(rc);
    ss_status st = store_sqlite_status(rc);
    /* an I/O error whose system call ran out of space (SQLite reports
     * growing the -shm file that way, SQLITE_IOERR_SHMSIZE) is a full
     * store too */
    int sys = db != NULL ? sqlite3_system_errno(db) : 0;
    if ((rc & 0xff) == SQLITE_IOERR && (sys == ENOSPC || sys == EDQUOT)) {
        return ss_error_set(err, SS_ESTOREFULL, "",
                            "store %s: %s: %s (SQLite code %d: %s)", path,
                            doing, msg, rc, strerror(sys));
    }
    return ss_error_set(err, st, "", "store %s: %s: %s (SQLite code %d)", path,
                        doing, msg, rc);
}

ss_status store_sqlite_connect(const char *path, int busy_timeout_ms,
                               int create, sqlite3 **out, ss_error *err) {
    int flags = SQLITE_OPEN_READWRITE | SQLITE_OPEN_NOMUTEX |
                SQLITE_OPEN_EXRESCODE | (create ? SQLITE_OPEN_CREATE : 0);
    sqlite3 *db = NULL;
    int rc = sqlite3_open_v2(path, &db, flags, NULL);
    if (rc == SQLITE_OK)
        rc = sqlite3_busy_timeout(db, busy_timeout_ms);
    /* journal_size_limit: the WAL file is cut back to 64 MiB after a
     * checkpoint that found it larger.
     * trusted_schema = ON: the CHECK constraints of our schema call
     * json_valid(), which SQLite 3.40 does not mark innocuous.  The files
     * we open are our own; store_open refuses any other file before a
     * statement touches its tables.
     * temp_store = MEMORY: the group commit gives each record a savepoint,
     * whose statement journal otherwise spills to a temporary file past
     * 64 KiB (three times the pwrite calls per record with 8 KiB pages,
     * counted with strace); our temporary data is that and small sorts. */
    if (rc == SQLITE_OK)
        rc = sqlite3_exec(db,
                          "PRAGMA synchronous = FULL;"
                          "PRAGMA foreign_keys = ON;"
                          "PRAGMA journal_size_limit = 67108864;"
                          "PRAGMA temp_store = MEMORY;"
                          "PRAGMA trusted_schema = ON",
                          NULL, NULL, NULL);
    if (rc != SQLITE_OK) {
        ss_status st = store_sqlite_fail(db, path, rc, "opening", err);
        sqlite3_close(db);
        return st;
    }
    *out = db;
    return SS_OK;
}

sqlite3 *store_sqlite_handle(store_conn *c) { return c->db; }

ss_status store_open(const char *path, const store_options *opt, store **out,
                     ss_error *err) {
    if (path == NULL || path[0] == '\0')
        return ss_error_set(err, SS_EINVAL, "data", "no store path given");
    store *s = calloc(1, sizeof *s);
    if (s == NULL || (s->path = strdup(path)) == NULL) {
        free(s);
        return ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                            path);
    }
    s->busy_timeout_ms =
        opt != NULL && opt->busy_timeout_ms > 0 ? opt->busy_timeout_ms : 2000;
    sqlite3 *db = NULL;
    ss_status st = store_sqlite_connect(path, s->busy_timeout_ms, 1, &db, err);
    if (st == SS_OK)
        st = store_sqlite_migrate(db, path, err);
    sqlite3_close(db);
    struct stat sb;
    if (st == SS_OK && stat(path, &sb) != 0)
        st = ss_error_set(err, SS_ESTORE, "", "store %s: cannot stat the file",
                          path);
    if (st != SS_OK) {
        store_close(s);
        return st;
    }
    s->dev = (unsigned long long)sb.st_dev;
    s->ino = (unsigned long long)sb.st_ino;
    *out = s;
    return SS_OK;
}

void store_close(store *s) {
    if (s == NULL)
        return;
    free(s->path);
    free(s);
}

const char *store_path(const store *s) { return s->path; }

ss_status store_conn_open(store *s, store_conn **out, ss_error *err) {
    store_conn *c = calloc(1, sizeof *c);
    if (c == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                            s->path);
    c->owner = s;
    ss_status st =
        store_sqlite_connect(s->path, s->busy_timeout_ms, 0, &c->db, err);
    for (int i = 0; st == SS_OK && i < SQ_FIXED_COUNT; ++i) {
        int rc =
            sqlite3_prepare_v3(c->db, sq_fixed_sql[i], -1,
                               SQLITE_PREPARE_PERSISTENT, &c->fixed[i], NULL);
        if (rc != SQLITE_OK)
            st = store_sqlite_fail(c->db, s->path, rc, "preparing", err);
    }
    if (st != SS_OK) {
        store_conn_close(c);
        return st;
    }
    *out = c;
    return SS_OK;
}

void store_conn_close(store_conn *c) {
    if (c == NULL)
        return;
    store__checkpointer_stop(c);
    for (int i = 0; i < SQ_FIXED_COUNT; ++i)
        sqlite3_finalize(c->fixed[i]);
    for (int i = 0; i < SQ_LIST_VARIANTS; ++i)
        sqlite3_finalize(c->list[i]);
    for (int i = 0; i < SQL_LAZY_COUNT; ++i)
        sqlite3_finalize(c->lazy[i]);
    sqlite3_close(c->db);
    free(c);
}

/* ------------------------------------------------------------------------ */
/* Statement helpers.  Every statement is reset right after use so that no
 * read transaction stays open (which would starve WAL checkpoints).        */

/* Steps a statement that returns no row; records a failure. */
static int sq_run(store_conn *c, int which, const char *doing, ss_status *st,
                  ss_error *err) {
    sqlite3_stmt *q = c->fixed[which];
    int rc = sqlite3_step(q);
    if (rc != SQLITE_DONE && st != NULL)
        *st = store_sqlite_fail(c->db, c->owner->path, rc, doing, err);
    sqlite3_reset(q);
    sqlite3_clear_bindings(q);
    return rc == SQLITE_DONE ? SQLITE_OK : rc;
}

static void sq_rollback(store_conn *c) {
    if (!sqlite3_get_autocommit(c->db)) /* SQLite may have rolled back */
        sq_run(c, SQ_ROLLBACK, "rolling back", NULL, NULL);
}

static void sq_bind(sqlite3_stmt *q, int i, const char *text) {
    sqlite3_bind_text(q, i, text, -1, SQLITE_STATIC);
}

/* Inserts one record and its key inside an open transaction. */
static ss_status sq_insert(store_conn *c, const store_record *rec,
                           const char *key, const char *fingerprint,
                           ss_error *err) {
    const char *path = c->owner->path;
    sqlite3_stmt *q = c->fixed[SQ_PUT_ANALYSIS];
    sq_bind(q, 1, rec->id);
    sq_bind(q, 2, rec->created_at);
    sq_bind(q, 3, rec->label);
    sqlite3_bind_int64(q, 4, rec->levels);
    sq_bind(q, 5, rec->method);
    sq_bind(q, 6, rec->software_version);
    sq_bind(q, 7, rec->request_json);
    sq_bind(q, 8, rec->result_json);
    if (rec->calibration_name[0] != '\0') {
        sq_bind(q, 9, rec->calibration_name);
        sqlite3_bind_int64(q, 10, rec->calibration_version);
    }
    if (rec->measured_at[0] != '\0')
        sq_bind(q, 11, rec->measured_at);
    ss_error why; /* SQLite's message, taken before the statement resets */
    ss_error_clear(&why);
    ss_status st = SS_OK;
    int rc = sq_run(c, SQ_PUT_ANALYSIS, "storing the analysis", &st, &why);
    if (rc == SQLITE_CONSTRAINT_PRIMARYKEY)
        return ss_error_set(err, SS_ECONFLICT, "id",
                            "store %s: analysis id %s is already taken", path,
                            rec->id);
    if ((rc & 0xff) == SQLITE_CONSTRAINT) /* a CHECK of the schema */
        return ss_error_set(err, SS_EINVAL,
                            strstr(why.message, "request_is_json")  ? "request"
                            : strstr(why.message, "result_is_json") ? "result"
                                                                    : "",
                            "%s", why.message);
    if (rc != SQLITE_OK)
        return ss_error_set(err, st, "", "%s", why.message);
    if (key == NULL)
        return SS_OK;
    q = c->fixed[SQ_PUT_KEY];
    sq_bind(q, 1, key);
    sq_bind(q, 2, fingerprint);
    sq_bind(q, 3, rec->id);
    sq_bind(q, 4, rec->created_at);
    rc = sq_run(c, SQ_PUT_KEY, "storing the idempotency key", NULL, NULL);
    if (rc == SQLITE_CONSTRAINT_PRIMARYKEY)
        return ss_error_set(err, SS_ECONFLICT, "idempotency_key",
                            "store %s: the idempotency key is already stored",
                            path);
    if (rc != SQLITE_OK)
        return store_sqlite_fail(c->db, path, rc, "storing the idempotency key",
                                 err);
    return SS_OK;
}

ss_status store_put(store_conn *c, const store_record *rec,
                    const char *idem_key, const char *fingerprint,
                    ss_error *err) {
    ss_status st = store_put_check(rec, idem_key, fingerprint, err);
    if (st != SS_OK)
        return st;
    if (sq_run(c, SQ_BEGIN, "waiting for the write lock", &st, err))
        return st;
    st = sq_insert(c, rec, idem_key, fingerprint, err);
    if (st == SS_OK)
        sq_run(c, SQ_COMMIT, "committing", &st, err);
    if (st != SS_OK)
        sq_rollback(c);
    return st;
}

/* Marks every item with the batch's failure. */
static ss_status sq_batch_fail(store_put_item *items, size_t n, ss_status st,
                               const ss_error *err) {
    for (size_t i = 0; i < n; ++i) {
        items[i].status = st;
        if (err != NULL)
            items[i].error = *err;
    }
    return st;
}

ss_status store_put_batch(store_conn *c, store_put_item *items, size_t n,
                          ss_error *err) {
    ss_error local;
    ss_error_clear(&local);
    for (size_t i = 0; i < n; ++i) {
        ss_error_clear(&items[i].error);
        items[i].status =
            store_put_check(items[i].rec, items[i].idem_key,
                            items[i].fingerprint, &items[i].error);
    }
    if (n == 0)
        return SS_OK;
    ss_status st = SS_OK;
    sq_run(c, SQ_BEGIN, "waiting for the write lock", &st, &local);
    for (size_t i = 0; i < n && st == SS_OK; ++i) {
        store_put_item *it = &items[i];
        if (it->status != SS_OK)
            continue;
        if (sq_run(c, SQ_SAVEPOINT, "opening a savepoint", &st, &local))
            break;
        it->status =
            sq_insert(c, it->rec, it->idem_key, it->fingerprint, &it->error);
        if (it->status == SS_EINVAL || it->status == SS_ECONFLICT) {
            sq_run(c, SQ_ROLLBACK_TO, "undoing an item", &st, &local);
        } else if (it->status != SS_OK) {
            st = it->status;
            local = it->error;
            break;
        }
        if (st == SS_OK)
            sq_run(c, SQ_RELEASE, "releasing a savepoint", &st, &local);
    }
    if (st == SS_OK)
        sq_run(c, SQ_COMMIT, "committing", &st, &local);
    if (st == SS_OK)
        store__checkpoint_after_commit(c);
    if (st != SS_OK) {
        sq_rollback(c);
        ss_error_set(err, st, local.field, "%s", local.message);
        return sq_batch_fail(items, n, st, &local);
    }
    return SS_OK;
}

/* ------------------------------------------------------------------------ */
/* Helpers of the schema-2 files (store_sqlite.h).                           */

sqlite3_stmt *store__stmt(store_conn *c, int which, const char *sql,
                          ss_error *err) {
    if (c->lazy[which] == NULL) {
        int rc = sqlite3_prepare_v3(c->db, sql, -1, SQLITE_PREPARE_PERSISTENT,
                                    &c->lazy[which], NULL);
        if (rc != SQLITE_OK) {
            store_sqlite_fail(c->db, c->owner->path, rc, "preparing", err);
            return NULL;
        }
    }
    return c->lazy[which];
}

void store__done(sqlite3_stmt *q) {
    if (q != NULL) {
        sqlite3_reset(q);
        sqlite3_clear_bindings(q);
    }
}

ss_status store__begin(store_conn *c, ss_error *err) {
    ss_status st = SS_OK;
    sq_run(c, SQ_BEGIN, "waiting for the write lock", &st, err);
    return st;
}

ss_status store__commit(store_conn *c, ss_error *err) {
    ss_status st = SS_OK;
    sq_run(c, SQ_COMMIT, "committing", &st, err);
    return st;
}

void store__rollback(store_conn *c) { sq_rollback(c); }

ss_status store__begin_read(store_conn *c, ss_error *err) {
    int rc = sqlite3_exec(c->db, "BEGIN", NULL, NULL, NULL);
    return rc == SQLITE_OK ? SS_OK
                           : store_sqlite_fail(c->db, c->owner->path, rc,
                                               "starting a read", err);
}

void store__bind_text(sqlite3_stmt *q, int i, const char *text) {
    sqlite3_bind_text(q, i, text, -1, SQLITE_STATIC);
}

void store__bind_text_or_null(sqlite3_stmt *q, int i, const char *text) {
    if (text != NULL && text[0] != '\0')
        sqlite3_bind_text(q, i, text, -1, SQLITE_STATIC);
    else
        sqlite3_bind_null(q, i);
}

int store__copy(sqlite3_stmt *q, int i, char *dst, size_t cap) {
    const unsigned char *t = sqlite3_column_text(q, i);
    size_t n = t != NULL ? (size_t)sqlite3_column_bytes(q, i) : 0;
    if (n >= cap)
        return 0;
    memcpy(dst, t != NULL ? (const char *)t : "", n);
    dst[n] = '\0';
    return 1;
}

ss_status store_conn_set_bulk(store_conn *c, ss_error *err) {
    int rc =
        sqlite3_exec(c->db, "PRAGMA synchronous = NORMAL", NULL, NULL, NULL);
    return rc == SQLITE_OK ? SS_OK
                           : store_sqlite_fail(c->db, c->owner->path, rc,
                                               "setting synchronous", err);
}

ss_status store_purge_idempotency(store_conn *c, time_t now, uint64_t *purged,
                                  ss_error *err) {
    char cutoff[32];
    if (store_time_from_unix(now - (time_t)STORE_IDEMPOTENCY_TTL_DAYS * 86400,
                             cutoff) != 0)
        return ss_error_set(err, SS_EINVAL, "now", "time out of range");
    ss_status st = SS_OK;
    if (sq_run(c, SQ_BEGIN, "waiting for the write lock", &st, err))
        return st;
    sq_bind(c->fixed[SQ_KEY_PURGE], 1, cutoff);
    sq_run(c, SQ_KEY_PURGE, "purging idempotency keys", &st, err);
    uint64_t n = (uint64_t)sqlite3_changes64(c->db);
    if (st == SS_OK)
        sq_run(c, SQ_COMMIT, "committing", &st, err);
    if (st != SS_OK) {
        sq_rollback(c);
        return st;
    }
    if (purged != NULL)
        *purged = n;
    return SS_OK;
}
