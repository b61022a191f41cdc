/*
 * cmd_serve.c — `swapspec serve`: settings from the command line, the
 * environment (SWAPSPEC_LISTEN, SWAPSPEC_DATA, SWAPSPEC_TOKENS,
 * SWAPSPEC_THREADS, SWAPSPEC_TLS_CERT, SWAPSPEC_TLS_KEY) and a config file
 * of `key = value` lines (`#` comments), in that order of precedence, then
 * the daemon (http_serve) until SIGTERM or SIGINT.  Also `swapspec routes`,
 * which prints the route table as JSON (a test holds it against the API
 * specification).
 */
#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "cli_json.h"
#include "commands.h"
#include "http.h"

enum {
    OPT_LISTEN,
    OPT_DATA,
    OPT_TOKENS,
    OPT_THREADS,
    OPT_TLS_CERT,
    OPT_TLS_KEY,
    OPT_CONFIG,
    OPT_N
};

static const cli_option serve_options[OPT_N] = {
    [OPT_LISTEN] = {"listen", CLI_PATH, 0, "HOST:PORT", 0, 0, 0,
                    "address to listen on (default 127.0.0.1:8080; port 0 "
                    "picks a free port, logged at start-up)"},
    [OPT_DATA] = {"data", CLI_PATH, 0, "FILE.db", 0, 0, 0,
                  "SQLite store (default ./var/swapspec.db; created with its "
                  "folder)"},
    [OPT_TOKENS] = {"tokens", CLI_PATH, 0, "FILE", 0, 0, 0,
                    "tokens file of `role sha256hex(token)` lines; without "
                    "one only loopback addresses are allowed"},
    [OPT_THREADS] =
        {"threads", CLI_UINT, 0, "N", 1, 256, 0,
         "worker threads (default 16: a long computation holds its thread)"},
    [OPT_TLS_CERT] = {"tls-cert", CLI_PATH, 0, "FILE.pem", 0, 0, 0,
                      "serve HTTPS with this certificate"},
    [OPT_TLS_KEY] = {"tls-key", CLI_PATH, 0, "FILE.pem", 0, 0, 0,
                     "private key of --tls-cert"},
    [OPT_CONFIG] = {"config", CLI_PATH, 0, "FILE", 0, 0, 0,
                    "config file of `key = value` lines (see "
                    "deploy/swapspec.conf)"},
};

static ss_status serve_set_listen(http_settings *s, const char *v,
                                  const char *field, ss_error *err) {
    const char *colon = strrchr(v, ':');
    char *end = NULL;
    unsigned long port = colon ? strtoul(colon + 1, &end, 10) : 0;
    if (colon == NULL || colon == v || end == colon + 1 || *end != '\0' ||
        port > 65535 || (size_t)(colon - v) >= sizeof s->listen_host)
        return ss_error_set(err, SS_EINVAL, field,
                            "expected HOST:PORT (e.g. 127.0.0.1:8080), got "
                            "'%s'",
                            v);
    memcpy(s->listen_host, v, (size_t)(colon - v));
    s->listen_host[colon - v] = '\0';
    s->listen_port = (unsigned)port;
    return SS_OK;
}

static ss_status serve_set_uint(unsigned long *out, const char *v,
                                unsigned long lo, unsigned long hi,
                                const char *field, ss_error *err) {
    char *end = NULL;
    unsigned long x = strtoul(v, &end, 10);
    if (!isdigit((unsigned char)v[0]) || *end != '\0' || x < lo || x > hi)
        return ss_error_set(err, SS_EINVAL, field,
                            "expected a whole number from %lu to %lu, got "
                            "'%s'",
                            lo, hi, v);
    *out = x;
    return SS_OK;
}

