/*
 * json_text.h — writing JSON text straight into a growing buffer, for the
 * documents the service renders on every request (an analysis result has
 * some 400 numbers; building a jansson tree for it and printing that cost
 * more than the analysis itself).
 *
 * Numbers are written with the fewest significant digits that read back
 * as the same double (16.8, not 16.800000000000001), placed as printf's
 * "%.17g" places digits, with ".0" appended when the text would read as
 * an integer and an exponent without '+' or leading zeros ("1e-5",
 * "2e20"), as jansson writes reals.  json_text_number works without printf
 * for magnitudes from about 1e-11 to 1e17 (exact integer arithmetic on the
 * binary value) and with snprintf/strtod elsewhere.  Non-finite numbers
 * are written as null.
 *
 * Commas and colons are placed by the writer: call jt_key before each
 * member of an object, nothing before array items.  The first allocation
 * failure is remembered and every later call does nothing; jt_finish
 * reports it.
 */
#ifndef SWAPSPEC_JSON_TEXT_H
#define SWAPSPEC_JSON_TEXT_H

#include <jansson.h>
#include <stddef.h>
#include <stdint.h>

#define JT_DEPTH_MAX 32

typedef struct {
    char *buf;
    size_t len, cap;
    int failed;                           /* out of memory or too deep */
    unsigned depth;                       /* open objects and arrays */
    unsigned char nonempty[JT_DEPTH_MAX]; /* an item written at depth */
    unsigned char after_key;              /* a key is waiting for its value */
} jt_writer;

/* Formats x as described above into out (NUL-terminated); returns the
 * length.  out needs 32 bytes. */
size_t json_text_number(double x, char out[32]);

void jt_init(jt_writer *w, size_t initial_cap);
/* Hands the text over (NUL-terminated, release with free) and resets the
 * writer; NULL when any call failed or objects are left open. */
char *jt_finish(jt_writer *w, size_t *len);
void jt_release(jt_writer *w); /* drops the text; accepts a zeroed writer */

void jt_object_begin(jt_writer *w);
void jt_object_end(jt_writer *w);
void jt_array_begin(jt_writer *w);
void jt_array_end(jt_writer *w);
void jt_key(jt_writer *w, const char *key);
void jt_string(jt_writer *w, const char *s); /* escaped per RFC 8259 §7 */
void jt_number(jt_writer *w, double x);      /* null when not finite */
void jt_integer(jt_writer *w, int64_t x);
void jt_null(jt_writer *w);
void jt_bool(jt_writer *w, int v);
/* A JSON text written as it is (the caller vouches for it). */
void jt_raw(jt_writer *w, const char *text, size_t len);
/* An array of n numbers. */
void jt_numbers(jt_writer *w, const double *x, size_t n);
/* A jansson value, members in the object's own order: the document
 * json_dumps(v, JSON_COMPACT | JSON_REAL_PRECISION(17)) writes, with the
 * shortest exact numbers, faster. */
void jt_json(jt_writer *w, const json_t *v);
/* jt_json of doc as a new text (release with free), NULL when out of
 * memory, doc NULL, or nested deeper than JT_DEPTH_MAX. */
char *json_text_dump(const json_t *doc, size_t *len);

#endif /* SWAPSPEC_JSON_TEXT_H */
