/*
 * reprocess_runner.c — the work on one reprocessing job and the daemon's
 * runner thread (see reprocess_runner.h).  Owns the runner thread, its
 * store connection, and per run a small cache of calibration versions and
 * one page of pending items; the stored request and result of one analysis
 * at a time.
 */
#include "reprocess_runner.h"

#include <errno.h>
#include <pthread.h>
#include <signal.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "analysis_exec.h"
#include "api_request.h"
#include "log_line.h"

#ifndef SWAPSPEC_VERSION
#define SWAPSPEC_VERSION "unknown"
#endif

/* Pending items read per page, and calibration versions kept per run. */
#define RP_PAGE 64
#define RP_CACHE 8
/* An owner without a heartbeat for this long is taken for gone. */
#define RP_STALE_SECONDS 600

/* ------------------------------------------------------------------------ */
/* Owners.                                                                   */

/* Field 22 of /proc/PID/stat (start time, clock ticks since boot); -1 when
 * the file cannot be read. */
static int rp_proc_start(long pid, unsigned long long *start) {
    char path[64], buf[1024];
    snprintf(path, sizeof path, "/proc/%ld/stat", pid);
    FILE *f = fopen(path, "r");
    if (f == NULL)
        return -1;
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    char *p = strrchr(buf, ')'); /* the command name may hold spaces */
    if (p == NULL || p[1] != ' ')
        return -1;
    p += 2; /* field 3 */
    for (int field = 3; field < 22; field++) {
        p = strchr(p, ' ');
        if (p == NULL)
            return -1;
        p++;
    }
    char *end = NULL;
    *start = strtoull(p, &end, 10);
    return end == p ? -1 : 0;
}

void reprocess_owner_self(char out[48]) {
    long pid = (long)getpid();
    unsigned long long start = 0;
    if (rp_proc_start(pid, &start) != 0)
        start = 0;
    snprintf(out, 48, "%ld:%llu", pid, start);
}

/* The record form of now − seconds. */
static void rp_time_ago(long seconds, char out[32]) {
    time_t t = time(NULL) - seconds;
    struct tm tm;
    gmtime_r(&t, &tm);
    if (strftime(out, 32, "%Y-%m-%dT%H:%M:%S.000Z", &tm) == 0)
        snprintf(out, 32, "0000-01-01T00:00:00.000Z");
}

int reprocess_owner_alive(const char *owner, const char *heartbeat_at) {
    long pid = 0;
    unsigned long long start = 0, now_start = 0;
    if (owner == NULL || owner[0] == '\0' ||
        sscanf(owner, "%ld:%llu", &pid, &start) != 2 || pid <= 0)
        return 0;
    char stale[32];
    rp_time_ago(RP_STALE_SECONDS, stale);
    if (heartbeat_at != NULL && heartbeat_at[0] != '\0' &&
        strcmp(heartbeat_at, stale) < 0)
        return 0;
    if (kill((pid_t)pid, 0) != 0 && errno == ESRCH)
        return 0;
    if (start != 0 && rp_proc_start(pid, &now_start) == 0 && now_start != start)
        return 0; /* the pid now belongs to another process */
    return 1;
}

ss_status reprocess_job_take(store_conn *c, const store_job *job,
                             const char *me, int *claimed, ss_error *err) {
    *claimed = 0;
    if (strcmp(job->owner, me) != 0 && job->owner[0] != '\0' &&
        reprocess_owner_alive(job->owner, job->heartbeat_at))
        return SS_OK;
    return store_job_claim(c, job->id, job->owner, me, claimed, err);
}

/* ------------------------------------------------------------------------ */
/* One item.                                                                 */

typedef struct {
    store_calibration versions[RP_CACHE];
    size_t count, next;
} rp_cache;

static ss_status rp_calibration(store_conn *c, rp_cache *cache,
                                const char *name, unsigned version,
                                const store_calibration **out, ss_error *err) {
    for (size_t i = 0; i < cache->count; i++)
        if (cache->versions[i].version == version &&
            strcmp(cache->versions[i].name, name) == 0) {
            *out = &cache->versions[i];
            return SS_OK;
        }
    store_calibration *slot = &cache->versions[cache->next];
    ss_status st = store_calibration_get(c, name, version, slot, err);
    if (st != SS_OK)
        return st;
    cache->next = (cache->next + 1) % RP_CACHE;
    if (cache->count < RP_CACHE)
        cache->count++;
    *out = slot;
    return SS_OK;
}

/* Failures of the analysis itself (the item fails, the job goes on), as
 * opposed to failures of the store or of memory (the run stops). */
static int rp_item_fault(ss_status st) {
    return st != SS_ENOMEM && st != SS_EBUSY && st != SS_ESTORE &&
           st != SS_ESTOREFULL && st != SS_EUNAVAILABLE;
}

