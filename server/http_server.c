/*
 * http_server.c — the daemon: libmicrohttpd with an internal thread pool on
 * epoll, the per-request pipeline (body cap → route → role → media type →
 * strict JSON → handler → response → log line and metrics), per-thread
 * store connections, in-flight Idempotency-Keys, the reprocessing runner
 * thread (reprocess_runner.h), and graceful shutdown on SIGTERM/SIGINT (the
 * runner stops after its current item; quiesce, drain with a deadline,
 * stop, close the store).
 *
 * Owns the http_app (store, tokens, metrics, settings, runner) for the life
 * of http_serve, and each request's http_request until MHD's completion
 * callback frees it.  Follows the 0.9.75 rules: a response is queued only
 * on the first call or the last one.  A Content-Length over the cap is
 * decided on the first call and answered 413 at once for clients waiting
 * for 100 Continue and for bodies over HTTP_DRAIN_LIMIT, else on the last
 * call after the body was read and dropped.
 */
#define _GNU_SOURCE /* SCHED_BATCH in <sched.h> */
#include <arpa/inet.h>
#include <errno.h>
#include <microhttpd.h>
#include <pthread.h>
#include <sched.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>
#include <unistd.h>

#include "http.h"
#include "json_text.h"
#include "log_line.h"
#include "reprocess_runner.h"

#define HTTP_INFLIGHT_MAX 1024

struct http_app {
    http_settings settings;
    store *db;
    committer *writer;
    reprocess_runner *runner;
    auth_tokens *tokens;
    metrics *stats;
    pthread_key_t conn_key;
    pthread_mutex_t inflight_lock;
    char *inflight[HTTP_INFLIGHT_MAX];
};

/* A body declared larger than the limit is read and dropped up to this
 * size before the 413 goes out (lingering close); larger ones, and clients
 * waiting for 100 Continue, get the 413 at once. */
#define HTTP_DRAIN_LIMIT (16ull * 1024 * 1024)

/* Per-request state, freed in the completion callback. */
typedef struct {
    struct timespec start;
    char *body;
    size_t len, cap;
    int too_big;
    int answered; /* a response was queued on the first call */
    unsigned status;
    size_t bytes_out;
    const char *route; /* template, for logs and metrics */
    char method[16];
    char path[256];
    http_ctx ctx; /* the handler's view; lives as long as the request, so
                     that a deferred answer can finish after a suspension */
} http_request;

void http_settings_default(http_settings *s) {
    memset(s, 0, sizeof *s);
    snprintf(s->listen_host, sizeof s->listen_host, "127.0.0.1");
    s->listen_port = 8080;
    snprintf(s->data_path, sizeof s->data_path, "./var/swapspec.db");
    s->threads = 16;
    s->body_limit = 1u << 20;
    s->connection_timeout = 30;
    s->connection_limit = 256;
    s->per_ip_limit = 64;
    s->connection_memory = 64u * 1024u;
    s->drain_seconds = 10;
    s->simulation_shots = 100000;
    s->budget.max_diagrams = 1000000;
    s->budget.max_table_cells = 8000000;
    s->budget.max_work = 1000000000u; /* about 2.3 s of likelihood */
    s->budget.max_seconds = 20;       /* and never more than 20 s */
}

store *http_app_store(http_app *app) { return app->db; }
committer *http_app_committer(http_app *app) { return app->writer; }
reprocess_runner *http_app_runner(http_app *app) { return app->runner; }
metrics *http_app_metrics(http_app *app) { return app->stats; }
const http_settings *http_app_settings(http_app *app) { return &app->settings; }

static void http_conn_destroy(void *c) { store_conn_close(c); }

store_conn *http_store_conn(http_app *app, ss_error *err) {
    store_conn *c = pthread_getspecific(app->conn_key);
    if (c != NULL)
        return c;
    if (store_conn_open(app->db, &c, err) != SS_OK) {
        metrics_store_error(app->stats);
        return NULL;
    }
    pthread_setspecific(app->conn_key, c);
    return c;
}

