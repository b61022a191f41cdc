/*
 * json_text.c — the JSON text writer of json_text.h and its number
 * formatting.
 *
 * Numbers: a finite double x = m·2^e (m < 2^53) has 17 significant digits
 * D = round(x·10^k), k = 16 − floor(log10 |x|).  For 0 <= k <= 27, 5^k fits
 * in 64 bits, so x·10^k = m·5^k·2^(k+e) is an exact 128-bit integer times a
 * power of two and D is rounded half-to-even exactly from the bits shifted
 * out.  Then the fewest digits p whose correctly rounded decimal still
 * reads back as x are found exactly (jt_reads_back), so 16.8 prints as
 * "16.8" and not "16.800000000000001", and every text reads back to the
 * same double.  tests/test_json_text.c holds the output against glibc
 * (snprintf "%.*e" for the digits, strtod for the reading back) on
 * millions of values.  Zeros and integers below 10^15 are written
 * directly; other magnitudes and subnormals go through snprintf "%.17g".  Owns
 * the writer's buffer until jt_finish.
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
    static const uint64_t table[28] = {1ull,
                                       5ull,
                                       25ull,
                                       125ull,
                                       625ull,
                                       3125ull,
                                       15625ull,
                                       78125ull,
                                       390625ull,
                                       1953125ull,
                                       9765625ull,
                                       48828125ull,
                                       244140625ull,
                                       1220703125ull,
                                       6103515625ull,
                                       30517578125ull,
                                       152587890625ull,
                                       762939453125ull,
                                       3814697265625ull,
                                       19073486328125ull,
                                       95367431640625ull,
                                       476837158203125ull,
                                       2384185791015625ull,
                                       11920928955078125ull,
                                       59604644775390625ull,
                                       298023223876953125ull,
                                       1490116119384765625ull,
                                       7450580596923828125ull};
    return table[k];
}

static size_t jt_place(int neg, uint64_t D, int E, char out[32]);

/* Outside the fast range (subnormals, |x| below about 1e-11 or from 1e17
 * on): the shortest "%.*e" that strtod reads back as x, placed by
 * jt_place like the fast path's digits. */
