/*
 * store_sqlite_calib.c — named, versioned calibrations in the SQLite store
 * (store.h): storing a new version, reading one version, the version valid
 * at a time, and the list of names.
 *
 * A version is one row of the table `calibrations` (schema step 2), keyed by
 * (name, version).  A new version takes the next number of its name inside
 * one BEGIN IMMEDIATE transaction, so two writers never get the same number;
 * triggers of the schema refuse every UPDATE and DELETE, so a stored version
 * never changes.  "Valid at t" is the version with the greatest valid_from
 * <= t, ties going to the higher version number; the index (name,
 * valid_from, version) answers it with one descending seek.  Numbers are
 * stored as REAL (IEEE doubles, exact round trip).  Owns no memory beyond
 * the list array it returns.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store_sqlite.h"

enum {
    CAL_NEXT = SQL_CAL_FIRST,
    CAL_INSERT,
    CAL_GET,
    CAL_LATEST,
    CAL_VALID_AT,
    CAL_LIST,
    CAL_LAST
};
_Static_assert(CAL_LAST - SQL_CAL_FIRST <= SQL_CAL_COUNT,
               "store_sqlite.h reserves too few calibration statements");

#define CAL_COLUMNS                                                            \
    "name, version, created_at, valid_from, note, energy_offset, pair_shift,"  \
    " exchange, noise_sd, coupling_spread, unit"

static const char *const cal_sql[CAL_LAST - SQL_CAL_FIRST] = {
    "SELECT coalesce(max(version), 0) + 1 FROM calibrations WHERE name = ?1",
    "INSERT INTO calibrations (" CAL_COLUMNS ")"
    " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
    "SELECT " CAL_COLUMNS " FROM calibrations WHERE name = ?1 AND version = ?2",
    "SELECT " CAL_COLUMNS " FROM calibrations WHERE name = ?1"
    " ORDER BY version DESC LIMIT 1",
    "SELECT " CAL_COLUMNS " FROM calibrations WHERE name = ?1"
    " AND valid_from <= ?2 ORDER BY valid_from DESC, version DESC LIMIT 1",
    "SELECT c.name, c.version, c.valid_from, c.created_at FROM calibrations c"
    " WHERE c.version = (SELECT max(version) FROM calibrations"
    " WHERE name = c.name) ORDER BY c.name",
};

static sqlite3_stmt *cal_stmt(store_conn *c, int which, ss_error *err) {
    return store__stmt(c, which, cal_sql[which - SQL_CAL_FIRST], err);
}

/* Reads a row of CAL_COLUMNS. */
static ss_status cal_read(store_conn *c, sqlite3_stmt *q,
                          store_calibration *out, ss_error *err) {
    store_calibration k;
    memset(&k, 0, sizeof k);
    sqlite3_int64 version = sqlite3_column_int64(q, 1);
    int ok = store__copy(q, 0, k.name, sizeof k.name) &&
             store__copy(q, 2, k.created_at, sizeof k.created_at) &&
             store__copy(q, 3, k.valid_from, sizeof k.valid_from) &&
             store__copy(q, 4, k.note, sizeof k.note) &&
             store__copy(q, 10, k.cal.unit, sizeof k.cal.unit) &&
             version >= 1 && version <= 0x7fffffff;
    if (!ok)
        return ss_error_set(err, SS_ESTORE, "",
                            "store %s: a stored calibration has a malformed "
                            "field",
                            store_path(c->owner));
    k.version = (unsigned)version;
    k.cal.offset = sqlite3_column_double(q, 5);
    k.cal.pair_shift = sqlite3_column_double(q, 6);
    k.cal.exchange = sqlite3_column_double(q, 7);
    k.cal.noise_sd = sqlite3_column_double(q, 8);
    k.cal.coupling_spread = sqlite3_column_double(q, 9);
    *out = k;
    return SS_OK;
}

