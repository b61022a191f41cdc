/*
 * cmd_reprocess.c — `swapspec reprocess --data DB --calibration NAME
 * [--version N] [--since T] [--until T] [--label L]`: the nightly
 * reprocessing run, in this process, on the service's store.
 *
 * It resumes the newest unfinished job with exactly these parameters (one
 * a killed run or a stopped daemon left behind) or creates a new one, takes
 * it (reprocess_runner.h: a job held by a live process, say the daemon, is
 * followed until it finishes or is let go), and works it.  Progress goes to
 * stderr: a bar redrawn in place when stderr is a terminal, else a plain
 * line at every 5 % and at least every 2 seconds.  The final summary is the
 * job document (reprocess_runner.h) plus "resumed" and "seconds", on
 * stdout.  Exit status 0 when the job is done; 1 when some analyses failed
 * (the summary lists them) or the run was interrupted by SIGINT/SIGTERM
 * (it stops between items; run the command again to resume); 2 for bad
 * options.  The daemon may run on the same file meanwhile (WAL, busy
 * timeout).  Owns the store and its connection for the command's life.
 */
#include <signal.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "cli_json.h"
#include "commands.h"
#include "http.h"
#include "reprocess_runner.h"

enum { OPT_DATA, OPT_CAL, OPT_VERSION, OPT_SINCE, OPT_UNTIL, OPT_LABEL, OPT_N };

static const cli_option reprocess_options_table[OPT_N] = {
    [OPT_DATA] = {"data", CLI_PATH, 1, "FILE.db", 0, 0, 0,
                  "the service's SQLite store (it must exist)"},
    [OPT_CAL] = {"calibration", CLI_PATH, 1, "NAME", 0, 0, 0,
                 "re-run the analyses whose calibration was given by "
                 "reference to NAME"},
    [OPT_VERSION] = {"version", CLI_UINT, 0, "N", 1, 2147483647ul, 0,
                     "use version N for all (default: for each analysis "
                     "the version valid when its shots were taken)"},
    [OPT_SINCE] = {"since", CLI_PATH, 0, "TIME", 0, 0, 0,
                   "only analyses created at or after TIME (RFC 3339)"},
    [OPT_UNTIL] = {"until", CLI_PATH, 0, "TIME", 0, 0, 0,
                   "only analyses created before TIME (RFC 3339)"},
    [OPT_LABEL] = {"label", CLI_PATH, 0, "LABEL", 0, 0, 0,
                   "only analyses with exactly this label"},
};

/* ------------------------------------------------------------------------ */
/* Signals and progress.                                                     */

static volatile sig_atomic_t rc_interrupted;

static void rc_on_signal(int sig) {
    (void)sig;
    rc_interrupted = 1;
}

static int rc_should_stop(void *ctx) {
    (void)ctx;
    return rc_interrupted != 0;
}

typedef struct {
    int tty;
    struct timespec start, last;
    int last_percent; /* -1 before the first line */
    int drawn;        /* a bar is on the terminal's line */
} rc_progress;

static double rc_seconds(const struct timespec *a, const struct timespec *b) {
    return (double)(b->tv_sec - a->tv_sec) +
           1e-9 * (double)(b->tv_nsec - a->tv_nsec);
}

static void rc_show(void *ctx, const store_job *job) {
    rc_progress *p = ctx;
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    uint64_t done = job->revised + job->unchanged + job->failed;
    int percent = job->total ? (int)(100 * done / job->total) : 100;
    int last = done == job->total;
    double since = rc_seconds(&p->last, &now);
    if (p->tty) {
        if (!last && since < 0.1 && p->drawn)
            return;
        char bar[41];
        int fill = percent * 40 / 100;
        for (int i = 0; i < 40; i++)
            bar[i] = i < fill ? '#' : '.';
        bar[40] = '\0';
        fprintf(stderr,
                "\r[%s] %3d%% %llu/%llu  revised %llu  unchanged %llu  "
                "failed %llu  %.0f s ",
                bar, percent, (unsigned long long)done,
                (unsigned long long)job->total,
                (unsigned long long)job->revised,
                (unsigned long long)job->unchanged,
                (unsigned long long)job->failed, rc_seconds(&p->start, &now));
        p->drawn = 1;
    } else {
        if (!last && percent / 5 == p->last_percent / 5 && since < 2.0)
            return;
        fprintf(stderr,
                "reprocess %s: %llu/%llu done (%d%%), revised %llu, "
                "unchanged %llu, failed %llu, %.1f s\n",
                job->id, (unsigned long long)done,
                (unsigned long long)job->total, percent,
                (unsigned long long)job->revised,
                (unsigned long long)job->unchanged,
                (unsigned long long)job->failed, rc_seconds(&p->start, &now));
    }
    fflush(stderr);
    p->last = now;
    p->last_percent = percent;
}