static size_t jt_fallback(double x, char out[32]) {
    char text[40];
    for (int p = 1; p <= 17; p++) {
        snprintf(text, sizeof text, "%.*e", p - 1, x);
        double back = strtod(text, NULL);
        if (memcmp(&back, &x, sizeof x) == 0 || p == 17)
            break;
    }
    uint64_t D = 0;
    int digits = 0;
    const char *c = text + (text[0] == '-');
    for (; *c && *c != 'e'; c++)
        if (*c >= '0' && *c <= '9') {
            D = D * 10u + (uint64_t)(*c - '0');
            digits++;
        }
    for (; digits < 17; digits++)
        D *= 10u;
    return jt_place(signbit(x) != 0, D, atoi(c + 1), out);
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

/* Rounds x·10^k (17 significant digits) to p digits, D_p·10^(17−p), and
 * tells whether that decimal reads back as x: it must lie within half a
 * unit in the last place of x (a quarter below a power of two, where the
 * double below is closer), the ends included when m is even (strtod rounds
 * halfway cases to even).  Everything is scaled to exact 128-bit
 * integers.  *scaled receives D_p·10^(17−p). */
static int jt_reads_back(uint64_t m, int e, int k, unsigned biased, int p,
                         uint64_t *scaled) {
    int kp = k - (17 - p), shift = k + e;
    uint64_t t, dp;
    if (shift < -68 || shift > 20)
        return 0;
    if (kp >= 0) {
        if (!jt_scaled(m, e, kp, &t, &dp))
            return 0;
    } else { /* x·10^kp = m·5^k·2^shift / 10^(k − kp): divide exactly */
        int j = k - kp;
        if (j > 17)
            return 0;
        jt_u128 num = (jt_u128)m * jt_pow5(k), den = jt_pow10[j];
        if (shift >= 0)
            num <<= shift;
        else
            den <<= -shift;
        jt_u128 q = num / den, rem = num % den;
        if (q >> 64 != 0)
            return 0;
        dp = (uint64_t)q +
             ((2 * rem > den || (2 * rem == den && (q & 1u))) ? 1u : 0u);
    }
    uint64_t v = dp * jt_pow10[17 - p]; /* <= 10^17 */
    /* x·10^k = m·5^k·2^shift and half an ulp is 5^k·2^(shift−1): both
     * sides times 2^(2 − min(shift, 0)) are integers */
    int up = shift < 0 ? -shift : 0, keep = shift > 0 ? shift : 0;
    jt_u128 a = (jt_u128)v << (up + 2);
    jt_u128 b = ((jt_u128)m * jt_pow5(k)) << (keep + 2);
    jt_u128 tol_hi = (jt_u128)jt_pow5(k) << (keep + 1);
    jt_u128 tol_lo = (m == (1ull << 52) && biased > 1) ? tol_hi >> 1 : tol_hi;
    int even = (m & 1u) == 0;
    jt_u128 d = a >= b ? a - b : b - a;
    jt_u128 tol = a >= b ? tol_hi : tol_lo;
    *scaled = v;
    return even ? d <= tol : d < tol;
}

static const char jt_pairs[201] = "00010203040506070809"
                                  "10111213141516171819"
                                  "20212223242526272829"
                                  "30313233343536373839"
                                  "40414243444546474849"
                                  "50515253545556575859"
                                  "60616263646566676869"
                                  "70717273747576777879"
                                  "80818283848586878889"
                                  "90919293949596979899";

/* The 8 decimal digits of v < 10^8, leading zeros included. */
static void jt_digits8(char o[8], uint32_t v) {
    uint32_t a = v / 10000u, b = v % 10000u;
    memcpy(o, jt_pairs + 2 * (a / 100u), 2);
    memcpy(o + 2, jt_pairs + 2 * (a % 100u), 2);
    memcpy(o + 4, jt_pairs + 2 * (b / 100u), 2);
    memcpy(o + 6, jt_pairs + 2 * (b % 100u), 2);
}

/* Writes the 17 digits of D with decimal exponent E as "%.17g" would,
 * then jansson's tidying. */
static size_t jt_place(int neg, uint64_t D, int E, char out[32]) {
    char d[17];
    uint32_t hi = (uint32_t)(D / 100000000u); /* < 10^9 */
    jt_digits8(d + 9, (uint32_t)(D % 100000000u));
    jt_digits8(d + 1, hi % 100000000u);
    d[0] = (char)('0' + hi / 100000000u);
    int last = 16; /* last significant digit */
    while (last > 0 && d[last] == '0')
        last--;
    char *o = out;
    if (neg)
        *o++ = '-';
    if (E < -4 || E >= 17) {
        *o++ = d[0];
        if (last > 0) {
            *o++ = '.';
            memcpy(o, d + 1, (size_t)last);
            o += last;
        }
        *o++ = 'e';
        unsigned ae = (unsigned)(E < 0 ? -E : E);
        if (E < 0)
            *o++ = '-';
        if (ae >= 100)
            *o++ = (char)('0' + ae / 100u);
        if (ae >= 10)
            *o++ = (char)('0' + ae / 10u % 10u);
        *o++ = (char)('0' + ae % 10u);
    } else if (E >= 0) {
        memcpy(o, d, (size_t)E + 1);
        o += E + 1;
        *o++ = '.';
        if (last <= E) {
            *o++ = '0'; /* jansson's ".0" */
        } else {
            memcpy(o, d + E + 1, (size_t)(last - E));
            o += last - E;
        }
    } else {
        *o++ = '0';
        *o++ = '.';
        memset(o, '0', (size_t)(-E - 1));
        o += -E - 1;
        memcpy(o, d, (size_t)last + 1);
        o += last + 1;
    }
    *o = '\0';
    return (size_t)(o - out);
}

/* The decimal digits of x (a '-' first when negative) in out, without a
 * terminating NUL; returns their count (at most 20). */
static size_t jt_int_text(int64_t x, char out[24]) {
    char t[24];
    size_t n = sizeof t, len = 0;
    uint64_t v = x < 0 ? 0u - (uint64_t)x : (uint64_t)x;
    do {
        t[--n] = (char)('0' + v % 10u);
        v /= 10u;
    } while (v != 0);
    if (x < 0)
        out[len++] = '-';
    memcpy(out + len, t + n, sizeof t - n);
    return len + sizeof t - n;
}

/* floor(log10 |x|) for a normal x = 1.f·2^e2, or one off (the caller's
 * loop corrects either way): e2·log10(2) gives it to within one, and a
 * comparison with the power of ten above settles it. */
static int jt_decimal_exponent(double x, int e2) {
    static const double above[] = {
        1e-11, 1e-10, 1e-9, 1e-8, 1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2,
        1e-1,  1e0,   1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,
        1e9,   1e10,  1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18};
    /* 78913 / 2^18 = 0.30102920… < log10 2 = 0.30102999…, so the floor is
     * floor(e2·log10 2) or, for e2 < 0, one above it (|e2| < 1100) */
    int E = e2 >= 0 ? (e2 * 78913) >> 18
                    : -((-e2 * 78913 + (1 << 18) - 1) >> 18); /* floor */
    int i = E + 12; /* above[i] = 10^(E+1) */
    if (i < 0 || i >= (int)(sizeof above / sizeof above[0]))
        return (int)floor(log10(fabs(x)));
    return fabs(x) >= above[i] ? E + 1 : E;
}

size_t json_text_number(double x, char out[32]) {
    if (!isfinite(x)) {
        memcpy(out, "null", 5);
        return 4;
    }
    uint64_t u;
    memcpy(&u, &x, sizeof u);
    if (x == 0) { /* "0.0" or "-0.0", as jt_place writes them */
        size_t n = u >> 63 ? 4 : 3;
        memcpy(out, u >> 63 ? "-0.0" : "0.0", n + 1);
        return n;
    }
    if (fabs(x) < 1e15 && x == (double)(int64_t)x) {
        /* an integer below 10^15 has at most 15 digits, all of them exact:
         * its 15-digit rounding is itself, so it prints as "%lld.0" */
        size_t len = jt_int_text((int64_t)x, out);
        memcpy(out + len, ".0", 3);
        return len + 2;
    }
    unsigned biased = (unsigned)(u >> 52) & 0x7ffu;
    if (biased == 0) /* subnormal */
        return jt_fallback(x, out);
    uint64_t m = (u & ((1ull << 52) - 1u)) | (1ull << 52);
    int e = (int)biased - 1075;
    int E = jt_decimal_exponent(x, (int)biased - 1023);
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
            k--;
        }
        /* the fewest digits that still read back as x.  17 always do.
         * When 15 do, the 15-digit rounding is the shortest one padded
         * with zeros: a decimal of p <= 15 digits that reads back lies
         * within half an ulp of x (relative 2^-53 ~ 1.1e-16), closer than
         * half the spacing of 15-digit decimals (relative > 5e-16), so it
         * IS the 15-digit rounding; jt_place drops the zeros.  Only 16 and
         * 17 need their own test. */
        uint64_t best = r, dp16 = 0, dp15 = 0;
        if (jt_reads_back(m, e, k, biased, 16, &dp16))
            best = jt_reads_back(m, e, k, biased, 15, &dp15) ? dp15 : dp16;
        if (best == jt_pow10[17]) { /* p digits rounded up to 10^p */
            best = jt_pow10[16];
            E++;
        }
        return jt_place((int)(u >> 63), best, E, out);
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

/* 1 for the bytes a JSON string cannot hold as they are (RFC 8259 §7):
 * control bytes, the quotation mark and the reverse solidus. */
static const unsigned char jt_escaped[256] = {
    [0x00] = 1, [0x01] = 1, [0x02] = 1, [0x03] = 1, [0x04] = 1, [0x05] = 1,
    [0x06] = 1, [0x07] = 1, [0x08] = 1, [0x09] = 1, [0x0a] = 1, [0x0b] = 1,
    [0x0c] = 1, [0x0d] = 1, [0x0e] = 1, [0x0f] = 1, [0x10] = 1, [0x11] = 1,
    [0x12] = 1, [0x13] = 1, [0x14] = 1, [0x15] = 1, [0x16] = 1, [0x17] = 1,
    [0x18] = 1, [0x19] = 1, [0x1a] = 1, [0x1b] = 1, [0x1c] = 1, [0x1d] = 1,
    [0x1e] = 1, [0x1f] = 1, ['"'] = 1,  ['\\'] = 1};

/* s[0..n) quoted, then `colon` ':' characters (0 or 1); NUL bytes inside
 * are escaped like any control byte.  A string without anything to escape
 * (every key and nearly every text here) is copied in one piece. */
static void jt_quoted_n(jt_writer *w, const char *s, size_t n, size_t colon) {
    static const char hex[] = "0123456789abcdef";
    const unsigned char *p = (const unsigned char *)s, *end = p + n, *run = p;
    while (p < end && !jt_escaped[*p])
        p++;
    if (p == end) {
        if (!jt_reserve(w, n + 2 + colon))
            return;
        char *o = w->buf + w->len;
        o[0] = '"';
        memcpy(o + 1, s, n);
        o[n + 1] = '"';
        o[n + 2] = ':'; /* overwritten by the NUL when colon is 0 */
        w->len += n + 2 + colon;
        w->buf[w->len] = '\0';
        return;
    }
    jt_put(w, "\"", 1);
    for (;;) {
        while (p < end && !jt_escaped[*p])
            p++;
        jt_put(w, (const char *)run, (size_t)(p - run));
        if (p == end)
            break;
        unsigned char c = *p++;
        run = p;
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
    }
    jt_put(w, "\":", 1 + colon);
}

void jt_key(jt_writer *w, const char *key) {
    if (w->after_key || w->depth == 0) {
        w->failed = 1;
        return;
    }
    jt_item(w);
    jt_quoted_n(w, key, strlen(key), 1);
    w->after_key = 1;
}

void jt_string(jt_writer *w, const char *s) {
    jt_item(w);
    jt_quoted_n(w, s, strlen(s), 0);
}

void jt_number(jt_writer *w, double x) {
    char text[32];
    size_t n = json_text_number(x, text);
    jt_item(w);
    jt_put(w, text, n);
}

void jt_integer(jt_writer *w, int64_t x) {
    char text[24];
    size_t n = jt_int_text(x, text);
    jt_item(w);
    jt_put(w, text, n);
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
        jt_quoted_n(w, json_string_value(v), json_string_length(v), 0);
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