int http_inflight_take(http_app *app, const char *key) {
    int free_slot = -1, taken = 0;
    pthread_mutex_lock(&app->inflight_lock);
    for (int i = 0; i < HTTP_INFLIGHT_MAX; i++) {
        if (app->inflight[i] == NULL) {
            if (free_slot < 0)
                free_slot = i;
        } else if (strcmp(app->inflight[i], key) == 0) {
            taken = 1;
        }
    }
    int ok = !taken && free_slot >= 0 &&
             (app->inflight[free_slot] = strdup(key)) != NULL;
    pthread_mutex_unlock(&app->inflight_lock);
    return ok;
}

void http_inflight_release(http_app *app, const char *key) {
    pthread_mutex_lock(&app->inflight_lock);
    for (int i = 0; i < HTTP_INFLIGHT_MAX; i++)
        if (app->inflight[i] != NULL && strcmp(app->inflight[i], key) == 0) {
            free(app->inflight[i]);
            app->inflight[i] = NULL;
            break;
        }
    pthread_mutex_unlock(&app->inflight_lock);
}

const char *http_query(http_ctx *ctx, const char *name) {
    return MHD_lookup_connection_value(ctx->conn, MHD_GET_ARGUMENT_KIND, name);
}

const char *http_header(http_ctx *ctx, const char *name) {
    return MHD_lookup_connection_value(ctx->conn, MHD_HEADER_KIND, name);
}

/* A whole-number query parameter from 1 to 2^31 − 1; 0 when absent. */
ss_status http_parse_count(const char *text, const char *name, unsigned max,
                           unsigned *out, ss_error *err) {
    char *end = NULL;
    unsigned long x = strtoul(text, &end, 10);
    if (text[0] < '0' || text[0] > '9' || *end != '\0' || x < 1 || x > max ||
        strlen(text) > 10)
        return ss_error_set(err, SS_EINVAL, name,
                            "%s must be a whole number from 1 to %u", name,
                            max);
    *out = (unsigned)x;
    return SS_OK;
}

ss_status http_query_count(http_ctx *ctx, const char *name, unsigned *out,
                           ss_error *err) {
    const char *v = http_query(ctx, name);
    *out = 0;
    return v == NULL ? SS_OK : http_parse_count(v, name, 2147483647u, out, err);
}

static double http_elapsed(const struct timespec *start) {
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)(now.tv_sec - start->tv_sec) +
           1e-9 * (double)(now.tv_nsec - start->tv_nsec);
}

/* Queues a response; returns MHD's verdict.  Takes doc or text. */
static enum MHD_Result http_send(struct MHD_Connection *conn, http_request *req,
                                 unsigned status, json_t *doc, int problem,
                                 char *text, size_t text_len,
                                 const char *content_type, const http_ctx *ctx,
                                 const char *allow) {
    char *body = text;
    size_t len = text_len;
    if (doc != NULL) {
        body = json_text_dump(doc, &len); /* = json_dumps, faster */
        len = body ? len : 0;
        json_decref(doc);
        content_type =
            problem ? "application/problem+json" : "application/json";
    }
    if (body == NULL) {
        body = strdup("");
        len = 0;
        status = 500;
    }
    struct MHD_Response *resp =
        MHD_create_response_from_buffer(len, body, MHD_RESPMEM_MUST_FREE);
    if (resp == NULL) {
        free(body);
        return MHD_NO;
    }
    MHD_add_response_header(resp, MHD_HTTP_HEADER_CONTENT_TYPE,
                            content_type ? content_type : "text/plain");
    MHD_add_response_header(resp, "Cache-Control", "no-store");
    MHD_add_response_header(resp, "X-Content-Type-Options", "nosniff");
    if (status == 401)
        MHD_add_response_header(resp, MHD_HTTP_HEADER_WWW_AUTHENTICATE,
                                "Bearer realm=\"swapspec\"");
    if (status == 503)
        MHD_add_response_header(resp, MHD_HTTP_HEADER_RETRY_AFTER, "1");
    if (allow != NULL && allow[0])
        MHD_add_response_header(resp, MHD_HTTP_HEADER_ALLOW, allow);
    if (ctx != NULL && ctx->location[0])
        MHD_add_response_header(resp, MHD_HTTP_HEADER_LOCATION, ctx->location);
    if (ctx != NULL && ctx->replayed)
        MHD_add_response_header(resp, "Idempotent-Replayed", "true");
    enum MHD_Result r = MHD_queue_response(conn, status, resp);
    MHD_destroy_response(resp);
    req->status = status;
    req->bytes_out = len;
    return r;
}