static void rc_progress_end(rc_progress *p) {
    if (p->tty && p->drawn)
        fputc('\n', stderr);
    p->drawn = 0;
}

/* ------------------------------------------------------------------------ */
/* The run.                                                                  */

static ss_status rc_params(const cli_parsed *args, store_job_params *p,
                           ss_error *err) {
    const cli_value *v = args->values;
    memset(p, 0, sizeof *p);
    if (!store_calibration_name_valid(v[OPT_CAL].text))
        return store_calibration_name_error(v[OPT_CAL].text, "calibration",
                                            err);
    snprintf(p->calibration, sizeof p->calibration, "%s", v[OPT_CAL].text);
    p->version = v[OPT_VERSION].present ? (unsigned)v[OPT_VERSION].u : 0;
    if (v[OPT_SINCE].present &&
        store_time_normalize(v[OPT_SINCE].text, p->since) != 0)
        return ss_error_set(err, SS_EINVAL, "since",
                            "--since must be an RFC 3339 date-time such as "
                            "2026-12-02T03:50:12Z");
    if (v[OPT_UNTIL].present &&
        store_time_normalize(v[OPT_UNTIL].text, p->until) != 0)
        return ss_error_set(err, SS_EINVAL, "until",
                            "--until must be an RFC 3339 date-time such as "
                            "2026-12-02T03:50:12Z");
    if (v[OPT_LABEL].present) {
        if (strlen(v[OPT_LABEL].text) >= sizeof p->label)
            return ss_error_set(err, SS_EINVAL, "label",
                                "--label may have at most %zu bytes",
                                sizeof p->label - 1);
        snprintf(p->label, sizeof p->label, "%s", v[OPT_LABEL].text);
        p->has_label = 1;
    }
    return SS_OK;
}

/* The job to work: the unfinished one with these parameters, or a new
 * one held by this process from the start. */
static ss_status rc_job(store_conn *c, const store_job_params *p,
                        store_job *job, int *resumed, ss_error *err) {
    char me[48];
    reprocess_owner_self(me);
    char id[32];
    int found = 0;
    ss_status st = store_job_find_unfinished(c, p, id, &found, err);
    if (st != SS_OK)
        return st;
    *resumed = found;
    if (found)
        return store_job_get(c, id, job, err);
    return store_job_create(c, p, "cli", me, job, err);
}

/* Works the job, or follows it while another live process holds it. */
static ss_status rc_work(store_conn *c, store_job *job, rc_progress *prog,
                         int *finished, ss_error *err) {
    char me[48];
    reprocess_owner_self(me);
    reprocess_options o = {
        .should_stop = rc_should_stop, .progress = rc_show, .ctx = prog};
    http_settings defaults;
    http_settings_default(&defaults); /* the daemon's default budget */
    o.budget = defaults.budget;
    *finished = 0;
    ss_status st = SS_OK;
    int told = 0;
    while (st == SS_OK && !rc_interrupted) {
        if (strcmp(job->state, "done") == 0 ||
            strcmp(job->state, "failed") == 0) {
            *finished = 1;
            break;
        }
        int claimed = 0;
        st = reprocess_job_take(c, job, me, &claimed, err);
        if (st == SS_OK && claimed)
            return reprocess_job_run(c, job->id, me, &o, job, finished, err);
        if (st == SS_OK && !told) {
            fprintf(stderr, "reprocess %s: held by process %s; following it\n",
                    job->id, job->owner);
            told = 1;
        }
        struct timespec nap = {1, 0};
        nanosleep(&nap, NULL);
        if (st == SS_OK)
            st = store_job_get(c, job->id, job, err);
        if (st == SS_OK)
            rc_show(prog, job);
    }
    return st;
}

