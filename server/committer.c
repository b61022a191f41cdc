/*
 * committer.c — the group-commit writer (see committer.h).  Owns the writer
 * thread, its store connection and the queue; queued items live on the
 * stacks of the waiting handlers, so the queue allocates nothing per write.
 */
#include "committer.h"

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

typedef struct commit_item {
    store_put_item put;
    int done;
    struct commit_item *next;
} commit_item;

struct committer {
    store *db;
    store_conn *conn;
    size_t max_batch;
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t queued;   /* the writer waits for work */
    pthread_cond_t finished; /* handlers wait for their commit */
    commit_item *head, *tail;
    int stopping;
};

static void *committer_main(void *arg) {
    committer *c = arg;
    store_put_item *batch = malloc(c->max_batch * sizeof *batch);
    commit_item **owners = malloc(c->max_batch * sizeof *owners);
    pthread_mutex_lock(&c->lock);
    for (;;) {
        while (c->head == NULL && !c->stopping)
            pthread_cond_wait(&c->queued, &c->lock);
        if (c->head == NULL && c->stopping)
            break;
        size_t n = 0;
        while (c->head != NULL && n < c->max_batch) {
            owners[n] = c->head;
            batch[n] = c->head->put;
            c->head = c->head->next;
            n++;
        }
        if (c->head == NULL)
            c->tail = NULL;
        pthread_mutex_unlock(&c->lock);
        ss_error err;
        ss_error_clear(&err);
        if (batch == NULL || owners == NULL) {
            for (size_t i = 0; i < n; i++) {
                batch[i].status = SS_ENOMEM;
                ss_error_set(&batch[i].error, SS_ENOMEM, "", NULL);
            }
        } else {
            store_put_batch(c->conn, batch, n, &err);
        }
        pthread_mutex_lock(&c->lock);
        for (size_t i = 0; i < n; i++) {
            owners[i]->put.status = batch[i].status;
            owners[i]->put.error = batch[i].error;
            owners[i]->done = 1;
        }
        pthread_cond_broadcast(&c->finished);
    }
    pthread_mutex_unlock(&c->lock);
    free(batch);
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
    if (st != SS_OK) {
        free(c);
        return st;
    }
    pthread_mutex_init(&c->lock, NULL);
    pthread_cond_init(&c->queued, NULL);
    pthread_cond_init(&c->finished, NULL);
    if (pthread_create(&c->thread, NULL, committer_main, c) != 0) {
        store_conn_close(c->conn);
        pthread_mutex_destroy(&c->lock);
        pthread_cond_destroy(&c->queued);
        pthread_cond_destroy(&c->finished);
        free(c);
        return ss_error_set(err, SS_EINTERNAL, "",
                            "cannot start the writer thread");
    }
    *out = c;
    return SS_OK;
}

void committer_stop(committer *c) {
    if (c == NULL)
        return;
    pthread_mutex_lock(&c->lock);
    c->stopping = 1;
    pthread_cond_signal(&c->queued);
    pthread_mutex_unlock(&c->lock);
    pthread_join(c->thread, NULL);
    store_conn_close(c->conn);
    pthread_mutex_destroy(&c->lock);
    pthread_cond_destroy(&c->queued);
    pthread_cond_destroy(&c->finished);
    free(c);
}

ss_status committer_put(committer *c, const store_record *rec,
                        const char *idem_key, const char *fingerprint,
                        ss_error *err) {
    commit_item item;
    memset(&item, 0, sizeof item);
    item.put.rec = rec;
    item.put.idem_key = idem_key;
    item.put.fingerprint = fingerprint;
    pthread_mutex_lock(&c->lock);
    if (c->stopping) {
        pthread_mutex_unlock(&c->lock);
        return ss_error_set(err, SS_EUNAVAILABLE, "",
                            "the service is shutting down");
    }
    if (c->tail != NULL)
        c->tail->next = &item;
    else
        c->head = &item;
    c->tail = &item;
    pthread_cond_signal(&c->queued);
    while (!item.done)
        pthread_cond_wait(&c->finished, &c->lock);
    pthread_mutex_unlock(&c->lock);
    if (item.put.status != SS_OK && err != NULL && err->code == SS_OK)
        *err = item.put.error;
    return item.put.status;
}
