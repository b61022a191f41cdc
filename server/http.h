/*
 * http.h — the service's request pipeline, shared by the daemon
 * (http_server.c), the route table (http_routes.c), problem responses
 * (http_problem.c) and the handlers (handlers_*.c).
 *
 * Every request runs the same flat pipeline: gather the body (capped) →
 * match the route → check the bearer token's role → check the media type
 * and parse the JSON strictly (duplicate keys rejected) → call the handler
 * → render JSON or a problem document → log one line and count it.  A
 * handler reads its inputs from an http_ctx and leaves its answer there.
 */
#ifndef SWAPSPEC_HTTP_H
#define SWAPSPEC_HTTP_H

#include <jansson.h>
#include <stddef.h>

#include "auth.h"
#include "committer.h"
#include "metrics.h"
#include "store.h"
#include "swapspec.h"

/* Settings of a running service. */
typedef struct {
    char listen_host[64];
    unsigned listen_port; /* 0: any free port */
    char data_path[512];
    char tokens_path[512]; /* "" = no access control */
    char tls_cert[512], tls_key[512];
    unsigned threads;            /* worker threads (default 16) */
    size_t body_limit;           /* bytes (default 1 MiB) */
    unsigned connection_timeout; /* seconds (default 30) */
    unsigned connection_limit;   /* default 256 */
    unsigned per_ip_limit;       /* default 64 */
    size_t connection_memory;    /* per-connection pool (default 64 KiB) */
    unsigned drain_seconds;      /* shutdown deadline (default 10) */
    unsigned simulation_shots;   /* cap on shots over HTTP (100000) */
    ss_budget budget;            /* per request: diagrams 1 000 000, Schur
                                    table cells 8 000 000 (≈ 64–128 MiB), so
                                    that the worker threads together stay
                                    within a few GiB */
} http_settings;

void http_settings_default(http_settings *s);

typedef struct http_app http_app; /* the running service (http_server.c) */

typedef struct http_ctx http_ctx;
typedef ss_status (*http_handler)(http_ctx *ctx, ss_error *err);
typedef ss_status (*http_finish)(http_ctx *ctx, void *state, ss_error *err);

typedef struct {
    const char *method;
    const char *path; /* template: "{id}", "{name}" match one segment */
    auth_role role;   /* AUTH_NONE: open */
    int json_body;    /* 1: the body must be a JSON object */
    http_handler handler;
} http_route;

extern const http_route http_routes[];
extern const size_t http_route_count;

/* The route for (method, path): the match, or NULL with *allowed set to
 * the comma-separated methods of a path that exists (405) or "" (404).
 * The {...} segment, if any, is copied into id (at most cap−1 bytes). */
const http_route *http_route_match(const char *method, const char *path,
                                   char *id, size_t cap, char *allowed,
                                   size_t allowed_cap);

/* One request as the handler sees it. */
struct http_ctx {
    http_app *app;
    struct MHD_Connection *conn;
    const http_route *route;
    const char *method;
    const char *path;
    char id[256];     /* the {id} or {name} segment of the path */
    const char *body; /* raw body (NUL-terminated), len body_len */
    size_t body_len;
    json_t *json; /* parsed body for json_body routes */
    auth_role role;
    /* the answer */
    unsigned status;
    json_t *doc; /* JSON document (reference owned) */
    char *text;  /* or a text body (malloc'd) */
    size_t text_len;
    const char *content_type; /* for text */
    char location[128];
    int replayed; /* Idempotent-Replayed: true */
    /* a deferred answer (http_defer) */
    http_finish finish;
    void *state;
    void (*release)(void *state);
};

/* Deferred answers.  A handler that waits for work another thread finishes
 * (the group commit) calls http_defer and returns SS_OK without an answer:
 * the connection is suspended at once, so the worker thread goes on
 * serving other connections instead of waiting.  Call it BEFORE handing
 * the work over.  The other thread calls http_resume(ctx) when the work is
 * over (exactly once); the pipeline then calls finish(ctx, state, err) on
 * the worker thread, which answers as a handler would.  release(state)
 * runs when the request ends, finished or not. */
