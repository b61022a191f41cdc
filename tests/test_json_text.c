/*
 * test_json_text.c — the JSON text writer (server/json_text.c).
 *
 * Numbers are held against glibc — an outside oracle that converts exactly
 * (C17 7.21.6.1 asks for correct rounding up to DECIMAL_DIG digits): the
 * shortest "%.*e" that strtod reads back as the same double, placed as
 * "%.17g" places digits, with jansson's tidying (".0" for integral text,
 * exponent without '+' or leading zeros [the tidying rules from memory of
 * jansson's dump.c]); on 400 000 doubles drawn log-uniformly over
 * 1e-15..1e20 with both signs, random bit patterns, and the edges where
 * the fast path turns (powers of ten and their neighbours, powers of two,
 * integers, halves).  Every text must also read back (strtod) to the same
 * double bit for bit.  Documents are parsed back with jansson and compared
 * member by member.
 */
#include <criterion/criterion.h>
#include <jansson.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "json_text.h"

/* The expected text, from glibc alone: the shortest p (1..17) whose
 * correctly rounded "%.*e" reads back (strtod) as x, placed like "%.17g"
 * would place those digits (exponent form below 1e-4 and from 1e17 on,
 * trailing zeros dropped), then jansson's tidying (".0" on integral text,
 * exponent without '+' or leading zeros). */
static void oracle(double x, char *out, size_t cap) {
    char e_form[48];
    int p = 1;
    int plain = 0;
    for (; p < 17; p++) {
        snprintf(e_form, sizeof e_form, "%.*e", p - 1, x);
        double back = strtod(e_form, NULL);
        if (memcmp(&back, &x, sizeof x) == 0)
            break;
    }
    char raw[48];
    if (plain) {
        snprintf(raw, sizeof raw, "%.17g", x);
    } else {
        snprintf(e_form, sizeof e_form, "%.*e", p - 1, x);
        /* digits and exponent of the p-digit form */
        char digits[24];
        size_t nd = 0;
        const char *c = e_form;
        int neg = *c == '-';
        if (neg)
            c++;
        for (; *c && *c != 'e'; c++)
            if (*c >= '0' && *c <= '9')
                digits[nd++] = *c;
        digits[nd] = '\0';
        int ex = atoi(c + 1);
        while (nd > 1 && digits[nd - 1] == '0')
            digits[--nd] = '\0';
        size_t o = 0;
        if (neg)
            raw[o++] = '-';
        if (ex < -4 || ex >= 17) {
            raw[o++] = digits[0];
            if (nd > 1) {
                raw[o++] = '.';
                for (size_t i = 1; i < nd; i++)
                    raw[o++] = digits[i];
            }
            o += (size_t)snprintf(raw + o, sizeof raw - o, "e%+03d", ex);
        } else if (ex >= 0) {
            for (int i = 0; i <= ex; i++)
                raw[o++] = (size_t)i < nd ? digits[i] : '0';
            if (nd > (size_t)ex + 1) {
                raw[o++] = '.';
                for (size_t i = (size_t)ex + 1; i < nd; i++)
                    raw[o++] = digits[i];
            }
        } else {
            raw[o++] = '0';
            raw[o++] = '.';
            for (int i = 0; i < -ex - 1; i++)
                raw[o++] = '0';
            for (size_t i = 0; i < nd; i++)
                raw[o++] = digits[i];
        }
        raw[o] = '\0';
    }
    char *e = strchr(raw, 'e');
    if (e == NULL) {
        snprintf(out, cap, "%s%s", raw, strchr(raw, '.') ? "" : ".0");
        return;
    }
    *e = '\0';
    long ex = strtol(e + 1, NULL, 10);
    snprintf(out, cap, "%se%ld", raw, ex);
}

static uint64_t rng_state = 0x9e3779b97f4a7c15ull;
static uint64_t rng_next(void) { /* splitmix64 (Steele, Lea, Flood 2014) */
    uint64_t z = (rng_state += 0x9e3779b97f4a7c15ull);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
    return z ^ (z >> 31);
}

/* 10^k for k = 0..17. */
static uint64_t jt_test_pow10(int k) {
    uint64_t p = 1;
    while (k-- > 0)
        p *= 10u;
    return p;
}

