/*
 * reprocess_runner.h — running reprocessing jobs: the work on one job
 * (shared by `swapspec reprocess` and the daemon) and the daemon's
 * background thread.
 *
 * A job's items are worked in seq order, a page of pending items at a time
 * (nothing is loaded whole).  Each item re-runs the stored request with the
 * item's calibration version and finishes in one store transaction
 * (store_job_item_finish): the new revision and the done mark together, so
 * a kill -9 at any moment loses nothing and duplicates nothing.  An item
 * whose latest revision already used that version is counted unchanged;
 * an analysis that cannot be re-run (the core refuses it) is counted
 * failed with the reason; store failures stop the run (the job stays
 * unfinished and resumes later).
 *
 * Ownership: a runner claims a job by compare-and-set on jobs.owner, a
 * text "PID:START" naming the process (START: its start time in clock
 * ticks since boot, from /proc/PID/stat, so that a reused pid is not taken
 * for the old owner).  A job whose owner is gone — no such process, another
 * process under that pid, or no heartbeat for 10 minutes — may be claimed
 * by anyone; this is how a job resumes after kill -9.  Processes in other
 * pid namespaces look gone; a second runner then only repeats work, since
 * an item is written once (the claim is re-checked in every item's
 * transaction).
 */
#ifndef SWAPSPEC_REPROCESS_RUNNER_H
#define SWAPSPEC_REPROCESS_RUNNER_H

#include <jansson.h>

#include "store.h"

/* This process as a job owner, "PID:START". */
void reprocess_owner_self(char out[48]);
/* 0 when the owner text names no live process on this host (or its
 * heartbeat, record form, is older than 10 minutes); 1 otherwise. */
int reprocess_owner_alive(const char *owner, const char *heartbeat_at);

typedef struct {
    ss_budget budget;
    /* polled between items; non-zero stops the run */
    int (*should_stop)(void *ctx);
    /* after every item (job holds the counts so far); may be NULL */
    void (*progress)(void *ctx, const store_job *job);
    void *ctx;
} reprocess_options;

/* Works job `id`, which `me` must hold (store_job_claim), until no item is
 * pending or should_stop says so.  *finished = 1 when the job was finished
 * (state done or failed; *job holds its final row), 0 when it stopped
 * early (the job is released for a later run).  A store failure is
 * returned (the job is released when the store allows). */
ss_status reprocess_job_run(store_conn *c, const char *id, const char *me,
                            const reprocess_options *o, store_job *job,
                            int *finished, ss_error *err);

/* Claims job for me when it has no owner or its owner is gone; *claimed
 * tells. */
ss_status reprocess_job_take(store_conn *c, const store_job *job,
                             const char *me, int *claimed, ss_error *err);

/* The daemon's runner: one thread with its own store connection (bulk
 * mode, see store_conn_set_bulk) that works unfinished jobs oldest first.
 * It looks for work when woken (POST /v1/reprocessing) and every 5
 * seconds, so it also resumes, at start-up, the jobs a previous process
 * left unfinished. */
typedef struct reprocess_runner reprocess_runner;

ss_status reprocess_runner_start(store *db, const ss_budget *budget,
                                 reprocess_runner **out, ss_error *err);
/* Asks the thread to look for work now.  Accepts NULL. */
void reprocess_runner_wake(reprocess_runner *r);
/* Asks the thread to stop after its current item (non-blocking). */
void reprocess_runner_request_stop(reprocess_runner *r);
/* Stops the thread (after its current item; the job it held is released
 * and resumes at the next start) and frees it.  Accepts NULL. */
void reprocess_runner_stop(reprocess_runner *r);

/* The job document (reprocess_doc.c), shared by GET /v1/jobs/{id} and the
 * summary of `swapspec reprocess`:
 *   {"id", "state", "origin", "created_at", "parameters": {"calibration",
 *    "version"?, "since"?, "until"?, "label"?}, "total", "done",
 *    "revised", "unchanged", "failed", "started_at", "finished_at",
 *    "errors": [{"analysis_id", "detail"}, ...]}
 * done = revised + unchanged + failed; started_at and finished_at are null
 * until they happen; errors lists the first REPROCESS_ERRORS_MAX failed
 * items in job order.  A new document, or NULL with err set. */
#define REPROCESS_ERRORS_MAX 100
json_t *reprocess_job_doc(store_conn *c, const store_job *job, ss_error *err);

#endif /* SWAPSPEC_REPROCESS_RUNNER_H */