void http_defer(http_ctx *ctx, http_finish finish, void *state,
                void (*release)(void *state));
void http_resume(http_ctx *ctx);

/* The caller thread's store connection (opened on first use, closed when
 * the worker thread ends).  NULL with err set when the store fails. */
store_conn *http_store_conn(http_app *app, ss_error *err);
store *http_app_store(http_app *app);
/* The group-commit writer every stored analysis goes through. */
committer *http_app_committer(http_app *app);
/* The background thread that runs reprocessing jobs (reprocess_runner.h). */
struct reprocess_runner *http_app_runner(http_app *app);
metrics *http_app_metrics(http_app *app);
const http_settings *http_app_settings(http_app *app);

/* In-flight Idempotency-Keys: 1 when key was free and is now taken, 0 when
 * another request holds it. */
int http_inflight_take(http_app *app, const char *key);
void http_inflight_release(http_app *app, const char *key);

/* A query-string parameter (NULL when absent). */
const char *http_query(http_ctx *ctx, const char *name);
/* A request header (NULL when absent). */
const char *http_header(http_ctx *ctx, const char *name);
/* A whole number from 1 to max written in decimal digits only: SS_EINVAL
 * naming `name` otherwise (*out untouched). */
ss_status http_parse_count(const char *text, const char *name, unsigned max,
                           unsigned *out, ss_error *err);
/* A query parameter that must be a whole number from 1 to 2^31 − 1:
 * *out = 0 when absent; SS_EINVAL naming the parameter otherwise. */
ss_status http_query_count(http_ctx *ctx, const char *name, unsigned *out,
                           ss_error *err);

/* Problem responses: a new application/problem+json document for err
 * (RFC 9457: type, title, status, detail, errors[{pointer, detail}]). */
json_t *http_problem_doc(const ss_error *err, unsigned *status);
/* "runs[2].energy_variance" -> "/runs/2/energy_variance" (RFC 6901). */
void http_field_pointer(const char *field, char *out, size_t cap);

/* Handlers (handlers_compute.c, handlers_analyses.c, handlers_ops.c,
 * handlers_calibrations.c, handlers_jobs.c). */
ss_status handle_predictions(http_ctx *ctx, ss_error *err);
ss_status handle_candidates(http_ctx *ctx, ss_error *err);
ss_status handle_simulations(http_ctx *ctx, ss_error *err);
ss_status handle_analyses_create(http_ctx *ctx, ss_error *err);
ss_status handle_analyses_get(http_ctx *ctx, ss_error *err);
ss_status handle_analyses_list(http_ctx *ctx, ss_error *err);
ss_status handle_analyses_revisions(http_ctx *ctx, ss_error *err);
/* handlers_calibrations.c, handlers_jobs.c */
ss_status handle_calibrations_put(http_ctx *ctx, ss_error *err);
ss_status handle_calibrations_get(http_ctx *ctx, ss_error *err);
ss_status handle_calibrations_list(http_ctx *ctx, ss_error *err);
ss_status handle_reprocessing_create(http_ctx *ctx, ss_error *err);
ss_status handle_jobs_get(http_ctx *ctx, ss_error *err);
/* handlers_pages.c: HTML pages, SVG figures, the favicon */
ss_status handle_page_index(http_ctx *ctx, ss_error *err);
ss_status handle_page_analysis(http_ctx *ctx, ss_error *err);
ss_status handle_figure(http_ctx *ctx, ss_error *err);
ss_status handle_favicon(http_ctx *ctx, ss_error *err);
ss_status handle_healthz(http_ctx *ctx, ss_error *err);
ss_status handle_metrics(http_ctx *ctx, ss_error *err);

/* Runs the service until SIGTERM or SIGINT: opens the store and the tokens,
 * starts the daemon, logs the bound address, waits, drains, closes.
 * Returns 0 on a clean shutdown. */
int http_serve(const http_settings *settings, ss_error *err);

#endif /* SWAPSPEC_HTTP_H */