static void check_one(double x) {
    char got[32], want[96];
    json_text_number(x, got);
    oracle(x, want, sizeof want);
    cr_assert_str_eq(got, want, "x = %a", x);
    double back = strtod(got, NULL);
    cr_assert(memcmp(&back, &x, sizeof x) == 0, "%s does not read back", got);
}

Test(json_text, numbers_log_uniform) {
    for (int i = 0; i < 400000; i++) {
        double u = (double)(rng_next() >> 11) * 0x1p-53;
        double x = pow(10.0, -15.0 + 35.0 * u);
        check_one(rng_next() & 1 ? -x : x);
    }
}

Test(json_text, numbers_random_bits) {
    for (int i = 0; i < 300000; i++) {
        uint64_t b = rng_next();
        double x;
        memcpy(&x, &b, sizeof x);
        if (!isfinite(x))
            continue;
        check_one(x);
    }
}

/* Integral doubles (the writer's direct path below 10^15, the general one
 * above): every magnitude, both signs, trailing zeros, and the bounds. */
Test(json_text, numbers_integral) {
    for (int i = 0; i < 200000; i++) {
        int digits = 1 + (int)(rng_next() % 17u); /* 1..17 digits */
        uint64_t v = rng_next() % jt_test_pow10(digits);
        if (i % 4 == 0) /* trailing zeros */
            v -= v % jt_test_pow10((int)(rng_next() % (unsigned)digits));
        double x = (double)v;
        check_one(rng_next() & 1 ? -x : x);
    }
    const double bounds[] = {1e15, 999999999999999.0, 1e15 - 0.5, 1e15 + 1.0,
                             4503599627370496.0};
    for (size_t i = 0; i < sizeof bounds / sizeof bounds[0]; i++) {
        check_one(bounds[i]);
        check_one(-bounds[i]);
        check_one(nextafter(bounds[i], 0.0));
    }
}

Test(json_text, numbers_edges) {
    for (int k = -20; k <= 22; k++) {
        double p = pow(10.0, k);
        check_one(p);
        check_one(nextafter(p, 0.0));
        check_one(nextafter(p, INFINITY));
        check_one(-p);
    }
    for (int k = -60; k <= 60; k++) { /* the narrower gap below 2^k */
        double p = ldexp(1.0, k);
        check_one(p);
        check_one(nextafter(p, 0.0));
        check_one(nextafter(p, INFINITY));
    }
    for (int i = -3000; i <= 3000; i++) {
        check_one((double)i);
        check_one(i / 2.0);
        check_one(i / 24.0); /* λ/n values */
    }
    const double specials[] = {0.0,
                               -0.0,
                               0.1,
                               0.95,
                               127.3,
                               1.0 / 3.0,
                               9007199254740992.0,
                               9007199254740993.0,
                               99999999999999999.0,
                               1e17,
                               5e-324,
                               2.2250738585072014e-308,
                               1.7976931348623157e308};
    for (size_t i = 0; i < sizeof specials / sizeof specials[0]; i++)
        check_one(specials[i]);
    char t[32];
    json_text_number(NAN, t);
    cr_assert_str_eq(t, "null");
    json_text_number(-INFINITY, t);
    cr_assert_str_eq(t, "null");
}

/* A document with nesting, every value kind and strings that need escapes,
 * parsed back by jansson (strict: it rejects control characters in strings
 * and trailing commas). */
