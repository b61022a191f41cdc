/*
 * test_http.c — the service end to end: `swapspec serve` runs as a child
 * process on a loopback port and is driven over real sockets.  Covers the
 * compute routes, stored analyses with Idempotency-Key, keyset pagination,
 * RFC 9457 problems for each error class (with JSON pointers), access
 * control per route and role, the loopback-only rule without tokens,
 * /metrics in the Prometheus text format, graceful shutdown on SIGTERM, and
 * durability of acknowledged analyses across kill -9.
 */
#include <math.h>
#include <pthread.h>

#include "http_harness.h"

static hh_daemon hd;

static void hd_setup(void) { hh_tmpdir(hd.dir, sizeof hd.dir); }
static void hd_teardown(void) {
    if (hd.pid > 0)
        hh_stop(&hd, SIGKILL);
    hh_rmdir(hd.dir);
}

static const char *const PREDICT =
    "{\"levels\":3,\"atoms\":24,\"spectrum\":[0.6,0.3,0.1],\"top\":3}";
static const char *const ANALYSIS =
    "{\"levels\":3,\"label\":\"quillfeather/test\",\"runs\":[{\"atoms\":12,"
    "\"shots\":300,\"mean_energy\":27.0,\"energy_variance\":90.0}],"
    "\"method\":\"moments\"}";

/* The problem document of r: status, type suffix and (optional) pointer. */
static void expect_problem(const hh_response *r, int status, const char *name,
                           const char *pointer) {
    char ct[128];
    cr_expect(r->status == status, "status %d, expected %d (%s)", r->status,
              status, r->body);
    cr_expect(hh_header(r, "Content-Type", ct, sizeof ct) &&
                  strcmp(ct, "application/problem+json") == 0,
              "problem content type");
    cr_assert(r->json != NULL, "problem body is JSON: %s", r->body);
    char type[96];
    snprintf(type, sizeof type, "urn:swapspec:problem:%s", name);
    cr_expect(
        strcmp(json_string_value(json_object_get(r->json, "type")), type) == 0,
        "type %s, expected %s",
        json_string_value(json_object_get(r->json, "type")), type);
    cr_expect(json_integer_value(json_object_get(r->json, "status")) == status);
    cr_expect(json_is_string(json_object_get(r->json, "title")));
    cr_expect(json_is_string(json_object_get(r->json, "detail")));
    if (pointer != NULL) {
        json_t *e = json_array_get(json_object_get(r->json, "errors"), 0);
        const char *got = json_string_value(json_object_get(e, "pointer"));
        cr_expect(got && strcmp(got, pointer) == 0, "pointer %s, expected %s",
                  got ? got : "(none)", pointer);
    }
}

Test(http, compute_routes_answer_like_the_command_line, .init = hd_setup,
     .fini = hd_teardown, .timeout = 60) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r;
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, PREDICT, &r);
    cr_assert(r.status == 200, "%d %s", r.status, r.body);
    /* the acceptance figures (closed forms of domain.md §2) */
    cr_expect(fabs(json_real_value(json_object_get(r.json, "mean_content")) -
                   126.96) < 1e-9);
    cr_expect(
        fabs(json_real_value(json_object_get(r.json, "content_variance")) -
             611.064) < 1e-9);
    cr_expect(json_array_size(json_object_get(r.json, "diagrams")) == 3);
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/candidates", NULL, "application/json",
               NULL, "{\"levels\":3,\"atoms\":6,\"content\":3}", &r);
    cr_assert(r.status == 200, "%s", r.body);
    cr_expect(json_array_size(json_object_get(r.json, "degenerate_groups")) ==
              1);
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/simulations", NULL, "application/json",
               NULL,
               "{\"levels\":3,\"atoms\":8,\"spectrum\":[0.5,0.3,0.2],"
               "\"shots\":50,\"seed\":3,\"calibration\":{\"offset\":1,"
               "\"pair_shift\":0.5,\"exchange\":2,\"noise_sd\":0.1,"
               "\"unit\":\"Hz\"}}",
               &r);
    cr_assert(r.status == 200, "%s", r.body);
    cr_expect(json_array_size(json_object_get(r.json, "energies")) == 50);
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/simulations", NULL, "application/json",
               NULL,
               "{\"levels\":3,\"atoms\":8,\"spectrum\":[0.5,0.3,0.2],"
               "\"shots\":5000000}",
               &r);
    expect_problem(&r, 422, "work-budget-exceeded", "/shots");
    hh_free(&r);
}

