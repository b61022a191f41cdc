/*
 * cli_args.c — strict parsing of `--name value` / `--name=value` options.
 *
 * Owns the translation of argv words into typed values for one command's
 * option table.  Every number must use its whole word (strtoul, strtoll and
 * strtod with full-string checks), integers are range-checked before they
 * are narrowed, and the first problem is reported in an ss_error that names
 * the option.  Whether a spectrum's entries make a valid spectrum is left to
 * the core (ss_spectrum_validate), which names the entry and the defect.
 */
#include "cli_args.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Copies at most len bytes of s into a field buffer sized like
 * ss_error.field. */
static void cli_field_copy(char *dst, size_t cap, const char *s, size_t len) {
    if (len >= cap)
        len = cap - 1;
    memcpy(dst, s, len);
    dst[len] = '\0';
}

static int cli_all_digits(const char *s) {
    if (*s == '\0')
        return 0;
    for (; *s; s++)
        if (!isdigit((unsigned char)*s))
            return 0;
    return 1;
}

/* Parses the whole of s[0..len-1] as a real number.  Returns 1 on success.
 * Overflow ("1e999") fails; gradual underflow is accepted as parsed. */
static int cli_parse_real(const char *s, size_t len, double *out) {
    char buf[128];
    char *end = NULL;
    if (len == 0 || len >= sizeof buf)
        return 0;
    memcpy(buf, s, len);
    buf[len] = '\0';
    if (isspace((unsigned char)buf[0]))
        return 0;
    errno = 0;
    double x = strtod(buf, &end);
    if (end != buf + len)
        return 0;
    if (errno == ERANGE && fabs(x) > 1.0)
        return 0;
    *out = x;
    return 1;
}

static ss_status cli_parse_uint(const cli_option *opt, const char *text,
                                cli_value *v, ss_error *err) {
    if (!cli_all_digits(text))
        return ss_error_set(err, SS_EMALFORMED, opt->name,
                            "--%s must be a whole number from %lu to %lu; "
                            "got '%s'",
                            opt->name, opt->min, opt->max, text);
    errno = 0;
    unsigned long x = strtoul(text, NULL, 10);
    if (errno == ERANGE || x < opt->min || x > opt->max)
        return ss_error_set(err, SS_EINVAL, opt->name,
                            "--%s must be a whole number from %lu to %lu; "
                            "got %s",
                            opt->name, opt->min, opt->max, text);
    v->u = x;
    return SS_OK;
}

static ss_status cli_parse_int(const cli_option *opt, const char *text,
                               cli_value *v, ss_error *err) {
    const char *digits = (*text == '-' || *text == '+') ? text + 1 : text;
    if (!cli_all_digits(digits))
        return ss_error_set(err, SS_EMALFORMED, opt->name,
                            "--%s must be a whole number; got '%s'", opt->name,
                            text);
    errno = 0;
    long long x = strtoll(text, NULL, 10);
    if (errno == ERANGE)
        return ss_error_set(err, SS_EINVAL, opt->name,
                            "--%s is out of the 64-bit integer range: %s",
                            opt->name, text);
    v->i = (int64_t)x;
    return SS_OK;
}

static ss_status cli_parse_scalar_real(const cli_option *opt, const char *text,
                                       cli_value *v, ss_error *err) {
    double x = 0.0;
    if (!cli_parse_real(text, strlen(text), &x))
        return ss_error_set(err, SS_EMALFORMED, opt->name,
                            "--%s must be a number; got '%s'", opt->name, text);
    if (!isfinite(x))
        return ss_error_set(err, SS_EINVAL, opt->name,
                            "--%s must be a finite number; got '%s'", opt->name,
                            text);
    if (opt->nonnegative && x < 0.0)
        return ss_error_set(err, SS_EINVAL, opt->name,
                            "--%s must not be negative; got %s", opt->name,
                            text);
    v->r = x;
    return SS_OK;
}

/* Splits "a,b,c" into reals; blanks around an entry are allowed.  Entries
 * that do not parse are reported as "<name>[i]". */