static enum MHD_Result http_send_problem(struct MHD_Connection *conn,
                                         http_request *req, const ss_error *err,
                                         const char *allow) {
    unsigned status = 500;
    json_t *doc = http_problem_doc(err, &status);
    return http_send(conn, req, status, doc, 1, NULL, 0, NULL, NULL, allow);
}

/* 1 when the Content-Type is application/json (parameters allowed). */
static int http_is_json(const char *ct) {
    if (ct == NULL)
        return 0;
    size_t n = strcspn(ct, ";");
    while (n > 0 && (ct[n - 1] == ' ' || ct[n - 1] == '\t'))
        n--;
    return n == 16 && strncasecmp(ct, "application/json", 16) == 0;
}

static void http_log_event(const char *event, json_t *fields);

/* A store failure: counted, logged whole for the operator (file, SQLite's
 * words and code), and told to the client without the server's paths or
 * internals (RFC 9457 §5), with what to do. */
static void http_store_failed(http_app *app, const http_request *req,
                              ss_error *err) {
    metrics_store_error(app->stats);
    http_log_event("store-error", json_pack("{s:s,s:s,s:s,s:s}", "method",
                                            req->method, "route", req->route,
                                            "code", ss_status_name(err->code),
                                            "detail", err->message));
    const char *what =
        err->code == SS_ESTOREFULL ? "the store has no space left"
        : err->code == SS_EBUSY    ? "the store is busy with another writer"
                                   : "the store failed";
    ss_error told; /* ss_error_set keeps the first error: a new one */
    ss_error_clear(&told);
    ss_error_set(&told, err->code, err->field,
                 "%s; the request was not carried out and nothing was "
                 "stored: retry later (an Idempotency-Key makes the retry "
                 "safe); the service log has the details",
                 what);
    *err = told;
}

/* The answer once the handler (or its deferred finish) is over. */
static enum MHD_Result http_answer(http_app *app, struct MHD_Connection *conn,
                                   http_request *req, ss_status st,
                                   ss_error *err) {
    http_ctx *ctx = &req->ctx;
    if (st != SS_OK) {
        json_decref(ctx->doc);
        free(ctx->text);
        ctx->doc = NULL;
        ctx->text = NULL;
        if (err->code == SS_OK)
            ss_error_set(err, st, "", NULL);
        if (st == SS_EBUSY || st == SS_ESTORE || st == SS_ESTOREFULL)
            http_store_failed(app, req, err);
        return http_send_problem(conn, req, err, NULL);
    }
    char *text = ctx->text;
    json_t *doc = ctx->doc;
    ctx->text = NULL; /* http_send takes them */
    ctx->doc = NULL;
    return http_send(conn, req, ctx->status ? ctx->status : 200, doc, 0, text,
                     ctx->text_len, ctx->content_type, ctx, NULL);
}

void http_defer(http_ctx *ctx, http_finish finish, void *state,
                void (*release)(void *state)) {
    ctx->finish = finish;
    ctx->state = state;
    ctx->release = release;
    MHD_suspend_connection(ctx->conn);
}

void http_resume(http_ctx *ctx) { MHD_resume_connection(ctx->conn); }

