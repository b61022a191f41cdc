/*
 * store_sqlite_schema.c — the schema of the SQLite store and its forward
 * migrations.
 *
 * The schema version lives in PRAGMA user_version and the file is marked
 * with PRAGMA application_id.  sq_migrations[] lists the steps in order;
 * step k takes a file from version k-1 to k and runs in its own
 * BEGIN IMMEDIATE transaction together with the user_version update, so a
 * crash leaves the file at k-1 or at k, never in between, and two processes
 * opening the same file migrate it once.  To change the schema, append a
 * step (issue 5: calibrations and analysis revisions become step 2); never
 * edit a step that has shipped.
 *
 * Files this code refuses (SS_ESTORE, nothing written): a file whose
 * application_id is another application's; a file at version 0 that already
 * holds tables (someone else's database — we do not adopt it); a file of a
 * newer schema than this build knows.  Owns no memory.
 */
#include <stdio.h>
#include <string.h>

#include "store_sqlite.h"

typedef struct {
    int version;
    const char *name;
    const char *sql;
} sq_migration;

static const sq_migration sq_migrations[] = {
    {1, "analyses and idempotency keys",
     "CREATE TABLE analyses ("
     " id TEXT PRIMARY KEY NOT NULL"
     "  CONSTRAINT id_form CHECK (length(id) = 23 AND id GLOB 'an_*'),"
     " created_at TEXT NOT NULL"
     "  CONSTRAINT created_at_form CHECK (length(created_at) = 24),"
     " label TEXT NOT NULL,"
     " levels INTEGER NOT NULL CONSTRAINT levels_range CHECK (levels >= 0),"
     " method TEXT NOT NULL,"
     " software_version TEXT NOT NULL,"
     " request_json TEXT NOT NULL"
     "  CONSTRAINT request_is_json CHECK (json_valid(request_json)),"
     " result_json TEXT NOT NULL"
     "  CONSTRAINT result_is_json CHECK (json_valid(result_json)));"
     "CREATE INDEX analyses_by_time ON analyses (created_at, id);"
     "CREATE INDEX analyses_by_label ON analyses (label, created_at, id);"
     "CREATE INDEX analyses_by_levels ON analyses (levels, created_at, id);"
     "CREATE TABLE idempotency_keys ("
     " key TEXT PRIMARY KEY NOT NULL,"
     " fingerprint TEXT NOT NULL"
     "  CONSTRAINT fingerprint_form CHECK (length(fingerprint) = 64),"
     " analysis_id TEXT NOT NULL REFERENCES analyses (id) ON DELETE CASCADE,"
     " created_at TEXT NOT NULL);"
     "CREATE INDEX idempotency_keys_by_time ON idempotency_keys (created_at);"},
    /* Step 2 (issue 5): named calibration versions (triggers refuse any
     * change or deletion), the calibration an analysis referenced, later
     * revisions of analyses, reprocessing jobs and their items.  Revision 1
     * stays the analyses row; revisions k >= 2 name the calibration version
     * and the job that wrote them.  Job counters live on the job row and
     * change in the same transaction as the item they count. */
    {2, "calibrations, revisions and reprocessing jobs",
     "CREATE TABLE calibrations ("
     " name TEXT NOT NULL CONSTRAINT name_form CHECK (length(name) BETWEEN"
     "  1 AND 64 AND name NOT GLOB '*[^a-z0-9-]*'),"
     " version INTEGER NOT NULL CONSTRAINT version_range CHECK (version >= 1),"
     " created_at TEXT NOT NULL"
     "  CONSTRAINT created_at_form CHECK (length(created_at) = 24),"
     " valid_from TEXT NOT NULL"
     "  CONSTRAINT valid_from_form CHECK (length(valid_from) = 24),"
     " note TEXT NOT NULL"
     "  CONSTRAINT note_length CHECK (length(CAST(note AS BLOB)) <= 500),"
     " energy_offset REAL NOT NULL,"
     " pair_shift REAL NOT NULL,"
     " exchange REAL NOT NULL CONSTRAINT exchange_nonzero CHECK (exchange <> "
     "0),"
     " noise_sd REAL NOT NULL CONSTRAINT noise_sd_range CHECK (noise_sd >= 0),"
     " coupling_spread REAL NOT NULL"
     "  CONSTRAINT coupling_spread_range CHECK (coupling_spread >= 0),"
     " unit TEXT NOT NULL,"
     " PRIMARY KEY (name, version));"
     "CREATE INDEX calibrations_by_validity"
     " ON calibrations (name, valid_from, version);"
     "CREATE TRIGGER calibrations_never_change BEFORE UPDATE ON calibrations"
     " BEGIN SELECT RAISE(ABORT, 'calibration versions are never changed');"
     " END;"
     "CREATE TRIGGER calibrations_never_deleted BEFORE DELETE ON calibrations"
     " BEGIN SELECT RAISE(ABORT, 'calibration versions are never deleted');"
     " END;"
     "ALTER TABLE analyses ADD COLUMN calibration_name TEXT;"
     "ALTER TABLE analyses ADD COLUMN calibration_version INTEGER;"
     "ALTER TABLE analyses ADD COLUMN measured_at TEXT;"
     "CREATE INDEX analyses_by_calibration"
     " ON analyses (calibration_name, created_at, id)"
     " WHERE calibration_name IS NOT NULL;"
     "CREATE TABLE jobs ("
     " id TEXT PRIMARY KEY NOT NULL"
     "  CONSTRAINT id_form CHECK (length(id) = 24 AND id GLOB 'job_*'),"
     " created_at TEXT NOT NULL"
     "  CONSTRAINT created_at_form CHECK (length(created_at) = 24),"
     " origin TEXT NOT NULL CONSTRAINT origin_known"
     "  CHECK (origin IN ('http', 'cli')),"
     " calibration_name TEXT NOT NULL,"
     " calibration_version INTEGER,"
     " since TEXT, until TEXT, label TEXT,"
     " state TEXT NOT NULL CONSTRAINT state_known"
     "  CHECK (state IN ('queued', 'running', 'done', 'failed')),"
     " total INTEGER NOT NULL,"
     " revised INTEGER NOT NULL DEFAULT 0,"
     " unchanged INTEGER NOT NULL DEFAULT 0,"
     " failed INTEGER NOT NULL DEFAULT 0,"
     " started_at TEXT, finished_at TEXT,"
     " owner TEXT, heartbeat_at TEXT,"
     " CONSTRAINT counts_in_range CHECK (revised + unchanged + failed <= "
     "total));"
     "CREATE INDEX jobs_unfinished ON jobs (created_at, id)"
     " WHERE state IN ('queued', 'running');"
     "CREATE TABLE job_items ("
     " job_id TEXT NOT NULL REFERENCES jobs (id),"
     " seq INTEGER NOT NULL,"
     " analysis_id TEXT NOT NULL REFERENCES analyses (id),"
     " target_version INTEGER,"
     " state TEXT NOT NULL DEFAULT 'pending' CONSTRAINT item_state_known"
     "  CHECK (state IN ('pending', 'revised', 'unchanged', 'failed')),"
     " detail TEXT,"
     " PRIMARY KEY (job_id, seq)) WITHOUT ROWID;"
     "CREATE INDEX job_items_by_state ON job_items (job_id, state, seq);"
     "CREATE TABLE revisions ("
     " analysis_id TEXT NOT NULL REFERENCES analyses (id),"
     " revision INTEGER NOT NULL CONSTRAINT revision_range"
     "  CHECK (revision >= 2),"
     " created_at TEXT NOT NULL"
     "  CONSTRAINT created_at_form CHECK (length(created_at) = 24),"
     " calibration_name TEXT NOT NULL,"
     " calibration_version INTEGER NOT NULL,"
     " software_version TEXT NOT NULL,"
     " job_id TEXT NOT NULL REFERENCES jobs (id),"
     " method TEXT NOT NULL,"
     " result_json TEXT NOT NULL"
     "  CONSTRAINT result_is_json CHECK (json_valid(result_json)),"
     " CONSTRAINT one_per_number UNIQUE (analysis_id, revision),"
     " FOREIGN KEY (calibration_name, calibration_version)"
     "  REFERENCES calibrations (name, version));"
     "CREATE TRIGGER revisions_never_change BEFORE UPDATE ON revisions"
     " BEGIN SELECT RAISE(ABORT, 'revisions are never changed'); END;"
     "CREATE TRIGGER revisions_never_deleted BEFORE DELETE ON revisions"
     " BEGIN SELECT RAISE(ABORT, 'revisions are never deleted'); END;"},
};