static ss_status cli_parse_list(const cli_option *opt, const char *text,
                                cli_value *v, ss_error *err) {
    size_t n = 1;
    for (const char *c = text; *c; c++)
        n += (*c == ',');
    double *list = malloc(n * sizeof *list);
    if (list == NULL)
        return ss_error_set(err, SS_ENOMEM, opt->name,
                            "no memory for %zu entries of --%s", n, opt->name);
    const char *start = text;
    for (size_t k = 0; k < n; k++) {
        const char *stop = strchr(start, ',');
        if (stop == NULL)
            stop = start + strlen(start);
        const char *a = start, *b = stop;
        while (a < b && isspace((unsigned char)*a))
            a++;
        while (b > a && isspace((unsigned char)b[-1]))
            b--;
        if (!cli_parse_real(a, (size_t)(b - a), &list[k])) {
            char field[sizeof err->field];
            snprintf(field, sizeof field, "%s[%zu]", opt->name, k);
            free(list);
            return ss_error_set(err, SS_EMALFORMED, field,
                                "entry %zu of --%s is not a number: '%.*s'",
                                k + 1, opt->name, (int)(stop - start), start);
        }
        start = stop + 1;
    }
    v->list = list;
    v->list_len = n;
    return SS_OK;
}

static ss_status cli_parse_value(const cli_option *opt, const char *text,
                                 cli_value *v, ss_error *err) {
    switch (opt->kind) {
    case CLI_UINT:
        return cli_parse_uint(opt, text, v, err);
    case CLI_INT:
        return cli_parse_int(opt, text, v, err);
    case CLI_REAL:
        return cli_parse_scalar_real(opt, text, v, err);
    case CLI_LIST:
        return cli_parse_list(opt, text, v, err);
    case CLI_PATH:
        return SS_OK;
    }
    return ss_error_set(err, SS_EINTERNAL, opt->name, "unknown option kind");
}

static const cli_option *cli_find_option(const cli_command *cmd,
                                         const char *name, size_t len,
                                         size_t *index) {
    for (size_t k = 0; k < cmd->option_count; k++) {
        const char *candidate = cmd->options[k].name;
        if (strlen(candidate) == len && strncmp(candidate, name, len) == 0) {
            *index = k;
            return &cmd->options[k];
        }
    }
    return NULL;
}

static int cli_is_help(const char *word) {
    return strcmp(word, "--help") == 0 || strcmp(word, "-h") == 0;
}

/* Handles the option word argv[*i] (and its value); advances *i past a
 * separate value word. */
static ss_status cli_parse_word(const cli_command *cmd, int argc, char **argv,
                                int *i, cli_value *values, ss_error *err) {
    const char *word = argv[*i];
    char field[sizeof err->field];
    if (strncmp(word, "--", 2) != 0 || word[2] == '\0')
        return ss_error_set(err, SS_EMALFORMED, "",
                            "unexpected argument '%s' for '%s'; options "
                            "look like --name value",
                            word, cmd->name);
    const char *name = word + 2;
    const char *eq = strchr(name, '=');
    size_t len = eq ? (size_t)(eq - name) : strlen(name);
    size_t k = 0;
    const cli_option *opt = cli_find_option(cmd, name, len, &k);
    if (opt == NULL) {
        cli_field_copy(field, sizeof field, name, len);
        return ss_error_set(err, SS_EMALFORMED, field,
                            "unknown option --%s for '%s' (see swapspec %s "
                            "--help)",
                            field, cmd->name, cmd->name);
    }
    if (values[k].present)
        return ss_error_set(err, SS_EMALFORMED, opt->name,
                            "option --%s is given more than once", opt->name);
    const char *text = NULL;
    if (eq != NULL)
        text = eq + 1;
    else if (*i + 1 < argc && strncmp(argv[*i + 1], "--", 2) != 0)
        text = argv[++*i];
    if (text == NULL || *text == '\0')
        return ss_error_set(err, SS_EMALFORMED, opt->name,
                            "option --%s needs a value (%s)", opt->name,
                            opt->metavar);
    values[k].present = 1;
    values[k].text = text;
    return cli_parse_value(opt, text, &values[k], err);
}

ss_status cli_args_parse(const cli_command *cmd, int argc, char **argv,
                         cli_parsed *out, ss_error *err) {
    cli_parsed parsed = {cmd, NULL, 0, NULL, NULL, NULL};
    for (int i = 0; i < argc; i++)
        if (cli_is_help(argv[i]))
            parsed.help = 1;
    parsed.values = calloc(cmd->option_count + 1, sizeof *parsed.values);
    if (parsed.values == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "no memory for options");
    if (parsed.help) {
        *out = parsed;
        return SS_OK;
    }
    for (int i = 0; i < argc; i++) {
        if (cmd->positional != NULL && parsed.positional == NULL &&
            (argv[i][0] != '-' || strcmp(argv[i], "-") == 0)) {
            parsed.positional = argv[i];
            continue;
        }
        ss_status st = cli_parse_word(cmd, argc, argv, &i, parsed.values, err);
        if (st != SS_OK) {
            cli_args_free(&parsed);
            return st;
        }
    }
    if (cmd->positional != NULL && parsed.positional == NULL) {
        cli_args_free(&parsed);
        return ss_error_set(err, SS_EINVAL, "input",
                            "missing %s for '%s' (use - for standard input)",
                            cmd->positional, cmd->name);
    }
    for (size_t k = 0; k < cmd->option_count; k++) {
        const cli_option *opt = &cmd->options[k];
        if (opt->required && !parsed.values[k].present) {
            cli_args_free(&parsed);
            return ss_error_set(err, SS_EINVAL, opt->name,
                                "missing required option --%s %s for '%s'",
                                opt->name, opt->metavar, cmd->name);
        }
    }
    *out = parsed;
    return SS_OK;
}