/* The whole pipeline for a complete request. */
static enum MHD_Result http_pipeline(http_app *app, struct MHD_Connection *conn,
                                     http_request *req) {
    ss_error err;
    ss_error_clear(&err);
    http_ctx *ctx = &req->ctx;
    if (ctx->finish != NULL) { /* resumed after a deferral */
        http_finish finish = ctx->finish;
        ctx->finish = NULL;
        ss_status st = finish(ctx, ctx->state, &err);
        return http_answer(app, conn, req, st, &err);
    }
    memset(ctx, 0, sizeof *ctx);
    ctx->app = app;
    ctx->conn = conn;
    ctx->method = req->method;
    ctx->path = req->path;
    ctx->body = req->body ? req->body : "";
    ctx->body_len = req->len;
    char allowed[64];
    ctx->route = http_route_match(req->method, req->path, ctx->id,
                                  sizeof ctx->id, allowed, sizeof allowed);
    if (ctx->route == NULL) {
        if (allowed[0]) {
            ss_error_set(&err, SS_EMETHOD, "",
                         "%s is not allowed on %s; use %s", req->method,
                         req->path, allowed);
            req->route = "unmatched";
            return http_send_problem(conn, req, &err, allowed);
        }
        ss_error_set(&err, SS_ENOTFOUND, "", "no route for %s %s", req->method,
                     req->path);
        req->route = "unmatched";
        return http_send_problem(conn, req, &err, NULL);
    }
    req->route = ctx->route->path;
    ctx->role = auth_check(app->tokens, http_header(ctx, "Authorization"));
    if (ctx->route->role != AUTH_NONE && ctx->role == AUTH_NONE) {
        ss_error_set(&err, SS_EUNAUTHORIZED, "",
                     "this route needs a bearer token with role %s or above",
                     auth_role_name(ctx->route->role));
        return http_send_problem(conn, req, &err, NULL);
    }
    if (ctx->route->role > ctx->role) {
        ss_error_set(&err, SS_EFORBIDDEN, "",
                     "the token's role (%s) does not allow %s %s (needs %s)",
                     auth_role_name(ctx->role), req->method, ctx->route->path,
                     auth_role_name(ctx->route->role));
        return http_send_problem(conn, req, &err, NULL);
    }
    if (req->too_big) {
        ss_error_set(&err, SS_ETOOLARGE, "",
                     "the body is larger than the limit of %zu bytes",
                     app->settings.body_limit);
        return http_send_problem(conn, req, &err, NULL);
    }
    if (ctx->route->json_body) {
        if (!http_is_json(http_header(ctx, MHD_HTTP_HEADER_CONTENT_TYPE))) {
            ss_error_set(&err, SS_EMEDIATYPE, "",
                         "send the body as application/json");
            return http_send_problem(conn, req, &err, NULL);
        }
        json_error_t jerr;
        ctx->json =
            json_loadb(ctx->body, ctx->body_len, JSON_REJECT_DUPLICATES, &jerr);
        if (ctx->json == NULL) {
            ss_error_set(&err, SS_EMALFORMED, "",
                         "the body is not valid JSON: %s (line %d, column "
                         "%d)",
                         jerr.text, jerr.line, jerr.column);
            return http_send_problem(conn, req, &err, NULL);
        }
    }
    ss_status st = ctx->route->handler(ctx, &err);
    json_decref(ctx->json);
    ctx->json = NULL;
    if (st == SS_OK && ctx->finish != NULL)
        return MHD_YES; /* suspended: the answer comes after http_resume */
    return http_answer(app, conn, req, st, &err);
}

static enum MHD_Result http_access(void *cls, struct MHD_Connection *conn,
                                   const char *url, const char *method,
                                   const char *version, const char *upload_data,
                                   size_t *upload_data_size, void **con_cls) {
    (void)version;
    http_app *app = cls;
    http_request *req = *con_cls;
    if (req == NULL) { /* headers are in: set up, decide early on size */
        req = calloc(1, sizeof *req);
        if (req == NULL)
            return MHD_NO;
        clock_gettime(CLOCK_MONOTONIC, &req->start);
        snprintf(req->method, sizeof req->method, "%s", method);
        snprintf(req->path, sizeof req->path, "%s", url);
        req->route = "unmatched";
        *con_cls = req;
        const char *cl = MHD_lookup_connection_value(
            conn, MHD_HEADER_KIND, MHD_HTTP_HEADER_CONTENT_LENGTH);
        unsigned long long declared = cl ? strtoull(cl, NULL, 10) : 0;
        const char *expect = MHD_lookup_connection_value(
            conn, MHD_HEADER_KIND, MHD_HTTP_HEADER_EXPECT);
        if (declared > app->settings.body_limit &&
            declared <= HTTP_DRAIN_LIMIT &&
            (expect == NULL || strcasecmp(expect, "100-continue") != 0)) {
            /* decided now, answered once the body has been read and
             * dropped: a client that sent it whole would otherwise see the
             * connection reset before it reads the 413 */
            req->too_big = 1;
            return MHD_YES;
        }
        if (cl != NULL && declared > app->settings.body_limit) {
            char ignored[256], allowed[64];
            const http_route *r = http_route_match(
                method, url, ignored, sizeof ignored, allowed, sizeof allowed);
            req->route = r ? r->path : "unmatched";
            ss_error err;
            ss_error_clear(&err);
            ss_error_set(&err, SS_ETOOLARGE, "",
                         "the body (%s bytes) is larger than the limit of %zu "
                         "bytes",
                         cl, app->settings.body_limit);
            req->answered = 1;
            return http_send_problem(conn, req, &err, NULL);
        }
        return MHD_YES;
    }
    if (*upload_data_size > 0) { /* a chunk of the body */
        size_t n = *upload_data_size;
        *upload_data_size = 0;
        if (req->answered || req->too_big)
            return MHD_YES;
        if (req->len + n > app->settings.body_limit) {
            req->too_big = 1;
            free(req->body);
            req->body = NULL;
            req->len = 0;
            return MHD_YES;
        }
        if (req->len + n + 1 > req->cap) {
            size_t cap = (req->len + n + 1) * 2;
            if (cap > app->settings.body_limit + 1)
                cap = app->settings.body_limit + 1;
            char *grown = realloc(req->body, cap);
            if (grown == NULL)
                return MHD_NO;
            req->body = grown;
            req->cap = cap;
        }
        memcpy(req->body + req->len, upload_data, n);
        req->len += n;
        req->body[req->len] = '\0';
        return MHD_YES;
    }
    if (req->answered)
        return MHD_YES;
    return http_pipeline(app, conn, req);
}