/* One setting by its config-file name. */
static ss_status serve_set(http_settings *s, const char *key, const char *v,
                           const char *field, ss_error *err) {
    unsigned long x = 0;
    ss_status st = SS_OK;
#define SERVE_PATH(name, dst)                                                  \
    if (strcmp(key, name) == 0) {                                              \
        if (strlen(v) >= sizeof(dst))                                          \
            return ss_error_set(err, SS_EINVAL, field, "path too long");       \
        snprintf(dst, sizeof(dst), "%s", v);                                   \
        return SS_OK;                                                          \
    }
#define SERVE_UINT(name, dst, lo, hi)                                          \
    if (strcmp(key, name) == 0) {                                              \
        st = serve_set_uint(&x, v, lo, hi, field, err);                        \
        if (st == SS_OK)                                                       \
            dst = (__typeof__(dst))x;                                          \
        return st;                                                             \
    }
    if (strcmp(key, "listen") == 0)
        return serve_set_listen(s, v, field, err);
    SERVE_PATH("data", s->data_path)
    SERVE_PATH("tokens", s->tokens_path)
    SERVE_PATH("tls_cert", s->tls_cert)
    SERVE_PATH("tls_key", s->tls_key)
    SERVE_UINT("threads", s->threads, 1, 256)
    SERVE_UINT("body_limit", s->body_limit, 1024, 256ul << 20)
    SERVE_UINT("connection_timeout", s->connection_timeout, 1, 3600)
    SERVE_UINT("connection_limit", s->connection_limit, 1, 60000)
    SERVE_UINT("per_ip_limit", s->per_ip_limit, 1, 60000)
    SERVE_UINT("connection_memory", s->connection_memory, 8192, 1ul << 24)
    SERVE_UINT("drain_seconds", s->drain_seconds, 0, 3600)
    SERVE_UINT("simulation_shots", s->simulation_shots, 1, 1000000)
    SERVE_UINT("max_diagrams", s->budget.max_diagrams, 1, 8000000)
    SERVE_UINT("max_table_cells", s->budget.max_table_cells, 1, 64000000)
    SERVE_UINT("max_work", s->budget.max_work, 1, SS_BUDGET_WORK_DEFAULT)
    SERVE_UINT("max_seconds", s->budget.max_seconds, 1, 3600)
#undef SERVE_PATH
#undef SERVE_UINT
    return ss_error_set(err, SS_EINVAL, field, "unknown setting '%s'", key);
}

static ss_status serve_config_file(http_settings *s, const char *path,
                                   ss_error *err) {
    FILE *f = fopen(path, "r");
    if (f == NULL)
        return ss_error_set(err, SS_ENOTFOUND, "config",
                            "cannot read config file '%s'", path);
    char line[1024];
    int lineno = 0;
    ss_status st = SS_OK;
    while (st == SS_OK && fgets(line, sizeof line, f) != NULL) {
        lineno++;
        char *hash = strchr(line, '#');
        if (hash)
            *hash = '\0';
        char *eq = strchr(line, '=');
        char *k = line;
        while (isspace((unsigned char)*k))
            k++;
        if (*k == '\0')
            continue;
        char field[96];
        snprintf(field, sizeof field, "config:%d", lineno);
        if (eq == NULL) {
            st = ss_error_set(err, SS_EINVAL, field,
                              "config file '%s', line %d: expected "
                              "key = value",
                              path, lineno);
            break;
        }
        *eq = '\0';
        char *v = eq + 1;
        for (char *e = eq; e > k && isspace((unsigned char)e[-1]); e--)
            e[-1] = '\0';
        while (isspace((unsigned char)*v))
            v++;
        for (size_t n = strlen(v); n > 0 && isspace((unsigned char)v[n - 1]);
             n--)
            v[n - 1] = '\0';
        snprintf(field, sizeof field, "config.%.80s", k);
        st = serve_set(s, k, v, field, err);
    }
    fclose(f);
    return st;
}