Test(http, every_error_class_is_a_problem_document, .init = hd_setup,
     .fini = hd_teardown, .timeout = 60) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r;
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, "{\"levels\":3,\"atoms\":24,\"spectrum\":[0.6,0.3,-0.1]}",
               &r);
    expect_problem(&r, 422, "invalid-argument", "/spectrum/2");
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, "{\"levels\":3,\"atoms\":24,\"colour\":1}", &r);
    expect_problem(&r, 422, "invalid-argument", "/colour");
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json", NULL,
               "{\"levels\":3,\"runs\":[{\"atoms\":6,\"shots\":10,"
               "\"mean_energy\":3},{\"atoms\":6,\"shots\":10,\"mean_energy\":"
               "3,\"energy_variance\":1},{\"atoms\":6,\"shots\":10,"
               "\"mean_energy\":3,\"energy_variance\":-2}]}",
               &r);
    expect_problem(&r, 422, "invalid-argument", "/runs/0/energy_variance");
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, "{\"levels\":3,", &r);
    expect_problem(&r, 400, "malformed-input", NULL);
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, "{\"levels\":3,\"levels\":4}", &r);
    expect_problem(&r, 400, "malformed-input", NULL);
    hh_free(&r);
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "text/plain", NULL,
               PREDICT, &r);
    expect_problem(&r, 415, "unsupported-media-type", NULL);
    hh_free(&r);
    hh_request(hd.port, "GET", "/v1/nothing-here", NULL, NULL, NULL, NULL, &r);
    expect_problem(&r, 404, "not-found", NULL);
    hh_free(&r);
    hh_request(hd.port, "DELETE", "/v1/analyses", NULL, NULL, NULL, NULL, &r);
    expect_problem(&r, 405, "method-not-allowed", NULL);
    char allow[64];
    cr_expect(hh_header(&r, "Allow", allow, sizeof allow) &&
              strstr(allow, "POST") && strstr(allow, "GET"));
    hh_free(&r);
    hh_request(hd.port, "GET", "/v1/analyses/an_00000000000000000000", NULL,
               NULL, NULL, NULL, &r);
    expect_problem(&r, 404, "not-found", NULL);
    hh_free(&r);
    hh_request(hd.port, "GET", "/v1/analyses?limit=0", NULL, NULL, NULL, NULL,
               &r);
    expect_problem(&r, 422, "invalid-argument", "/limit");
    hh_free(&r);
    /* over the 1 MiB cap: decided from Content-Length before the body */
    size_t big = (1u << 20) + 10;
    char *body = malloc(big + 1);
    memset(body, ' ', big);
    body[big] = '\0';
    body[0] = '{';
    body[big - 1] = '}';
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json", NULL,
               body, &r);
    expect_problem(&r, 413, "content-too-large", NULL);
    hh_free(&r);
    free(body);
    /* a table of bad bodies on the forward model: each gets its status and
     * a problem document, and the next good request is served normally */
    static const struct {
        const char *body;
        int status;
        const char *name, *pointer;
    } bad[] = {
        {"{\"levels\":3,\"atoms\":24,\"spectrum\":[NaN,0.3,0.1]}", 400,
         "malformed-input", NULL},
        {"{\"levels\":3,\"atoms\":24,\"spectrum\":[Infinity,0,0]}", 400,
         "malformed-input", NULL},
        {"{\"levels\":3,\"atoms\":24,\"spectrum\":[1e400,0.3,0.1]}", 400,
         "malformed-input", NULL},
        {"{\"levels\":100,\"atoms\":24,\"spectrum\":[0.6,0.3,0.1]}", 422,
         "invalid-argument", "/levels"},
        {"{\"levels\":3,\"atoms\":1000000000,\"spectrum\":[0.6,0.3,0.1]}", 422,
         "invalid-argument", "/atoms"},
        {"{\"levels\":\"three\",\"atoms\":24,\"spectrum\":[0.6,0.3,0.1]}", 422,
         "invalid-argument", "/levels"},
        {"{\"levels\":3,\"atoms\":24,\"spectrum\":[0.6,0.3,0.2]}", 422,
         "invalid-argument", "/spectrum"},
        {"[1,2,3]", 400, "malformed-input", NULL},
        /* 6 292 069 diagrams (OEIS A026820): over the service's per-request
         * budget, refused before any work */
        {"{\"levels\":10,\"atoms\":100,\"spectrum\":[0.1,0.1,0.1,0.1,0.1,"
         "0.1,0.1,0.1,0.1,0.1]}",
         422, "work-budget-exceeded", NULL},
    };
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++) {
        hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
                   NULL, bad[k].body, &r);
        expect_problem(&r, bad[k].status, bad[k].name, bad[k].pointer);
        hh_free(&r);
        hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
                   NULL, PREDICT, &r);
        cr_expect(r.status == 200, "good request after bad body %zu: %d", k,
                  r.status);
        hh_free(&r);
    }
    /* a 10 MB body */
    size_t huge = 10u << 20;
    body = malloc(huge + 1);
    memset(body, ' ', huge);
    body[huge] = '\0';
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, body, &r);
    expect_problem(&r, 413, "content-too-large", NULL);
    hh_free(&r);
    free(body);
    /* headers only, no body sent: a client waiting for 100 Continue, and a
     * declared body over the 16 MiB drain limit, get the 413 at once (RFC
     * 9110 §10.1.1: a server may answer a final status instead of 100) */
    static const char *const early[] = {
        "POST /v1/predictions HTTP/1.1\r\nHost: x\r\nContent-Type: "
        "application/json\r\nContent-Length: 2097152\r\nExpect: "
        "100-continue\r\nConnection: close\r\n\r\n",
        "POST /v1/predictions HTTP/1.1\r\nHost: x\r\nContent-Type: "
        "application/json\r\nContent-Length: 20971520\r\nConnection: "
        "close\r\n\r\n"};
    for (size_t k = 0; k < 2; k++) {
        hh_raw(hd.port, early[k], strlen(early[k]), &r);
        expect_problem(&r, 413, "content-too-large", NULL);
        hh_free(&r);
    }
    /* the daemon still serves */
    hh_request(hd.port, "GET", "/healthz", NULL, NULL, NULL, NULL, &r);
    cr_expect(r.status == 200);
    hh_free(&r);
}

