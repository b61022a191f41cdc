/*
 * store_sqlite_list.c — the list query of the SQLite store: keyset
 * pagination, newest first.
 *
 * Items are ordered by (created_at DESC, id DESC); a page asks for limit + 1
 * rows, and when the extra row exists the cursor of the page encodes the
 * (created_at, id) of its last item; the next page continues with the row
 * value comparison (created_at, id) < (:after_t, :after_id), which the
 * indexes (created_at, id) and (label, created_at, id) serve without a sort
 * (test_store checks the query plans).  Each combination of filters has its
 * own statement, built here and prepared once per connection on first use,
 * so that no "?1 IS NULL OR ..." clause hides the indexes from the planner.
 * Each item carries the result of the analysis's latest revision.
 * Owns: the list statements of a connection (finalised with it) and the
 * page items it allocates.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store_sqlite.h"

enum { SQ_HAS_LABEL = 1, SQ_HAS_SINCE = 2, SQ_HAS_UNTIL = 4, SQ_HAS_AFTER = 8 };

int store_sqlite_list_sql(unsigned variant, char *buf, size_t cap) {
    static const char *const cond[4] = {
        "label = :label",
        "created_at >= :since",
        "created_at < :until",
        "(created_at, id) < (:after_t, :after_id)",
    };
    /* the result of the latest revision (schema 2): a later revision when
     * there is one (max via the revisions' unique index), else the row's */
    int n = snprintf(buf, cap,
                     "SELECT id, created_at, label, levels, method,"
                     " software_version, coalesce((SELECT r.result_json"
                     " FROM revisions r WHERE r.analysis_id = analyses.id"
                     " ORDER BY r.revision DESC LIMIT 1), result_json)"
                     " FROM analyses");
    const char *joint = " WHERE ";
    for (unsigned bit = 0; bit < 4; ++bit) {
        if (n < 0 || (size_t)n >= cap)
            return -1;
        if (variant & (1u << bit)) {
            n += snprintf(buf + n, cap - (size_t)n, "%s%s", joint, cond[bit]);
            joint = " AND ";
        }
    }
    if (n < 0 || (size_t)n >= cap)
        return -1;
    n += snprintf(buf + n, cap - (size_t)n,
                  " ORDER BY created_at DESC, id DESC LIMIT :limit");
    return n < 0 || (size_t)n >= cap ? -1 : 0;
}

static ss_status sq_list_statement(store_conn *c, unsigned variant,
                                   sqlite3_stmt **out, ss_error *err) {
    if (c->list[variant] == NULL) {
        char sql[512];
        if (store_sqlite_list_sql(variant, sql, sizeof sql) != 0)
            return ss_error_set(err, SS_EINTERNAL, "",
                                "store %s: list query too long",
                                c->owner->path);
        int rc = sqlite3_prepare_v3(c->db, sql, -1, SQLITE_PREPARE_PERSISTENT,
                                    &c->list[variant], NULL);
        if (rc != SQLITE_OK)
            return store_sqlite_fail(c->db, c->owner->path, rc,
                                     "preparing the list query", err);
    }
    *out = c->list[variant];
    return SS_OK;
}

static void sq_bind_name(sqlite3_stmt *q, const char *name, const char *v) {
    sqlite3_bind_text(q, sqlite3_bind_parameter_index(q, name), v, -1,
                      SQLITE_STATIC);
}

/* Steps through the rows into page (capacity limit items); sets *more when
 * a row beyond the limit exists. */
static ss_status sq_collect(store_conn *c, sqlite3_stmt *q, unsigned limit,
                            store_page *page, int *more, ss_error *err) {
    for (;;) {
        int rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            return SS_OK;
        if (rc != SQLITE_ROW)
            return store_sqlite_fail(c->db, c->owner->path, rc,
                                     "listing analyses", err);
        if (page->count == limit) {
            *more = 1;
            return SS_OK;
        }
        ss_status st = store__read_row(c, q, 0, &page->items[page->count], err);
        if (st != SS_OK)
            return st;
        ++page->count;
    }
}

ss_status store_list(store_conn *c, const store_query *q, store_page *out,
                     ss_error *err) {
    store_checked_query cq;
    ss_status st = store_query_check(q, &cq, c->owner->path, err);
    if (st != SS_OK)
        return st;
    unsigned variant = (cq.label != NULL ? SQ_HAS_LABEL : 0u) |
                       (cq.since[0] != '\0' ? SQ_HAS_SINCE : 0u) |
                       (cq.until[0] != '\0' ? SQ_HAS_UNTIL : 0u) |
                       (cq.has_cursor ? SQ_HAS_AFTER : 0u);
    sqlite3_stmt *stmt = NULL;
    st = sq_list_statement(c, variant, &stmt, err);
    if (st != SS_OK)
        return st;
    store_page page;
    memset(&page, 0, sizeof page);
    page.items = calloc(cq.limit, sizeof *page.items);
    if (page.items == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                            c->owner->path);
    if (variant & SQ_HAS_LABEL)
        sq_bind_name(stmt, ":label", cq.label);
    if (variant & SQ_HAS_SINCE)
        sq_bind_name(stmt, ":since", cq.since);
    if (variant & SQ_HAS_UNTIL)
        sq_bind_name(stmt, ":until", cq.until);
    if (variant & SQ_HAS_AFTER) {
        sq_bind_name(stmt, ":after_t", cq.after.created_at);
        sq_bind_name(stmt, ":after_id", cq.after.id);
    }
    sqlite3_bind_int64(stmt, sqlite3_bind_parameter_index(stmt, ":limit"),
                       (sqlite3_int64)cq.limit + 1);
    int more = 0;
    st = sq_collect(c, stmt, cq.limit, &page, &more, err);
    sqlite3_reset(stmt);
    sqlite3_clear_bindings(stmt);
    if (st != SS_OK) {
        store_page_release(&page);
        return st;
    }
    if (more) {
        store_position last;
        memcpy(last.created_at, page.items[page.count - 1].created_at,
               sizeof last.created_at);
        memcpy(last.id, page.items[page.count - 1].id, sizeof last.id);
        store_cursor_encode(&last, page.next_cursor);
    }
    *out = page;
    return SS_OK;
}
