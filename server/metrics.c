/*
 * metrics.c — counters by (route, status), a latency histogram per route,
 * and the store error counter, rendered in the Prometheus text format 0.0.4
 * (HELP and TYPE before the samples, cumulative `le` buckets ending in
 * +Inf equal to _count, then _sum and _count).  Owns its tables.
 */
#include "metrics.h"

#include <pthread.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define METRICS_ROUTES 32
#define METRICS_STATUSES 24

static const double metrics_bounds[] = {0.001, 0.0025, 0.005, 0.01, 0.025,
                                        0.05,  0.1,    0.25,  0.5,  1.0,
                                        2.5,   5.0,    10.0};
#define METRICS_BUCKETS (sizeof metrics_bounds / sizeof metrics_bounds[0])

typedef struct {
    char route[64];
    unsigned status[METRICS_STATUSES];
    uint64_t count[METRICS_STATUSES];
    size_t nstatus;
    uint64_t bucket[METRICS_BUCKETS]; /* non-cumulative here */
    uint64_t total;
    double sum;
} metrics_route;

struct metrics {
    pthread_mutex_t lock;
    metrics_route routes[METRICS_ROUTES];
    size_t nroutes;
    uint64_t store_errors;
};

metrics *metrics_alloc(void) {
    metrics *m = calloc(1, sizeof *m);
    if (m != NULL)
        pthread_mutex_init(&m->lock, NULL);
    return m;
}

void metrics_free(metrics *m) {
    if (m == NULL)
        return;
    pthread_mutex_destroy(&m->lock);
    free(m);
}

static metrics_route *metrics_route_of(metrics *m, const char *route) {
    for (size_t i = 0; i < m->nroutes; i++)
        if (strcmp(m->routes[i].route, route) == 0)
            return &m->routes[i];
    if (m->nroutes == METRICS_ROUTES)
        return NULL;
    metrics_route *r = &m->routes[m->nroutes++];
    snprintf(r->route, sizeof r->route, "%s", route);
    return r;
}

void metrics_observe(metrics *m, const char *route, unsigned status,
                     double seconds) {
    if (m == NULL)
        return;
    pthread_mutex_lock(&m->lock);
    metrics_route *r = metrics_route_of(m, route);
    if (r != NULL) {
        size_t k = 0;
        while (k < r->nstatus && r->status[k] != status)
            k++;
        if (k == r->nstatus && r->nstatus < METRICS_STATUSES)
            r->status[r->nstatus++] = status;
        if (k < r->nstatus)
            r->count[k]++;
        size_t b = 0;
        while (b < METRICS_BUCKETS && seconds > metrics_bounds[b])
            b++;
        if (b < METRICS_BUCKETS)
            r->bucket[b]++;
        r->total++;
        r->sum += seconds;
    }
    pthread_mutex_unlock(&m->lock);
}

void metrics_store_error(metrics *m) {
    if (m == NULL)
        return;
    pthread_mutex_lock(&m->lock);
    m->store_errors++;
    pthread_mutex_unlock(&m->lock);
}

/* A growing text buffer. */
typedef struct {
    char *buf;
    size_t len, cap;
    int failed;
} metrics_text;

static void metrics_printf(metrics_text *t, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static void metrics_printf(metrics_text *t, const char *fmt, ...) {
    if (t->failed)
        return;
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        int n = vsnprintf(t->buf + t->len, t->cap - t->len, fmt, ap);
        va_end(ap);
        if (n < 0) {
            t->failed = 1;
            return;
        }
        if ((size_t)n < t->cap - t->len) {
            t->len += (size_t)n;
            return;
        }
        size_t cap = t->cap * 2 + (size_t)n;
        char *grown = realloc(t->buf, cap);
        if (grown == NULL) {
            t->failed = 1;
            return;
        }
        t->buf = grown;
        t->cap = cap;
    }
}

char *metrics_render(metrics *m, const metrics_store_view *store, size_t *len) {
    metrics_text t = {malloc(4096), 0, 4096, 0};
    if (t.buf == NULL)
        return NULL;
    pthread_mutex_lock(&m->lock);
    metrics_printf(&t, "# HELP swapspec_http_requests_total HTTP requests "
                       "answered, by route template and status.\n"
                       "# TYPE swapspec_http_requests_total counter\n");
    for (size_t i = 0; i < m->nroutes; i++)
        for (size_t k = 0; k < m->routes[i].nstatus; k++)
            metrics_printf(&t,
                           "swapspec_http_requests_total{route=\"%s\","
                           "status=\"%u\"} %llu\n",
                           m->routes[i].route, m->routes[i].status[k],
                           (unsigned long long)m->routes[i].count[k]);
    metrics_printf(&t, "# HELP swapspec_http_request_duration_seconds Time "
                       "from the first byte of a request to its response "
                       "being queued.\n"
                       "# TYPE swapspec_http_request_duration_seconds "
                       "histogram\n");
    for (size_t i = 0; i < m->nroutes; i++) {
        const metrics_route *r = &m->routes[i];
        uint64_t cum = 0;
        for (size_t b = 0; b < METRICS_BUCKETS; b++) {
            cum += r->bucket[b];
            metrics_printf(&t,
                           "swapspec_http_request_duration_seconds_bucket{"
                           "route=\"%s\",le=\"%g\"} %llu\n",
                           r->route, metrics_bounds[b],
                           (unsigned long long)cum);
        }
        metrics_printf(&t,
                       "swapspec_http_request_duration_seconds_bucket{route="
                       "\"%s\",le=\"+Inf\"} %llu\n"
                       "swapspec_http_request_duration_seconds_sum{route="
                       "\"%s\"} %.9g\n"
                       "swapspec_http_request_duration_seconds_count{route="
                       "\"%s\"} %llu\n",
                       r->route, (unsigned long long)r->total, r->route, r->sum,
                       r->route, (unsigned long long)r->total);
    }
    metrics_printf(&t,
                   "# HELP swapspec_store_errors_total Store operations "
                   "that failed (busy, full, I/O).\n"
                   "# TYPE swapspec_store_errors_total counter\n"
                   "swapspec_store_errors_total %llu\n",
                   (unsigned long long)m->store_errors);
    pthread_mutex_unlock(&m->lock);
    if (store->stored >= 0)
        metrics_printf(&t,
                       "# HELP swapspec_analyses_stored Analyses held in "
                       "the store.\n"
                       "# TYPE swapspec_analyses_stored gauge\n"
                       "swapspec_analyses_stored %lld\n",
                       (long long)store->stored);
    if (store->checkpoints_passed >= 0 && store->checkpoints_failed >= 0)
        metrics_printf(&t,
                       "# HELP swapspec_store_checkpoints_total Background "
                       "copies of the write-ahead log into the database "
                       "file, by outcome.\n"
                       "# TYPE swapspec_store_checkpoints_total counter\n"
                       "swapspec_store_checkpoints_total{outcome=\"passed\"} "
                       "%lld\n"
                       "swapspec_store_checkpoints_total{outcome=\"failed\"} "
                       "%lld\n",
                       (long long)store->checkpoints_passed,
                       (long long)store->checkpoints_failed);
    if (store->log_restarts >= 0)
        metrics_printf(&t,
                       "# HELP swapspec_store_log_restarts_total Times the "
                       "write-ahead log was started again from its "
                       "beginning after a checkpoint.\n"
                       "# TYPE swapspec_store_log_restarts_total counter\n"
                       "swapspec_store_log_restarts_total %lld\n",
                       (long long)store->log_restarts);
    if (t.failed) {
        free(t.buf);
        return NULL;
    }
    *len = t.len;
    return t.buf;
}
