/*
 * http_routes.c — the route table of the service (the one list of what the
 * daemon answers; `swapspec routes` prints it and a test holds it against
 * api-spec/openapi.yaml) and path-template matching.  Owns no memory.
 */
#include <stdio.h>
#include <string.h>

#include "http.h"

const http_route http_routes[] = {
    {"POST", "/v1/predictions", AUTH_WRITE, 1, handle_predictions},
    {"POST", "/v1/candidates", AUTH_WRITE, 1, handle_candidates},
    {"POST", "/v1/simulations", AUTH_WRITE, 1, handle_simulations},
    {"POST", "/v1/analyses", AUTH_WRITE, 1, handle_analyses_create},
    {"GET", "/v1/analyses", AUTH_READ, 0, handle_analyses_list},
    {"GET", "/v1/analyses/{id}", AUTH_READ, 0, handle_analyses_get},
    {"GET", "/v1/analyses/{id}/revisions", AUTH_READ, 0,
     handle_analyses_revisions},
    {"PUT", "/v1/calibrations/{name}", AUTH_ADMIN, 1, handle_calibrations_put},
    {"GET", "/v1/calibrations/{name}", AUTH_READ, 0, handle_calibrations_get},
    {"GET", "/v1/calibrations", AUTH_READ, 0, handle_calibrations_list},
    {"POST", "/v1/reprocessing", AUTH_ADMIN, 1, handle_reprocessing_create},
    {"GET", "/v1/jobs/{id}", AUTH_READ, 0, handle_jobs_get},
    {"GET", "/v1/analyses/{id}/figures/{name}.svg", AUTH_READ, 0,
     handle_figure},
    {"GET", "/healthz", AUTH_NONE, 0, handle_healthz},
    {"GET", "/metrics", AUTH_NONE, 0, handle_metrics},
    /* pages for people (handlers_pages.c) */
    {"GET", "/", AUTH_READ, 0, handle_page_index},
    {"GET", "/analyses/{id}", AUTH_READ, 0, handle_page_analysis},
    {"GET", "/favicon.ico", AUTH_NONE, 0, handle_favicon},
};
const size_t http_route_count = sizeof http_routes / sizeof http_routes[0];

/* 1 when path fits template; the first {...} parameter goes to id.  A
 * parameter may be followed by literal text in its segment ("{name}.svg"):
 * the segment must end with it and the parameter is what comes before. */
static int http_path_fits(const char *tmpl, const char *path, char *id,
                          size_t cap) {
    int captured = 0;
    while (*tmpl && *path) {
        if (*tmpl == '{') {
            size_t seg = strcspn(path, "/");
            const char *close = strchr(tmpl, '}');
            if (close == NULL)
                return 0;
            size_t suffix = strcspn(close + 1, "/");
            if (seg <= suffix || seg - suffix >= cap ||
                memcmp(path + seg - suffix, close + 1, suffix) != 0)
                return 0;
            if (!captured) {
                memcpy(id, path, seg - suffix);
                id[seg - suffix] = '\0';
                captured = 1;
            }
            path += seg;
            tmpl = close + 1 + suffix;
            continue;
        }
        if (*tmpl != *path)
            return 0;
        tmpl++;
        path++;
    }
    return *tmpl == '\0' && *path == '\0';
}

const http_route *http_route_match(const char *method, const char *path,
                                   char *id, size_t cap, char *allowed,
                                   size_t allowed_cap) {
    allowed[0] = '\0';
    /* HEAD is GET without a body (RFC 9110 §9.3.2); libmicrohttpd drops
     * the body of a HEAD response itself */
    if (strcmp(method, "HEAD") == 0)
        method = "GET";
    size_t used = 0;
    for (size_t i = 0; i < http_route_count; i++) {
        char scratch[256] = "";
        if (!http_path_fits(http_routes[i].path, path, scratch, sizeof scratch))
            continue;
        if (strcmp(http_routes[i].method, method) == 0) {
            snprintf(id, cap, "%s", scratch);
            return &http_routes[i];
        }
        int n = snprintf(allowed + used, allowed_cap - used, "%s%s",
                         used ? ", " : "", http_routes[i].method);
        if (n > 0 && (size_t)n < allowed_cap - used)
            used += (size_t)n;
    }
    return NULL;
}