#define SQ_MIGRATION_COUNT (sizeof sq_migrations / sizeof sq_migrations[0])

int store_sqlite_schema_latest(void) {
    return sq_migrations[SQ_MIGRATION_COUNT - 1].version;
}

/* Runs a one-value integer query. */
static int sq_int(sqlite3 *db, const char *sql, long long *out) {
    sqlite3_stmt *st = NULL;
    int rc = sqlite3_prepare_v2(db, sql, -1, &st, NULL);
    if (rc == SQLITE_OK) {
        rc = sqlite3_step(st);
        if (rc == SQLITE_ROW) {
            *out = sqlite3_column_int64(st, 0);
            rc = SQLITE_OK;
        }
    }
    sqlite3_finalize(st);
    return rc;
}

/* Checks the file under the write lock.  Returns 1 when a step is due and
 * sets *next, 0 when the file is current, or a status < 0 via *status. */
static int sq_inspect(sqlite3 *db, const char *path, int *next,
                      ss_status *status, ss_error *err) {
    long long app = 0, version = 0, objects = 0;
    int rc = sq_int(db, "PRAGMA application_id", &app);
    if (rc == SQLITE_OK)
        rc = sq_int(db, "PRAGMA user_version", &version);
    if (rc == SQLITE_OK)
        rc = sq_int(db, "SELECT count(*) FROM sqlite_schema", &objects);
    if (rc != SQLITE_OK) {
        *status = store_sqlite_fail(db, path, rc, "reading the schema", err);
        return -1;
    }
    int latest = store_sqlite_schema_latest();
    const char *why = NULL;
    if (app != 0 && app != STORE_SQLITE_APPLICATION_ID)
        why = "belongs to another application (application_id differs)";
    else if (version == 0 && objects > 0)
        why = "is not a swapspec store (it holds tables but no schema "
              "version)";
    else if (version > latest)
        why = "has a newer schema than this build understands";
    else if (version > 0 && app != STORE_SQLITE_APPLICATION_ID)
        why = "is not a swapspec store (no swapspec application_id)";
    if (why != NULL) {
        *status = ss_error_set(err, SS_ESTORE, "",
                               "store %s: the file %s (schema version %lld, "
                               "this build: %d); refusing to use it",
                               path, why, version, latest);
        return -1;
    }
    *next = (int)version + 1;
    return version < latest ? 1 : 0;
}

