/*
 * committer.c — the group-commit writer (see committer.h).  Owns the writer
 * thread, its store connection and the queue; queued items belong to their
 * submitters (a request's heap state), so the queue allocates nothing per
 * write.  Outcomes are delivered through each item's callback outside the
 * queue's lock.
 */
#include "committer.h"

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

struct committer {
    store *db;
    store_conn *conn;
    size_t max_batch;
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t queued; /* the writer waits for work */
    committer_item *head, *tail;
    int stopping;     /* no new items */
    int join_claimed; /* a drain has joined or is joining the thread */
};

/* Commits one batch and tells each owner its outcome. */
static void committer_commit(committer *c, committer_item **owners,
                             store_put_item *batch, size_t n) {
    ss_error err;
    ss_error_clear(&err);
    store_put_batch(c->conn, batch, n, &err);
    for (size_t i = 0; i < n; i++) {
        committer_item *it = owners[i];
        it->put.status = batch[i].status;
        it->put.error = batch[i].error;
        it->done(it, it->arg); /* the item may be gone after this */
    }
}

static void *committer_main(void *arg) {
    committer *c = arg;
    store_put_item *batch = malloc(c->max_batch * sizeof *batch);
    committer_item **owners = malloc(c->max_batch * sizeof *owners);
    size_t cap = batch != NULL && owners != NULL ? c->max_batch : 1;
    store_put_item one;
    committer_item *one_owner;
    if (cap == 1) { /* out of memory at start: commit one at a time */
        batch = batch ? batch : &one;
        owners = owners ? owners : &one_owner;
    }
    pthread_mutex_lock(&c->lock);
    for (;;) {
        while (c->head == NULL && !c->stopping)
            pthread_cond_wait(&c->queued, &c->lock);
        if (c->head == NULL) /* stopping, and everything is committed */
            break;
        size_t n = 0;
        while (c->head != NULL && n < cap) {
            owners[n] = c->head;
            batch[n] = c->head->put;
            c->head = c->head->next;
            n++;
        }
        if (c->head == NULL)
            c->tail = NULL;
        pthread_mutex_unlock(&c->lock);
        committer_commit(c, owners, batch, n);
        pthread_mutex_lock(&c->lock);
    }
    pthread_mutex_unlock(&c->lock);
    if (batch != &one)
        free(batch);
    if (owners != &one_owner)
        free(owners);
    return NULL;
}

ss_status committer_start(store *db, size_t max_batch, committer **out,
                          ss_error *err) {
    committer *c = calloc(1, sizeof *c);
    if (c == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    c->db = db;
    c->max_batch = max_batch ? max_batch : 1;
    ss_status st = store_conn_open(db, &c->conn, err);
    if (st == SS_OK) /* the writer's commits never wait for a checkpoint */
        st = store_conn_background_checkpoints(c->conn, err);
    if (st != SS_OK) {
        store_conn_close(c->conn);
        free(c);
        return st;
    }
    pthread_mutex_init(&c->lock, NULL);
    pthread_cond_init(&c->queued, NULL);
    if (pthread_create(&c->thread, NULL, committer_main, c) != 0) {
        store_conn_close(c->conn);
        pthread_mutex_destroy(&c->lock);
        pthread_cond_destroy(&c->queued);
        free(c);
        return ss_error_set(err, SS_EINTERNAL, "",
                            "cannot start the writer thread");
    }
    *out = c;
    return SS_OK;
}

void committer_checkpoint_stats(committer *c, store_checkpoint_stats *out) {
    store_checkpoint_counts(c->conn, out);
}

void committer_drain(committer *c) {
    if (c == NULL)
        return;
    pthread_mutex_lock(&c->lock);
    int join = !c->join_claimed;
    c->stopping = 1;
    c->join_claimed = 1;
    pthread_cond_signal(&c->queued);
    pthread_mutex_unlock(&c->lock);
    if (join)
        pthread_join(c->thread, NULL);
}

void committer_stop(committer *c) {
    if (c == NULL)
        return;
    committer_drain(c);
    store_conn_close(c->conn);
    pthread_mutex_destroy(&c->lock);
    pthread_cond_destroy(&c->queued);
    free(c);
}

void committer_submit(committer *c, committer_item *item, committer_done done,
                      void *arg) {
    item->done = done;
    item->arg = arg;
    item->next = NULL;
    ss_error_clear(&item->put.error);
    pthread_mutex_lock(&c->lock);
    if (c->stopping) {
        pthread_mutex_unlock(&c->lock);
        item->put.status = ss_error_set(&item->put.error, SS_EUNAVAILABLE, "",
                                        "the service is shutting down");
        done(item, arg);
        return;
    }
    if (c->tail != NULL)
        c->tail->next = item;
    else
        c->head = item;
    c->tail = item;
    pthread_cond_signal(&c->queued);
    pthread_mutex_unlock(&c->lock);
}
