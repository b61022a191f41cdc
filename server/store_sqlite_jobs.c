/*
 * store_sqlite_jobs.c — reprocessing jobs in the SQLite store (store.h):
 * creating a job with its snapshot of items, reading and finding jobs,
 * ownership (claim, release, finish), the pending items, and the one
 * transaction that finishes an item.
 *
 * A job is a row of `jobs`; its items are rows of `job_items` (job_id, seq)
 * written once, when the job is created, by one INSERT ... SELECT over the
 * analyses that referenced the calibration (index analyses_by_calibration),
 * in (created_at, id) order.  When the job names no version, each item's
 * target version is resolved in that same statement: the version with the
 * greatest valid_from <= the analysis's measured_at (else created_at), ties
 * to the higher number, among the versions stored at that moment.  Nothing
 * is ever loaded whole: items are read in pages of pending rows.
 *
 * Finishing an item (store_job_item_finish) is one BEGIN IMMEDIATE
 * transaction: the item moves from pending to revised/unchanged/failed
 * (only if still pending), the new revision k+1 is inserted (unless the
 * latest revision already used the same calibration version), and the job
 * row's counters and heartbeat are updated — but only while the caller
 * still owns the job (compare on jobs.owner).  A crash therefore leaves an
 * item either wholly done or wholly pending.  Owns no memory beyond the
 * request text of store_job_source.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store_sqlite.h"

enum {
    JOB_INSERT = SQL_JOB_FIRST,
    JOB_SNAPSHOT,
    JOB_SET_TOTAL,
    JOB_GET,
    JOB_FIND,
    JOB_UNFINISHED,
    JOB_CLAIM,
    JOB_RELEASE,
    JOB_FINISH,
    JOB_PENDING,
    JOB_ERRORS,
    JOB_SOURCE,
    JOB_LATEST,
    JOB_INSERT_REVISION,
    JOB_ITEM_DONE,
    JOB_COUNT,
    JOB_VERSION_EXISTS,
    JOB_LAST
};

#define JOB_COLUMNS                                                            \
    "id, created_at, origin, state, calibration_name,"                         \
    " coalesce(calibration_version, 0), since, until, label, total, revised,"  \
    " unchanged, failed, started_at, finished_at, owner, heartbeat_at,"        \
    " label IS NOT NULL"

static const char *const job_sql[JOB_LAST - SQL_JOB_FIRST] = {
    "INSERT INTO jobs (id, created_at, origin, calibration_name,"
    " calibration_version, since, until, label, state, total, owner,"
    " heartbeat_at, started_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8,"
    " CASE WHEN ?9 IS NULL THEN 'queued' ELSE 'running' END, 0, ?9,"
    " CASE WHEN ?9 IS NULL THEN NULL ELSE ?2 END,"
    " CASE WHEN ?9 IS NULL THEN NULL ELSE ?2 END)",
    "INSERT INTO job_items (job_id, seq, analysis_id, target_version)"
    " SELECT ?1, row_number() OVER (ORDER BY a.created_at, a.id), a.id,"
    " coalesce(?3, (SELECT c.version FROM calibrations c"
    "  WHERE c.name = a.calibration_name"
    "  AND c.valid_from <= coalesce(a.measured_at, a.created_at)"
    "  ORDER BY c.valid_from DESC, c.version DESC LIMIT 1))"
    " FROM analyses a WHERE a.calibration_name = ?2"
    " AND (?4 IS NULL OR a.created_at >= ?4)"
    " AND (?5 IS NULL OR a.created_at < ?5)"
    " AND (?6 IS NULL OR a.label = ?6)"
    " ORDER BY a.created_at, a.id",
    "UPDATE jobs SET total = ?2, state = CASE WHEN ?2 = 0 THEN 'done'"
    " ELSE state END, started_at = CASE WHEN ?2 = 0 THEN created_at"
    " ELSE started_at END, finished_at = CASE WHEN ?2 = 0 THEN created_at"
    " END, owner = CASE WHEN ?2 = 0 THEN NULL ELSE owner END WHERE id = ?1",
    "SELECT " JOB_COLUMNS " FROM jobs WHERE id = ?1",
    "SELECT id FROM jobs WHERE state IN ('queued', 'running')"
    " AND calibration_name = ?1 AND calibration_version IS ?2"
    " AND since IS ?3 AND until IS ?4 AND label IS ?5"
    " ORDER BY created_at DESC, id DESC LIMIT 1",
    "SELECT " JOB_COLUMNS " FROM jobs WHERE state IN ('queued', 'running')"
    " ORDER BY created_at, id LIMIT ?1",
    "UPDATE jobs SET owner = ?3, heartbeat_at = ?4, state = 'running',"
    " started_at = coalesce(started_at, ?4) WHERE id = ?1 AND owner IS ?2"
    " AND state IN ('queued', 'running')",
    "UPDATE jobs SET owner = NULL WHERE id = ?1 AND owner = ?2",
    "UPDATE jobs SET state = CASE WHEN failed > 0 THEN 'failed' ELSE 'done'"
    " END, finished_at = ?3, owner = NULL WHERE id = ?1 AND owner = ?2"
    " AND state = 'running' AND revised + unchanged + failed = total",
    "SELECT seq, analysis_id, coalesce(target_version, 0) FROM job_items"
    " WHERE job_id = ?1 AND state = 'pending' AND seq > ?2 ORDER BY seq"
    " LIMIT ?3",
    "SELECT analysis_id, coalesce(detail, '') FROM job_items"
    " WHERE job_id = ?1 AND state = 'failed' ORDER BY seq LIMIT ?2",
    "SELECT request_json, created_at, measured_at FROM analyses WHERE id = ?1",
    "SELECT coalesce(r.revision, 1), coalesce(r.calibration_name,"
    " a.calibration_name), coalesce(r.calibration_version,"
    " a.calibration_version, 0) FROM analyses a LEFT JOIN (SELECT revision,"
    " calibration_name, calibration_version FROM revisions"
    " WHERE analysis_id = ?1 ORDER BY revision DESC LIMIT 1) r"
    " WHERE a.id = ?1",
    "INSERT INTO revisions (analysis_id, revision, created_at,"
    " calibration_name, calibration_version, software_version, job_id,"
    " method, result_json) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
    "UPDATE job_items SET state = ?3, detail = ?4 WHERE job_id = ?1"
    " AND seq = ?2 AND state = 'pending'",
    "UPDATE jobs SET revised = revised + ?3, unchanged = unchanged + ?4,"
    " failed = failed + ?5, heartbeat_at = ?6 WHERE id = ?1 AND owner = ?2"
    " AND state = 'running'",
    "SELECT (SELECT count(*) FROM calibrations WHERE name = ?1),"
    " (SELECT count(*) FROM calibrations WHERE name = ?1 AND version = ?2)",
};

_Static_assert(JOB_LAST - SQL_JOB_FIRST <= SQL_JOB_COUNT,
               "store_sqlite.h reserves too few job statements");

static sqlite3_stmt *job_stmt(store_conn *c, int which, ss_error *err) {
    return store__stmt(c, which, job_sql[which - SQL_JOB_FIRST], err);
}

static const char *job_path(const store_conn *c) {
    return store_path(c->owner);
}

static ss_status job_fail(store_conn *c, int rc, const char *doing,
                          ss_error *err) {
    return store_sqlite_fail(c->db, job_path(c), rc, doing, err);
}

/* A row of JOB_COLUMNS into *out. */
static ss_status job_read(store_conn *c, sqlite3_stmt *q, store_job *out,
                          ss_error *err) {
    store_job j;
    memset(&j, 0, sizeof j);
    sqlite3_int64 version = sqlite3_column_int64(q, 5);
    int ok =
        store__copy(q, 0, j.id, sizeof j.id) &&
        store__copy(q, 1, j.created_at, sizeof j.created_at) &&
        store__copy(q, 2, j.origin, sizeof j.origin) &&
        store__copy(q, 3, j.state, sizeof j.state) &&
        store__copy(q, 4, j.params.calibration, sizeof j.params.calibration) &&
        store__copy(q, 6, j.params.since, sizeof j.params.since) &&
        store__copy(q, 7, j.params.until, sizeof j.params.until) &&
        store__copy(q, 8, j.params.label, sizeof j.params.label) &&
        store__copy(q, 13, j.started_at, sizeof j.started_at) &&
        store__copy(q, 14, j.finished_at, sizeof j.finished_at) &&
        store__copy(q, 15, j.owner, sizeof j.owner) &&
        store__copy(q, 16, j.heartbeat_at, sizeof j.heartbeat_at) &&
        version >= 0 && version <= 0x7fffffff;
    if (!ok)
        return ss_error_set(err, SS_ESTORE, "",
                            "store %s: a stored job has a malformed field",
                            job_path(c));
    j.params.version = (unsigned)version;
    j.params.has_label = sqlite3_column_int(q, 17);
    j.total = (uint64_t)sqlite3_column_int64(q, 9);
    j.revised = (uint64_t)sqlite3_column_int64(q, 10);
    j.unchanged = (uint64_t)sqlite3_column_int64(q, 11);
    j.failed = (uint64_t)sqlite3_column_int64(q, 12);
    *out = j;
    return SS_OK;
}

