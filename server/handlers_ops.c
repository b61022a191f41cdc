/*
 * handlers_ops.c — GET /healthz (the process answers and the store reads)
 * and GET /metrics (Prometheus text format 0.0.4).  Both are open routes;
 * neither reveals tokens, paths or request contents.
 */
#include <stdlib.h>

#include "http.h"

#ifndef SWAPSPEC_VERSION
#define SWAPSPEC_VERSION "unknown"
#endif

ss_status handle_healthz(http_ctx *ctx, ss_error *err) {
    ss_error store_err;
    ss_error_clear(&store_err);
    store_conn *c = http_store_conn(ctx->app, &store_err);
    ss_status st = c ? store_check(c, &store_err) : store_err.code;
    int ok = st == SS_OK;
    ctx->status = ok ? 200 : 503;
    ctx->doc =
        json_pack("{s:s,s:s,s:s}", "status", ok ? "ok" : "unavailable", "store",
                  ok ? "ok" : ss_status_name(st), "version", SWAPSPEC_VERSION);
    return ctx->doc ? SS_OK : ss_error_set(err, SS_ENOMEM, "", NULL);
}

ss_status handle_metrics(http_ctx *ctx, ss_error *err) {
    metrics_store_view view = {-1, -1, -1, -1};
    ss_error store_err;
    ss_error_clear(&store_err);
    store_conn *c = http_store_conn(ctx->app, &store_err);
    uint64_t count = 0;
    if (c != NULL && store_count(c, &count, &store_err) == SS_OK)
        view.stored = (int64_t)count;
    store_checkpoint_stats ck;
    committer_checkpoint_stats(http_app_committer(ctx->app), &ck);
    view.checkpoints_passed = (int64_t)(ck.passes - ck.failed_passes);
    view.checkpoints_failed = (int64_t)ck.failed_passes;
    view.log_restarts = (int64_t)ck.restarts;
    ctx->text =
        metrics_render(http_app_metrics(ctx->app), &view, &ctx->text_len);
    if (ctx->text == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    ctx->content_type = "text/plain; version=0.0.4; charset=utf-8";
    return SS_OK;
}