Test(http, analyses_are_stored_listed_and_idempotent, .init = hd_setup,
     .fini = hd_teardown, .timeout = 120) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r, again;
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               "Idempotency-Key: \"key-1\"", ANALYSIS, &r);
    cr_assert(r.status == 201, "%d %s", r.status, r.body);
    const char *id = json_string_value(json_object_get(r.json, "id"));
    cr_assert(id != NULL);
    char loc[128], want[128];
    snprintf(want, sizeof want, "/v1/analyses/%s", id);
    cr_expect(hh_header(&r, "Location", loc, sizeof loc) &&
              strcmp(loc, want) == 0);
    cr_expect(json_is_object(json_object_get(r.json, "result")));
    cr_expect(json_is_object(json_object_get(r.json, "request")));
    /* the same key and body: the stored record, no new one */
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               "Idempotency-Key: \"key-1\"", ANALYSIS, &again);
    cr_expect(again.status == 200, "%d", again.status);
    char replay[16];
    cr_expect(hh_header(&again, "Idempotent-Replayed", replay, sizeof replay));
    cr_expect(
        strcmp(json_string_value(json_object_get(again.json, "id")), id) == 0);
    cr_expect(json_equal(json_object_get(again.json, "result"),
                         json_object_get(r.json, "result")));
    hh_free(&again);
    /* the same key, another body */
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               "Idempotency-Key: \"key-1\"",
               "{\"levels\":2,\"runs\":[{\"atoms\":4,\"shots\":100,"
               "\"mean_energy\":3.5,\"energy_variance\":3}]}",
               &again);
    expect_problem(&again, 422, "idempotency-key-reused", "/Idempotency-Key");
    hh_free(&again);
    hh_request(hd.port, "GET", want, NULL, NULL, NULL, NULL, &again);
    cr_expect(again.status == 200);
    cr_expect(json_equal(json_object_get(again.json, "result"),
                         json_object_get(r.json, "result")));
    hh_free(&again);
    hh_free(&r);
    /* more records, then page through them newest first */
    for (int k = 0; k < 6; k++) {
        hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
                   NULL, ANALYSIS, &r);
        cr_assert(r.status == 201);
        hh_free(&r);
    }
    char path[256] = "/v1/analyses?limit=3&label=quillfeather/test";
    int seen = 0, pages = 0;
    char last[40] = "9999";
    for (;;) {
        hh_request(hd.port, "GET", path, NULL, NULL, NULL, NULL, &r);
        cr_assert(r.status == 200, "%s", r.body);
        json_t *items = json_object_get(r.json, "items"), *it;
        size_t i;
        json_array_foreach(items, i, it) {
            const char *at =
                json_string_value(json_object_get(it, "created_at"));
            cr_expect(strcmp(at, last) <= 0, "newest first");
            snprintf(last, sizeof last, "%s", at);
            seen++;
        }
        pages++;
        json_t *next = json_object_get(r.json, "next_cursor");
        if (!json_is_string(next)) {
            hh_free(&r);
            break;
        }
        snprintf(path, sizeof path,
                 "/v1/analyses?limit=3&label=quillfeather/test&cursor=%s",
                 json_string_value(next));
        hh_free(&r);
    }
    cr_expect(seen == 7, "seen %d of 7", seen);
    cr_expect(pages == 3);
}

/* Two levels from a mean and a variance: every bootstrap replicate draws
 * the 20 001 content levels of 40 000 atoms, so 4500 of them (within the
 * bootstrap's work budget of 4537 replicates here) take a while.  The run
 * is p = (0.6, 0.4) at n = 40 000: the exact mean content C(n,2)·P2 and
 * variance of domain.md §2 (P2 = 0.52, P3 = 0.28). */
#define SLOW_BODY                                                              \
    "{\"levels\":2,\"bootstrap\":4500,\"runs\":[{\"atoms\":40000,"             \
    "\"shots\":1000,\"mean_energy\":415989600,"                                \
    "\"energy_variance\":614937586176}],\"method\":\"moments\"}"

/* A JSON POST on a thread of its own, for a request that keeps the daemon
 * busy while the test does something else; the answer lands in r. */
typedef struct {
    int port;
    const char *path, *headers, *body;
    hh_response r;
} hh_background;

static void *post_in_background(void *arg) {
    hh_background *b = arg;
    hh_request(b->port, "POST", b->path, NULL, "application/json", b->headers,
               b->body, &b->r);
    return NULL;
}

Test(http, same_key_while_running_is_409, .init = hd_setup, .fini = hd_teardown,
     .timeout = 120) {
    cr_assert(hh_start(&hd, NULL) == 0);
    /* a large bootstrap keeps the analysis busy for a while */
    hh_background s = {
        hd.port, "/v1/analyses", "Idempotency-Key: slow-1", SLOW_BODY, {0}};
    pthread_t t;
    pthread_create(&t, NULL, post_in_background, &s);
    struct timespec nap = {0, 200 * 1000 * 1000};
    nanosleep(&nap, NULL);
    hh_response r;
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               "Idempotency-Key: slow-1", SLOW_BODY, &r);
    pthread_join(t, NULL);
    cr_expect(s.r.status == 201, "first request: %d", s.r.status);
    hh_free(&s.r);
    expect_problem(&r, 409, "conflict", NULL);
    hh_free(&r);
}

/* 1 when a concrete path fits a route template: a "{...}" part matches
 * one or more characters other than '/', the rest must be equal. */