static ss_status rc_summary(store_conn *c, const store_job *job, int resumed,
                            const rc_progress *prog, json_t **out,
                            ss_error *err) {
    json_t *doc = reprocess_job_doc(c, job, err);
    if (doc == NULL)
        return err->code;
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    cli_json_put(doc, "resumed", json_boolean(resumed), err);
    cli_json_put_real(doc, "seconds", rc_seconds(&prog->start, &now), err);
    return cli_json_finish(doc, out, err);
}

static ss_status reprocess_run(const cli_parsed *args, json_t **doc_out,
                               ss_error *err) {
    store_job_params p;
    ss_status st = rc_params(args, &p, err);
    if (st != SS_OK)
        return st;
    const char *path = args->values[OPT_DATA].text;
    struct stat sb;
    if (stat(path, &sb) != 0)
        return ss_error_set(err, SS_ENOTFOUND, "data",
                            "there is no store at '%s'", path);
    rc_progress prog = {.tty = isatty(STDERR_FILENO), .last_percent = -1};
    clock_gettime(CLOCK_MONOTONIC, &prog.start);
    prog.last = prog.start;
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = rc_on_signal;
    sigemptyset(&sa.sa_mask);
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    store *db = NULL;
    store_conn *c = NULL;
    store_options so = {10000}; /* wait out the daemon's group commits */
    st = store_open(path, &so, &db, err);
    if (st == SS_OK)
        st = store_conn_open(db, &c, err);
    if (st == SS_OK)
        st = store_conn_set_bulk(c, err);
    store_job job;
    int resumed = 0, finished = 0;
    if (st == SS_OK)
        st = rc_job(c, &p, &job, &resumed, err);
    if (st == SS_OK && resumed)
        fprintf(stderr, "reprocess %s: resuming (%llu of %llu done)\n", job.id,
                (unsigned long long)(job.revised + job.unchanged + job.failed),
                (unsigned long long)job.total);
    if (st == SS_OK)
        st = rc_work(c, &job, &prog, &finished, err);
    rc_progress_end(&prog);
    json_t *doc = NULL;
    if (st == SS_OK)
        st = rc_summary(c, &job, resumed, &prog, &doc, err);
    store_conn_close(c);
    store_close(db);
    if (st != SS_OK)
        return st;
    if (finished && strcmp(job.state, "done") == 0) {
        *doc_out = doc;
        return SS_OK;
    }
    /* the summary still goes to stdout; the exit status says what is
     * wrong */
    st = cli_json_emit(doc, stdout, err);
    json_decref(doc);
    if (st != SS_OK)
        return st;
    if (!finished)
        return ss_error_set(
            err, SS_EUNAVAILABLE, "",
            "job %s was interrupted after %llu of %llu "
            "analyses; run the same command again to resume",
            job.id,
            (unsigned long long)(job.revised + job.unchanged + job.failed),
            (unsigned long long)job.total);
    return ss_error_set(err, SS_EINTERNAL, "job",
                        "job %s finished, but %llu of %llu analyses could not "
                        "be re-run (see errors in the summary)",
                        job.id, (unsigned long long)job.failed,
                        (unsigned long long)job.total);
}

const cli_command cli_cmd_reprocess = {
    "reprocess",
    "re-run stored analyses with a new calibration version",
    "Re-runs the stored analyses whose calibration was given by reference "
    "to NAME with the version valid when their shots were taken (or with "
    "--version N), adding a new revision to each analysis whose latest "
    "revision used another version; nothing is overwritten.  An interrupted "
    "run resumes where it stopped when started again with the same options; "
    "running it twice is harmless.",
    reprocess_options_table,
    OPT_N,
    "Progress on stderr (a bar on a terminal, plain lines otherwise); the "
    "summary, a JSON object, on stdout.  Exit status 0 when the job is "
    "done, 1 when analyses failed or the run was interrupted, 2 for bad "
    "options.  The service may run on the same store meanwhile.",
    reprocess_run,
    NULL,
};
