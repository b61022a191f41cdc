/*
 * commands.h — the subcommands of the swapspec executable.
 *
 * Each command lives in its own cmd_<name>.c and exposes one cli_command
 * record (its option table and its run function); main.c dispatches on the
 * table of these records.
 */
#ifndef SWAPSPEC_COMMANDS_H
#define SWAPSPEC_COMMANDS_H

#include "cli_args.h"

extern const cli_command cli_cmd_predict;
extern const cli_command cli_cmd_diagrams;
extern const cli_command cli_cmd_simulate;
extern const cli_command cli_cmd_analyze;
extern const cli_command cli_cmd_serve;
extern const cli_command cli_cmd_routes;
extern const cli_command cli_cmd_reprocess;

#endif /* SWAPSPEC_COMMANDS_H */