static int path_fits_template(const char *tmpl, const char *path) {
    while (*tmpl) {
        if (*tmpl == '{') {
            tmpl = strchr(tmpl, '}');
            if (tmpl == NULL)
                return 0;
            tmpl++;
            size_t seg = strcspn(path, "/");
            size_t lit = strcspn(tmpl, "/{"); /* literal tail, e.g. ".svg" */
            if (seg <= lit || strncmp(path + seg - lit, tmpl, lit) != 0)
                return 0;
            path += seg;
            tmpl += lit;
            continue;
        }
        if (*tmpl++ != *path++)
            return 0;
    }
    return *path == '\0';
}

Test(http, roles_per_route, .init = hd_setup, .fini = hd_teardown,
     .timeout = 120) {
    /* tokens: sha256 of "r-token", "w-token", "a-token" */
    char tokens[256];
    hh_tokens(hd.dir, tokens, sizeof tokens);
    const char *names[3] = {"r-token", "w-token", "a-token"};
    const char *extra[] = {"--tokens", tokens, NULL};
    cr_assert(hh_start(&hd, extra) == 0);
    static const struct {
        const char *method, *path, *body;
        int status[4]; /* none, read, write, admin */
    } table[] = {
        {"GET", "/healthz", NULL, {200, 200, 200, 200}},
        {"GET", "/metrics", NULL, {200, 200, 200, 200}},
        {"GET", "/v1/analyses", NULL, {401, 200, 200, 200}},
        {"GET",
         "/v1/analyses/an_00000000000000000000",
         NULL,
         {401, 404, 404, 404}},
        {"POST",
         "/v1/predictions",
         "{\"levels\":2,\"atoms\":3,\"spectrum\":[0.5,0.5]}",
         {401, 403, 200, 200}},
        {"POST",
         "/v1/candidates",
         "{\"levels\":2,\"atoms\":3}",
         {401, 403, 200, 200}},
        {"POST",
         "/v1/simulations",
         "{\"levels\":2,\"atoms\":3,\"spectrum\":[0.5,0.5],\"shots\":2}",
         {401, 403, 200, 200}},
        {"POST",
         "/v1/analyses",
         "{\"levels\":2,\"runs\":[{\"atoms\":4,\"shots\":100,\"mean_energy\":"
         "3.5,\"energy_variance\":3}]}",
         {401, 403, 201, 201}},
        {"GET",
         "/v1/analyses/an_00000000000000000000/revisions",
         NULL,
         {401, 404, 404, 404}},
        {"PUT",
         "/v1/calibrations/acl-test",
         "{\"offset\":0,\"pair_shift\":0,\"exchange\":1,\"noise_sd\":0}",
         {401, 403, 403, 201}},
        {"GET", "/v1/calibrations/acl-test", NULL, {401, 200, 200, 200}},
        {"GET", "/v1/calibrations", NULL, {401, 200, 200, 200}},
        {"POST",
         "/v1/reprocessing",
         "{\"calibration\":\"acl-test\"}",
         {401, 403, 403, 202}},
        {"GET",
         "/v1/jobs/job_00000000000000000000",
         NULL,
         {401, 404, 404, 404}},
        {"GET",
         "/v1/analyses/an_00000000000000000000/figures/spectrum.svg",
         NULL,
         {401, 404, 404, 404}},
        {"GET", "/", NULL, {401, 200, 200, 200}},
        {"GET",
         "/analyses/an_00000000000000000000",
         NULL,
         {401, 404, 404, 404}},
        {"GET", "/favicon.ico", NULL, {200, 200, 200, 200}},
    };
    /* the table covers every route the daemon serves (`swapspec routes`) */
    FILE *rp = popen(SWAPSPEC_BINARY " routes", "r");
    cr_assert(rp != NULL);
    json_error_t jerr;
    json_t *routes = json_loadf(rp, 0, &jerr);
    pclose(rp);
    cr_assert(json_is_array(routes), "swapspec routes: %s", jerr.text);
    size_t ri;
    json_t *route;
    json_array_foreach(routes, ri, route) {
        const char *m = json_string_value(json_object_get(route, "method"));
        const char *tmpl = json_string_value(json_object_get(route, "path"));
        int covered = 0;
        for (size_t i = 0; i < sizeof table / sizeof table[0] && !covered; i++)
            covered = strcmp(table[i].method, m) == 0 &&
                      path_fits_template(tmpl, table[i].path);
        cr_expect(covered, "route %s %s is missing from the access table", m,
                  tmpl);
    }
    json_decref(routes);
    const char *tok[4] = {NULL, "r-token", "w-token", "a-token"};
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
        for (int k = 0; k < 4; k++) {
            hh_response r;
            hh_request(hd.port, table[i].method, table[i].path, tok[k],
                       table[i].body ? "application/json" : NULL, NULL,
                       table[i].body, &r);
            cr_expect(r.status == table[i].status[k], "%s %s as %s: %d",
                      table[i].method, table[i].path, tok[k] ? tok[k] : "-",
                      r.status);
            char www[128];
            if (r.status == 401)
                cr_expect(hh_header(&r, "WWW-Authenticate", www, sizeof www) &&
                          strncmp(www, "Bearer", 6) == 0);
            hh_free(&r);
        }
    hh_response r;
    hh_request(hd.port, "GET", "/v1/analyses", "wrong-token", NULL, NULL, NULL,
               &r);
    expect_problem(&r, 401, "unauthorized", NULL);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    /* tokens never reach the log */
    FILE *log = fopen(hd.log, "r");
    char line[4096];
    while (log && fgets(line, sizeof line, log))
        for (int k = 0; k < 3; k++)
            cr_expect(strstr(line, names[k]) == NULL, "token in log: %s", line);
    if (log)
        fclose(log);
}