static ss_status job_params_check(const store_job_params *p, ss_error *err) {
    if (!store_calibration_name_valid(p->calibration))
        return store_calibration_name_error(p->calibration, "calibration", err);
    if (p->since[0] && !store_time_canonical(p->since))
        return ss_error_set(err, SS_EINVAL, "since",
                            "since must be in the record form");
    if (p->until[0] && !store_time_canonical(p->until))
        return ss_error_set(err, SS_EINVAL, "until",
                            "until must be in the record form");
    if (memchr(p->label, '\0', sizeof p->label) == NULL)
        return ss_error_set(err, SS_EINVAL, "label", "label is too long");
    return SS_OK;
}

/* Inside the creating transaction: the calibration (and version) exist. */
static ss_status job_check_calibration(store_conn *c, const store_job_params *p,
                                       ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_VERSION_EXISTS, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, p->calibration);
    sqlite3_bind_int64(q, 2, p->version);
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    if (rc != SQLITE_ROW)
        st = job_fail(c, rc, "checking the calibration", err);
    else if (sqlite3_column_int64(q, 0) == 0)
        st = ss_error_set(err, SS_EINVAL, "calibration",
                          "there is no calibration named '%s'", p->calibration);
    else if (p->version && sqlite3_column_int64(q, 1) == 0)
        st = ss_error_set(err, SS_EINVAL, "version",
                          "calibration '%s' has no version %u (it has %lld)",
                          p->calibration, p->version,
                          (long long)sqlite3_column_int64(q, 0));
    store__done(q);
    return st;
}

