/*
 * metrics.h — request counters and latency histograms for /metrics, in the
 * Prometheus text exposition format 0.0.4.  Routes are the fixed templates
 * of the route table (never raw paths or ids), so label values stay
 * bounded.  Thread-safe (one mutex; updates are a few additions).
 */
#ifndef SWAPSPEC_METRICS_H
#define SWAPSPEC_METRICS_H

#include <stddef.h>
#include <stdint.h>

typedef struct metrics metrics;

metrics *metrics_alloc(void);
void metrics_free(metrics *m); /* accepts NULL */

/* Records one finished request: route template ("/v1/analyses/{id}", or
 * "unmatched"), HTTP status, duration in seconds. */
void metrics_observe(metrics *m, const char *route, unsigned status,
                     double seconds);
void metrics_store_error(metrics *m);

/* What the store reports at scrape time; a negative value is omitted. */
typedef struct {
    int64_t stored; /* swapspec_analyses_stored */
    /* swapspec_store_checkpoints_total{outcome="passed"|"failed"} and
     * swapspec_store_log_restarts_total: the background checkpoints */
    int64_t checkpoints_passed, checkpoints_failed, log_restarts;
} metrics_store_view;

/* Writes the exposition text (malloc'd, caller frees). */
char *metrics_render(metrics *m, const metrics_store_view *store, size_t *len);

#endif /* SWAPSPEC_METRICS_H */