/* Steps a one-row query; *found = 0 for no row. */
static ss_status cal_one(store_conn *c, sqlite3_stmt *q, store_calibration *out,
                         int *found, ss_error *err) {
    int rc = sqlite3_step(q);
    ss_status st = SS_OK;
    *found = rc == SQLITE_ROW;
    if (rc == SQLITE_ROW)
        st = cal_read(c, q, out, err);
    else if (rc != SQLITE_DONE)
        st = store_sqlite_fail(c->db, store_path(c->owner), rc,
                               "reading a calibration", err);
    store__done(q);
    return st;
}

/* SS_ENOTFOUND naming "name" when no version of name exists at all. */
static ss_status cal_name_known(store_conn *c, const char *name,
                                ss_error *err) {
    sqlite3_stmt *q = cal_stmt(c, CAL_LATEST, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, name);
    store_calibration any;
    int found = 0;
    ss_status st = cal_one(c, q, &any, &found, err);
    if (st == SS_OK && !found)
        st = ss_error_set(err, SS_ENOTFOUND, "name",
                          "there is no calibration named '%s'", name);
    return st;
}

ss_status store_calibration_put(store_conn *c, store_calibration *io,
                                ss_error *err) {
    const char *path = store_path(c->owner);
    if (!store_calibration_name_valid(io->name))
        return store_calibration_name_error(io->name, "name", err);
    if (!store_time_canonical(io->created_at))
        return ss_error_set(err, SS_EINVAL, "created_at",
                            "created_at must have the form "
                            "2026-12-02T03:50:12.345Z");
    if (!store_time_canonical(io->valid_from))
        return ss_error_set(err, SS_EINVAL, "valid_from",
                            "valid_from must have the form "
                            "2026-12-02T03:50:12.345Z");
    if (memchr(io->note, '\0', sizeof io->note) == NULL)
        return ss_error_set(err, SS_EINVAL, "note",
                            "a note has at most %d bytes",
                            STORE_CALIBRATION_NOTE_MAX);
    ss_status st = ss_calibration_validate(&io->cal, err);
    if (st != SS_OK)
        return st;
    sqlite3_stmt *next = cal_stmt(c, CAL_NEXT, err);
    sqlite3_stmt *ins = next ? cal_stmt(c, CAL_INSERT, err) : NULL;
    if (ins == NULL)
        return err->code;
    if ((st = store__begin(c, err)) != SS_OK)
        return st;
    store__bind_text(next, 1, io->name);
    int rc = sqlite3_step(next);
    sqlite3_int64 version =
        rc == SQLITE_ROW ? sqlite3_column_int64(next, 0) : 0;
    if (rc != SQLITE_ROW)
        st = store_sqlite_fail(c->db, path, rc, "numbering the version", err);
    store__done(next);
    if (st == SS_OK) {
        store__bind_text(ins, 1, io->name);
        sqlite3_bind_int64(ins, 2, version);
        store__bind_text(ins, 3, io->created_at);
        store__bind_text(ins, 4, io->valid_from);
        store__bind_text(ins, 5, io->note);
        sqlite3_bind_double(ins, 6, io->cal.offset);
        sqlite3_bind_double(ins, 7, io->cal.pair_shift);
        sqlite3_bind_double(ins, 8, io->cal.exchange);
        sqlite3_bind_double(ins, 9, io->cal.noise_sd);
        sqlite3_bind_double(ins, 10, io->cal.coupling_spread);
        store__bind_text(ins, 11, io->cal.unit);
        rc = sqlite3_step(ins);
        if (rc != SQLITE_DONE)
            st = store_sqlite_fail(c->db, path, rc, "storing a calibration",
                                   err);
        store__done(ins);
    }
    if (st == SS_OK)
        st = store__commit(c, err);
    if (st != SS_OK) {
        store__rollback(c);
        return st;
    }
    io->version = (unsigned)version;
    return SS_OK;
}

