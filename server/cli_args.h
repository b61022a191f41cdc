/*
 * cli_args.h — strict command-line option parsing for the swapspec commands.
 *
 * Each command describes its options in a table of cli_option rows; the
 * parser walks argv once, checks every value completely (no trailing junk,
 * no silent wrap-around, ranges enforced) and reports the first problem in
 * the core's ss_error record, naming the option as the field.  The same
 * table generates `swapspec <cmd> --help`.
 */
#ifndef SWAPSPEC_CLI_ARGS_H
#define SWAPSPEC_CLI_ARGS_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

#include <jansson.h>

#include "swapspec.h"

typedef enum {
    CLI_UINT, /* unsigned decimal integer within [min, max] */
    CLI_INT,  /* signed decimal integer (64 bits) */
    CLI_REAL, /* finite real number; >= 0 when `nonnegative` is set */
    CLI_LIST, /* comma-separated reals; entries are judged by the core */
    CLI_PATH  /* a file name, taken as given */
} cli_kind;

typedef struct {
    const char *name; /* without the leading "--" */
    cli_kind kind;
    int required;
    const char *metavar;
    unsigned long min, max; /* CLI_UINT only */
    int nonnegative;        /* CLI_REAL only */
    const char *help;
} cli_option;

/* One parsed value; `present` is 0 when the option was not given. */
typedef struct {
    int present;
    unsigned long u; /* CLI_UINT */
    int64_t i;       /* CLI_INT */
    double r;        /* CLI_REAL */
    double *list;    /* CLI_LIST, list_len entries, owned */
    size_t list_len;
    const char *text; /* the raw value (points into argv, or into owned) */
    char *owned;      /* the value's text when it came from a JSON body */
} cli_value;

typedef struct cli_command cli_command;

/* The outcome of parsing one command line: values[k] belongs to
 * command->options[k].  help is set when --help was given. */
typedef struct {
    const cli_command *command;
    cli_value *values;
    int help;
    const char *positional;  /* the one positional word, when allowed */
    json_t *calibration;     /* inline calibration object of a JSON body
                                (a reference held until cli_args_free) */
    const ss_budget *budget; /* work budget; NULL = the core's default (the
                                service sets a tighter one per request) */
} cli_parsed;

/* A subcommand: its options, and the function that computes its JSON
 * document.  run returns SS_OK and a new document in *doc_out, or an error
 * status with err filled and *doc_out untouched. */
struct cli_command {
    const char *name;
    const char *brief;   /* one line for `swapspec --help` */
    const char *summary; /* a paragraph for `swapspec <cmd> --help` */
    const cli_option *options;
    size_t option_count;
    const char *notes; /* extra help text, may be NULL */
    ss_status (*run)(const cli_parsed *args, json_t **doc_out, ss_error *err);
    /* metavar of the one required positional word ("FILE.json"), or NULL
     * when the command takes none.  "-" counts as a positional word. */
    const char *positional;
};

/* Options shared by several commands (designated-initializer friendly). */
#define CLI_OPTION_LEVELS                                                      \
    {                                                                          \
        "levels", CLI_UINT, 1, "D", SS_LEVELS_MIN, SS_LEVELS_MAX, 0,           \
            "number of spin levels d (2..16)"                                  \
    }
#define CLI_OPTION_ATOMS                                                       \
    {                                                                          \
        "atoms", CLI_UINT, 1, "N", 1, SS_ATOMS_MAX, 0,                         \
            "number of atoms n per shot (1..100000)"                           \
    }
#define CLI_OPTION_SPECTRUM                                                    \
    {                                                                          \
        "spectrum", CLI_LIST, 1, "P1,P2,...", 0, 0, 0,                         \
            "single-atom spectrum: d non-negative numbers summing to 1"        \
    }
#define CLI_OPTION_CALIBRATION                                                 \
    {                                                                          \
        "calibration", CLI_PATH, 0, "FILE.json", 0, 0, 0,                      \
            "calibration file {offset, pair_shift, exchange, noise_sd, "       \
            "unit}; "                                                          \
            "default: energies in units of J (offset 0, pair_shift 0, "        \
            "exchange 1)"                                                      \
    }

/* Parses argv[0..argc-1] (the words after the command name) against
 * cmd->options.  On success fills *out (release with cli_args_free) and
 * returns SS_OK; on failure returns SS_EMALFORMED (unknown option, missing
 * or unparsable value, repeated option, stray word) or SS_EINVAL (value out
 * of range, required option missing), with err naming the option, and
 * leaves nothing to free.  --help anywhere sets out->help and skips the
 * required-option check. */
ss_status cli_args_parse(const cli_command *cmd, int argc, char **argv,
                         cli_parsed *out, ss_error *err);

/* The same options from a JSON object (the HTTP service's request body):
 * each key is an option name with '-' written as '_' ("energy_sd"); numbers
 * for CLI_UINT/CLI_INT/CLI_REAL, an array of numbers for CLI_LIST, and for
 * the option "calibration" an inline calibration object.  Values go through
 * the same checks as on the command line; unknown keys and wrong types are
 * SS_EINVAL naming the key.  Release with cli_args_free. */
/* Rewords an error of cmd run from a JSON body: its option names become
 * JSON keys, in the field ("energy-sd" → "energy_sd", a leading option
 * name only) and in the message ("--energy-sd" → "energy_sd"); the
 * client's own keys are left as they were written. */
void cli_error_as_json(const cli_command *cmd, ss_error *err);

ss_status cli_args_from_json(const cli_command *cmd, const json_t *body,
                             cli_parsed *out, ss_error *err);

/* Releases what cli_args_parse allocated; accepts a zeroed struct. */
void cli_args_free(cli_parsed *parsed);

/* Writes `swapspec <cmd> --help` text generated from the option table. */
void cli_args_print_help(const cli_command *cmd, FILE *out);

/* Writes text word-wrapped to `width` columns, every line (the first one
 * included) indented by `indent` spaces beyond `first_column`, the column
 * the cursor is in when called.  Ends with a newline. */
void cli_args_print_wrapped(FILE *out, const char *text, int first_column,
                            int indent, int width);

#endif /* SWAPSPEC_CLI_ARGS_H */
