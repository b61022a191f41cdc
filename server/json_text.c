/*
 * json_text.c — the JSON text writer of json_text.h and its number
 * formatting.
 *
 * Numbers: a finite double x = m·2^e (m < 2^53) has 17 significant digits
 * D = round(x·10^k), k = 16 − floor(log10 |x|).  For 0 <= k <= 27, 5^k fits
 * in 64 bits, so x·10^k = m·5^k·2^(k+e) is an exact 128-bit integer times a
 * power of two and D is rounded half-to-even exactly from the bits shifted
 * out — the same digits glibc's printf gives for "%.17g" (it converts
 * exactly; C17 7.21.6.1 asks for correct rounding when the precision is at
 * most DECIMAL_DIG).  tests/test_json_text.c holds the output against
 * snprintf on millions of values.  Other magnitudes, zeros and subnormals
 * go through snprintf.  Owns the writer's buffer until jt_finish.
 */
#include "json_text.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

__extension__ typedef unsigned __int128 jt_u128; /* GCC and Clang */

static const uint64_t jt_pow10[18] = {1ull,
                                      10ull,
                                      100ull,
                                      1000ull,
                                      10000ull,
                                      100000ull,
                                      1000000ull,
                                      10000000ull,
                                      100000000ull,
                                      1000000000ull,
                                      10000000000ull,
                                      100000000000ull,
                                      1000000000000ull,
                                      10000000000000ull,
                                      100000000000000ull,
                                      1000000000000000ull,
                                      10000000000000000ull,
                                      100000000000000000ull};

/* 5^k for k = 0..27 (5^27 = 7 450 580 596 923 828 125 < 2^63). */
static uint64_t jt_pow5(int k) {
    uint64_t r = 1;
    for (int i = 0; i < k; i++)
        r *= 5u;
    return r;
}

/* jansson's conventions on printf's text: ".0" when neither '.' nor 'e'
 * appears, no '+' and no leading zeros in the exponent (jansson's
 * jsonp_dtoa does both [from memory]). */
static size_t jt_tidy(char *s, size_t len) {
    char *e = strchr(s, 'e');
    if (e == NULL) {
        if (strchr(s, '.') == NULL) {
            memcpy(s + len, ".0", 3);
            len += 2;
        }
        return len;
    }
    char *from = e + 1, *to = e + 1;
    if (*from == '-')
        *to++ = *from++;
    else if (*from == '+')
        from++;
    while (*from == '0' && from[1] != '\0')
        from++;
    memmove(to, from, strlen(from) + 1);
    return strlen(s);
}

static size_t jt_fallback(double x, char out[32]) {
    int n = snprintf(out, 32, "%.17g", x);
    return jt_tidy(out, n > 0 ? (size_t)n : 0);
}

/* floor(x·10^k) and round-half-even(x·10^k) for x = m·2^e, 0 <= k <= 27.
 * Returns 0 when the value would not fit (outside the fast range). */
static int jt_scaled(uint64_t m, int e, int k, uint64_t *floor_out,
                     uint64_t *round_out) {
    jt_u128 num = (jt_u128)m * jt_pow5(k);
    int shift = k + e; /* x·10^k = num·2^shift */
    if (shift >= 0) {
        if (shift > 10 || (num << shift) >> 64 != 0)
            return 0;
        *floor_out = *round_out = (uint64_t)(num << shift);
        return 1;
    }
    int s = -shift;
    if (s >= 127)
        return 0;
    jt_u128 t = num >> s;
    if (t >> 64 != 0)
        return 0;
    jt_u128 rem = num - (t << s), half = (jt_u128)1 << (s - 1);
    *floor_out = (uint64_t)t;
    *round_out =
        (uint64_t)t + ((rem > half || (rem == half && (t & 1u))) ? 1u : 0u);
    return 1;
}

/* Writes the 17 digits of D with decimal exponent E as "%.17g" would,
 * then jansson's tidying. */