Test(http, refuses_non_loopback_without_tokens, .init = hd_setup,
     .fini = hd_teardown, .timeout = 30) {
    const char *extra[] = {"--listen", "0.0.0.0:0", NULL};
    int rc = hh_start(&hd, extra);
    cr_expect(rc == 2, "exit status %d", rc);
    FILE *log = fopen(hd.log, "r");
    char line[4096] = "";
    cr_assert(log && fgets(line, sizeof line, log));
    fclose(log);
    cr_expect(strstr(line, "loopback") != NULL, "%s", line);
}

Test(http, metrics_follow_the_text_format, .init = hd_setup,
     .fini = hd_teardown, .timeout = 60) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r;
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL, PREDICT, &r);
    hh_free(&r);
    hh_request(hd.port, "GET", "/metrics", NULL, NULL, NULL, NULL, &r);
    cr_assert(r.status == 200);
    char ct[128];
    cr_expect(hh_header(&r, "Content-Type", ct, sizeof ct) &&
              strncmp(ct, "text/plain; version=0.0.4", 25) == 0);
    /* Prometheus exposition format 0.0.4: TYPE before samples, +Inf bucket
     * equal to _count, body ending in a newline */
    const char *b = r.body;
    cr_expect(r.body_len > 0 && b[r.body_len - 1] == '\n');
    const char *type = strstr(b, "# TYPE swapspec_http_requests_total counter");
    const char *sample =
        strstr(b, "swapspec_http_requests_total{route=\"/v1/predictions\","
                  "status=\"200\"} 1");
    cr_expect(type && sample && type < sample, "%s", b);
    cr_expect(strstr(b, "swapspec_http_request_duration_seconds_bucket{route="
                        "\"/v1/predictions\",le=\"+Inf\"} 1") != NULL);
    cr_expect(strstr(b, "swapspec_http_request_duration_seconds_count{route="
                        "\"/v1/predictions\"} 1") != NULL);
    cr_expect(strstr(b, "swapspec_analyses_stored 0") != NULL);
    /* nothing written yet: no checkpoint has run */
    cr_expect(strstr(b, "# TYPE swapspec_store_checkpoints_total counter\n"
                        "swapspec_store_checkpoints_total{outcome=\"passed\"} "
                        "0\n"
                        "swapspec_store_checkpoints_total{outcome=\"failed\"} "
                        "0\n") != NULL,
              "%s", b);
    cr_expect(strstr(b, "swapspec_store_log_restarts_total 0\n") != NULL);
    hh_free(&r);
}

Test(http, sigterm_drains_and_exits_cleanly, .init = hd_setup,
     .fini = hd_teardown, .timeout = 60) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r;
    hh_request(hd.port, "GET", "/healthz", NULL, NULL, NULL, NULL, &r);
    cr_expect(r.status == 200);
    cr_expect(
        strcmp(json_string_value(json_object_get(r.json, "store")), "ok") == 0);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    FILE *log = fopen(hd.log, "r");
    char line[4096];
    int shutdown = 0;
    while (log && fgets(line, sizeof line, log))
        shutdown |= strstr(line, "\"shutdown\"") != NULL;
    if (log)
        fclose(log);
    cr_expect(shutdown, "a shutdown line is logged");
}

Test(http, acknowledged_analyses_survive_kill_9, .init = hd_setup,
     .fini = hd_teardown, .timeout = 180) {
    char ids[40][40];
    int acked = 0;
    cr_assert(hh_start(&hd, NULL) == 0);
    for (int k = 0; k < 40; k++) {
        hh_response r;
        char key[64];
        snprintf(key, sizeof key, "Idempotency-Key: burst-%d", k);
        hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
                   key, ANALYSIS, &r);
        if (r.status == 201)
            snprintf(ids[acked++], sizeof ids[0], "%.38s",
                     json_string_value(json_object_get(r.json, "id")));
        hh_free(&r);
        if (k == 25)
            break; /* then kill without warning */
    }
    cr_expect(hh_stop(&hd, SIGKILL) == 128 + SIGKILL);
    cr_assert(hh_start(&hd, NULL) == 0);
    for (int k = 0; k < acked; k++) {
        char path[160];
        snprintf(path, sizeof path, "/v1/analyses/%.39s", ids[k]);
        hh_response r;
        hh_request(hd.port, "GET", path, NULL, NULL, NULL, NULL, &r);
        cr_expect(r.status == 200, "acknowledged %s lost after kill -9",
                  ids[k]);
        hh_free(&r);
    }
    /* a replay of an acknowledged key returns the stored record */
    hh_response r;
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json",
               "Idempotency-Key: burst-3", ANALYSIS, &r);
    cr_expect(r.status == 200);
    cr_expect(
        strcmp(json_string_value(json_object_get(r.json, "id")), ids[3]) == 0);
    hh_free(&r);
    cr_expect(acked == 26);
    /* one record per key: 26 acknowledged, the replay added none */
    hh_request(hd.port, "GET", "/v1/analyses?limit=200", NULL, NULL, NULL, NULL,
               &r);
    cr_expect(json_array_size(json_object_get(r.json, "items")) ==
                  (size_t)acked,
              "%zu records", json_array_size(json_object_get(r.json, "items")));
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
    /* PRAGMA integrity_check on the store the crash left (sqlite3 shell) */
    char cmd[256], out[64] = "";
    snprintf(cmd, sizeof cmd, "sqlite3 %s/store.db 'PRAGMA integrity_check'",
             hd.dir);
    FILE *p = popen(cmd, "r");
    cr_assert(p != NULL);
    cr_expect(fgets(out, sizeof out, p) != NULL && strcmp(out, "ok\n") == 0,
              "integrity_check: %s", out);
    pclose(p);
}

