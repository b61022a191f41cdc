/*
 * page.h — the HTML pages the daemon serves to people (handlers_pages.c
 * routes them): the list of recent analyses (page_list.c), one analysis
 * with its inputs, spectrum table, flags in plain sentences and the
 * figures inline (page_analysis.c), the frame every page shares and the
 * favicon (page_html.c), and the texts that explain each flag
 * (page_flags.c).
 *
 * Pages are rendered from plain values, never from the store, so they can
 * be tested without a daemon.  Every string that came from outside (label,
 * id, messages, filters) is escaped (page_text_escaped).  Links are
 * relative ("analyses/ID" from the list, "../" back), so the pages also
 * work behind a proxy that serves them under a path prefix.  The pages
 * carry no script: everything works without JavaScript.
 */
#ifndef SWAPSPEC_PAGE_H
#define SWAPSPEC_PAGE_H

#include <stddef.h>

#include "page_text.h"
#include "svg_figures.h"
#include "svg_model.h"

/* The style sheet of every page, the exact text of its <style> element
 * (a Content-Security-Policy names it by its SHA-256). */
extern const char page_html_style[];

/* Opens a page: doctype, <head> with charset, viewport, the policy csp as
 * a <meta http-equiv="Content-Security-Policy"> when csp is not NULL, the
 * escaped title, an inline favicon (a data: URL, so the browser asks for
 * no /favicon.ico) and the style; then <body> and the site header, whose
 * "all analyses" link is home (relative). */
void page_html_begin(page_text *t, const char *title, const char *home,
                     const char *csp);
void page_html_end(page_text *t);
/* s percent-encoded for a query string (RFC 3986 unreserved characters
 * kept, everything else %XX), not yet escaped for HTML. */
void page_text_urlencoded(page_text *t, const char *s);

/* The 16x16 icon of GET /favicon.ico (ICO with one 32-bit bitmap), in a
 * new buffer of *len bytes (release with free); NULL when out of memory. */
unsigned char *page_favicon_ico(size_t *len);

/* The plain-language texts of a flag code; NULL for a code this table
 * does not know (the page then shows the analysis's own message only). */
typedef struct {
    const char *code;
    const char *title;   /* a short heading */
    const char *meaning; /* what it means */
    const char *action;  /* what to do */
} page_flag_text;
const page_flag_text *page_flag_text_find(const char *code);
/* Every entry (for tests): *count receives the number. */
const page_flag_text *page_flag_texts(size_t *count);

/* One analysis page. */
typedef struct {
    const char *id, *created_at, *label, *software_version;
    unsigned revision, revision_count; /* shown revision, how many */
    const char *revised_at;            /* "" for revision 1 */
    const svg_analysis *a;             /* the shown revision */
    const svg_law *laws;               /* svg_laws_compute */
    size_t law_count, law_total;
    const svg_revision *revs; /* every revision, oldest first (n >= 1) */
    size_t rev_count;
    const char *csp; /* NULL: no policy element */
} page_analysis_view;

/* The page as a new text (release with free), NULL when out of memory. */
char *page_analysis_render(const page_analysis_view *v, size_t *len);

/* One row of the list page. */
typedef struct {
    char id[32];
    char created_at[32];
    char label[128];
    unsigned levels;
    char method[16];
    int has_values;
    double values[SS_LEVELS_MAX];
    char flags[200]; /* flag codes, comma-separated */
} page_list_item;

typedef struct {
    const page_list_item *items;
    size_t count;
    /* the filter as received (NULL or "" when absent), echoed in the form
     * and carried into the next-page link */
    const char *label, *since, *until;
    unsigned limit;
    const char *next_cursor; /* "" when there is no further page */
    int first_page;          /* 0 when a cursor was given */
    const char *csp;
} page_list_view;

char *page_list_render(const page_list_view *v, size_t *len);

#endif /* SWAPSPEC_PAGE_H */