static void http_completed(void *cls, struct MHD_Connection *conn,
                           void **con_cls, enum MHD_RequestTerminationCode tc) {
    (void)conn;
    http_app *app = cls;
    http_request *req = *con_cls;
    if (req == NULL)
        return;
    double secs = http_elapsed(&req->start);
    if (req->status != 0)
        metrics_observe(app->stats, req->route, req->status, secs);
    /* one JSON line per request; the path holds no token, the query string
     * is not logged */
    json_t *line =
        json_pack("{s:s,s:s,s:s,s:i,s:f,s:I,s:I,s:b}", "event", "request",
                  "method", req->method, "route", req->route, "status",
                  (int)req->status, "duration_ms", secs * 1e3, "bytes_in",
                  (json_int_t)req->len, "bytes_out", (json_int_t)req->bytes_out,
                  "completed", tc == MHD_REQUEST_TERMINATED_COMPLETED_OK);
    log_line(line);
    if (req->ctx.release != NULL)
        req->ctx.release(req->ctx.state);
    json_decref(req->ctx.doc);
    free(req->ctx.text);
    free(req->body);
    free(req);
    *con_cls = NULL;
}

static void http_log_event(const char *event, json_t *fields) {
    json_t *line = fields ? fields : json_object();
    json_object_set_new(line, "event", json_string(event));
    log_line(line);
}

static char *http_read_file(const char *path, ss_error *err,
                            const char *field) {
    FILE *f = fopen(path, "rb");
    if (f == NULL) {
        ss_error_set(err, SS_ENOTFOUND, field, "cannot read '%s'", path);
        return NULL;
    }
    size_t cap = 1 << 16, len = 0;
    char *buf = malloc(cap + 1);
    if (buf != NULL)
        len = fread(buf, 1, cap, f);
    fclose(f);
    if (buf == NULL || len == cap) {
        free(buf);
        ss_error_set(err, SS_EINVAL, field, "'%s' is missing or too large",
                     path);
        return NULL;
    }
    buf[len] = '\0';
    return buf;
}

/* The calling thread's scheduling policy: SCHED_BATCH (on) or SCHED_OTHER
 * (off); threads it creates inherit it.  The worker threads run under
 * SCHED_BATCH (sched(7): Linux does not let a woken batch thread preempt
 * the running one), so that the group-commit writer — the one serial stage
 * of every stored analysis — is not preempted by each worker it wakes when
 * it resumes the connections of a commit.  Measured under the load script
 * (64 connections, 2 cores): the writer spent 0.57–0.84 ms per commit of
 * ~30 records resuming connections with the default policy, 0.10 ms with
 * this one.  An unprivileged thread may switch between the two; where it
 * cannot, the default policy stays, which only costs speed. */
static void http_batch_policy(int on) {
#ifdef SCHED_BATCH
    struct sched_param none;
    memset(&none, 0, sizeof none);
    (void)pthread_setschedparam(pthread_self(), on ? SCHED_BATCH : SCHED_OTHER,
                                &none);
#else
    (void)on;
#endif
}