static ss_status sq_exec(sqlite3 *db, const char *path, const char *sql,
                         const char *doing, ss_error *err) {
    int rc = sqlite3_exec(db, sql, NULL, NULL, NULL);
    return rc == SQLITE_OK ? SS_OK
                           : store_sqlite_fail(db, path, rc, doing, err);
}

static ss_status sq_apply(sqlite3 *db, const char *path, int next,
                          ss_error *err) {
    const sq_migration *m = &sq_migrations[next - 1];
    if (m->version != next) /* the table must list versions 1, 2, ... */
        return ss_error_set(err, SS_EINTERNAL, "",
                            "store %s: migration table out of order at %d",
                            path, next);
    char doing[128];
    snprintf(doing, sizeof doing, "migrating to schema %d (%s)", m->version,
             m->name);
    ss_status st = sq_exec(db, path, m->sql, doing, err);
    if (st != SS_OK)
        return st;
    char pragma[96];
    snprintf(pragma, sizeof pragma,
             "PRAGMA user_version = %d; PRAGMA application_id = %d", m->version,
             STORE_SQLITE_APPLICATION_ID);
    return sq_exec(db, path, pragma, doing, err);
}

ss_status store_sqlite_migrate(sqlite3 *db, const char *path, ss_error *err) {
    /* 8 KiB pages for a new file (SQLite ignores this for a file that has
     * its first table, and a WAL file keeps its size): a stored analysis is
     * about 10 KiB of JSON, which on 4 KiB pages spills into a chain of
     * overflow pages, each a WAL frame of its own (two pwrite calls) and
     * again a write at checkpoint.  tests/bench/bench_service.c measured
     * about 95 against 65 microseconds per record in batches of 64
     * (2026-12-02, this project's 2-core machine). */
    sqlite3_exec(db, "PRAGMA page_size = 8192", NULL, NULL, NULL);
    for (;;) {
        ss_status st = sq_exec(db, path, "BEGIN IMMEDIATE",
                               "locking the file to check its schema", err);
        if (st != SS_OK)
            return st;
        int next = 0;
        int due = sq_inspect(db, path, &next, &st, err);
        if (due == 1)
            st = sq_apply(db, path, next, err);
        if (due < 0 || st != SS_OK) {
            sqlite3_exec(db, "ROLLBACK", NULL, NULL, NULL);
            return st;
        }
        st = sq_exec(db, path, "COMMIT", "committing the schema", err);
        if (st != SS_OK) {
            sqlite3_exec(db, "ROLLBACK", NULL, NULL, NULL);
            return st;
        }
        if (due == 0)
            break;
    }
    /* WAL persists in the file; switching needs no transaction open. */
    sqlite3_stmt *q = NULL;
    int rc = sqlite3_prepare_v2(db, "PRAGMA journal_mode = WAL", -1, &q, NULL);
    if (rc == SQLITE_OK)
        rc = sqlite3_step(q);
    const unsigned char *mode =
        rc == SQLITE_ROW ? sqlite3_column_text(q, 0) : NULL;
    int wal = mode != NULL && strcmp((const char *)mode, "wal") == 0;
    ss_status st = SS_OK;
    if (rc != SQLITE_ROW && rc != SQLITE_DONE)
        st = store_sqlite_fail(db, path, rc, "switching to WAL", err);
    else if (!wal)
        st = ss_error_set(err, SS_ESTORE, "",
                          "store %s: the file cannot use write-ahead logging "
                          "(is it on a network file system?)",
                          path);
    sqlite3_finalize(q);
    return st;
}