Test(http, tls_with_a_certificate_made_here, .init = hd_setup,
     .fini = hd_teardown, .timeout = 60) {
    /* a throw-away self-signed certificate (openssl from Debian) */
    char cmd[512];
    snprintf(cmd, sizeof cmd,
             "openssl req -x509 -newkey rsa:2048 -nodes -days 1 -subj "
             "/CN=127.0.0.1 -keyout %s/key.pem -out %s/cert.pem "
             ">/dev/null 2>&1",
             hd.dir, hd.dir);
    cr_assert(system(cmd) == 0, "openssl could not make a certificate");
    char cert[128], key[128];
    snprintf(cert, sizeof cert, "%s/cert.pem", hd.dir);
    snprintf(key, sizeof key, "%s/key.pem", hd.dir);
    const char *extra[] = {"--tls-cert", cert, "--tls-key", key, NULL};
    cr_assert(hh_start(&hd, extra) == 0);
    /* HTTPS answers (curl checks the chain against the certificate) */
    char out[256] = "";
    snprintf(cmd, sizeof cmd,
             "curl -s --cacert %s https://127.0.0.1:%d/healthz", cert, hd.port);
    FILE *p = popen(cmd, "r");
    cr_assert(p != NULL);
    cr_expect(fgets(out, sizeof out, p) != NULL);
    pclose(p);
    cr_expect(strstr(out, "\"status\":\"ok\"") != NULL, "%s", out);
    /* plain HTTP on the TLS port gets no HTTP answer */
    snprintf(cmd, sizeof cmd,
             "curl -s -o /dev/null -w '%%{http_code}' "
             "http://127.0.0.1:%d/healthz",
             hd.port);
    p = popen(cmd, "r");
    cr_assert(p != NULL);
    out[0] = '\0';
    if (fgets(out, sizeof out, p) == NULL)
        out[0] = '\0';
    pclose(p);
    cr_expect(strcmp(out, "200") != 0, "plain HTTP answered: %s", out);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
}

/* Faults a lab network produces, each answered and survived (issue 7):
 * headers over the per-connection memory → 431 from libmicrohttpd; the
 * store's write lock held by another process past the busy timeout → 503
 * store-busy with Retry-After (RFC 9110 §10.2.3), then 201 once the lock
 * is gone; a client that sends half a request and stalls is disconnected
 * by the connection timeout (1 s here), while other requests are served. */
Test(http, faults_are_answered_and_survived, .init = hd_setup,
     .fini = hd_teardown, .timeout = 90) {
    char conf[256];
    snprintf(conf, sizeof conf, "%s/swapspec.conf", hd.dir);
    hh_write(conf, "connection_timeout = 1\n");
    const char *extra[] = {"--config", conf, NULL};
    cr_assert(hh_start(&hd, extra) == 0);
    hh_response r;
    /* 1. a 100 KB header */
    size_t big = 100000;
    char *hdr = malloc(big + 16);
    memcpy(hdr, "X-Big: ", 7);
    memset(hdr + 7, 'a', big);
    hdr[7 + big] = '\0';
    hh_request(hd.port, "GET", "/healthz", NULL, NULL, hdr, NULL, &r);
    cr_expect(r.status == 431, "oversized header: %d", r.status);
    hh_free(&r);
    free(hdr);
    /* 2. the write lock held by another process (sqlite3's shell) */
    char cmd[512];
    snprintf(cmd, sizeof cmd, "sqlite3 %s/store.db", hd.dir);
    FILE *lock = popen(cmd, "w");
    cr_assert(lock != NULL);
    fputs("BEGIN IMMEDIATE;\n", lock);
    fflush(lock);
    nanosleep(&(struct timespec){0, 300000000}, NULL);
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json", NULL,
               ANALYSIS, &r);
    expect_problem(&r, 503, "store-busy", NULL);
    char retry[32];
    cr_expect(hh_header(&r, "Retry-After", retry, sizeof retry) &&
                  atoi(retry) >= 1,
              "503 without Retry-After");
    hh_free(&r);
    fputs("ROLLBACK;\n.quit\n", lock);
    pclose(lock);
    hh_request(hd.port, "POST", "/v1/analyses", NULL, "application/json", NULL,
               ANALYSIS, &r);
    cr_expect(r.status == 201, "after the lock: %d", r.status);
    hh_free(&r);
    /* 3. half a request, then silence */
    int fd = hh_connect(hd.port);
    const char *half = "POST /v1/analyses HTTP/1.1\r\nHost: x\r\n";
    cr_assert(send(fd, half, strlen(half), MSG_NOSIGNAL) > 0);
    hh_request(hd.port, "GET", "/healthz", NULL, NULL, NULL, NULL, &r);
    cr_expect(r.status == 200, "served beside a stalled client: %d", r.status);
    hh_free(&r);
    struct pollfd p = {fd, POLLIN, 0};
    cr_expect(poll(&p, 1, 5000) == 1, "the stalled connection stayed open");
    char buf[256];
    ssize_t n = recv(fd, buf, sizeof buf, 0);
    cr_expect(n <= 0 || strncmp(buf, "HTTP/1.1 408", 12) == 0,
              "stalled client got %zd bytes", n);
    close(fd);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
}

