/*
 * entry_compute_body.c — the body of the compute_body fuzz target: the
 * bodies of POST /v1/predictions, /v1/candidates and /v1/simulations.
 * The first byte picks the command (predict, diagrams, simulate); the rest
 * is the body, parsed as the daemon parses it (json_loadb with
 * JSON_REJECT_DUPLICATES), read with cli_args_from_json against the
 * command's option table as handlers_compute.c does, and then run with the
 * fuzz budget in place of the service's (a failure's names rewritten for
 * JSON with cli_error_as_json, as the handler does).
 *
 * Checks: a refused body has a status of the table (malformed only for a
 * body that is not an object), names a field that resolves in the body,
 * and an unknown field exists in it; an accepted body has every required
 * option, whole numbers within their option's range and equal to the JSON
 * number, reals and list entries equal bit for bit to the JSON numbers (the
 * "%.17g" text round trip of cli_args.c must be exact), and non-negative
 * reals where the option says so.  The command then returns a document
 * that jansson can print, or a failure checked like any other.
 * Simulations run only up to 64 shots and 200000 atoms drawn in all.
 */
#include "fuzz_entry.h"

#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli_args.h"
#include "commands.h"

/* The JSON key of option name ("energy-sd" → "energy_sd"). */
static void fz_key_of(const char *name, char *key, size_t cap) {
    size_t n = 0;
    for (; name[n] && n + 1 < cap; n++)
        key[n] = name[n] == '-' ? '_' : name[n];
    key[n] = '\0';
}

/* The JSON keys of cmd's options, NULL-terminated (static storage). */
static const char *const *fz_keys_of(const cli_command *cmd) {
    static char keys[16][64];
    static const char *list[17];
    size_t n = 0;
    for (; n < cmd->option_count && n < 16; n++) {
        fz_key_of(cmd->options[n].name, keys[n], sizeof keys[n]);
        list[n] = keys[n];
    }
    list[n] = NULL;
    return list;
}

/* An error names a key of the body (as sent: "energy_sd", not the
 * option's "energy-sd"), a budget limit, or nothing. */
static int fz_check_named(const cli_command *cmd, const ss_error *err,
                          const char *where, fuzz_verdict *v) {
    if (!fuzz_field_among(err->field, fz_keys_of(cmd)))
        return fuzz_fail(v,
                         "%s: the error names '%s', not a key of the %s "
                         "body: %s",
                         where, err->field, cmd->name, err->message);
    return 0;
}

static int fz_check_value(const cli_option *opt, const cli_value *val,
                          const json_t *j, fuzz_verdict *v) {
    switch (opt->kind) {
    case CLI_UINT:
        if (val->u < opt->min || val->u > opt->max ||
            (double)val->u != json_number_value(j))
            return fuzz_fail(v, "%s read as %lu from %.17g (range %lu..%lu)",
                             opt->name, val->u, json_number_value(j), opt->min,
                             opt->max);
        return 0;
    case CLI_INT:
        if (json_is_integer(j) ? val->i != json_integer_value(j)
                               : (double)val->i != json_real_value(j))
            return fuzz_fail(v, "%s read as %lld from %.17g", opt->name,
                             (long long)val->i, json_number_value(j));
        return 0;
    case CLI_REAL:
        if (val->r != json_number_value(j) || !isfinite(val->r) ||
            (opt->nonnegative && val->r < 0))
            return fuzz_fail(v, "%s read as %.17g from %.17g", opt->name,
                             val->r, json_number_value(j));
        return 0;
    case CLI_LIST:
        if (val->list_len != json_array_size(j) ||
            (val->list_len > 0 && val->list == NULL))
            return fuzz_fail(v, "%s: %zu entries read from %zu", opt->name,
                             val->list_len, json_array_size(j));
        for (size_t k = 0; k < val->list_len; k++)
            if (val->list[k] != json_number_value(json_array_get(j, k)))
                return fuzz_fail(v, "%s[%zu] read as %.17g from %.17g",
                                 opt->name, k, val->list[k],
                                 json_number_value(json_array_get(j, k)));
        return 0;
    case CLI_PATH:
        return 0;
    }
    return fuzz_fail(v, "%s: unknown kind", opt->name);
}

