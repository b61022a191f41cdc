/*
 * page_text.h — the text buffer the HTML pages (page_*.c) and the SVG
 * figures (svg_*.c) are written into, with the escaping every string from
 * the store goes through and the fixed-point number formats they show.
 *
 * Escaping (page_text_escaped) serves both HTML 5 text and attribute values
 * and XML 1.0 character data: & < > " ' become entity references, and the
 * characters XML 1.0 forbids (C0 controls other than tab, line feed and
 * carriage return; U+FFFE, U+FFFF) and any byte that is not part of valid
 * UTF-8 become U+FFFD, so a label typed by a user can neither close a tag
 * nor make a figure malformed.
 *
 * The first allocation failure is remembered and every later call does
 * nothing; page_text_finish reports it.
 */
#ifndef SWAPSPEC_PAGE_TEXT_H
#define SWAPSPEC_PAGE_TEXT_H

#include <stddef.h>

typedef struct {
    char *buf;
    size_t len, cap;
    int failed;
} page_text;

void page_text_init(page_text *t, size_t initial_cap);
/* Hands the text over (NUL-terminated; release with free) and resets t;
 * NULL when any call failed. */
char *page_text_finish(page_text *t, size_t *len);
void page_text_release(page_text *t); /* accepts a zeroed buffer */

/* Raw text: markup written by the program itself, never user data. */
void page_text_add(page_text *t, const char *s);
void page_text_addn(page_text *t, const char *s, size_t n);
void page_text_printf(page_text *t, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
/* Text from outside (labels, messages, ids): escaped as described above. */
void page_text_escaped(page_text *t, const char *s);

/* x with `decimals` digits after the point ("%.*f"), "−0" shown as "0";
 * "n/a" for a non-finite x.  out needs 48 bytes. */
const char *page_fmt_fixed(double x, int decimals, char out[48]);
/* A coordinate for SVG: at most two decimals, trailing zeros dropped
 * ("12.5", "40", "-3.25"); 0 for a non-finite x.  out needs 48 bytes. */
const char *page_fmt_coord(double x, char out[48]);
/* A number shown with `sig` significant digits ("%.*g"), "n/a" when not
 * finite.  out needs 48 bytes. */
const char *page_fmt_sig(double x, int sig, char out[48]);

#endif /* SWAPSPEC_PAGE_TEXT_H */