ss_status store_calibration_get(store_conn *c, const char *name,
                                unsigned version, store_calibration *out,
                                ss_error *err) {
    if (!store_calibration_name_valid(name))
        return ss_error_set(err, SS_ENOTFOUND, "name",
                            "there is no calibration named '%.80s'",
                            name ? name : "");
    sqlite3_stmt *q = cal_stmt(c, version ? CAL_GET : CAL_LATEST, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, name);
    if (version)
        sqlite3_bind_int64(q, 2, version);
    int found = 0;
    ss_status st = cal_one(c, q, out, &found, err);
    if (st != SS_OK || found)
        return st;
    st = cal_name_known(c, name, err);
    if (st != SS_OK)
        return st;
    return ss_error_set(err, SS_ENOTFOUND, "version",
                        "calibration '%s' has no version %u", name, version);
}

ss_status store_calibration_valid_at(store_conn *c, const char *name,
                                     const char *at, store_calibration *out,
                                     ss_error *err) {
    if (!store_calibration_name_valid(name))
        return ss_error_set(err, SS_ENOTFOUND, "name",
                            "there is no calibration named '%.80s'",
                            name ? name : "");
    if (!store_time_canonical(at))
        return ss_error_set(err, SS_EINVAL, "at",
                            "the time must have the form "
                            "2026-12-02T03:50:12.345Z");
    sqlite3_stmt *q = cal_stmt(c, CAL_VALID_AT, err);
    if (q == NULL)
        return err->code;
    store__bind_text(q, 1, name);
    store__bind_text(q, 2, at);
    int found = 0;
    ss_status st = cal_one(c, q, out, &found, err);
    if (st != SS_OK || found)
        return st;
    st = cal_name_known(c, name, err);
    if (st != SS_OK)
        return st;
    /* the earliest valid_from, for the message */
    sqlite3_stmt *all = NULL;
    char earliest[32] = "";
    int rc = sqlite3_prepare_v2(c->db,
                                "SELECT min(valid_from) FROM calibrations"
                                " WHERE name = ?1",
                                -1, &all, NULL);
    if (rc == SQLITE_OK) {
        store__bind_text(all, 1, name);
        if (sqlite3_step(all) == SQLITE_ROW)
            store__copy(all, 0, earliest, sizeof earliest);
    }
    sqlite3_finalize(all);
    return ss_error_set(err, SS_ENOTFOUND, "at",
                        "no version of calibration '%s' is valid at %s (the "
                        "earliest valid_from is %s)",
                        name, at, earliest[0] ? earliest : "unknown");
}

ss_status store_calibration_list(store_conn *c, store_calibration_entry **items,
                                 size_t *count, ss_error *err) {
    const char *path = store_path(c->owner);
    sqlite3_stmt *q = cal_stmt(c, CAL_LIST, err);
    if (q == NULL)
        return err->code;
    store_calibration_entry *arr = NULL;
    size_t n = 0, cap = 0;
    ss_status st = SS_OK;
    for (;;) {
        int rc = sqlite3_step(q);
        if (rc == SQLITE_DONE)
            break;
        if (rc != SQLITE_ROW) {
            st =
                store_sqlite_fail(c->db, path, rc, "listing calibrations", err);
            break;
        }
        if (n == cap) {
            cap = cap ? 2 * cap : 16;
            store_calibration_entry *grown = realloc(arr, cap * sizeof *arr);
            if (grown == NULL) {
                st = ss_error_set(err, SS_ENOMEM, "", "store %s: out of memory",
                                  path);
                break;
            }
            arr = grown;
        }
        store_calibration_entry *e = &arr[n];
        memset(e, 0, sizeof *e);
        sqlite3_int64 v = sqlite3_column_int64(q, 1);
        if (!store__copy(q, 0, e->name, sizeof e->name) ||
            !store__copy(q, 2, e->valid_from, sizeof e->valid_from) ||
            !store__copy(q, 3, e->created_at, sizeof e->created_at) || v < 1 ||
            v > 0x7fffffff) {
            st = ss_error_set(err, SS_ESTORE, "",
                              "store %s: a stored calibration has a malformed "
                              "field",
                              path);
            break;
        }
        /* versions are numbered 1..latest without gaps (never deleted) */
        e->latest_version = e->count = (unsigned)v;
        n++;
    }
    store__done(q);
    if (st != SS_OK) {
        free(arr);
        return st;
    }
    *items = arr;
    *count = n;
    return SS_OK;
}
