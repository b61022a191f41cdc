/*
 * store_sqlite_revisions.c — reading the revisions of an analysis from the
 * SQLite store (store.h): one revision with its analysis, and the walk over
 * all of them.
 *
 * Revision 1 is the analyses row itself (its result, software version and
 * the calibration it referenced); revisions 2, 3, ... are rows of the table
 * `revisions`, numbered without gaps (store_sqlite_jobs.c writes them, one
 * per transaction, as max + 1; triggers refuse changes and deletions).  The
 * reads of one call run in one read transaction so that the record and its
 * revision count agree even while a reprocessing job commits.  Owns the
 * texts it copies into the caller's record.
 */
#include <stdlib.h>
#include <string.h>

#include "store_sqlite.h"

enum { REV_HEAD = SQL_REV_FIRST, REV_FIRST_RESULT, REV_ONE, REV_ALL, REV_LAST };
_Static_assert(REV_LAST - SQL_REV_FIRST <= SQL_REV_COUNT,
               "store_sqlite.h reserves too few revision statements");

static const char *const rev_sql[REV_LAST - SQL_REV_FIRST] = {
    "SELECT id, created_at, label, levels, method, software_version,"
    " request_json, calibration_name, calibration_version, measured_at,"
    " coalesce((SELECT max(revision) FROM revisions WHERE analysis_id = a.id),"
    " 1) FROM analyses a WHERE id = ?1",
    "SELECT result_json FROM analyses WHERE id = ?1",
    "SELECT revision, created_at, calibration_name, calibration_version,"
    " software_version, job_id, method, result_json FROM revisions"
    " WHERE analysis_id = ?1 AND revision = ?2",
    "SELECT revision, created_at, calibration_name, calibration_version,"
    " software_version, job_id, method, result_json FROM revisions"
    " WHERE analysis_id = ?1 ORDER BY revision",
};

static sqlite3_stmt *rev_stmt(store_conn *c, int which, ss_error *err) {
    return store__stmt(c, which, rev_sql[which - SQL_REV_FIRST], err);
}

static ss_status rev_malformed(store_conn *c, ss_error *err) {
    return ss_error_set(err, SS_ESTORE, "",
                        "store %s: a stored revision has a malformed field",
                        store_path(c->owner));
}

/* The analysis row (REV_HEAD) into rec (request_json copied) and the
 * revision-1 part of info; *latest = the highest revision number. */
static ss_status rev_head(store_conn *c, const char *id, store_record *rec,
                          store_revision_info *first, unsigned *latest,
                          ss_error *err) {
    sqlite3_stmt *q = rev_stmt(c, REV_HEAD, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    store_record r;
    memset(&r, 0, sizeof r);
    store_revision_info f;
    memset(&f, 0, sizeof f);
    if (rc == SQLITE_DONE) {
        st =
            ss_error_set(err, SS_ENOTFOUND, "id", "no analysis with id %s", id);
    } else if (rc != SQLITE_ROW) {
        st = store_sqlite_fail(c->db, store_path(c->owner), rc,
                               "reading an analysis", err);
    } else {
        sqlite3_int64 levels = sqlite3_column_int64(q, 3);
        sqlite3_int64 cver = sqlite3_column_int64(q, 8);
        sqlite3_int64 top = sqlite3_column_int64(q, 10);
        int ok =
            store__copy(q, 0, r.id, sizeof r.id) &&
            store__copy(q, 1, r.created_at, sizeof r.created_at) &&
            store__copy(q, 2, r.label, sizeof r.label) &&
            store__copy(q, 4, r.method, sizeof r.method) &&
            store__copy(q, 5, r.software_version, sizeof r.software_version) &&
            store__copy(q, 7, r.calibration_name, sizeof r.calibration_name) &&
            store__copy(q, 9, r.measured_at, sizeof r.measured_at) &&
            levels >= 0 && levels <= 0xffff && cver >= 0 &&
            cver <= 0x7fffffff && top >= 1 && top <= 0x7fffffff;
        if (!ok) {
            st = rev_malformed(c, err);
        } else {
            r.levels = (unsigned)levels;
            r.calibration_version = (unsigned)cver;
            const unsigned char *t = sqlite3_column_text(q, 6);
            r.request_json = strdup(t ? (const char *)t : "");
            if (r.request_json == NULL)
                st = ss_error_set(err, SS_ENOMEM, "", "out of memory");
            f.revision = 1;
            memcpy(f.created_at, r.created_at, sizeof f.created_at);
            memcpy(f.calibration_name, r.calibration_name,
                   sizeof f.calibration_name);
            f.calibration_version = r.calibration_version;
            memcpy(f.software_version, r.software_version,
                   sizeof f.software_version);
            memcpy(f.method, r.method, sizeof f.method);
            *latest = (unsigned)top;
        }
    }
    store__done(q);
    if (st != SS_OK) {
        store_record_release(&r);
        return st;
    }
    *rec = r;
    *first = f;
    return SS_OK;
}

/* A row of REV_ONE / REV_ALL into info; *result points into the row. */
static ss_status rev_row(store_conn *c, sqlite3_stmt *q,
                         store_revision_info *info, const char **result,
                         ss_error *err) {
    store_revision_info r;
    memset(&r, 0, sizeof r);
    sqlite3_int64 k = sqlite3_column_int64(q, 0);
    sqlite3_int64 v = sqlite3_column_int64(q, 3);
    int ok = store__copy(q, 1, r.created_at, sizeof r.created_at) &&
             store__copy(q, 2, r.calibration_name, sizeof r.calibration_name) &&
             store__copy(q, 4, r.software_version, sizeof r.software_version) &&
             store__copy(q, 5, r.job_id, sizeof r.job_id) &&
             store__copy(q, 6, r.method, sizeof r.method) && k >= 2 &&
             k <= 0x7fffffff && v >= 1 && v <= 0x7fffffff;
    if (!ok)
        return rev_malformed(c, err);
    r.revision = (unsigned)k;
    r.calibration_version = (unsigned)v;
    const unsigned char *t = sqlite3_column_text(q, 7);
    *result = t ? (const char *)t : "";
    *info = r;
    return SS_OK;
}

/* The text of one column of a one-row query, copied. */
static ss_status rev_copy_result(store_conn *c, sqlite3_stmt *q, int col,
                                 char **out, ss_error *err) {
    const unsigned char *t = sqlite3_column_text(q, col);
    *out = strdup(t ? (const char *)t : "");
    return *out ? SS_OK
                : ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                               store_path(c->owner));
}