static size_t jt_place(int neg, uint64_t D, int E, char out[32]) {
    char d[18];
    for (int i = 16; i >= 0; i--) {
        d[i] = (char)('0' + D % 10u);
        D /= 10u;
    }
    int last = 16; /* last significant digit */
    while (last > 0 && d[last] == '0')
        last--;
    size_t n = 0;
    if (neg)
        out[n++] = '-';
    if (E < -4 || E >= 17) {
        out[n++] = d[0];
        if (last > 0) {
            out[n++] = '.';
            for (int i = 1; i <= last; i++)
                out[n++] = d[i];
        }
        out[n++] = 'e';
        unsigned ae = (unsigned)(E < 0 ? -E : E);
        if (E < 0)
            out[n++] = '-';
        if (ae >= 100)
            out[n++] = (char)('0' + ae / 100u);
        if (ae >= 10)
            out[n++] = (char)('0' + ae / 10u % 10u);
        out[n++] = (char)('0' + ae % 10u);
    } else if (E >= 0) {
        for (int i = 0; i <= E; i++)
            out[n++] = d[i];
        out[n++] = '.';
        if (last <= E)
            out[n++] = '0'; /* jansson's ".0" */
        for (int i = E + 1; i <= last; i++)
            out[n++] = d[i];
    } else {
        out[n++] = '0';
        out[n++] = '.';
        for (int i = 0; i < -E - 1; i++)
            out[n++] = '0';
        for (int i = 0; i <= last; i++)
            out[n++] = d[i];
    }
    out[n] = '\0';
    return n;
}

size_t json_text_number(double x, char out[32]) {
    if (!isfinite(x)) {
        memcpy(out, "null", 5);
        return 4;
    }
    uint64_t u;
    memcpy(&u, &x, sizeof u);
    unsigned biased = (unsigned)(u >> 52) & 0x7ffu;
    if (biased == 0) /* zero or subnormal */
        return jt_fallback(x, out);
    uint64_t m = (u & ((1ull << 52) - 1u)) | (1ull << 52);
    int e = (int)biased - 1075;
    int E = (int)floor(log10(fabs(x)));
    for (int tries = 0; tries < 3; tries++) {
        int k = 16 - E;
        uint64_t t, r;
        if (k < 0 || k > 27 || !jt_scaled(m, e, k, &t, &r))
            break;
        if (t < jt_pow10[16]) { /* log10 rounded up across a power of 10 */
            E--;
            continue;
        }
        if (t >= jt_pow10[17]) {
            E++;
            continue;
        }
        if (r == jt_pow10[17]) { /* rounding carried into a new digit */
            r = jt_pow10[16];
            E++;
        }
        return jt_place((int)(u >> 63), r, E, out);
    }
    return jt_fallback(x, out);
}

/* ------------------------------------------------------------------------ */
/* The writer.                                                              */

static int jt_reserve(jt_writer *w, size_t more) {
    if (w->failed)
        return 0;
    if (w->len + more + 1 <= w->cap)
        return 1;
    size_t cap = w->cap ? w->cap : 256;
    while (cap < w->len + more + 1)
        cap *= 2;
    char *grown = realloc(w->buf, cap);
    if (grown == NULL) {
        w->failed = 1;
        return 0;
    }
    w->buf = grown;
    w->cap = cap;
    return 1;
}

static void jt_put(jt_writer *w, const char *s, size_t n) {
    if (!jt_reserve(w, n))
        return;
    memcpy(w->buf + w->len, s, n);
    w->len += n;
    w->buf[w->len] = '\0';
}

/* Comma before an item unless it is the first at its depth or the value
 * of a key just written. */
static void jt_item(jt_writer *w) {
    if (w->after_key) {
        w->after_key = 0;
        return;
    }
    if (w->depth == 0)
        return;
    if (w->nonempty[w->depth - 1])
        jt_put(w, ",", 1);
    w->nonempty[w->depth - 1] = 1;
}

void jt_init(jt_writer *w, size_t initial_cap) {
    memset(w, 0, sizeof *w);
    if (initial_cap > 0) {
        w->buf = malloc(initial_cap);
        if (w->buf == NULL)
            w->failed = 1;
        else {
            w->cap = initial_cap;
            w->buf[0] = '\0';
        }
    }
}

char *jt_finish(jt_writer *w, size_t *len) {
    char *text = NULL;
    if (!w->failed && w->depth == 0 && !w->after_key && w->buf != NULL) {
        text = w->buf;
        if (len != NULL)
            *len = w->len;
        w->buf = NULL;
    }
    jt_release(w);
    return text;
}

void jt_release(jt_writer *w) {
    free(w->buf);
    memset(w, 0, sizeof *w);
}

static void jt_open(jt_writer *w, char c) {
    jt_item(w);
    if (w->depth >= JT_DEPTH_MAX) {
        w->failed = 1;
        return;
    }
    jt_put(w, &c, 1);
    w->nonempty[w->depth++] = 0;
}

static void jt_close(jt_writer *w, char c) {
    if (w->depth == 0 || w->after_key) {
        w->failed = 1;
        return;
    }
    w->depth--;
    jt_put(w, &c, 1);
}

