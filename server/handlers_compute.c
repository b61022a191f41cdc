/*
 * handlers_compute.c — POST /v1/predictions, /v1/candidates and
 * /v1/simulations: the forward model, energy → diagrams, and synthetic
 * shots.  Each body is read with the option table of the matching command
 * (cli_args_from_json: the same names, ranges and checks as the command
 * line) and answered with the very document the command prints.  Owns
 * nothing beyond the request.
 */
#include "cli_args.h"
#include "commands.h"
#include "http.h"

static ss_status compute_with(const cli_command *cmd, http_ctx *ctx,
                              ss_error *err) {
    cli_parsed args;
    ss_status st = cli_args_from_json(cmd, ctx->json, &args, err);
    if (st != SS_OK)
        return st;
    args.budget = &http_app_settings(ctx->app)->budget;
    st = cmd->run(&args, &ctx->doc, err);
    cli_args_free(&args);
    if (st != SS_OK)
        cli_error_as_json(cmd, err); /* the body's keys, not the options */
    return st;
}

ss_status handle_predictions(http_ctx *ctx, ss_error *err) {
    return compute_with(&cli_cmd_predict, ctx, err);
}

ss_status handle_candidates(http_ctx *ctx, ss_error *err) {
    return compute_with(&cli_cmd_diagrams, ctx, err);
}

ss_status handle_simulations(http_ctx *ctx, ss_error *err) {
    /* simulations over HTTP are bounded more tightly than on the command
     * line: the whole document is held in memory and sent at once */
    json_t *shots = json_object_get(ctx->json, "shots");
    unsigned cap = http_app_settings(ctx->app)->simulation_shots;
    if (json_is_number(shots) && json_number_value(shots) > cap)
        return ss_error_set(err, SS_EBUDGET, "shots",
                            "at most %u shots per simulation request over "
                            "HTTP; got %.0f",
                            cap, json_number_value(shots));
    return compute_with(&cli_cmd_simulate, ctx, err);
}