/* Compute limits (issue 7): every request over the work budget of its
 * route is refused up front with 422 work-budget-exceeded, the pointer of
 * the field to change and the limit ("at most ...; got ..."), and the next
 * good request on the same route is served.  The limits and their cost
 * models are stated beside the code (server/cmd_simulate.c,
 * cmd_predict.c, cmd_diagrams.c, core/src/internal.h); the numbers here
 * are worked from those formulas by hand:
 * - simulations: shots × (atoms + 32) × (levels + 8) ≤ 5·10^8, so 10 000
 *   shots of 100 000 atoms on 16 levels (10^9 atoms, about 34 s of drawing
 *   before) are refused, and at 100 000 atoms on 2 levels at most
 *   5·10^8 / (100 032 · 10) = 499.8, i.e. 499 shots are allowed;
 * - predictions: at most 100 000 entries; 3461 atoms on 3 levels have
 *   999 941 diagrams, nearly all with distinct contents (the span of
 *   contents is ~6·10^6), and d = 2 has one energy level per diagram
 *   (domain.md §2: c strictly monotone in the second row) and
 *   floor(n/2) + 1 diagrams (OEIS A026820), i.e. 2·(floor(n/2) + 1)
 *   entries with top 0: 100 000 atoms make 100 002 (refused), 99 999 make
 *   100 000 (served);
 * - candidates: at most 100 000 listed diagrams; 260 atoms on 4 levels
 *   have 129 228 diagrams (OEIS A026820), all listed without a selection
 *   or with a window of ±3·10^6 (their degenerate groups come on top);
 * - analyses: the bootstrap of one run of 12 atoms on 4 levels allows
 *   1460 replicates (test_inversion's cost_model_boundaries); the runs'
 *   Schur tables together at most max_table_cells = 8·10^6 cells, half
 *   that with a bootstrap: 100 runs of 100 000 atoms on 2 levels need
 *   100 × 100 001 (cells(n, 2) = n + 1), and one run of 83 atoms on 9
 *   levels with a bootstrap alone more than 4·10^6 (its table has
 *   6.6·10^6 cells, within the 8·10^6 of a single table). */
#define U16                                                                    \
    "[0.0625,0.0625,0.0625,0.0625,0.0625,0.0625,0.0625,0.0625,0.0625,"         \
    "0.0625,0.0625,0.0625,0.0625,0.0625,0.0625,0.0625]"

static const struct {
    const char *path, *body, *pointer, *detail;
} over_budget[] = {
    {"/v1/simulations",
     "{\"levels\":16,\"atoms\":100000,\"spectrum\":" U16 ",\"shots\":10000}",
     "/shots", "at most 208 shots"},
    {"/v1/simulations",
     "{\"levels\":2,\"atoms\":100000,\"spectrum\":[0.5,0.5],\"shots\":500}",
     "/shots", "at most 499 shots"},
    {"/v1/predictions",
     "{\"levels\":3,\"atoms\":3461,\"spectrum\":[0.6,0.3,0.1]}", "/atoms",
     "at most 100000 entries"},
    {"/v1/predictions",
     "{\"levels\":16,\"atoms\":63,\"spectrum\":" U16 ",\"top\":100000}", "/top",
     "at most 100000 entries"},
    {"/v1/predictions",
     "{\"levels\":2,\"atoms\":100000,\"spectrum\":[0.5,0.5],\"top\":0}",
     "/atoms", "got up to 100002"},
    {"/v1/candidates", "{\"levels\":4,\"atoms\":260}", "/atoms",
     "at most 100000 listed diagrams"},
    {"/v1/candidates",
     "{\"levels\":4,\"atoms\":260,\"energy\":0,\"energy_sd\":1e6}",
     "/energy_sd", "at most 100000 listed diagrams"},
    {"/v1/analyses",
     "{\"levels\":4,\"bootstrap\":10000,\"runs\":[{\"atoms\":12,\"shots\":"
     "1000,\"mean_energy\":19.8,\"energy_variance\":73.26}],\"method\":"
     "\"moments\"}",
     "/bootstrap", "at most 1460 bootstrap replicates"},
    {"/v1/analyses",
     "{\"levels\":9,\"bootstrap\":10,\"runs\":[{\"atoms\":83,\"shots\":500,"
     "\"mean_energy\":459.405,\"energy_variance\":5008.620475}],"
     "\"method\":\"moments\"}",
     "/runs/0/atoms", "at most 4000000 Schur-table cells"},
    {"/v1/analyses", NULL, "/runs", "got 10000100"}, /* built below */
};

/* A good request per route, served after each refusal. */
static const char *good_body(const char *path) {
    if (strcmp(path, "/v1/predictions") == 0)
        return PREDICT;
    if (strcmp(path, "/v1/candidates") == 0)
        return "{\"levels\":3,\"atoms\":6,\"content\":3}";
    if (strcmp(path, "/v1/simulations") == 0)
        return "{\"levels\":3,\"atoms\":8,\"spectrum\":[0.5,0.3,0.2],"
               "\"shots\":50}";
    return ANALYSIS;
}