static int fz_check_parsed(const cli_command *cmd, const json_t *body,
                           const cli_parsed *p, fuzz_verdict *v) {
    for (size_t k = 0; k < cmd->option_count; k++) {
        const cli_option *opt = &cmd->options[k];
        char key[64];
        fz_key_of(opt->name, key, sizeof key);
        const json_t *j = json_object_get(body, key);
        if (strcmp(opt->name, "calibration") == 0) {
            if (j != p->calibration)
                return fuzz_fail(v, "the inline calibration was not kept");
            continue;
        }
        if (p->values[k].present != (j != NULL))
            return fuzz_fail(v, "%s: present %d, in the body %d", opt->name,
                             p->values[k].present, j != NULL);
        if (opt->required && !p->values[k].present)
            return fuzz_fail(v, "required %s accepted missing", opt->name);
        if (j != NULL && fz_check_value(opt, &p->values[k], j, v))
            return 1;
    }
    return 0;
}

/* The value of a whole-number option as given, or 0. */
static double fz_number(const json_t *body, const char *key) {
    const json_t *j = json_object_get(body, key);
    return json_is_number(j) ? json_number_value(j) : 0.0;
}

static int fz_run(const cli_command *cmd, const json_t *body, cli_parsed *p,
                  fuzz_verdict *v) {
    if (cmd == &cli_cmd_simulate &&
        (fz_number(body, "shots") > 64 ||
         fz_number(body, "shots") * fz_number(body, "atoms") > 200000))
        return 0;
    ss_budget budget = fuzz_budget();
    p->budget = &budget;
    ss_error err;
    ss_error_clear(&err);
    json_t *doc = NULL;
    ss_status st = cmd->run(p, &doc, &err);
    if (st == SS_OK) {
        char *text = json_is_object(doc) ? json_dumps(doc, JSON_COMPACT) : NULL;
        int bad = text == NULL ? fuzz_fail(v,
                                           "%s: the document does not "
                                           "print",
                                           cmd->name)
                               : 0;
        free(text);
        json_decref(doc);
        return bad;
    }
    if (doc != NULL)
        return fuzz_fail(v, "%s failed but returned a document", cmd->name);
    cli_error_as_json(cmd, &err); /* as handlers_compute.c does */
    if (fuzz_check_failure(st, &err, cmd->name, v))
        return 1;
    if (st != SS_EINVAL && st != SS_EBUDGET && st != SS_ERANGE &&
        st != SS_ENOMEM && !(st == SS_EINTERNAL && fuzz_lenient("internal")))
        return fuzz_fail(v, "%s returned %s: %s", cmd->name, ss_status_name(st),
                         err.message);
    if (fz_check_named(cmd, &err, cmd->name, v))
        return 1;
    return fuzz_check_field(body, &err, cmd->name, v);
}

int fuzz_compute_body_one(const uint8_t *data, size_t size, fuzz_verdict *v) {
    if (size == 0)
        return 0;
    static const cli_command *const cmds[] = {
        &cli_cmd_predict, &cli_cmd_diagrams, &cli_cmd_simulate};
    const cli_command *cmd = cmds[data[0] % 3];
    json_error_t jerr;
    json_t *body = json_loadb((const char *)data + 1, size - 1,
                              JSON_REJECT_DUPLICATES, &jerr);
    if (body == NULL)
        return 0; /* 400 in the daemon, before any of our code */
    cli_parsed p;
    memset(&p, 0, sizeof p);
    ss_error err;
    ss_error_clear(&err);
    ss_status st = cli_args_from_json(cmd, body, &p, &err);
    int bad = 0;
    if (st == SS_OK) {
        bad = fz_check_parsed(cmd, body, &p, v);
        if (!bad)
            bad = fz_run(cmd, body, &p, v);
        cli_args_free(&p);
    } else if (fuzz_check_failure(st, &err, "cli_args_from_json", v)) {
        bad = 1;
    } else if (st != SS_EINVAL && st != SS_ENOMEM &&
               !(st == SS_EMALFORMED && !json_is_object(body))) {
        bad = fuzz_fail(v, "cli_args_from_json returned %s: %s",
                        ss_status_name(st), err.message);
    } else if (strstr(err.message, "unknown field") == NULL &&
               fz_check_named(cmd, &err, "cli_args_from_json", v)) {
        bad = 1;
    } else {
        bad = fuzz_check_field(body, &err, "cli_args_from_json", v);
    }
    json_decref(body);
    return bad;
}
