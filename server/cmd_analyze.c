/*
 * cmd_analyze.c — `swapspec analyze FILE.json` (or `-` for standard input):
 * measured energies to a spectrum with uncertainty, candidate diagrams and
 * flags.  Reads the request document (api_request.h), runs and renders it
 * (analysis_exec.h, as the service does).  A calibration given by reference
 * needs --data, the service's store, to be resolved.  Owns the input buffer
 * for the duration of the command.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "analysis_exec.h"
#include "api_request.h"
#include "cli_json.h"
#include "commands.h"

/* Largest request accepted from a file or standard input. */
#define ANALYZE_MAX_INPUT (64u * 1024u * 1024u)

static const cli_option analyze_options[] = {
    {"method", CLI_PATH, 0, "METHOD", 0, 0, 0,
     "override the request's method: auto, moments, likelihood or "
     "diagrams"},
    {"data", CLI_PATH, 0, "FILE.db", 0, 0, 0,
     "the service's store, to resolve a calibration given by reference "
     "({\"ref\": NAME}); nothing is written to it"},
};

/* Reads all of f into a new buffer (NUL-terminated); NULL with err set. */
static char *analyze_slurp(FILE *f, const char *name, size_t *len,
                           ss_error *err) {
    size_t cap = 65536, used = 0;
    char *buf = malloc(cap);
    while (buf != NULL) {
        size_t got = fread(buf + used, 1, cap - used - 1, f);
        used += got;
        if (got == 0)
            break;
        if (used + 1 == cap) {
            if (cap >= ANALYZE_MAX_INPUT) {
                free(buf);
                ss_error_set(err, SS_EINVAL, "input",
                             "'%s' is larger than %u bytes", name,
                             ANALYZE_MAX_INPUT);
                return NULL;
            }
            char *grown = realloc(buf, cap * 2);
            if (grown == NULL) {
                free(buf);
                buf = NULL;
                break;
            }
            buf = grown;
            cap *= 2;
        }
    }
    if (buf == NULL) {
        ss_error_set(err, SS_ENOMEM, "input", "no memory to read '%s'", name);
        return NULL;
    }
    if (ferror(f)) {
        free(buf);
        ss_error_set(err, SS_ENOTFOUND, "input", "cannot read '%s'", name);
        return NULL;
    }
    buf[used] = '\0';
    *len = used;
    return buf;
}

/* The request's calibration; a reference is resolved in the store at
 * data_path (which must exist) at measured_at, else now. */
static ss_status analyze_calibration(const char *data_path,
                                     const api_request *req,
                                     analysis_calibration *cal, ss_error *err) {
    if (req->cal_ref[0] == '\0' || data_path == NULL)
        return analysis_calibration_resolve(NULL, req, NULL, cal, err);
    struct stat sb;
    if (stat(data_path, &sb) != 0)
        return ss_error_set(err, SS_ENOTFOUND, "data",
                            "there is no store at '%s'", data_path);
    store *db = NULL;
    store_conn *c = NULL;
    ss_status st = store_open(data_path, NULL, &db, err);
    if (st == SS_OK)
        st = store_conn_open(db, &c, err);
    char now[32];
    store_time_now(now);
    if (st == SS_OK)
        st = analysis_calibration_resolve(c, req, now, cal, err);
    store_conn_close(c);
    store_close(db);
    return st;
}

static ss_status analyze_run(const cli_parsed *args, json_t **doc_out,
                             ss_error *err) {
    const char *path = args->positional;
    int use_stdin = strcmp(path, "-") == 0;
    FILE *f = use_stdin ? stdin : fopen(path, "rb");
    if (f == NULL)
        return ss_error_set(err, SS_ENOTFOUND, "input",
                            "cannot open request file '%s'", path);
    size_t len = 0;
    char *text =
        analyze_slurp(f, use_stdin ? "standard input" : path, &len, err);
    if (!use_stdin)
        fclose(f);
    if (text == NULL)
        return err->code;
    api_request req;
    ss_status st = api_request_parse_text(text, len, &req, err);
    free(text);
    if (st != SS_OK)
        return st;
    if (args->values[0].present &&
        ss_method_parse(args->values[0].text, &req.req.method) != SS_OK) {
        api_request_release(&req);
        return ss_error_set(err, SS_EINVAL, "method",
                            "--method must be auto, moments, likelihood or "
                            "diagrams");
    }
    analysis_calibration cal;
    st = analyze_calibration(
        args->values[1].present ? args->values[1].text : NULL, &req, &cal, err);
    char method[16];
    if (st == SS_OK)
        st = analysis_execute(&req, &cal, NULL, doc_out, method, err);
    api_request_release(&req);
    return st;
}

const cli_command cli_cmd_analyze = {
    "analyze",
    "measured energies to a spectrum with uncertainty and flags",
    "Reads an analysis request (levels, calibration, runs as per-shot "
    "energies or as shots/mean_energy/energy_variance, method, confidence) "
    "and prints the estimated spectrum with standard errors and intervals, "
    "the power sums, the candidate Young diagrams of each run, and flags "
    "where the data cannot decide.",
    analyze_options,
    sizeof analyze_options / sizeof analyze_options[0],
    "Results are statistical estimates. Example request: "
    "samples/analysis-request.json.",
    analyze_run,
    "FILE.json",
};
