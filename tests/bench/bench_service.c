/*
 * bench_service.c — `swapspec-bench-service`: the two costs behind one
 * POST /v1/analyses, measured apart from HTTP and from the load generator
 * (which shares the cores in tests/load/run-load.sh, so its figures are
 * noisy).  Prints figures; asserts nothing (the tests do that).
 *
 * 1. The worker's share: the load script's body (three summary runs,
 *    moments) parsed with jansson, decoded, run and rendered as the stored
 *    result text (analysis_execute_text), as the handler does.  Fastest of
 *    five batches of 1000, and the mean.
 * 2. The writer's share: store_put_batch on a fresh store in the working
 *    directory (WAL, synchronous=FULL: one fdatasync per commit), batches of
 *    1, 16 and 64 records like the group commit's, each record the result
 *    of (1); microseconds per record including the sync, and records/s.
 *
 * Usage: swapspec-bench-service [records per batch size, default 4096]
 */
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "analysis_exec.h"
#include "api_request.h"
#include "store.h"

static const char body[] =
    "{\"levels\":3,\"label\":\"load/boxtrap-a\",\"method\":\"moments\","
    "\"runs\":[{\"atoms\":8,\"shots\":300,\"mean_energy\":11.62,"
    "\"energy_variance\":31.9},{\"atoms\":12,\"shots\":300,"
    "\"mean_energy\":27.39,\"energy_variance\":92.6},{\"atoms\":16,"
    "\"shots\":300,\"mean_energy\":49.8,\"energy_variance\":196.0}]}";

static double now(void) {
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

/* One request's computation; the result text in *text (caller frees). */
static int one_request(char **text, size_t *len) {
    json_error_t jerr;
    json_t *root = json_loads(body, JSON_REJECT_DUPLICATES, &jerr);
    api_request req;
    ss_error err;
    ss_error_clear(&err);
    int ok = root != NULL && api_request_from_json(root, &req, &err) == SS_OK;
    if (ok) {
        analysis_calibration cal;
        char method[16];
        ok = analysis_calibration_resolve(
                 NULL, &req, "2026-12-02T00:00:00.000Z", &cal, &err) == SS_OK &&
             analysis_execute_text(&req, &cal, NULL, text, len, method, &err) ==
                 SS_OK;
        api_request_release(&req);
    }
    json_decref(root);
    if (!ok)
        fprintf(stderr, "bench: the request failed: %s\n", err.message);
    return ok;
}

static int bench_worker(char **result, size_t *result_len) {
    double best = 1e9, total = 0;
    for (int b = 0; b < 5; b++) {
        double t0 = now();
        for (int i = 0; i < 1000; i++) {
            char *text = NULL;
            size_t len = 0;
            if (!one_request(&text, &len))
                return 0;
            free(text);
        }
        double dt = now() - t0;
        best = dt < best ? dt : best;
        total += dt;
    }
    if (!one_request(result, result_len))
        return 0;
    printf("worker: parse + decode + moments + render, %zu-byte result: "
           "%.1f us per request (fastest batch of 1000; mean of 5000: "
           "%.1f us)\n",
           *result_len, best * 1e3, total / 5 * 1e3 / 1.0);
    return 1;
}

static int bench_store(const char *result, unsigned records) {
    char path[64];
    snprintf(path, sizeof path, "bench-service-%d.db", (int)getpid());
    store *db = NULL;
    store_conn *c = NULL;
    ss_error err;
    ss_error_clear(&err);
    if (store_open(path, NULL, &db, &err) != SS_OK ||
        store_conn_open(db, &c, &err) != SS_OK) {
        fprintf(stderr, "bench: %s\n", err.message);
        store_close(db);
        return 0;
    }
    static const size_t sizes[] = {1, 16, 64};
    store_record *recs = calloc(64, sizeof *recs);
    store_put_item *items = calloc(64, sizeof *items);
    int ok = recs != NULL && items != NULL;
    for (size_t s = 0; ok && s < sizeof sizes / sizeof sizes[0]; s++) {
        size_t B = sizes[s];
        unsigned n = B == 1 ? records / 8 : records; /* one sync each */
        double t0 = now();
        for (unsigned done = 0; ok && done < n; done += (unsigned)B) {
            for (size_t i = 0; i < B; i++) {
                store_record *r = &recs[i];
                memset(r, 0, sizeof *r);
                store_time_now(r->created_at);
                ok = ok && store_id_generate(r->id, &err) == SS_OK;
                snprintf(r->label, sizeof r->label, "bench/service");
                r->levels = 3;
                snprintf(r->method, sizeof r->method, "moments");
                snprintf(r->software_version, sizeof r->software_version,
                         "bench");
                r->request_json = (char *)body;
                r->result_json = (char *)result;
                memset(&items[i], 0, sizeof items[i]);
                items[i].rec = r;
            }
            ok = ok && store_put_batch(c, items, B, &err) == SS_OK;
        }
        double dt = now() - t0;
        if (ok)
            printf("store: batches of %2zu, %u records: %.1f us per record "
                   "(%.0f records/s; %.2f ms per commit)\n",
                   B, n, dt / n * 1e6, n / dt,
                   dt / ((double)n / (double)B) * 1e3);
    }
    if (!ok)
        fprintf(stderr, "bench: the store failed: %s\n", err.message);
    free(recs);
    free(items);
    store_conn_close(c);
    store_close(db);
    unlink(path);
    char side[80];
    snprintf(side, sizeof side, "%s-wal", path);
    unlink(side);
    snprintf(side, sizeof side, "%s-shm", path);
    unlink(side);
    return ok;
}

int main(int argc, char **argv) {
    unsigned records = argc > 1 ? (unsigned)strtoul(argv[1], NULL, 10) : 4096;
    if (records < 64)
        records = 64;
    char *result = NULL;
    size_t len = 0;
    int ok = bench_worker(&result, &len) && bench_store(result, records);
    free(result);
    return ok ? 0 : 1;
}