void cli_args_free(cli_parsed *parsed) {
    if (parsed == NULL)
        return;
    json_decref(parsed->calibration);
    parsed->calibration = NULL;
    if (parsed->values == NULL)
        return;
    for (size_t k = 0; parsed->command && k < parsed->command->option_count;
         k++) {
        free(parsed->values[k].list);
        free(parsed->values[k].owned);
    }
    free(parsed->values);
    parsed->values = NULL;
}

/* The text form of a JSON value for cli_parse_value: a number as written
 * with 17 significant digits, an array of numbers joined by commas.  NULL
 * with err set when the type does not fit the option. */
static char *cli_json_text(const cli_option *opt, const char *key,
                           const json_t *v, ss_error *err) {
    char buf[64];
    if (opt->kind == CLI_LIST) {
        if (!json_is_array(v)) {
            ss_error_set(err, SS_EINVAL, key, "must be an array of numbers");
            return NULL;
        }
        size_t n = json_array_size(v), cap = n * 32 + 1;
        char *text = malloc(cap), *end = text;
        if (text == NULL) {
            ss_error_set(err, SS_ENOMEM, key, "no memory");
            return NULL;
        }
        *end = '\0';
        for (size_t i = 0; i < n; i++) {
            const json_t *x = json_array_get(v, i);
            if (!json_is_number(x)) {
                char field[96];
                snprintf(field, sizeof field, "%s[%zu]", key, i);
                ss_error_set(err, SS_EINVAL, field, "must be a number");
                free(text);
                return NULL;
            }
            end += snprintf(end, cap - (size_t)(end - text), "%s%.17g",
                            i ? "," : "", json_number_value(x));
        }
        return text;
    }
    if (opt->kind == CLI_PATH) {
        if (!json_is_string(v)) {
            ss_error_set(err, SS_EINVAL, key, "must be a string");
            return NULL;
        }
        return strdup(json_string_value(v));
    }
    if (!json_is_number(v)) {
        ss_error_set(err, SS_EINVAL, key, "must be a number");
        return NULL;
    }
    if (json_is_integer(v))
        snprintf(buf, sizeof buf, "%" JSON_INTEGER_FORMAT,
                 json_integer_value(v));
    else
        snprintf(buf, sizeof buf, "%.17g", json_real_value(v));
    char *text = strdup(buf);
    if (text == NULL)
        ss_error_set(err, SS_ENOMEM, key, "no memory");
    return text;
}

void cli_error_as_json(const cli_command *cmd, ss_error *err) {
    size_t k = 0;
    /* the field: only a leading option name ("energy-sd", not the
     * client's own "calibration.gain-db") */
    size_t head = strcspn(err->field, ".[");
    if (head > 0 && cli_find_option(cmd, err->field, head, &k) != NULL)
        for (size_t i = 0; i < head; i++)
            if (err->field[i] == '-')
                err->field[i] = '_';
    /* the message: "--option-name" → "option_name", for option names only */
    char *out = err->message;
    for (const char *in = err->message; *in;) {
        size_t len = 0;
        if (in[0] == '-' && in[1] == '-')
            while ((in[2 + len] >= 'a' && in[2 + len] <= 'z') ||
                   (in[2 + len] >= '0' && in[2 + len] <= '9') ||
                   in[2 + len] == '-')
                len++;
        if (len > 0 && cli_find_option(cmd, in + 2, len, &k) != NULL) {
            for (size_t i = 0; i < len; i++)
                *out++ = in[2 + i] == '-' ? '_' : in[2 + i];
            in += 2 + len;
            continue;
        }
        *out++ = *in++;
    }
    *out = '\0';
}

