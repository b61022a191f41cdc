/*
 * store_sqlite_read.c — the point reads of the SQLite store: one record by
 * id, an idempotency key, the count and the health check, plus the release
 * functions of records and pages.
 *
 * Reads run in implicit read transactions, which in WAL mode neither wait
 * for nor block the writer; every statement is reset right after use so that
 * no read transaction stays open and starves checkpoints.
 * Owns: the JSON texts it copies into records (freed by
 * store_record_release / store_page_release).
 */
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "store_sqlite.h"

/* ------------------------------------------------------------------------ */
/* Reads.                                                                    */

static char *sq_dup(sqlite3_stmt *q, int i) {
    const unsigned char *t = sqlite3_column_text(q, i);
    return strdup(t != NULL ? (const char *)t : "");
}

ss_status store__read_row(store_conn *c, sqlite3_stmt *q, int with_request,
                          store_record *out, ss_error *err) {
    store_record r;
    memset(&r, 0, sizeof r);
    int ok = store__copy(q, 0, r.id, sizeof r.id) &&
             store__copy(q, 1, r.created_at, sizeof r.created_at) &&
             store__copy(q, 2, r.label, sizeof r.label) &&
             store__copy(q, 4, r.method, sizeof r.method) &&
             store__copy(q, 5, r.software_version, sizeof r.software_version);
    sqlite3_int64 levels = sqlite3_column_int64(q, 3);
    if (!ok || levels < 0 || levels > 0xffff)
        return ss_error_set(err, SS_ESTORE, "",
                            "store %s: a stored record has a malformed field",
                            c->owner->path);
    r.levels = (unsigned)levels;
    int col = 6;
    if (with_request && (r.request_json = sq_dup(q, col++)) == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                            c->owner->path);
    if ((r.result_json = sq_dup(q, col)) == NULL) {
        free(r.request_json);
        return ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                            c->owner->path);
    }
    *out = r;
    return SS_OK;
}

ss_status store_get(store_conn *c, const char *id, store_record *out,
                    ss_error *err) {
    if (!store_id_valid(id))
        return ss_error_set(err, SS_ENOTFOUND, "id",
                            "store %s: no analysis with that id",
                            c->owner->path);
    sqlite3_stmt *q = c->fixed[SQ_GET];
    sqlite3_bind_text(q, 1, id, -1, SQLITE_STATIC);
    int rc = sqlite3_step(q);
    ss_status st;
    if (rc == SQLITE_ROW)
        st = store__read_row(c, q, 1, out, err);
    else if (rc == SQLITE_DONE)
        st = ss_error_set(err, SS_ENOTFOUND, "id",
                          "store %s: no analysis with id %s", c->owner->path,
                          id);
    else
        st = store_sqlite_fail(c->db, c->owner->path, rc, "reading", err);
    sqlite3_reset(q);
    sqlite3_clear_bindings(q);
    return st;
}

ss_status store_idempotency_find(store_conn *c, const char *key,
                                 char fingerprint[65], char id[32], int *found,
                                 ss_error *err) {
    if (key == NULL)
        return ss_error_set(err, SS_EINVAL, "idempotency_key", "no key");
    sqlite3_stmt *q = c->fixed[SQ_KEY_FIND];
    sqlite3_bind_text(q, 1, key, -1, SQLITE_STATIC);
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    char fp[65], aid[32];
    if (rc == SQLITE_ROW) {
        if (store__copy(q, 0, fp, sizeof fp) &&
            store__copy(q, 1, aid, sizeof aid)) {
            memcpy(fingerprint, fp, sizeof fp);
            memcpy(id, aid, sizeof aid);
            *found = 1;
        } else {
            st = ss_error_set(err, SS_ESTORE, "",
                              "store %s: a stored idempotency record is "
                              "malformed",
                              c->owner->path);
        }
    } else if (rc == SQLITE_DONE) {
        *found = 0;
    } else {
        st = store_sqlite_fail(c->db, c->owner->path, rc,
                               "reading an idempotency key", err);
    }
    sqlite3_reset(q);
    sqlite3_clear_bindings(q);
    return st;
}

ss_status store_count(store_conn *c, uint64_t *out, ss_error *err) {
    sqlite3_stmt *q = c->fixed[SQ_COUNT];
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    if (rc == SQLITE_ROW)
        *out = (uint64_t)sqlite3_column_int64(q, 0);
    else
        st = store_sqlite_fail(c->db, c->owner->path, rc, "counting", err);
    sqlite3_reset(q);
    return st;
}

ss_status store_check(store_conn *c, ss_error *err) {
    const char *path = c->owner->path;
    struct stat now;
    if (stat(path, &now) != 0 ||
        (unsigned long long)now.st_dev != c->owner->dev ||
        (unsigned long long)now.st_ino != c->owner->ino)
        return ss_error_set(err, SS_ESTORE, "",
                            "store %s: the file was removed or replaced "
                            "while the service had it open",
                            path);
    sqlite3_stmt *q = c->fixed[SQ_CHECK];
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    if (rc != SQLITE_ROW)
        st = store_sqlite_fail(c->db, path, rc, "health check", err);
    else if (sqlite3_column_int64(q, 0) != store_sqlite_schema_latest() ||
             sqlite3_column_int64(q, 1) != STORE_SQLITE_APPLICATION_ID)
        st = ss_error_set(err, SS_ESTORE, "",
                          "store %s: the schema changed under the service",
                          path);
    sqlite3_reset(q);
    return st;
}

void store_record_release(store_record *r) {
    if (r == NULL)
        return;
    free(r->request_json);
    free(r->result_json);
    r->request_json = NULL;
    r->result_json = NULL;
}

void store_page_release(store_page *p) {
    if (p == NULL)
        return;
    for (size_t i = 0; i < p->count; ++i)
        store_record_release(&p->items[i]);
    free(p->items);
    p->items = NULL;
    p->count = 0;
    p->next_cursor[0] = '\0';
}