static ss_status job_step_done(store_conn *c, sqlite3_stmt *q,
                               const char *doing, ss_error *err) {
    int rc = sqlite3_step(q);
    ss_status st = rc == SQLITE_DONE ? SS_OK : job_fail(c, rc, doing, err);
    store__done(q);
    return st;
}

/* The body of store_job_create, inside its transaction. */
static ss_status job_create_in(store_conn *c, const store_job_params *p,
                               const store_job *j, const char *owner,
                               ss_error *err) {
    ss_status st = job_check_calibration(c, p, err);
    sqlite3_stmt *ins = st == SS_OK ? job_stmt(c, JOB_INSERT, err) : NULL;
    sqlite3_stmt *snap = ins ? job_stmt(c, JOB_SNAPSHOT, err) : NULL;
    sqlite3_stmt *total = snap ? job_stmt(c, JOB_SET_TOTAL, err) : NULL;
    if (total == NULL)
        return err->code;
    store__bind_text(ins, 1, j->id);
    store__bind_text(ins, 2, j->created_at);
    store__bind_text(ins, 3, j->origin);
    store__bind_text(ins, 4, p->calibration);
    if (p->version)
        sqlite3_bind_int64(ins, 5, p->version);
    store__bind_text_or_null(ins, 6, p->since);
    store__bind_text_or_null(ins, 7, p->until);
    if (p->has_label)
        store__bind_text(ins, 8, p->label);
    store__bind_text_or_null(ins, 9, owner);
    if ((st = job_step_done(c, ins, "storing the job", err)) != SS_OK)
        return st;
    store__bind_text(snap, 1, j->id);
    store__bind_text(snap, 2, p->calibration);
    if (p->version)
        sqlite3_bind_int64(snap, 3, p->version);
    store__bind_text_or_null(snap, 4, p->since);
    store__bind_text_or_null(snap, 5, p->until);
    if (p->has_label)
        store__bind_text(snap, 6, p->label);
    if ((st = job_step_done(c, snap, "selecting the analyses", err)) != SS_OK)
        return st;
    sqlite3_int64 n = sqlite3_changes64(c->db);
    store__bind_text(total, 1, j->id);
    sqlite3_bind_int64(total, 2, n);
    return job_step_done(c, total, "counting the items", err);
}