Test(json_text, document_reads_back) {
    jt_writer w;
    jt_init(&w, 16);
    jt_object_begin(&w);
    jt_key(&w, "text");
    jt_string(&w, "quote \" backslash \\ tab \t newline \n bell \a λ");
    jt_key(&w, "list");
    jt_array_begin(&w);
    jt_integer(&w, -9223372036854775807LL - 1);
    jt_integer(&w, 0);
    jt_number(&w, 0.25);
    jt_number(&w, NAN);
    jt_null(&w);
    jt_bool(&w, 1);
    jt_array_begin(&w);
    jt_array_end(&w);
    jt_object_begin(&w);
    jt_object_end(&w);
    jt_array_end(&w);
    jt_key(&w, "raw");
    jt_raw(&w, "{\"a\":[1,2]}", 11);
    jt_key(&w, "n");
    jt_numbers(&w, (const double[]){1.5, -2e-7, 400.0}, 3);
    jt_key(&w, "key \"q\" \\ \t"); /* a key with escapes */
    jt_string(&w, "");
    jt_object_end(&w);
    size_t len = 0;
    char *text = jt_finish(&w, &len);
    cr_assert_not_null(text);
    cr_assert_eq(strlen(text), len);
    json_error_t jerr;
    json_t *doc = json_loads(text, JSON_REJECT_DUPLICATES, &jerr);
    cr_assert_not_null(doc, "%s: %s", text, jerr.text);
    cr_assert_str_eq(json_string_value(json_object_get(doc, "text")),
                     "quote \" backslash \\ tab \t newline \n bell \a λ");
    json_t *list = json_object_get(doc, "list");
    cr_assert_eq(json_array_size(list), 8);
    cr_assert_eq(json_integer_value(json_array_get(list, 0)), INT64_MIN);
    cr_assert_eq(json_real_value(json_array_get(list, 2)), 0.25);
    cr_assert(json_is_null(json_array_get(list, 3)));
    cr_assert(json_is_true(json_array_get(list, 5)));
    cr_assert_eq(json_integer_value(json_array_get(
                     json_object_get(json_object_get(doc, "raw"), "a"), 1)),
                 2);
    cr_assert_eq(json_real_value(json_array_get(json_object_get(doc, "n"), 1)),
                 -2e-7);
    cr_assert(strstr(text, "400.0") != NULL, "%s", text);
    cr_assert_str_eq(json_string_value(json_object_get(doc, "key \"q\" \\ \t")),
                     "");
    json_decref(doc);
    free(text);
}

/* Misuse is reported by jt_finish, not written: an unclosed object, a key
 * without its value, a value closing an object early. */
Test(json_text, misuse_fails) {
    jt_writer w;
    jt_init(&w, 0);
    jt_object_begin(&w);
    cr_assert_null(jt_finish(&w, NULL));
    jt_init(&w, 0);
    jt_object_begin(&w);
    jt_key(&w, "k");
    jt_object_end(&w);
    cr_assert_null(jt_finish(&w, NULL));
    jt_init(&w, 0);
    jt_array_end(&w);
    cr_assert_null(jt_finish(&w, NULL));
    jt_init(&w, 0);
    for (int i = 0; i <= JT_DEPTH_MAX; i++)
        jt_array_begin(&w);
    cr_assert_null(jt_finish(&w, NULL));
}

/* json_text_dump writes the same document as jansson reads it: parsed
 * back, every member and value equals the original (json_equal, jansson's
 * own comparison, exact for reals), for a document with every kind of
 * value, strings with NUL and control bytes, and 2000 random reals; and
 * the text has no spaces (compact, like JSON_COMPACT). */
Test(json_text, dump_reads_back) {
    json_t *doc = json_object();
    json_object_set_new(doc, "s", json_stringn("a\0b\x01\"\\/λ", 9));
    json_object_set_new(doc, "i", json_integer(-42));
    json_object_set_new(doc, "t", json_true());
    json_object_set_new(doc, "f", json_false());
    json_object_set_new(doc, "n", json_null());
    json_object_set_new(doc, "empty", json_object());
    json_t *arr = json_array();
    for (int i = 0; i < 2000; i++) {
        double u = (double)(rng_next() >> 11) * 0x1p-53;
        json_array_append_new(arr,
                              json_real((u - 0.5) * pow(10.0, 40 * u - 20)));
    }
    json_array_append_new(arr, json_real(400.0));
    json_array_append_new(arr, json_real(16.8));
    json_array_append_new(arr, json_array());
    json_object_set_new(doc, "reals", arr);
    size_t len = 0;
    char *got = json_text_dump(doc, &len);
    cr_assert_not_null(got);
    cr_assert_eq(len, strlen(got));
    cr_assert(strchr(got, ' ') == NULL);
    cr_assert(strstr(got, "400.0,16.8,[]") != NULL, "%.200s", got + len - 60);
    json_error_t jerr;
    json_t *back = json_loadb(got, len, JSON_ALLOW_NUL, &jerr);
    cr_assert_not_null(back, "%s", jerr.text);
    cr_assert(json_equal(doc, back));
    json_decref(back);
    free(got);
    json_decref(doc);
}