/* 100 summary runs of 100 000 atoms on 2 levels at p = (0.6, 0.4): the
 * exact mean and variance of domain.md §2 (as in the 9-level row, at
 * p = (0.2, 0.2, 0.1 ×5, 0.05 ×2)).  Free the result. */
static char *many_big_runs(void) {
    static const char run[] = "{\"atoms\":100000,\"shots\":100,\"mean_energy\":"
                              "2599974000,\"energy_variance\":9603359965184}";
    size_t cap = 100 * sizeof run + 128, used = 0;
    char *body = malloc(cap);
    used += (size_t)snprintf(body, cap, "{\"levels\":2,\"runs\":[");
    for (int k = 0; k < 100; k++)
        used += (size_t)snprintf(body + used, cap - used, "%s%s", k ? "," : "",
                                 run);
    snprintf(body + used, cap - used, "],\"method\":\"moments\"}");
    return body;
}

Test(http, compute_limits_are_refused_up_front, .init = hd_setup,
     .fini = hd_teardown, .timeout = 120) {
    cr_assert(hh_start(&hd, NULL) == 0);
    hh_response r;
    char *runs = many_big_runs();
    for (size_t k = 0; k < sizeof over_budget / sizeof over_budget[0]; k++) {
        const char *path = over_budget[k].path;
        const char *body = over_budget[k].body ? over_budget[k].body : runs;
        hh_request(hd.port, "POST", path, NULL, "application/json", NULL, body,
                   &r);
        expect_problem(&r, 422, "work-budget-exceeded", over_budget[k].pointer);
        const char *detail =
            json_string_value(json_object_get(r.json, "detail"));
        cr_expect(detail && strstr(detail, over_budget[k].detail) &&
                      strstr(detail, "got"),
                  "row %zu: detail '%s', expected '%s ... got ...'", k,
                  detail ? detail : "(none)", over_budget[k].detail);
        hh_free(&r);
        hh_request(hd.port, "POST", path, NULL, "application/json", NULL,
                   good_body(path), &r);
        cr_expect(r.status == 200 || r.status == 201,
                  "good request on %s after row %zu: %d %s", path, k, r.status,
                  r.body);
        hh_free(&r);
    }
    free(runs);
    /* the largest prediction of 2 levels the entry limit allows: 99 999
     * atoms, 50 000 diagrams and as many levels, top 0: 100 000 entries */
    hh_request(hd.port, "POST", "/v1/predictions", NULL, "application/json",
               NULL,
               "{\"levels\":2,\"atoms\":99999,\"spectrum\":[0.5,0.5],"
               "\"top\":0}",
               &r);
    cr_assert(r.status == 200, "%d %.300s", r.status, r.body);
    cr_expect(json_integer_value(json_object_get(r.json, "total_diagrams")) ==
              50000);
    cr_expect(json_array_size(json_object_get(r.json, "energy_levels")) ==
              50000);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
}

/* The per-request deadline (max_seconds, here 1 s) turns a slow
 * computation into 503 deadline-exceeded, and the worker is free for the
 * next request.  The simulation below is within the work budget (208 of 208
 * shots; about 1.3 s on the 2-core reference machine, Release build) and
 * the daemon is frozen (SIGSTOP) for 1.5 s while it draws — as a machine
 * far busier than the cost model assumes would — so the outcome does not
 * depend on the machine's speed: after SIGCONT the next look at the clock
 * is past the deadline.  (Frozen before the drawing started, the request
 * would still run past 1 s by itself on the reference machine, and far
 * past it in the sanitizer build.) */
#define SLOW_SIMULATION                                                        \
    "{\"levels\":16,\"atoms\":100000,\"spectrum\":[0.1,0.1,0.1,0.1,"           \
    "0.075,0.075,0.075,0.075,0.05,0.05,0.05,0.05,0.025,0.025,0.025,"           \
    "0.025],\"shots\":208}"

Test(http, deadline_turns_a_slow_request_into_503, .init = hd_setup,
     .fini = hd_teardown, .timeout = 120) {
    char conf[256];
    snprintf(conf, sizeof conf, "%s/swapspec.conf", hd.dir);
    hh_write(conf, "max_seconds = 1\n");
    const char *extra[] = {"--config", conf, NULL};
    cr_assert(hh_start(&hd, extra) == 0);
    hh_background s = {hd.port, "/v1/simulations", NULL, SLOW_SIMULATION, {0}};
    pthread_t t;
    pthread_create(&t, NULL, post_in_background, &s);
    nanosleep(&(struct timespec){0, 100 * 1000 * 1000}, NULL);
    kill(hd.pid, SIGSTOP);
    nanosleep(&(struct timespec){1, 500 * 1000 * 1000}, NULL);
    kill(hd.pid, SIGCONT);
    pthread_join(t, NULL);
    expect_problem(&s.r, 503, "deadline-exceeded", "/max_seconds");
    const char *detail = json_string_value(json_object_get(s.r.json, "detail"));
    cr_expect(detail && strstr(detail, "within 1 s"), "detail: %s", detail);
    hh_free(&s.r);
    hh_response r;
    hh_request(hd.port, "POST", "/v1/simulations", NULL, "application/json",
               NULL, good_body("/v1/simulations"), &r);
    cr_expect(r.status == 200, "the next simulation: %d %s", r.status, r.body);
    hh_free(&r);
    cr_expect(hh_stop(&hd, SIGTERM) == 0);
}
