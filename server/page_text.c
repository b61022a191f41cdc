/*
 * page_text.c — the growing text buffer of page_text.h, the escaping of
 * outside strings for HTML and XML, and the number formats of the pages and
 * figures.  Owns the buffer until page_text_finish hands it over.
 */
#include "page_text.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void page_text_init(page_text *t, size_t initial_cap) {
    memset(t, 0, sizeof *t);
    t->cap = initial_cap < 64 ? 64 : initial_cap;
    t->buf = malloc(t->cap);
    if (t->buf == NULL)
        t->failed = 1;
    else
        t->buf[0] = '\0';
}

char *page_text_finish(page_text *t, size_t *len) {
    char *out = t->failed ? NULL : t->buf;
    if (out == NULL)
        free(t->buf);
    else if (len != NULL)
        *len = t->len;
    memset(t, 0, sizeof *t);
    return out;
}

void page_text_release(page_text *t) {
    if (t == NULL)
        return;
    free(t->buf);
    memset(t, 0, sizeof *t);
}

/* Room for n more bytes and the NUL; 0 when it cannot be had. */
static int page_text_reserve(page_text *t, size_t n) {
    if (t->failed)
        return 0;
    if (t->len + n + 1 <= t->cap)
        return 1;
    size_t cap = t->cap ? t->cap : 64;
    while (cap < t->len + n + 1)
        cap *= 2;
    char *grown = realloc(t->buf, cap);
    if (grown == NULL) {
        t->failed = 1;
        return 0;
    }
    t->buf = grown;
    t->cap = cap;
    return 1;
}

void page_text_addn(page_text *t, const char *s, size_t n) {
    if (!page_text_reserve(t, n))
        return;
    memcpy(t->buf + t->len, s, n);
    t->len += n;
    t->buf[t->len] = '\0';
}

void page_text_add(page_text *t, const char *s) {
    page_text_addn(t, s, strlen(s));
}

void page_text_printf(page_text *t, const char *fmt, ...) {
    if (t->failed)
        return;
    va_list ap;
    va_start(ap, fmt);
    char small[256];
    int n = vsnprintf(small, sizeof small, fmt, ap);
    va_end(ap);
    if (n < 0) {
        t->failed = 1;
        return;
    }
    if ((size_t)n < sizeof small) {
        page_text_addn(t, small, (size_t)n);
        return;
    }
    if (!page_text_reserve(t, (size_t)n))
        return;
    va_start(ap, fmt);
    vsnprintf(t->buf + t->len, (size_t)n + 1, fmt, ap);
    va_end(ap);
    t->len += (size_t)n;
}

/* Length of the valid UTF-8 sequence at s (1..4), 0 when s does not start
 * one (RFC 3629 §4: no overlong forms, no surrogates, at most U+10FFFF);
 * *cp receives the code point. */
static size_t page_utf8_decode(const unsigned char *s, uint32_t *cp) {
    unsigned char c = s[0];
    if (c < 0x80) {
        *cp = c;
        return 1;
    }
    size_t n;
    uint32_t v, min;
    if (c >= 0xc2 && c <= 0xdf) {
        n = 2;
        v = c & 0x1fu;
        min = 0x80;
    } else if (c >= 0xe0 && c <= 0xef) {
        n = 3;
        v = c & 0x0fu;
        min = 0x800;
    } else if (c >= 0xf0 && c <= 0xf4) {
        n = 4;
        v = c & 0x07u;
        min = 0x10000;
    } else
        return 0;
    for (size_t i = 1; i < n; i++) {
        if ((s[i] & 0xc0) != 0x80)
            return 0;
        v = (v << 6) | (s[i] & 0x3fu);
    }
    if (v < min || v > 0x10ffff || (v >= 0xd800 && v <= 0xdfff))
        return 0;
    *cp = v;
    return n;
}

void page_text_escaped(page_text *t, const char *s) {
    static const char replacement[] = "\xef\xbf\xbd"; /* U+FFFD */
    const unsigned char *p = (const unsigned char *)s;
    while (*p && !t->failed) {
        /* copy the longest run that needs no change in one go */
        size_t run = 0;
        while (p[run] >= 0x20 && p[run] < 0x7f && p[run] != '&' &&
               p[run] != '<' && p[run] != '>' && p[run] != '"' &&
               p[run] != '\'')
            run++;
        if (run > 0) {
            page_text_addn(t, (const char *)p, run);
            p += run;
            continue;
        }
        uint32_t cp = 0;
        size_t n = page_utf8_decode(p, &cp);
        switch (n == 1 ? *p : 0) {
        case '&':
            page_text_add(t, "&amp;");
            break;
        case '<':
            page_text_add(t, "&lt;");
            break;
        case '>':
            page_text_add(t, "&gt;");
            break;
        case '"':
            page_text_add(t, "&quot;");
            break;
        case '\'':
            page_text_add(t, "&#39;");
            break;
        case '\t':
        case '\n':
        case '\r':
            page_text_addn(t, (const char *)p, 1);
            break;
        default:
            /* XML 1.0 §2.2 Char: no other C0 control, no U+FFFE/U+FFFF;
             * DEL and the C1 controls are allowed there but are parse
             * errors in HTML (WHATWG HTML §13.2.3.5), so they go too;
             * invalid UTF-8 is replaced byte by byte */
            if (n == 0 || cp < 0x20 || (cp >= 0x7f && cp <= 0x9f) ||
                cp == 0xfffe || cp == 0xffff)
                page_text_add(t, replacement);
            else
                page_text_addn(t, (const char *)p, n);
        }
        p += n ? n : 1;
    }
}

const char *page_fmt_fixed(double x, int decimals, char out[48]) {
    if (!isfinite(x)) {
        snprintf(out, 48, "n/a");
        return out;
    }
    snprintf(out, 48, "%.*f", decimals, x);
    /* "-0.000" → "0.000": a rounded zero carries no sign */
    if (out[0] == '-' && strspn(out + 1, "0.") == strlen(out + 1))
        memmove(out, out + 1, strlen(out));
    return out;
}

const char *page_fmt_coord(double x, char out[48]) {
    if (!isfinite(x))
        x = 0.0;
    page_fmt_fixed(x, 2, out);
    char *dot = strchr(out, '.');
    if (dot != NULL) {
        char *end = out + strlen(out);
        while (end > dot + 1 && end[-1] == '0')
            *--end = '\0';
        if (end == dot + 1)
            *dot = '\0';
    }
    return out;
}

const char *page_fmt_sig(double x, int sig, char out[48]) {
    if (!isfinite(x))
        snprintf(out, 48, "n/a");
    else
        snprintf(out, 48, "%.*g", sig, x == 0.0 ? 0.0 : x);
    return out;
}
