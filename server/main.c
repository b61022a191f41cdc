/*
 * main.c — entry point of the swapspec executable: subcommand dispatch.
 *
 * Owns process start-up (GSL's abort-on-error handler is switched off
 * before anything else), the table of subcommands, --help and --version,
 * and the one place where a command's outcome becomes output: the JSON
 * document on stdout and exit code 0, or one JSON error object on stderr
 * and the exit code the status table implies (2 for input errors, 1 for
 * internal ones).
 */
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "cli_json.h"
#include "commands.h"

#ifndef SWAPSPEC_VERSION
#define SWAPSPEC_VERSION "unknown"
#endif

static const cli_command *const main_commands[] = {
    &cli_cmd_predict, &cli_cmd_diagrams, &cli_cmd_simulate,  &cli_cmd_analyze,
    &cli_cmd_serve,   &cli_cmd_routes,   &cli_cmd_reprocess,
};
#define MAIN_COMMAND_COUNT (sizeof main_commands / sizeof main_commands[0])

static void main_usage(FILE *out) {
    fprintf(out,
            "usage: swapspec <command> [options]\n"
            "       swapspec <command> --help\n"
            "       swapspec --help | --version\n\n"
            "Turns the interaction energies of n trapped atoms with d spin "
            "levels into\nspectra, and spectra into the exact law of the "
            "readings.\n\ncommands:\n");
    for (size_t k = 0; k < MAIN_COMMAND_COUNT; k++)
        fprintf(out, "  %-10s %s\n", main_commands[k]->name,
                main_commands[k]->brief);
    fprintf(out, "\nResults are one JSON object on stdout.  Errors are one "
                 "JSON object\n{\"error\", \"field\", \"code\"} on "
                 "stderr, with exit code 2 (bad input)\nor 1 (internal "
                 "failure).\n");
}

static int main_run(const cli_command *cmd, int argc, char **argv) {
    ss_error err;
    ss_error_clear(&err);
    cli_parsed args = {0};
    if (cli_args_parse(cmd, argc, argv, &args, &err) != SS_OK)
        return cli_json_report_error(&err, stderr);
    if (args.help) {
        cli_args_print_help(cmd, stdout);
        cli_args_free(&args);
        return 0;
    }
    json_t *doc = NULL;
    ss_status st = cmd->run(&args, &doc, &err);
    cli_args_free(&args);
    if (st == SS_OK && doc != NULL)
        st = cli_json_emit(doc, stdout, &err);
    json_decref(doc);
    return st == SS_OK ? 0 : cli_json_report_error(&err, stderr);
}

int main(int argc, char **argv) {
    gsl_set_error_handler_off();
    ss_error err;
    ss_error_clear(&err);
    if (argc < 2) {
        ss_error_set(&err, SS_EMALFORMED, "command",
                     "no command given; try 'swapspec --help'");
        return cli_json_report_error(&err, stderr);
    }
    const char *name = argv[1];
    if (strcmp(name, "--help") == 0 || strcmp(name, "-h") == 0) {
        main_usage(stdout);
        return 0;
    }
    if (strcmp(name, "--version") == 0) {
        printf("swapspec %s\n", SWAPSPEC_VERSION);
        return 0;
    }
    for (size_t k = 0; k < MAIN_COMMAND_COUNT; k++)
        if (strcmp(name, main_commands[k]->name) == 0)
            return main_run(main_commands[k], argc - 2, argv + 2);
    ss_error_set(&err, SS_EMALFORMED, "command",
                 "unknown command '%s' (see swapspec --help for the list)",
                 name);
    return cli_json_report_error(&err, stderr);
}
