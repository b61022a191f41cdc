/*
 * handlers_pages.c — the routes people look at: GET / (recent analyses,
 * filtered like GET /v1/analyses), GET /analyses/{id} (one analysis as a
 * page), GET /v1/analyses/{id}/figures/{name}.svg (one figure on its own,
 * for dashboards) and GET /favicon.ico.  Each handler reads the store,
 * turns the stored documents into an svg_analysis (svg_model.h), computes
 * the predicted laws under the service's per-request work budget, and
 * renders (page.h, svg_figures.h).  The pages need the read role like the
 * JSON they show; the favicon is open.  Owns nothing beyond the request.
 */
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "auth.h"
#include "http.h"
#include "page.h"
#include "svg_figures.h"
#include "svg_model.h"

/* ------------------------------------------------------------------------ */
/* Content-Security-Policy of the pages: nothing but the page itself, its
 * one style element (named by its SHA-256, CSP Level 2 hash source), the
 * inline data: favicon, and forms that submit to the service.  Sent as a
 * <meta http-equiv> element (the pipeline sets the headers). */

static char pages_csp[256];
static pthread_once_t pages_csp_once = PTHREAD_ONCE_INIT;

static void pages_csp_build(void) {
    char hex[65];
    auth_sha256_hex(page_html_style, strlen(page_html_style), hex);
    unsigned char digest[32];
    for (int i = 0; i < 32; i++) {
        unsigned v = 0;
        sscanf(hex + 2 * i, "%2x", &v);
        digest[i] = (unsigned char)v;
    }
    /* base64 (RFC 4648 §4) of the 32 bytes: 44 characters with one '=' */
    static const char b64[] =
        "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    char enc[48];
    size_t o = 0;
    for (int i = 0; i < 32; i += 3) {
        unsigned v = (unsigned)digest[i] << 16;
        if (i + 1 < 32)
            v |= (unsigned)digest[i + 1] << 8;
        if (i + 2 < 32)
            v |= digest[i + 2];
        enc[o++] = b64[(v >> 18) & 63];
        enc[o++] = b64[(v >> 12) & 63];
        enc[o++] = i + 1 < 32 ? b64[(v >> 6) & 63] : '=';
        enc[o++] = i + 2 < 32 ? b64[v & 63] : '=';
    }
    enc[o] = '\0';
    snprintf(pages_csp, sizeof pages_csp,
             "default-src 'none'; img-src 'self' data:; style-src "
             "'sha256-%s'; form-action 'self'; base-uri 'none'",
             enc);
}

static const char *pages_policy(void) {
    pthread_once(&pages_csp_once, pages_csp_build);
    return pages_csp;
}

/* A query parameter, NULL when absent or empty (an empty form field). */
static const char *pages_param(http_ctx *ctx, const char *name) {
    const char *v = http_query(ctx, name);
    return v && v[0] ? v : NULL;
}

/* ------------------------------------------------------------------------ */
/* GET /                                                                     */

/* A list row from a stored item: spectrum values and flag codes out of its
 * result. */
static void pages_list_item(const store_record *r, page_list_item *it) {
    memset(it, 0, sizeof *it);
    snprintf(it->id, sizeof it->id, "%s", r->id);
    snprintf(it->created_at, sizeof it->created_at, "%s", r->created_at);
    snprintf(it->label, sizeof it->label, "%s", r->label);
    snprintf(it->method, sizeof it->method, "%s", r->method);
    it->levels = r->levels;
    json_error_t jerr;
    json_t *result =
        r->result_json ? json_loads(r->result_json, 0, &jerr) : NULL;
    const json_t *values =
        json_object_get(json_object_get(result, "spectrum"), "values");
    if (json_is_array(values) && json_array_size(values) == r->levels &&
        r->levels <= SS_LEVELS_MAX) {
        it->has_values = 1;
        for (unsigned i = 0; i < r->levels; i++)
            it->values[i] = json_number_value(json_array_get(values, i));
    }
    size_t used = 0, k;
    const json_t *flag;
    json_array_foreach(json_object_get(result, "flags"), k, flag) {
        const char *code = json_string_value(json_object_get(flag, "code"));
        if (code == NULL || strstr(it->flags, code) != NULL)
            continue;
        int n = snprintf(it->flags + used, sizeof it->flags - used, "%s%s",
                         used ? ", " : "", code);
        if (n < 0 || (size_t)n >= sizeof it->flags - used)
            break;
        used += (size_t)n;
    }
    json_decref(result);
}

/* A bare date from the form's date input becomes midnight UTC; anything
 * else goes to the store as given (which checks it). */
static const char *pages_when(const char *v, char out[40]) {
    if (v == NULL)
        return NULL;
    if (strlen(v) == 10 && v[4] == '-' && v[7] == '-') {
        snprintf(out, 40, "%sT00:00:00Z", v);
        return out;
    }
    return v;
}