void jt_object_begin(jt_writer *w) { jt_open(w, '{'); }
void jt_object_end(jt_writer *w) { jt_close(w, '}'); }
void jt_array_begin(jt_writer *w) { jt_open(w, '['); }
void jt_array_end(jt_writer *w) { jt_close(w, ']'); }

/* s[0..n) quoted; NUL bytes inside are escaped like any control byte. */
static void jt_quoted_n(jt_writer *w, const char *s, size_t n) {
    static const char hex[] = "0123456789abcdef";
    jt_put(w, "\"", 1);
    const char *run = s, *end = s + n;
    for (const char *p = s;; p++) {
        unsigned char c = p < end ? (unsigned char)*p : 0;
        if (p < end && c >= 0x20 && c != '"' && c != '\\')
            continue;
        jt_put(w, run, (size_t)(p - run));
        if (p == end)
            break;
        char esc[7] = {'\\', (char)c, 0, 0, 0, 0, 0};
        size_t elen = 2;
        switch (c) {
        case '"':
        case '\\':
            break;
        case '\b':
            esc[1] = 'b';
            break;
        case '\f':
            esc[1] = 'f';
            break;
        case '\n':
            esc[1] = 'n';
            break;
        case '\r':
            esc[1] = 'r';
            break;
        case '\t':
            esc[1] = 't';
            break;
        default:
            memcpy(esc + 1, "u00", 3);
            esc[4] = hex[c >> 4];
            esc[5] = hex[c & 15u];
            elen = 6;
        }
        jt_put(w, esc, elen);
        run = p + 1;
    }
    jt_put(w, "\"", 1);
}

static void jt_quoted(jt_writer *w, const char *s) {
    jt_quoted_n(w, s, strlen(s));
}

void jt_key(jt_writer *w, const char *key) {
    if (w->after_key || w->depth == 0) {
        w->failed = 1;
        return;
    }
    jt_item(w);
    jt_quoted(w, key);
    jt_put(w, ":", 1);
    w->after_key = 1;
}

void jt_string(jt_writer *w, const char *s) {
    jt_item(w);
    jt_quoted(w, s);
}

void jt_number(jt_writer *w, double x) {
    char text[32];
    size_t n = json_text_number(x, text);
    jt_item(w);
    jt_put(w, text, n);
}

void jt_integer(jt_writer *w, int64_t x) {
    char text[24];
    size_t n = sizeof text;
    uint64_t v = x < 0 ? 0u - (uint64_t)x : (uint64_t)x;
    do {
        text[--n] = (char)('0' + v % 10u);
        v /= 10u;
    } while (v != 0);
    if (x < 0)
        text[--n] = '-';
    jt_item(w);
    jt_put(w, text + n, sizeof text - n);
}

void jt_null(jt_writer *w) {
    jt_item(w);
    jt_put(w, "null", 4);
}

void jt_bool(jt_writer *w, int v) {
    jt_item(w);
    jt_put(w, v ? "true" : "false", v ? 4 : 5);
}

void jt_raw(jt_writer *w, const char *text, size_t len) {
    jt_item(w);
    jt_put(w, text, len);
}

void jt_numbers(jt_writer *w, const double *x, size_t n) {
    jt_array_begin(w);
    for (size_t i = 0; i < n; i++)
        jt_number(w, x[i]);
    jt_array_end(w);
}

void jt_json(jt_writer *w, const json_t *v) {
    const char *key;
    json_t *item;
    size_t i;
    switch (json_typeof(v)) {
    case JSON_OBJECT:
        jt_object_begin(w);
        json_object_foreach((json_t *)v, key, item) {
            jt_key(w, key);
            jt_json(w, item);
        }
        jt_object_end(w);
        break;
    case JSON_ARRAY:
        jt_array_begin(w);
        json_array_foreach(v, i, item) jt_json(w, item);
        jt_array_end(w);
        break;
    case JSON_STRING:
        jt_item(w);
        jt_quoted_n(w, json_string_value(v), json_string_length(v));
        break;
    case JSON_INTEGER:
        jt_integer(w, (int64_t)json_integer_value(v));
        break;
    case JSON_REAL:
        jt_number(w, json_real_value(v));
        break;
    case JSON_TRUE:
    case JSON_FALSE:
        jt_bool(w, json_is_true(v));
        break;
    case JSON_NULL:
        jt_null(w);
        break;
    }
}

char *json_text_dump(const json_t *doc, size_t *len) {
    jt_writer w;
    jt_init(&w, 1024);
    if (doc == NULL)
        w.failed = 1;
    else
        jt_json(&w, doc);
    return jt_finish(&w, len);
}