ss_status store_job_create(store_conn *c, const store_job_params *p,
                           const char *origin, const char *owner,
                           store_job *out, ss_error *err) {
    ss_status st = job_params_check(p, err);
    if (st != SS_OK)
        return st;
    if (origin == NULL ||
        (strcmp(origin, "http") != 0 && strcmp(origin, "cli") != 0))
        return ss_error_set(err, SS_EINVAL, "origin",
                            "origin is \"http\" or \"cli\"");
    store_job j;
    memset(&j, 0, sizeof j);
    if ((st = store_job_id_generate(j.id, err)) != SS_OK)
        return st;
    store_time_now(j.created_at);
    snprintf(j.origin, sizeof j.origin, "%s", origin);
    if ((st = store__begin(c, err)) != SS_OK)
        return st;
    st = job_create_in(c, p, &j, owner, err);
    if (st == SS_OK)
        st = store__commit(c, err);
    if (st != SS_OK) {
        store__rollback(c);
        return st;
    }
    return store_job_get(c, j.id, out, err);
}

ss_status store_job_get(store_conn *c, const char *id, store_job *out,
                        ss_error *err) {
    if (!store_job_id_valid(id))
        return ss_error_set(err, SS_ENOTFOUND, "id", "no job with that id");
    sqlite3_stmt *q = job_stmt(c, JOB_GET, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    int rc = sqlite3_step(q);
    ss_status st;
    if (rc == SQLITE_ROW)
        st = job_read(c, q, out, err);
    else if (rc == SQLITE_DONE)
        st = ss_error_set(err, SS_ENOTFOUND, "id", "no job with id %s", id);
    else
        st = job_fail(c, rc, "reading a job", err);
    store__done(q);
    return st;
}

ss_status store_job_find_unfinished(store_conn *c, const store_job_params *p,
                                    char id[32], int *found, ss_error *err) {
    ss_status st = job_params_check(p, err);
    sqlite3_stmt *q = st == SS_OK ? job_stmt(c, JOB_FIND, err) : NULL;
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, p->calibration);
    if (p->version)
        sqlite3_bind_int64(q, 2, p->version);
    store__bind_text_or_null(q, 3, p->since);
    store__bind_text_or_null(q, 4, p->until);
    if (p->has_label)
        store__bind_text(q, 5, p->label);
    int rc = sqlite3_step(q);
    *found = 0;
    if (rc == SQLITE_ROW) {
        if (store__copy(q, 0, id, 32))
            *found = 1;
        else
            st = ss_error_set(err, SS_ESTORE, "",
                              "store %s: a stored job id is malformed",
                              job_path(c));
    } else if (rc != SQLITE_DONE) {
        st = job_fail(c, rc, "finding a job", err);
    }
    store__done(q);
    return st;
}

