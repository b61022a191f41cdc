/*
 * calib_harness.h — test helpers for calibrations, revisions and
 * reprocessing (test_calibrations.c, test_reprocess.c), on top of
 * http_harness.h: a tokens file for the three roles, JSON requests that
 * return the parsed answer, `swapspec` runs as child processes with their
 * output in files, and read-only looks into the store file with SQLite's
 * own API (the contract there is about the file).
 */
#ifndef SWAPSPEC_CALIB_HARNESS_H
#define SWAPSPEC_CALIB_HARNESS_H

#include <sqlite3.h>

#include "http_harness.h"

/* The tokens of the three roles: hh_tokens (http_harness.h). */
static inline void ch_tokens(const char *dir, char *out, size_t cap) {
    hh_tokens(dir, out, cap);
}

/* A JSON request (method, path, token, body) answered with `status`; the
 * parsed answer (a new reference) or NULL when the body is not JSON. */
static inline json_t *ch_call(int port, const char *method, const char *path,
                              const char *token, const char *body, int status) {
    hh_response r;
    hh_request(port, method, path, token, body ? "application/json" : NULL,
               NULL, body, &r);
    cr_assert(r.status == status, "%s %s: status %d, expected %d: %.400s",
              method, path, r.status, status, r.body);
    json_t *doc = json_incref(r.json);
    hh_free(&r);
    return doc;
}

/* The problem of a refused request: status, type suffix, first pointer. */
static inline void ch_problem(int port, const char *method, const char *path,
                              const char *token, const char *body, int status,
                              const char *type, const char *pointer) {
    json_t *doc = ch_call(port, method, path, token, body, status);
    cr_assert(doc != NULL, "%s %s: no problem document", method, path);
    char want[96];
    snprintf(want, sizeof want, "urn:swapspec:problem:%s", type);
    const char *got = json_string_value(json_object_get(doc, "type"));
    cr_expect(got && strcmp(got, want) == 0, "%s %s: type %s, expected %s",
              method, path, got ? got : "(none)", want);
    if (pointer != NULL) {
        json_t *e = json_array_get(json_object_get(doc, "errors"), 0);
        const char *p = json_string_value(json_object_get(e, "pointer"));
        cr_expect(p && strcmp(p, pointer) == 0,
                  "%s %s: pointer %s, expected %s (%s)", method, path,
                  p ? p : "(none)", pointer,
                  json_string_value(json_object_get(doc, "detail")));
    }
    json_decref(doc);
}

/* Runs `swapspec ARGS...` (NULL-terminated) with stdout and stderr in
 * files; does not wait.  Returns the pid. */
static inline pid_t ch_spawn(const char *const *args, const char *out_path,
                             const char *err_path) {
    const char *argv[32] = {SWAPSPEC_BINARY};
    int argc = 1;
    for (int i = 0; args[i] && argc < 31; i++)
        argv[argc++] = args[i];
    argv[argc] = NULL;
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_addopen(&fa, 1, out_path,
                                     O_WRONLY | O_CREAT | O_TRUNC, 0600);
    posix_spawn_file_actions_addopen(&fa, 2, err_path,
                                     O_WRONLY | O_CREAT | O_TRUNC, 0600);
    pid_t pid = 0;
    int rc = posix_spawn(&pid, SWAPSPEC_BINARY, &fa, NULL, (char *const *)argv,
                         environ);
    posix_spawn_file_actions_destroy(&fa);
    cr_assert(rc == 0, "cannot start %s", SWAPSPEC_BINARY);
    return pid;
}

/* Waits for pid; its exit status (128 + signal when killed). */
static inline int ch_wait(pid_t pid) {
    int status = 0;
    waitpid(pid, &status, 0);
    return WIFEXITED(status) ? WEXITSTATUS(status) : 128 + WTERMSIG(status);
}

/* The whole text of a file (malloc'd). */
static inline char *ch_slurp(const char *path) {
    FILE *f = fopen(path, "r");
    cr_assert(f != NULL, "cannot read %s", path);
    size_t cap = 1 << 16, len = 0, n;
    char *buf = malloc(cap);
    while ((n = fread(buf + len, 1, cap - len - 1, f)) > 0) {
        len += n;
        if (len + 1 == cap)
            buf = realloc(buf, cap *= 2);
    }
    fclose(f);
    buf[len] = '\0';
    return buf;
}

/* A child that exited on its own left no sanitizer report in its stderr
 * (the sanitizer build runs the executable instrumented). */
static inline void ch_clean(const char *err_path) {
    char *text = ch_slurp(err_path);
    cr_expect(strstr(text, "ERROR: LeakSanitizer") == NULL &&
                  strstr(text, "ERROR: AddressSanitizer") == NULL &&
                  strstr(text, "runtime error:") == NULL,
              "sanitizer report: %.600s", text);
    free(text);
}

/* The store file, read-only, waiting up to 5 s for locks. */
static inline sqlite3 *ch_db(const char *path) {
    sqlite3 *db = NULL;
    cr_assert(sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL) ==
                  SQLITE_OK,
              "cannot open %s", path);
    sqlite3_busy_timeout(db, 5000);
    return db;
}

/* A one-integer query; -1 when it returns no row. */
static inline long long ch_int(sqlite3 *db, const char *sql) {
    sqlite3_stmt *q = NULL;
    cr_assert(sqlite3_prepare_v2(db, sql, -1, &q, NULL) == SQLITE_OK, "%s: %s",
              sql, sqlite3_errmsg(db));
    long long v = -1;
    int rc = sqlite3_step(q);
    if (rc == SQLITE_ROW)
        v = sqlite3_column_int64(q, 0);
    else
        cr_assert(rc == SQLITE_DONE, "%s: %s", sql, sqlite3_errmsg(db));
    sqlite3_finalize(q);
    return v;
}

/* PRAGMA integrity_check of the file is "ok". */
static inline void ch_integrity_ok(const char *path) {
    sqlite3 *db = ch_db(path);
    sqlite3_stmt *q = NULL;
    cr_assert(sqlite3_prepare_v2(db, "PRAGMA integrity_check", -1, &q, NULL) ==
              SQLITE_OK);
    cr_assert(sqlite3_step(q) == SQLITE_ROW);
    const char *v = (const char *)sqlite3_column_text(q, 0);
    cr_expect(v && strcmp(v, "ok") == 0, "integrity_check: %s",
              v ? v : "(null)");
    sqlite3_finalize(q);
    sqlite3_close(db);
}

#endif /* SWAPSPEC_CALIB_HARNESS_H */
