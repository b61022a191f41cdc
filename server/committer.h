/*
 * committer.h — group commit for the service's writes.
 *
 * One writer thread owns a store connection.  Handlers hand it a record
 * (with its Idempotency-Key) and wait; the writer takes everything queued
 * since its last commit and stores it in one transaction (store_put_batch:
 * one sync for the lot), then wakes each handler with its own outcome.  A
 * record is acknowledged only after the commit that holds it, so nothing
 * acknowledged is lost; throughput is no longer capped at one sync per
 * analysis.
 */
#ifndef SWAPSPEC_COMMITTER_H
#define SWAPSPEC_COMMITTER_H

#include "store.h"

typedef struct committer committer;

/* Starts the writer thread on its own connection to db.  Batches hold at
 * most max_batch records. */
ss_status committer_start(store *db, size_t max_batch, committer **out,
                          ss_error *err);
/* Commits what is queued, then stops the thread and closes its
 * connection.  Accepts NULL. */
void committer_stop(committer *c);

/* Stores rec (idem_key and fingerprint as for store_put) through the next
 * group commit; returns when that commit is done.  The outcome is the
 * record's own: SS_OK (durable), SS_ECONFLICT / SS_EINVAL (refused on its
 * own), or the batch's failure (SS_EBUSY, SS_ESTOREFULL, SS_ESTORE). */
ss_status committer_put(committer *c, const store_record *rec,
                        const char *idem_key, const char *fingerprint,
                        ss_error *err);

#endif /* SWAPSPEC_COMMITTER_H */