ss_status store_job_unfinished(store_conn *c, store_job *out, size_t cap,
                               size_t *count, ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_UNFINISHED, err);
    if (q == NULL)
        return err->code;
    sqlite3_bind_int64(q, 1, (sqlite3_int64)cap);
    size_t n = 0;
    ss_status st = SS_OK;
    while (st == SS_OK && n < cap) {
        int rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            break;
        if (rc != SQLITE_ROW)
            st = job_fail(c, rc, "listing unfinished jobs", err);
        else if ((st = job_read(c, q, &out[n], err)) == SS_OK)
            n++;
    }
    store__done(q);
    if (st == SS_OK)
        *count = n;
    return st;
}

/* Runs one UPDATE in its own transaction; *changed = rows changed. */
static ss_status job_update(store_conn *c, sqlite3_stmt *q, const char *doing,
                            int *changed, ss_error *err) {
    ss_status st = store__begin(c, err);
    if (st != SS_OK) {
        store__done(q);
        return st;
    }
    st = job_step_done(c, q, doing, err);
    *changed = (int)sqlite3_changes(c->db);
    if (st == SS_OK)
        st = store__commit(c, err);
    if (st != SS_OK)
        store__rollback(c);
    return st;
}

ss_status store_job_claim(store_conn *c, const char *id, const char *expected,
                          const char *me, int *claimed, ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_CLAIM, err);
    if (q == NULL)
        return err->code;
    char now[32];
    store_time_now(now);
    store__bind_text(q, 1, id);
    store__bind_text_or_null(q, 2, expected);
    store__bind_text(q, 3, me);
    store__bind_text(q, 4, now);
    int changed = 0;
    ss_status st = job_update(c, q, "claiming a job", &changed, err);
    if (st == SS_OK)
        *claimed = changed == 1;
    return st;
}

ss_status store_job_release(store_conn *c, const char *id, const char *me,
                            ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_RELEASE, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    store__bind_text(q, 2, me);
    int changed = 0;
    return job_update(c, q, "releasing a job", &changed, err);
}

ss_status store_job_finish(store_conn *c, const char *id, const char *me,
                           ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_FINISH, err);
    if (q == NULL)
        return err->code;
    char now[32];
    store_time_now(now);
    store__bind_text(q, 1, id);
    store__bind_text(q, 2, me);
    store__bind_text(q, 3, now);
    int changed = 0;
    ss_status st = job_update(c, q, "finishing a job", &changed, err);
    if (st == SS_OK && changed != 1)
        st = ss_error_set(err, SS_ECONFLICT, "job",
                          "job %s is not held by this runner or has items "
                          "left",
                          id);
    return st;
}

ss_status store_job_pending(store_conn *c, const char *id, uint64_t after,
                            store_job_item *items, size_t cap, size_t *count,
                            ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_PENDING, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    sqlite3_bind_int64(q, 2, (sqlite3_int64)after);
    sqlite3_bind_int64(q, 3, (sqlite3_int64)cap);
    size_t n = 0;
    ss_status st = SS_OK;
    while (st == SS_OK && n < cap) {
        int rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            break;
        if (rc != SQLITE_ROW) {
            st = job_fail(c, rc, "reading job items", err);
            break;
        }
        store_job_item *it = &items[n];
        sqlite3_int64 seq = sqlite3_column_int64(q, 0);
        sqlite3_int64 v = sqlite3_column_int64(q, 2);
        if (!store__copy(q, 1, it->analysis_id, sizeof it->analysis_id) ||
            seq < 1 || v < 0 || v > 0x7fffffff)
            st = ss_error_set(err, SS_ESTORE, "",
                              "store %s: a job item is malformed", job_path(c));
        it->seq = (uint64_t)seq;
        it->version = (unsigned)v;
        n++;
    }
    store__done(q);
    if (st == SS_OK)
        *count = n;
    return st;
}

