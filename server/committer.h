/*
 * committer.h — group commit for the service's writes.
 *
 * One writer thread owns a store connection.  A handler hands it a record
 * (with its Idempotency-Key) and returns at once; the writer takes
 * everything queued since its last commit, stores it in one transaction
 * (store_put_batch: one sync for the lot) and then tells each item's owner
 * its own outcome through the item's callback.  A record is acknowledged
 * only after the commit that holds it, so nothing acknowledged is lost;
 * throughput is not capped at one sync per analysis, and no worker thread
 * sits waiting for a sync (the HTTP connection is suspended meanwhile:
 * http_defer in http.h).
 */
#ifndef SWAPSPEC_COMMITTER_H
#define SWAPSPEC_COMMITTER_H

#include "store.h"

typedef struct committer committer;

/* One record on its way to the store.  The caller owns the item (and what
 * put.rec points to) until its done callback has been called. */
typedef struct committer_item committer_item;
typedef void (*committer_done)(committer_item *item, void *arg);
struct committer_item {
    store_put_item put; /* in: rec, idem_key, fingerprint; out: status,
                           error */
    committer_done done;
    void *arg;
    committer_item *next; /* the writer's queue */
};

/* Starts the writer thread on its own connection to db.  Batches hold at
 * most max_batch records. */
ss_status committer_start(store *db, size_t max_batch, committer **out,
                          ss_error *err);

/* Queues item (put.rec, put.idem_key and put.fingerprint as for store_put)
 * for the next group commit and returns at once.  done(item, arg) is called
 * exactly once with put.status and put.error set: on the writer thread once
 * the commit holding the item is over — SS_OK (durable), SS_ECONFLICT /
 * SS_EINVAL (refused on its own), or the batch's failure (SS_EBUSY,
 * SS_ESTOREFULL, SS_ESTORE) — or on the caller's thread before this
 * returns, with SS_EUNAVAILABLE, once the writer is stopping.  done must
 * not block; the committer does not touch the item after calling it. */
void committer_submit(committer *c, committer_item *item, committer_done done,
                      void *arg);

/* What the writer connection's background checkpoints did so far. */
void committer_checkpoint_stats(committer *c, store_checkpoint_stats *out);

/* Refuses new items, commits what is queued (every done callback has run
 * when it returns) and ends the thread.  The committer stays allocated for
 * callers that still submit (they get SS_EUNAVAILABLE).  Accepts NULL. */
void committer_drain(committer *c);
/* Drains if not done yet, closes the connection, frees.  Accepts NULL. */
void committer_stop(committer *c);

#endif /* SWAPSPEC_COMMITTER_H */