static int http_is_loopback(const char *host) {
    return strcmp(host, "127.0.0.1") == 0 || strcmp(host, "::1") == 0 ||
           strcmp(host, "localhost") == 0 || strncmp(host, "127.", 4) == 0;
}

int http_serve(const http_settings *settings, ss_error *err) {
    http_app *app = calloc(1, sizeof *app);
    if (app == NULL) {
        ss_error_set(err, SS_ENOMEM, "", NULL);
        return 1;
    }
    app->settings = *settings;
    pthread_mutex_init(&app->inflight_lock, NULL);
    pthread_key_create(&app->conn_key, http_conn_destroy);
    app->stats = metrics_alloc();
    struct MHD_Daemon *d = NULL;
    char *cert = NULL, *key = NULL;
    int rc = 1;
    if (settings->tokens_path[0] == '\0' &&
        !http_is_loopback(settings->listen_host)) {
        ss_error_set(err, SS_EINVAL, "listen",
                     "refusing to listen on %s without a tokens file: "
                     "without access control the service only listens on "
                     "loopback (give --tokens FILE)",
                     settings->listen_host);
        goto done;
    }
    if (settings->tokens_path[0] &&
        auth_tokens_load(settings->tokens_path, &app->tokens, err) != SS_OK)
        goto done;
    store_options so = {2000};
    if (store_open(settings->data_path, &so, &app->db, err) != SS_OK ||
        committer_start(app->db, 256, &app->writer, err) != SS_OK ||
        reprocess_runner_start(app->db, &settings->budget, &app->runner, err) !=
            SS_OK)
        goto done;

    struct sockaddr_in addr;
    memset(&addr, 0, sizeof addr);
    addr.sin_family = AF_INET;
    addr.sin_port = htons((uint16_t)settings->listen_port);
    const char *host = strcmp(settings->listen_host, "localhost") == 0
                           ? "127.0.0.1"
                           : settings->listen_host;
    if (inet_pton(AF_INET, host, &addr.sin_addr) != 1) {
        ss_error_set(err, SS_EINVAL, "listen", "'%s' is not an IPv4 address",
                     settings->listen_host);
        goto done;
    }
    unsigned flags = MHD_USE_INTERNAL_POLLING_THREAD | MHD_USE_EPOLL |
                     MHD_USE_ITC | MHD_ALLOW_SUSPEND_RESUME | MHD_USE_ERROR_LOG;
    int tls = settings->tls_cert[0] != '\0';
    if (tls) {
        if (MHD_is_feature_supported(MHD_FEATURE_TLS) != MHD_YES) {
            ss_error_set(err, SS_EINVAL, "tls_cert",
                         "this libmicrohttpd has no TLS support");
            goto done;
        }
        cert = http_read_file(settings->tls_cert, err, "tls_cert");
        key = cert ? http_read_file(settings->tls_key, err, "tls_key") : NULL;
        if (key == NULL)
            goto done;
        flags |= MHD_USE_TLS;
    }
    /* worker threads inherit this mask: only the main thread takes
     * SIGTERM/SIGINT (sigwait below) */
    /* a process started in the background may inherit SIGINT as ignored;
     * an ignored signal is discarded, never left pending for sigwait */
    signal(SIGINT, SIG_DFL);
    signal(SIGTERM, SIG_DFL);
    sigset_t sigs;
    sigemptyset(&sigs);
    sigaddset(&sigs, SIGTERM);
    sigaddset(&sigs, SIGINT);
    pthread_sigmask(SIG_BLOCK, &sigs, NULL);
    signal(SIGPIPE, SIG_IGN);
    struct MHD_OptionItem opts[16];
    size_t n = 0;
    opts[n++] = (struct MHD_OptionItem){MHD_OPTION_SOCK_ADDR, 0, &addr};
    opts[n++] = (struct MHD_OptionItem){MHD_OPTION_THREAD_POOL_SIZE,
                                        (intptr_t)settings->threads, NULL};
    opts[n++] =
        (struct MHD_OptionItem){MHD_OPTION_CONNECTION_TIMEOUT,
                                (intptr_t)settings->connection_timeout, NULL};
    opts[n++] =
        (struct MHD_OptionItem){MHD_OPTION_CONNECTION_LIMIT,
                                (intptr_t)settings->connection_limit, NULL};
    opts[n++] = (struct MHD_OptionItem){MHD_OPTION_PER_IP_CONNECTION_LIMIT,
                                        (intptr_t)settings->per_ip_limit, NULL};
    opts[n++] =
        (struct MHD_OptionItem){MHD_OPTION_CONNECTION_MEMORY_LIMIT,
                                (intptr_t)settings->connection_memory, NULL};
    opts[n++] =
        (struct MHD_OptionItem){MHD_OPTION_LISTEN_BACKLOG_SIZE, 512, NULL};
    if (tls) {
        opts[n++] = (struct MHD_OptionItem){MHD_OPTION_HTTPS_MEM_CERT, 0, cert};
        opts[n++] = (struct MHD_OptionItem){MHD_OPTION_HTTPS_MEM_KEY, 0, key};
    }
    opts[n++] = (struct MHD_OptionItem){MHD_OPTION_END, 0, NULL};
    http_batch_policy(1); /* inherited by MHD's worker threads */
    d = MHD_start_daemon(flags, 0, NULL, NULL, http_access, app,
                         MHD_OPTION_NOTIFY_COMPLETED, http_completed, app,
                         MHD_OPTION_ARRAY, opts, MHD_OPTION_END);
    http_batch_policy(0);
    if (d == NULL) {
        ss_error_set(err, SS_EUNAVAILABLE, "listen",
                     "cannot listen on %s:%u: %s", settings->listen_host,
                     settings->listen_port, strerror(errno));
        goto done;
    }
    const union MHD_DaemonInfo *info =
        MHD_get_daemon_info(d, MHD_DAEMON_INFO_BIND_PORT);
    unsigned port = info ? info->port : settings->listen_port;
    http_log_event("listening",
                   json_pack("{s:s,s:i,s:s,s:i,s:s,s:b,s:s}", "address",
                             settings->listen_host, "port", (int)port, "data",
                             settings->data_path, "threads",
                             (int)settings->threads, "access_control",
                             app->tokens ? "tokens" : "none (loopback only)",
                             "tls", tls, "version", SWAPSPEC_VERSION));
    int sig = 0;
    sigwait(&sigs, &sig);
    /* the reprocessing job stops after its current item (it resumes at the
     * next start) while the requests in flight drain */
    reprocess_runner_request_stop(app->runner);
    /* quiesce: stop accepting, let in-flight requests finish */
    MHD_socket listen_fd = MHD_quiesce_daemon(d);
    struct timespec start;
    clock_gettime(CLOCK_MONOTONIC, &start);
    unsigned left = 0;
    for (;;) {
        info = MHD_get_daemon_info(d, MHD_DAEMON_INFO_CURRENT_CONNECTIONS);
        left = info ? info->num_connections : 0;
        if (left == 0 || http_elapsed(&start) > settings->drain_seconds)
            break;
        struct timespec nap = {0, 20 * 1000 * 1000};
        nanosleep(&nap, NULL);
    }
    /* connections still suspended for a commit are resumed by the drain
     * (stopping MHD with one suspended is not allowed); requests still
     * computing get 503 when they hand their record over */
    committer_drain(app->writer);
    MHD_stop_daemon(d);
    d = NULL;
    if (listen_fd != MHD_INVALID_SOCKET)
        close(listen_fd);
    http_log_event("shutdown",
                   json_pack("{s:s,s:i,s:f}", "signal",
                             sig == SIGTERM ? "SIGTERM" : "SIGINT",
                             "abandoned_connections", (int)left,
                             "drain_seconds", http_elapsed(&start)));
    rc = 0;
done:
    if (d != NULL)
        MHD_stop_daemon(d);
    free(cert);
    free(key);
    reprocess_runner_stop(app->runner);
    committer_stop(app->writer); /* after the workers: nothing is queued */
    store_close(app->db);
    auth_tokens_free(app->tokens);
    metrics_free(app->stats);
    for (int i = 0; i < HTTP_INFLIGHT_MAX; i++)
        free(app->inflight[i]);
    pthread_key_delete(app->conn_key);
    pthread_mutex_destroy(&app->inflight_lock);
    free(app);
    return rc;
}