ss_status store_job_errors(store_conn *c, const char *id, size_t cap,
                           store_job_error_fn fn, void *ctx, ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_ERRORS, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    sqlite3_bind_int64(q, 2, (sqlite3_int64)cap);
    ss_status st = SS_OK;
    for (;;) {
        int rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            break;
        if (rc != SQLITE_ROW) {
            st = job_fail(c, rc, "reading job errors", err);
            break;
        }
        const unsigned char *a = sqlite3_column_text(q, 0);
        const unsigned char *d = sqlite3_column_text(q, 1);
        fn(ctx, a ? (const char *)a : "", d ? (const char *)d : "");
    }
    store__done(q);
    return st;
}

/* The latest revision's number and calibration (inside a transaction or
 * not). */
static ss_status job_latest(store_conn *c, const char *analysis_id,
                            unsigned *revision, char *name, size_t name_cap,
                            unsigned *version, ss_error *err) {
    sqlite3_stmt *q = job_stmt(c, JOB_LATEST, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, analysis_id);
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    if (rc == SQLITE_DONE) {
        st = ss_error_set(err, SS_ENOTFOUND, "id", "no analysis with id %s",
                          analysis_id);
    } else if (rc != SQLITE_ROW) {
        st = job_fail(c, rc, "reading the latest revision", err);
    } else {
        sqlite3_int64 k = sqlite3_column_int64(q, 0);
        sqlite3_int64 v = sqlite3_column_int64(q, 2);
        if (!store__copy(q, 1, name, name_cap) || k < 1 || k > 0x7fffffff ||
            v < 0 || v > 0x7fffffff)
            st = ss_error_set(err, SS_ESTORE, "",
                              "store %s: a stored revision is malformed",
                              job_path(c));
        *revision = (unsigned)k;
        *version = (unsigned)v;
    }
    store__done(q);
    return st;
}

ss_status store_job_source_get(store_conn *c, const char *analysis_id,
                               store_job_source *out, ss_error *err) {
    store_job_source s;
    memset(&s, 0, sizeof s);
    sqlite3_stmt *q = job_stmt(c, JOB_SOURCE, err);
    if (q == NULL)
        return err->code;
    ss_status st = store__begin_read(c, err);
    if (st != SS_OK)
        return st;
    store__bind_text(q, 1, analysis_id);
    int rc = sqlite3_step(q);
    if (rc == SQLITE_DONE) {
        st = ss_error_set(err, SS_ENOTFOUND, "id", "no analysis with id %s",
                          analysis_id);
    } else if (rc != SQLITE_ROW) {
        st = job_fail(c, rc, "reading an analysis", err);
    } else if (!store__copy(q, 1, s.created_at, sizeof s.created_at) ||
               !store__copy(q, 2, s.measured_at, sizeof s.measured_at)) {
        st = ss_error_set(err, SS_ESTORE, "",
                          "store %s: a stored analysis is malformed",
                          job_path(c));
    } else {
        const unsigned char *t = sqlite3_column_text(q, 0);
        s.request_json = strdup(t ? (const char *)t : "");
        if (s.request_json == NULL)
            st = ss_error_set(err, SS_ENOMEM, "", "out of memory");
    }
    store__done(q);
    if (st == SS_OK)
        st = job_latest(c, analysis_id, &s.revision_count, s.calibration_name,
                        sizeof s.calibration_name, &s.calibration_version, err);
    sqlite3_exec(c->db, "COMMIT", NULL, NULL, NULL); /* ends the read */
    if (st != SS_OK) {
        free(s.request_json);
        return st;
    }
    *out = s;
    return SS_OK;
}

void store_job_source_release(store_job_source *s) {
    if (s == NULL)
        return;
    free(s->request_json);
    s->request_json = NULL;
}