ss_status handle_page_index(http_ctx *ctx, ss_error *err) {
    const char *label = pages_param(ctx, "label");
    const char *since = pages_param(ctx, "since");
    const char *until = pages_param(ctx, "until");
    const char *cursor = pages_param(ctx, "cursor");
    const char *limit = pages_param(ctx, "limit");
    unsigned lim = 50;
    if (limit != NULL && http_parse_count(limit, "limit", STORE_LIST_LIMIT_MAX,
                                          &lim, err) != SS_OK)
        return err->code;
    if (label != NULL && strlen(label) >= sizeof((store_record *)0)->label)
        return ss_error_set(err, SS_EINVAL, "label", "label is too long");
    char since_buf[40], until_buf[40];
    store_query q = {label, pages_when(since, since_buf),
                     pages_when(until, until_buf), lim, cursor};
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    store_page page;
    memset(&page, 0, sizeof page);
    ss_status st = store_list(c, &q, &page, err);
    if (st != SS_OK)
        return st;
    page_list_item *items = calloc(page.count ? page.count : 1, sizeof *items);
    if (items == NULL) {
        store_page_release(&page);
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    }
    for (size_t k = 0; k < page.count; k++)
        pages_list_item(&page.items[k], &items[k]);
    page_list_view view = {
        items, page.count,       label,          since,         until,
        lim,   page.next_cursor, cursor == NULL, pages_policy()};
    ctx->text = page_list_render(&view, &ctx->text_len);
    free(items);
    store_page_release(&page);
    if (ctx->text == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    ctx->content_type = "text/html; charset=utf-8";
    return SS_OK;
}

/* ------------------------------------------------------------------------ */
/* One analysis: the documents, the model, the revisions.                    */

typedef struct {
    store_record rec;
    store_revision_info info;
    json_t *request, *result;
    svg_analysis a;
    svg_law *laws;
    size_t law_count, law_total;
    svg_revision *revs;
    size_t rev_count, rev_cap;
} pages_analysis;

static void pages_analysis_release(pages_analysis *p) {
    svg_laws_free(p->laws, p->law_count);
    svg_analysis_release(&p->a);
    json_decref(p->request);
    json_decref(p->result);
    store_record_release(&p->rec);
    free(p->revs);
    memset(p, 0, sizeof *p);
}

static void pages_revision_fill(svg_revision *r,
                                const store_revision_info *info,
                                const svg_analysis *a) {
    memset(r, 0, sizeof *r);
    r->revision = info->revision;
    snprintf(r->created_at, sizeof r->created_at, "%s", info->created_at);
    snprintf(r->software_version, sizeof r->software_version, "%s",
             info->software_version);
    if (info->calibration_name[0])
        snprintf(r->calibration, sizeof r->calibration, "%s v%u",
                 info->calibration_name, info->calibration_version);
    else if (strcmp(a->cal_source, "ref") == 0)
        snprintf(r->calibration, sizeof r->calibration, "%s v%u", a->cal_name,
                 a->cal_version);
    else
        snprintf(r->calibration, sizeof r->calibration, "%s",
                 strcmp(a->cal_source, "default") == 0 ? "default" : "inline");
    r->levels = a->levels;
    r->has_spectrum = a->has_spectrum;
    memcpy(r->values, a->values, sizeof r->values);
    memcpy(r->lower, a->lower, sizeof r->lower);
    memcpy(r->upper, a->upper, sizeof r->upper);
    size_t used = 0;
    for (size_t k = 0; k < a->flag_count; k++) {
        if (strstr(r->flags, a->flags[k].code) != NULL)
            continue;
        int n = snprintf(r->flags + used, sizeof r->flags - used, "%s%s",
                         used ? ", " : "", a->flags[k].code);
        if (n < 0 || (size_t)n >= sizeof r->flags - used)
            break;
        used += (size_t)n;
    }
}

static ss_status pages_revision_add(void *arg, const store_revision_info *info,
                                    const char *result_json, ss_error *err) {
    pages_analysis *p = arg;
    if (p->rev_count == p->rev_cap) {
        size_t cap = p->rev_cap ? 2 * p->rev_cap : 4;
        svg_revision *grown = realloc(p->revs, cap * sizeof *grown);
        if (grown == NULL)
            return ss_error_set(err, SS_ENOMEM, "", NULL);
        p->revs = grown;
        p->rev_cap = cap;
    }
    json_error_t jerr;
    json_t *result = json_loads(result_json, 0, &jerr);
    svg_analysis a;
    ss_error inner;
    ss_error_clear(&inner);
    ss_status st = svg_analysis_from_json(NULL, result, &a, &inner);
    if (st == SS_ENOMEM)
        st = ss_error_set(err, SS_ENOMEM, "", NULL);
    else {
        /* an unreadable old revision is listed without a spectrum */
        pages_revision_fill(&p->revs[p->rev_count++], info, &a);
        st = SS_OK;
    }
    svg_analysis_release(&a);
    json_decref(result);
    return st;
}

/* Loads revision `revision` (0 = latest) of ctx->id and what the page and
 * figures need: laws when want_laws, every revision when want_revs (or
 * when the analysis has several and want_revs is 2). */
static ss_status pages_load(http_ctx *ctx, unsigned revision, int want_laws,
                            int want_revs, pages_analysis *p, ss_error *err) {
    memset(p, 0, sizeof *p);
    store_conn *c = http_store_conn(ctx->app, err);
    if (c == NULL)
        return err->code;
    ss_status st =
        store_get_revision(c, ctx->id, revision, &p->rec, &p->info, err);
    if (st != SS_OK)
        return st;
    json_error_t jerr;
    p->request = json_loads(p->rec.request_json, 0, &jerr);
    p->result = json_loads(p->rec.result_json, 0, &jerr);
    st = svg_analysis_from_json(p->request, p->result, &p->a, err);
    if (st != SS_OK)
        return st;
    snprintf(p->a.label, sizeof p->a.label, "%s", p->rec.label);
    if (want_laws)
        st = svg_laws_compute(&p->a, &http_app_settings(ctx->app)->budget,
                              SVG_READINGS_PANELS_MAX, &p->laws, &p->law_count,
                              &p->law_total, err);
    if (st == SS_OK &&
        (want_revs == 1 || (want_revs == 2 && p->info.revision_count > 1)))
        st = store_revisions_foreach(c, ctx->id, pages_revision_add, p, err);
    return st;
}

ss_status handle_page_analysis(http_ctx *ctx, ss_error *err) {
    unsigned revision = 0;
    ss_status st = http_query_count(ctx, "revision", &revision, err);
    if (st != SS_OK)
        return st;
    pages_analysis p;
    st = pages_load(ctx, revision, 1, 2, &p, err);
    if (st == SS_OK) {
        page_analysis_view view = {
            p.rec.id,
            p.rec.created_at,
            p.rec.label,
            p.info.software_version,
            p.info.revision,
            p.info.revision_count,
            p.info.revision > 1 ? p.info.created_at : "",
            &p.a,
            p.laws,
            p.law_count,
            p.law_total,
            p.revs,
            p.rev_count,
            pages_policy(),
        };
        ctx->text = page_analysis_render(&view, &ctx->text_len);
        if (ctx->text == NULL)
            st = ss_error_set(err, SS_ENOMEM, "", NULL);
        ctx->content_type = "text/html; charset=utf-8";
    }
    pages_analysis_release(&p);
    return st;
}

/* ------------------------------------------------------------------------ */
/* GET /v1/analyses/{id}/figures/{name}.svg                                  */

static const char *const pages_figures[] = {"readings", "spectrum", "diagrams",
                                            "revisions"};

ss_status handle_figure(http_ctx *ctx, ss_error *err) {
    /* the route ends in "/figures/{name}.svg": the name is the last path
     * segment without the suffix (the route matcher gives ctx->id) */
    const char *last = strrchr(ctx->path, '/');
    last = last ? last + 1 : ctx->path;
    size_t n = strlen(last);
    n = n >= 4 ? n - 4 : 0;
    int which = -1;
    for (int k = 0; k < 4; k++)
        if (strlen(pages_figures[k]) == n &&
            strncmp(last, pages_figures[k], n) == 0)
            which = k;
    if (which < 0)
        return ss_error_set(err, SS_ENOTFOUND, "",
                            "no figure named '%.*s'; the figures are "
                            "readings, spectrum, diagrams and revisions",
                            (int)(n < 40 ? n : 40), last);
    unsigned revision = 0;
    ss_status st = http_query_count(ctx, "revision", &revision, err);
    if (st != SS_OK)
        return st;
    pages_analysis p;
    st = pages_load(ctx, revision, which == 0, which == 3, &p, err);
    if (st == SS_OK) {
        page_text t;
        page_text_init(&t, 32 * 1024);
        switch (which) {
        case 0:
            svg_readings_write(&t, &p.a, p.laws, p.law_count, p.law_total, 1);
            break;
        case 1:
            svg_spectrum_write(&t, &p.a, 1);
            break;
        case 2:
            svg_diagrams_write(&t, &p.a, 1);
            break;
        default:
            svg_revisions_write(&t, p.revs, p.rev_count, p.a.label, 1);
        }
        ctx->text = page_text_finish(&t, &ctx->text_len);
        if (ctx->text == NULL)
            st = ss_error_set(err, SS_ENOMEM, "", NULL);
        ctx->content_type = "image/svg+xml";
    }
    pages_analysis_release(&p);
    return st;
}

/* ------------------------------------------------------------------------ */

ss_status handle_favicon(http_ctx *ctx, ss_error *err) {
    unsigned char *ico = page_favicon_ico(&ctx->text_len);
    if (ico == NULL)
        return ss_error_set(err, SS_ENOMEM, "", NULL);
    ctx->text = (char *)ico;
    ctx->content_type = "image/vnd.microsoft.icon";
    return SS_OK;
}