/* Re-runs the stored request with version k; fills *doc_text. */
static ss_status rp_compute(const store_job_source *src,
                            const store_calibration *k,
                            const reprocess_options *o, char **doc_text,
                            char method[16], ss_error *err) {
    api_request req;
    ss_status st = api_request_parse_text(src->request_json,
                                          strlen(src->request_json), &req, err);
    if (st != SS_OK)
        return st;
    analysis_calibration cal;
    analysis_calibration_from_stored(k, &cal);
    size_t len = 0;
    st = analysis_execute_text(&req, &cal, &o->budget, doc_text, &len, method,
                               err);
    api_request_release(&req);
    return st;
}

static ss_status rp_item(store_conn *c, const store_job *job, const char *me,
                         const store_job_item *it, rp_cache *cache,
                         const reprocess_options *o,
                         store_item_outcome *outcome, ss_error *err) {
    const char *name = job->params.calibration;
    ss_error why;
    ss_error_clear(&why);
    ss_status st = SS_OK;
    store_job_source src;
    memset(&src, 0, sizeof src);
    const store_calibration *k = NULL;
    char *result = NULL, method[16] = "";
    if (it->version == 0) {
        st = store_job_source_get(c, it->analysis_id, &src, err);
        if (st == SS_OK)
            ss_error_set(&why, SS_EINVAL, "calibration",
                         "no version of calibration '%s' is valid at %s", name,
                         src.measured_at[0] ? src.measured_at : src.created_at);
    } else {
        st = rp_calibration(c, cache, name, it->version, &k, err);
        if (st == SS_OK)
            st = store_job_source_get(c, it->analysis_id, &src, err);
    }
    store_revision_new rev;
    memset(&rev, 0, sizeof rev);
    int unchanged = k != NULL && strcmp(src.calibration_name, name) == 0 &&
                    src.calibration_version == it->version;
    if (st == SS_OK && k != NULL && !unchanged) {
        ss_status run = rp_compute(&src, k, o, &result, method, &why);
        if (run != SS_OK && !rp_item_fault(run))
            st = ss_error_set(err, run, why.field, "%s", why.message);
    }
    if (st == SS_OK) {
        char detail[sizeof why.message + sizeof why.field + 4];
        snprintf(detail, sizeof detail, "%s%s%s", why.field,
                 why.field[0] ? ": " : "", why.message);
        store_time_now(rev.created_at);
        rev.calibration_name = name;
        rev.calibration_version = it->version;
        rev.software_version = SWAPSPEC_VERSION;
        rev.method = method;
        rev.result_json = result; /* NULL when unchanged */
        int failed = why.code != SS_OK;
        st = store_job_item_finish(c, job->id, me, it->seq, it->analysis_id,
                                   failed ? NULL : &rev, failed ? detail : NULL,
                                   outcome, err);
    }
    free(result);
    store_job_source_release(&src);
    return st;
}

/* ------------------------------------------------------------------------ */
/* One job.                                                                  */

static int rp_stop_requested(const reprocess_options *o) {
    return o->should_stop != NULL && o->should_stop(o->ctx);
}

/* Works the pending items; *stopped when asked to stop first. */
static ss_status rp_items(store_conn *c, store_job *job, const char *me,
                          const reprocess_options *o, int *stopped,
                          ss_error *err) {
    store_job_item *page = malloc(RP_PAGE * sizeof *page);
    rp_cache *cache = calloc(1, sizeof *cache);
    ss_status st = SS_OK;
    if (page == NULL || cache == NULL)
        st = ss_error_set(err, SS_ENOMEM, "", "no memory for the job");
    uint64_t after = 0;
    *stopped = 0;
    while (st == SS_OK) {
        size_t n = 0;
        st = store_job_pending(c, job->id, after, page, RP_PAGE, &n, err);
        if (st != SS_OK || n == 0)
            break;
        for (size_t i = 0; st == SS_OK && i < n; i++) {
            if (rp_stop_requested(o)) {
                *stopped = 1;
                break;
            }
            store_item_outcome what = STORE_ITEM_FAILED;
            st = rp_item(c, job, me, &page[i], cache, o, &what, err);
            if (st != SS_OK)
                break;
            after = page[i].seq;
            job->revised += what == STORE_ITEM_REVISED;
            job->unchanged += what == STORE_ITEM_UNCHANGED;
            job->failed += what == STORE_ITEM_FAILED;
            if (o->progress != NULL)
                o->progress(o->ctx, job);
        }
        if (*stopped)
            break;
    }
    free(page);
    free(cache);
    return st;
}

ss_status reprocess_job_run(store_conn *c, const char *id, const char *me,
                            const reprocess_options *o, store_job *job,
                            int *finished, ss_error *err) {
    *finished = 0;
    ss_status st = store_job_get(c, id, job, err);
    if (st != SS_OK)
        return st;
    if (strcmp(job->state, "done") == 0 || strcmp(job->state, "failed") == 0) {
        *finished = 1;
        return SS_OK;
    }
    int stopped = 0;
    st = rp_items(c, job, me, o, &stopped, err);
    if (st == SS_OK && !stopped)
        st = store_job_finish(c, id, me, err);
    if (st == SS_OK && !stopped) {
        *finished = 1;
        return store_job_get(c, id, job, err);
    }
    ss_error ignored; /* the first error is the one to report */
    ss_error_clear(&ignored);
    store_job_release(c, id, me, &ignored);
    return st;
}