/* The body of store_job_item_finish inside its transaction. */
static ss_status job_item_in(store_conn *c, const char *job_id, const char *me,
                             uint64_t seq, const char *analysis_id,
                             const store_revision_new *rev, const char *detail,
                             store_item_outcome *outcome, ss_error *err) {
    store_item_outcome what = rev == NULL                ? STORE_ITEM_FAILED
                              : rev->result_json == NULL ? STORE_ITEM_UNCHANGED
                                                         : STORE_ITEM_REVISED;
    unsigned latest = 0, version = 0;
    char name[72];
    ss_status st = SS_OK;
    if (what == STORE_ITEM_REVISED) {
        st = job_latest(c, analysis_id, &latest, name, sizeof name, &version,
                        err);
        if (st != SS_OK)
            return st;
        if (strcmp(name, rev->calibration_name) == 0 &&
            version == rev->calibration_version)
            what = STORE_ITEM_UNCHANGED;
    }
    static const char *const names[] = {"revised", "unchanged", "failed"};
    sqlite3_stmt *item = job_stmt(c, JOB_ITEM_DONE, err);
    sqlite3_stmt *count = item ? job_stmt(c, JOB_COUNT, err) : NULL;
    sqlite3_stmt *ins = count ? job_stmt(c, JOB_INSERT_REVISION, err) : NULL;
    if (ins == NULL)
        return err->code;
    store__bind_text(item, 1, job_id);
    sqlite3_bind_int64(item, 2, (sqlite3_int64)seq);
    store__bind_text(item, 3, names[what]);
    store__bind_text_or_null(item, 4, detail);
    if ((st = job_step_done(c, item, "marking the item", err)) != SS_OK)
        return st;
    if (sqlite3_changes(c->db) != 1)
        return ss_error_set(err, SS_ECONFLICT, "job",
                            "item %llu of job %s is no longer pending",
                            (unsigned long long)seq, job_id);
    if (what == STORE_ITEM_REVISED) {
        store__bind_text(ins, 1, analysis_id);
        sqlite3_bind_int64(ins, 2, (sqlite3_int64)latest + 1);
        store__bind_text(ins, 3, rev->created_at);
        store__bind_text(ins, 4, rev->calibration_name);
        sqlite3_bind_int64(ins, 5, rev->calibration_version);
        store__bind_text(ins, 6, rev->software_version);
        store__bind_text(ins, 7, job_id);
        store__bind_text(ins, 8, rev->method);
        store__bind_text(ins, 9, rev->result_json);
        if ((st = job_step_done(c, ins, "storing the revision", err)) != SS_OK)
            return st;
    }
    char now[32];
    store_time_now(now);
    store__bind_text(count, 1, job_id);
    store__bind_text(count, 2, me);
    sqlite3_bind_int(count, 3, what == STORE_ITEM_REVISED);
    sqlite3_bind_int(count, 4, what == STORE_ITEM_UNCHANGED);
    sqlite3_bind_int(count, 5, what == STORE_ITEM_FAILED);
    store__bind_text(count, 6, now);
    if ((st = job_step_done(c, count, "counting the item", err)) != SS_OK)
        return st;
    if (sqlite3_changes(c->db) != 1)
        return ss_error_set(err, SS_ECONFLICT, "job",
                            "job %s is no longer held by this runner", job_id);
    *outcome = what;
    return SS_OK;
}

ss_status store_job_item_finish(store_conn *c, const char *job_id,
                                const char *me, uint64_t seq,
                                const char *analysis_id,
                                const store_revision_new *rev,
                                const char *detail, store_item_outcome *outcome,
                                ss_error *err) {
    if (rev != NULL && rev->result_json != NULL &&
        (rev->calibration_name == NULL || rev->software_version == NULL ||
         rev->method == NULL || !store_time_canonical(rev->created_at)))
        return ss_error_set(err, SS_EINVAL, "revision",
                            "a revision needs its result, calibration, "
                            "software version, method and created_at");
    ss_status st = store__begin(c, err);
    if (st != SS_OK)
        return st;
    store_item_outcome what = STORE_ITEM_FAILED;
    st = job_item_in(c, job_id, me, seq, analysis_id, rev, detail, &what, err);
    if (st == SS_OK)
        st = store__commit(c, err);
    if (st != SS_OK) {
        store__rollback(c);
        return st;
    }
    *outcome = what;
    return SS_OK;
}
