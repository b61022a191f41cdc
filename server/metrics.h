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

/* Writes the exposition text (malloc'd, caller frees) with the gauge
 * swapspec_analyses_stored = stored (negative: omitted). */
char *metrics_render(metrics *m, int64_t stored, size_t *len);

#endif /* SWAPSPEC_METRICS_H */