ss_status cli_args_from_json(const cli_command *cmd, const json_t *body,
                             cli_parsed *out, ss_error *err) {
    cli_parsed parsed = {cmd, NULL, 0, NULL, NULL, NULL};
    if (!json_is_object(body))
        return ss_error_set(err, SS_EMALFORMED, "",
                            "the request body must be a JSON object");
    parsed.values = calloc(cmd->option_count + 1, sizeof *parsed.values);
    if (parsed.values == NULL)
        return ss_error_set(err, SS_ENOMEM, "", "no memory for options");
    const char *key;
    json_t *v;
    json_object_foreach((json_t *)body, key, v) {
        char name[64];
        snprintf(name, sizeof name, "%s", key);
        for (char *c = name; *c; c++)
            if (*c == '_')
                *c = '-';
        size_t k = 0;
        const cli_option *opt = cli_find_option(cmd, name, strlen(name), &k);
        if (opt == NULL || strchr(key, '-') != NULL) {
            cli_args_free(&parsed);
            return ss_error_set(err, SS_EINVAL, key, "unknown field '%.60s'",
                                key);
        }
        if (strcmp(opt->name, "calibration") == 0) {
            if (!json_is_object(v)) {
                cli_args_free(&parsed);
                return ss_error_set(err, SS_EINVAL, "calibration",
                                    "must be an object {offset, pair_shift, "
                                    "exchange, noise_sd, coupling_spread?, "
                                    "unit?}");
            }
            parsed.calibration = json_incref(v);
            continue;
        }
        char *text = cli_json_text(opt, key, v, err);
        if (text == NULL) {
            cli_args_free(&parsed);
            return err->code;
        }
        parsed.values[k].present = 1;
        parsed.values[k].owned = text;
        parsed.values[k].text = text;
        ss_status st = cli_parse_value(opt, text, &parsed.values[k], err);
        if (st == SS_EMALFORMED) /* well-formed JSON with a value of the
                                    wrong kind (3.5 where a whole number
                                    belongs): a content error */
            err->code = st = SS_EINVAL;
        if (st != SS_OK) {
            cli_error_as_json(cmd, err);
            cli_args_free(&parsed);
            return st;
        }
    }
    for (size_t k = 0; k < cmd->option_count; k++) {
        const cli_option *opt = &cmd->options[k];
        if (opt->required && !parsed.values[k].present) {
            cli_args_free(&parsed);
            ss_error_set(err, SS_EINVAL, opt->name,
                         "missing required field '--%s'", opt->name);
            cli_error_as_json(cmd, err);
            return err->code;
        }
    }
    *out = parsed;
    return SS_OK;
}

void cli_args_print_wrapped(FILE *out, const char *text, int first_column,
                            int indent, int width) {
    int column = first_column;
    while (*text != '\0') {
        while (*text == ' ')
            text++;
        int len = (int)strcspn(text, " ");
        if (len == 0)
            break;
        if (column > indent && column + 1 + len > width) {
            fprintf(out, "\n%*s", indent, "");
            column = indent;
        } else if (column > indent) {
            fputc(' ', out);
            column++;
        } else if (column < indent) {
            fprintf(out, "%*s", indent - column, "");
            column = indent;
        }
        fprintf(out, "%.*s", len, text);
        column += len;
        text += len;
    }
    fputc('\n', out);
}

void cli_args_print_help(const cli_command *cmd, FILE *out) {
    int column = fprintf(out, "usage: swapspec %s", cmd->name);
    if (cmd->positional != NULL)
        column += fprintf(out, " %s", cmd->positional);
    for (size_t k = 0; k < cmd->option_count; k++) {
        const cli_option *opt = &cmd->options[k];
        char word[96];
        int len =
            snprintf(word, sizeof word, opt->required ? "--%s %s" : "[--%s %s]",
                     opt->name, opt->metavar);
        if (column + 1 + len > 78)
            column = fprintf(out, "\n%16s", "") - 1;
        column += fprintf(out, " %s", word);
    }
    fprintf(out, "\n\n");
    cli_args_print_wrapped(out, cmd->summary, 0, 0, 78);
    fprintf(out, "\noptions:\n");
    for (size_t k = 0; k < cmd->option_count; k++) {
        const cli_option *opt = &cmd->options[k];
        char head[64];
        snprintf(head, sizeof head, "--%s %s", opt->name, opt->metavar);
        fprintf(out, "  %-24s", head);
        char help[512];
        snprintf(help, sizeof help, "%s%s", opt->help,
                 opt->required ? " (required)" : "");
        cli_args_print_wrapped(out, help, 26, 27, 78);
    }
    fprintf(out, "  %-24s %s\n", "--help", "show this text");
    if (cmd->notes != NULL) {
        fputc('\n', out);
        cli_args_print_wrapped(out, cmd->notes, 0, 0, 78);
    }
}
