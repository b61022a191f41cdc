/*
 * page_list.c — the list of recent analyses (GET /), newest first, with a
 * plain GET form that filters by label and creation time and a link to the
 * next page: the parameters and their meaning are those of
 * GET /v1/analyses (label exact, since inclusive, until exclusive, limit,
 * cursor), so a filtered page and the API list the same analyses.  Renders
 * from plain values (page.h); owns nothing beyond the text it returns.
 */
#include <stdio.h>
#include <string.h>

#include "page.h"

static const char *pl_or_empty(const char *s) { return s ? s : ""; }

/* 1 when s is a bare date YYYY-MM-DD (what <input type="date"> sends). */
static int pl_is_date(const char *s) {
    if (strlen(s) != 10)
        return 0;
    for (int i = 0; i < 10; i++)
        if (i == 4 || i == 7 ? s[i] != '-' : (s[i] < '0' || s[i] > '9'))
            return 0;
    return 1;
}

static void pl_input(page_text *t, const char *words, const char *name,
                     const char *value, int date) {
    page_text_add(t, "<label>");
    page_text_escaped(t, words);
    page_text_printf(t, "<input name=\"%s\" type=\"%s\" value=\"", name,
                     date && (value[0] == '\0' || pl_is_date(value)) ? "date"
                                                                     : "text");
    page_text_escaped(t, value);
    page_text_add(t, "\"></label>\n");
}

/* "?label=..&since=..&until=..&limit=..[&cursor=..]", escaped for an
 * attribute. */
static void pl_query(page_text *t, const page_list_view *v,
                     const char *cursor) {
    page_text q;
    page_text_init(&q, 256);
    const char *keys[3] = {"label", "since", "until"};
    const char *vals[3] = {v->label, v->since, v->until};
    page_text_printf(&q, "?limit=%u", v->limit);
    for (int i = 0; i < 3; i++)
        if (vals[i] && vals[i][0]) {
            page_text_printf(&q, "&%s=", keys[i]);
            page_text_urlencoded(&q, vals[i]);
        }
    if (cursor && cursor[0]) {
        page_text_add(&q, "&cursor=");
        page_text_urlencoded(&q, cursor);
    }
    if (q.failed)
        t->failed = 1;
    else
        page_text_escaped(t, q.buf);
    page_text_release(&q);
}

char *page_list_render(const page_list_view *v, size_t *len) {
    page_text t;
    page_text_init(&t, 16 * 1024 + 600 * v->count);
    char s1[48];
    page_html_begin(&t, "Analyses", "./", v->csp);
    page_text_add(&t, "<h1>Analyses</h1>\n<p class=\"meta\">Newest first. "
                      "Each spectrum is a statistical estimate; open an "
                      "analysis for its intervals, flags and figures.</p>\n"
                      "<form class=\"filter\" method=\"get\" action=\"./\">\n");
    pl_input(&t, "Label (exact)", "label", pl_or_empty(v->label), 0);
    pl_input(&t, "Created since (UTC, inclusive)", "since",
             pl_or_empty(v->since), 1);
    pl_input(&t, "Created until (UTC, exclusive)", "until",
             pl_or_empty(v->until), 1);
    page_text_add(&t, "<label>Per page<select name=\"limit\">");
    static const unsigned choices[] = {10, 25, 50, 100, 200};
    int listed = 0;
    for (size_t i = 0; i < sizeof choices / sizeof choices[0]; i++) {
        if (!listed && v->limit < choices[i]) {
            page_text_printf(&t, "<option selected>%u</option>", v->limit);
            listed = 1;
        }
        page_text_printf(&t, "<option%s>%u</option>",
                         choices[i] == v->limit ? " selected" : "", choices[i]);
        listed |= choices[i] == v->limit;
    }
    page_text_add(&t, "</select></label>\n<button type=\"submit\">Filter"
                      "</button> <a href=\"./\">Clear</a>\n</form>\n");

    int filtered = (v->label && v->label[0]) || (v->since && v->since[0]) ||
                   (v->until && v->until[0]);
    if (v->count == 0) {
        page_text_add(&t, "<p id=\"empty\">");
        page_text_add(&t, filtered || !v->first_page
                              ? "No analyses match this filter."
                              : "No analyses are stored yet: POST "
                                "/v1/analyses stores one.");
        page_text_add(&t, "</p>\n");
    } else {
        page_text_printf(&t,
                         "<table id=\"analyses-table\">\n<caption>%zu "
                         "analys%s on this page (spectra rounded to 3 "
                         "decimals)</caption>\n<thead><tr><th>Created "
                         "(UTC)</th><th>Label</th><th class=\"num\">d</th>"
                         "<th>Method</th><th>Spectrum estimate</th>"
                         "<th>Flags</th></tr></thead>\n<tbody>\n",
                         v->count, v->count == 1 ? "is" : "es");
        for (size_t k = 0; k < v->count; k++) {
            const page_list_item *it = &v->items[k];
            page_text_add(&t, "<tr><td class=\"when\">");
            page_text_escaped(&t, it->created_at);
            page_text_add(&t, "</td><td class=\"label\"><a href=\"analyses/");
            page_text_urlencoded(&t, it->id);
            page_text_add(&t, "\">");
            page_text_escaped(&t, it->label[0] ? it->label : it->id);
            page_text_printf(&t, "</a></td><td class=\"num\">%u</td><td>",
                             it->levels);
            page_text_escaped(&t, it->method);
            page_text_add(&t, "</td><td>");
            for (unsigned i = 0; it->has_values && i < it->levels; i++)
                page_text_printf(&t, "%s%s", i ? ", " : "",
                                 page_fmt_fixed(it->values[i], 3, s1));
            if (!it->has_values)
                page_text_add(&t, "none");
            page_text_add(&t, "</td><td class=\"codes\">");
            page_text_escaped(&t, it->flags[0] ? it->flags : "");
            page_text_add(&t, "</td></tr>\n");
        }
        page_text_add(&t, "</tbody></table>\n");
    }
    page_text_add(&t, "<nav class=\"pager\">");
    if (!v->first_page) {
        page_text_add(&t, "<a id=\"first-page\" href=\"./");
        pl_query(&t, v, NULL);
        page_text_add(&t, "\">Newest</a> ");
    }
    if (v->next_cursor && v->next_cursor[0]) {
        page_text_add(&t, "<a id=\"next-page\" rel=\"next\" href=\"./");
        pl_query(&t, v, v->next_cursor);
        page_text_add(&t, "\">Older analyses \xe2\x86\x92</a>");
    }
    page_text_add(&t, "</nav>\n");
    page_html_end(&t);
    return page_text_finish(&t, len);
}