static ss_status serve_settings(const cli_parsed *args, http_settings *s,
                                ss_error *err) {
    http_settings_default(s);
    const cli_value *v = args->values;
    ss_status st = SS_OK;
    if (v[OPT_CONFIG].present)
        st = serve_config_file(s, v[OPT_CONFIG].text, err);
    static const struct {
        const char *env, *key;
    } envs[] = {
        {"SWAPSPEC_LISTEN", "listen"},     {"SWAPSPEC_DATA", "data"},
        {"SWAPSPEC_TOKENS", "tokens"},     {"SWAPSPEC_THREADS", "threads"},
        {"SWAPSPEC_TLS_CERT", "tls_cert"}, {"SWAPSPEC_TLS_KEY", "tls_key"}};
    for (size_t i = 0; st == SS_OK && i < sizeof envs / sizeof envs[0]; i++) {
        const char *e = getenv(envs[i].env);
        if (e != NULL && e[0] != '\0')
            st = serve_set(s, envs[i].key, e, envs[i].env, err);
    }
    static const struct {
        int opt;
        const char *key;
    } opts[] = {{OPT_LISTEN, "listen"},     {OPT_DATA, "data"},
                {OPT_TOKENS, "tokens"},     {OPT_THREADS, "threads"},
                {OPT_TLS_CERT, "tls_cert"}, {OPT_TLS_KEY, "tls_key"}};
    for (size_t i = 0; st == SS_OK && i < sizeof opts / sizeof opts[0]; i++)
        if (v[opts[i].opt].present)
            st = serve_set(s, opts[i].key, v[opts[i].opt].text,
                           serve_options[opts[i].opt].name, err);
    if (st == SS_OK && (s->tls_cert[0] != '\0') != (s->tls_key[0] != '\0'))
        st = ss_error_set(err, SS_EINVAL, "tls-key",
                          "--tls-cert and --tls-key go together");
    return st;
}

/* Creates the folder of the data file (one level), as the embedded default
 * ./var/swapspec.db needs. */
static void serve_make_folder(const char *path) {
    char dir[512];
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (slash == NULL || slash == dir)
        return;
    *slash = '\0';
    mkdir(dir, 0700);
}

static ss_status serve_run(const cli_parsed *args, json_t **doc_out,
                           ss_error *err) {
    http_settings s;
    if (serve_settings(args, &s, err) != SS_OK)
        return err->code;
    serve_make_folder(s.data_path);
    if (http_serve(&s, err) != 0)
        return err->code != SS_OK ? err->code : SS_EINTERNAL;
    *doc_out = NULL; /* the daemon logs on stderr; nothing on stdout */
    return SS_OK;
}

const cli_command cli_cmd_serve = {
    "serve",
    "run the HTTP/JSON service",
    "Runs the HTTP/JSON service: predictions, candidates, simulations and "
    "stored analyses over /v1, with /healthz and /metrics.  Logs one JSON "
    "line per request on stderr.  Stops cleanly on SIGTERM or SIGINT, "
    "finishing requests in flight.",
    serve_options,
    OPT_N,
    "Settings also come from the environment (SWAPSPEC_LISTEN, "
    "SWAPSPEC_DATA, SWAPSPEC_TOKENS, SWAPSPEC_THREADS, SWAPSPEC_TLS_CERT, "
    "SWAPSPEC_TLS_KEY) and a config file; the command line wins, then the "
    "environment, then the file.",
    serve_run,
    NULL,
};

static ss_status routes_run(const cli_parsed *args, json_t **doc_out,
                            ss_error *err) {
    (void)args;
    json_t *arr = json_array();
    for (size_t i = 0; arr && i < http_route_count; i++)
        json_array_append_new(
            arr, json_pack("{s:s,s:s,s:s}", "method", http_routes[i].method,
                           "path", http_routes[i].path, "role",
                           http_routes[i].role == AUTH_NONE
                               ? "open"
                               : auth_role_name(http_routes[i].role)));
    if (arr == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    *doc_out = arr;
    return SS_OK;
}

static const cli_option routes_options[1] = {
    {"unused", CLI_PATH, 0, "X", 0, 0, 0, "(no options)"}};

const cli_command cli_cmd_routes = {
    "routes",
    "print the service's route table as JSON",
    "Prints the HTTP routes the service answers, with the role each needs "
    "(open, read, write, admin), as one JSON array.",
    routes_options,
    0,
    NULL,
    routes_run,
    NULL,
};