static ss_status rev_get(store_conn *c, const char *id, unsigned revision,
                         store_record *out, store_revision_info *info,
                         ss_error *err) {
    unsigned latest = 0;
    store_revision_info rev;
    ss_status st = rev_head(c, id, out, &rev, &latest, err);
    if (st != SS_OK)
        return st;
    unsigned want = revision ? revision : latest;
    if (want > latest) {
        store_record_release(out);
        return ss_error_set(err, SS_ENOTFOUND, "revision",
                            "analysis %s has %u revision%s, not %u", id, latest,
                            latest == 1 ? "" : "s", want);
    }
    sqlite3_stmt *q = rev_stmt(c, want == 1 ? REV_FIRST_RESULT : REV_ONE, err);
    if (q == NULL) {
        store_record_release(out);
        return err->code;
    }
    store__bind_text(q, 1, id);
    if (want > 1)
        sqlite3_bind_int64(q, 2, want);
    int rc = sqlite3_step(q);
    if (rc != SQLITE_ROW) {
        st = rc == SQLITE_DONE
                 ? rev_malformed(c, err)
                 : store_sqlite_fail(c->db, store_path(c->owner), rc,
                                     "reading a revision", err);
    } else if (want == 1) {
        st = rev_copy_result(c, q, 0, &out->result_json, err);
    } else {
        const char *text = NULL;
        st = rev_row(c, q, &rev, &text, err);
        if (st == SS_OK)
            st = rev_copy_result(c, q, 7, &out->result_json, err);
    }
    store__done(q);
    if (st != SS_OK) {
        store_record_release(out);
        return st;
    }
    rev.revision_count = latest;
    *info = rev;
    return SS_OK;
}

ss_status store_get_revision(store_conn *c, const char *id, unsigned revision,
                             store_record *out, store_revision_info *info,
                             ss_error *err) {
    if (!store_id_valid(id))
        return ss_error_set(err, SS_ENOTFOUND, "id",
                            "no analysis with that id");
    ss_status st = store__begin_read(c, err);
    if (st != SS_OK)
        return st;
    st = rev_get(c, id, revision, out, info, err);
    sqlite3_exec(c->db, "COMMIT", NULL, NULL, NULL); /* ends the read */
    return st;
}

static ss_status rev_walk(store_conn *c, const char *id, store_revision_fn fn,
                          void *ctx, ss_error *err) {
    store_record rec;
    store_revision_info info;
    unsigned latest = 0;
    ss_status st = rev_head(c, id, &rec, &info, &latest, err);
    if (st != SS_OK)
        return st;
    store_record_release(&rec); /* only the revision-1 metadata is needed */
    info.revision_count = latest;
    sqlite3_stmt *q = rev_stmt(c, REV_FIRST_RESULT, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    int rc = sqlite3_step(q);
    if (rc == SQLITE_ROW) {
        const unsigned char *t = sqlite3_column_text(q, 0);
        st = fn(ctx, &info, t ? (const char *)t : "", err);
    } else {
        st = store_sqlite_fail(c->db, store_path(c->owner), rc,
                               "reading a revision", err);
    }
    store__done(q);
    if (st != SS_OK || latest == 1)
        return st;
    q = rev_stmt(c, REV_ALL, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, id);
    while (st == SS_OK) {
        rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            break;
        if (rc != SQLITE_ROW) {
            st = store_sqlite_fail(c->db, store_path(c->owner), rc,
                                   "reading revisions", err);
            break;
        }
        const char *text = NULL;
        st = rev_row(c, q, &info, &text, err);
        info.revision_count = latest;
        if (st == SS_OK)
            st = fn(ctx, &info, text, err);
    }
    store__done(q);
    return st;
}

ss_status store_revisions_foreach(store_conn *c, const char *id,
                                  store_revision_fn fn, void *ctx,
                                  ss_error *err) {
    if (!store_id_valid(id))
        return ss_error_set(err, SS_ENOTFOUND, "id",
                            "no analysis with that id");
    ss_status st = store__begin_read(c, err);
    if (st != SS_OK)
        return st;
    st = rev_walk(c, id, fn, ctx, err);
    sqlite3_exec(c->db, "COMMIT", NULL, NULL, NULL); /* ends the read */
    return st;
}
