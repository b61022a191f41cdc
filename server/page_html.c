/*
 * page_html.c — what every page shares: the document head (policy, title,
 * inline favicon, the one style sheet), the site header and footer, query
 * string encoding for links, and the bytes of GET /favicon.ico (a 16x16
 * ICO drawn here: three rows of a Young diagram, white on the palette's
 * blue, as in the inline icon).  Owns nothing beyond the icon it returns.
 */
#include <stdlib.h>
#include <string.h>

#include "page.h"

const char page_html_style[] =
    "body{font-family:sans-serif;margin:0;color:#1a1a1a;background:#f4f4f4;"
    "line-height:1.4}"
    "header.site{background:#0072B2;color:#fff;padding:.6em 1.2em}"
    "header.site a{color:#fff;font-weight:bold}"
    "main{max-width:1000px;margin:0 auto;padding:.6em 1.4em 3em;"
    "background:#fff}"
    "h1{font-size:1.5em;margin:.5em 0 .2em}"
    "h2{font-size:1.2em;margin-top:1.6em;border-bottom:1px solid #ccc}"
    "h3{font-size:1.05em;margin:.3em 0}"
    "table{border-collapse:collapse;margin:.6em 0}"
    "th,td{border:1px solid #c8c8c8;padding:.3em .6em;text-align:left;"
    "vertical-align:top}"
    "th{background:#f0f0f0}"
    "td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}"
    "td.when,td.label{white-space:nowrap}"
    "caption{text-align:left;font-style:italic;padding:.3em 0}"
    ".meta{color:#4d4d4d}"
    ".note{background:#eef5fb;border-left:4px solid #56B4E9;"
    "padding:.4em .9em}"
    ".flag{border-left:4px solid #D55E00;padding:.2em .9em;margin:.9em 0;"
    "background:#fdf3ec}"
    ".detail{color:#404040;font-size:.92em}"
    "figure{margin:1.4em 0}"
    "figure svg{max-width:100%;height:auto;border:1px solid #e0e0e0}"
    "figcaption{font-size:.92em;color:#333;margin-top:.3em}"
    "form.filter{display:flex;flex-wrap:wrap;gap:.8em;align-items:flex-end;"
    "margin:1em 0}"
    "form.filter label{display:flex;flex-direction:column;font-size:.9em}"
    ".codes{font-size:.88em;color:#6b3000}"
    "nav.pager{margin:1em 0}"
    "footer{max-width:1000px;margin:0 auto;padding:.8em 1.4em;color:#555;"
    "font-size:.85em}";

/* The icon as an SVG data: URL (characters outside the URL set escaped,
 * RFC 2397 with percent-encoding). */
static const char page_icon_url[] =
    "data:image/svg+xml,%3Csvg%20xmlns='http://www.w3.org/2000/svg'%20"
    "viewBox='0%200%2016%2016'%3E%3Crect%20width='16'%20height='16'%20"
    "fill='%230072B2'/"
    "%3E%3Cpath%20d='M2%202h12v3H2zM2%206.5h8v3H2zM2%2011h4v3H2z'"
    "%20fill='%23fff'/%3E%3C/svg%3E";

void page_html_begin(page_text *t, const char *title, const char *home,
                     const char *csp) {
    page_text_add(t, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n"
                     "<meta charset=\"utf-8\">\n"
                     "<meta name=\"viewport\" "
                     "content=\"width=device-width, initial-scale=1\">\n");
    if (csp != NULL) {
        page_text_add(t, "<meta http-equiv=\"Content-Security-Policy\" "
                         "content=\"");
        page_text_escaped(t, csp);
        page_text_add(t, "\">\n");
    }
    page_text_add(t, "<title>");
    page_text_escaped(t, title);
    page_text_add(t, " \xe2\x80\x94 swapspec</title>\n<link rel=\"icon\" "
                     "href=\"");
    page_text_escaped(t, page_icon_url);
    page_text_add(t, "\">\n<style>");
    page_text_add(t, page_html_style);
    page_text_add(t, "</style>\n</head>\n<body>\n<header class=\"site\">"
                     "<a href=\"");
    page_text_escaped(t, home);
    page_text_add(t, "\">swapspec \xc2\xb7 all analyses</a></header>\n"
                     "<main>\n");
}