/* ------------------------------------------------------------------------ */
/* The daemon's thread.                                                      */

struct reprocess_runner {
    store *db;
    store_conn *conn;
    ss_budget budget;
    char me[48];
    pthread_t thread;
    pthread_mutex_t lock;
    pthread_cond_t wake;
    int woken;           /* under lock */
    atomic_int stopping; /* read between items without the lock */
};

static void rp_log(const char *event, const store_job *job, const ss_error *e) {
    json_t *line = json_pack(
        "{s:s,s:s,s:s,s:I,s:I,s:I,s:I}", "event", event, "job", job->id,
        "state", job->state, "total", (json_int_t)job->total, "revised",
        (json_int_t)job->revised, "unchanged", (json_int_t)job->unchanged,
        "failed", (json_int_t)job->failed);
    if (line != NULL && e != NULL && e->code != SS_OK)
        json_object_set_new(line, "error", json_string(e->message));
    log_line(line);
}

static int rp_runner_should_stop(void *ctx) {
    reprocess_runner *r = ctx;
    return atomic_load(&r->stopping) != 0;
}

/* Looks for one job to take and works it; *worked tells whether one ran. */
static ss_status rp_runner_once(reprocess_runner *r, int *worked,
                                ss_error *err) {
    store_job jobs[16];
    size_t n = 0;
    *worked = 0;
    ss_status st = store_job_unfinished(r->conn, jobs, 16, &n, err);
    for (size_t i = 0; st == SS_OK && i < n && !*worked; i++) {
        int claimed = 0;
        st = reprocess_job_take(r->conn, &jobs[i], r->me, &claimed, err);
        if (st != SS_OK || !claimed)
            continue;
        *worked = 1;
        rp_log("job-started", &jobs[i], NULL);
        reprocess_options o = {r->budget, rp_runner_should_stop, NULL, r};
        store_job job = jobs[i];
        int finished = 0;
        st = reprocess_job_run(r->conn, jobs[i].id, r->me, &o, &job, &finished,
                               err);
        rp_log(st != SS_OK ? "job-error"
               : finished  ? "job-finished"
                           : "job-paused",
               &job, err);
    }
    return st;
}

static void *rp_runner_main(void *arg) {
    reprocess_runner *r = arg;
    while (!atomic_load(&r->stopping)) {
        ss_error err;
        ss_error_clear(&err);
        int worked = 0;
        ss_status st = rp_runner_once(r, &worked, &err);
        if (worked && st == SS_OK)
            continue; /* look for the next job at once */
        pthread_mutex_lock(&r->lock);
        if (!r->woken && !atomic_load(&r->stopping)) {
            struct timespec until;
            clock_gettime(CLOCK_REALTIME, &until);
            until.tv_sec += st == SS_OK ? 5 : 1;
            pthread_cond_timedwait(&r->wake, &r->lock, &until);
        }
        r->woken = 0;
        pthread_mutex_unlock(&r->lock);
    }
    return NULL;
}

ss_status reprocess_runner_start(store *db, const ss_budget *budget,
                                 reprocess_runner **out, ss_error *err) {
    reprocess_runner *r = calloc(1, sizeof *r);
    if (r == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    r->db = db;
    r->budget = *budget;
    reprocess_owner_self(r->me);
    ss_status st = store_conn_open(db, &r->conn, err);
    if (st == SS_OK)
        st = store_conn_set_bulk(r->conn, err);
    if (st != SS_OK) {
        store_conn_close(r->conn);
        free(r);
        return st;
    }
    pthread_mutex_init(&r->lock, NULL);
    pthread_cond_init(&r->wake, NULL);
    if (pthread_create(&r->thread, NULL, rp_runner_main, r) != 0) {
        store_conn_close(r->conn);
        pthread_mutex_destroy(&r->lock);
        pthread_cond_destroy(&r->wake);
        free(r);
        return ss_error_set(err, SS_EINTERNAL, "",
                            "cannot start the reprocessing thread");
    }
    *out = r;
    return SS_OK;
}

void reprocess_runner_wake(reprocess_runner *r) {
    if (r == NULL)
        return;
    pthread_mutex_lock(&r->lock);
    r->woken = 1;
    pthread_cond_signal(&r->wake);
    pthread_mutex_unlock(&r->lock);
}

void reprocess_runner_request_stop(reprocess_runner *r) {
    if (r == NULL)
        return;
    pthread_mutex_lock(&r->lock);
    atomic_store(&r->stopping, 1);
    pthread_cond_signal(&r->wake);
    pthread_mutex_unlock(&r->lock);
}

void reprocess_runner_stop(reprocess_runner *r) {
    if (r == NULL)
        return;
    reprocess_runner_request_stop(r);
    pthread_join(r->thread, NULL);
    store_conn_close(r->conn);
    pthread_mutex_destroy(&r->lock);
    pthread_cond_destroy(&r->wake);
    free(r);
}