void page_html_end(page_text *t) {
    page_text_add(t, "</main>\n<footer>Served by swapspec from its own "
                     "store; figures are drawn by the daemon (SVG, no "
                     "script, no outside resources). Spectra are "
                     "statistical estimates from finite shots.</footer>\n"
                     "</body>\n</html>\n");
}

void page_text_urlencoded(page_text *t, const char *s) {
    static const char hex[] = "0123456789ABCDEF";
    for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
        unsigned char c = *p;
        /* RFC 3986 §2.3 unreserved */
        if ((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
            (c >= '0' && c <= '9') || c == '-' || c == '.' || c == '_' ||
            c == '~') {
            char one = (char)c;
            page_text_addn(t, &one, 1);
        } else {
            char three[3] = {'%', hex[c >> 4], hex[c & 15]};
            page_text_addn(t, three, 3);
        }
    }
}

/* Little-endian stores. */
static void page_le16(unsigned char *p, unsigned v) {
    p[0] = (unsigned char)(v & 0xff);
    p[1] = (unsigned char)((v >> 8) & 0xff);
}

static void page_le32(unsigned char *p, unsigned long v) {
    for (int i = 0; i < 4; i++)
        p[i] = (unsigned char)((v >> (8 * i)) & 0xff);
}

unsigned char *page_favicon_ico(size_t *len) {
    /* ICONDIR (6) + one ICONDIRENTRY (16) + BITMAPINFOHEADER (40) + 16x16
     * BGRA pixels bottom-up (1024) + the 1-bit AND mask, rows padded to 4
     * bytes (64): the ICO layout of one 32-bit image ("Icons", Microsoft
     * Win32 documentation [from memory]) */
    enum { W = 16, PIX = W * W * 4, MASK = W * 4, HDR = 6 + 16 + 40 };
    size_t n = HDR + PIX + MASK;
    unsigned char *b = calloc(1, n);
    if (b == NULL)
        return NULL;
    page_le16(b + 2, 1); /* type: icon */
    page_le16(b + 4, 1); /* one image */
    unsigned char *e = b + 6;
    e[0] = W;
    e[1] = W;
    page_le16(e + 4, 1);  /* planes */
    page_le16(e + 6, 32); /* bits per pixel */
    page_le32(e + 8, (unsigned long)(40 + PIX + MASK));
    page_le32(e + 12, 22); /* offset of the bitmap */
    unsigned char *h = b + 22;
    page_le32(h, 40);
    page_le32(h + 4, W);
    page_le32(h + 8, 2 * W); /* XOR and AND halves */
    page_le16(h + 12, 1);
    page_le16(h + 14, 32);
    page_le32(h + 20, (unsigned long)(PIX + MASK));
    unsigned char *px = b + HDR;
    /* three rows from the top, 12, 8 and 4 pixels long from x = 2 */
    for (int y = 0; y < W; y++)
        for (int x = 0; x < W; x++) {
            int white = x >= 2 && ((y >= 2 && y <= 4 && x < 14) ||
                                   (y >= 7 && y <= 9 && x < 10) ||
                                   (y >= 11 && y <= 13 && x < 6));
            unsigned char *q = px + ((W - 1 - y) * W + x) * 4; /* bottom-up */
            q[0] = white ? 0xff : 0xb2;                        /* B */
            q[1] = white ? 0xff : 0x72;                        /* G */
            q[2] = white ? 0xff : 0x00;                        /* R */
            q[3] = 0xff;                                       /* opaque */
        }
    *len = n;
    return b;
}
