/*
 * store_internal.h — helpers shared by the store backends (not by handlers).
 *
 * The page cursor and the argument checks every backend applies before it
 * talks to its database, so that all backends accept and refuse the same
 * inputs with the same fields.  Implemented in store_format.c.
 */
#ifndef SWAPSPEC_STORE_INTERNAL_H
#define SWAPSPEC_STORE_INTERNAL_H

#include "store.h"

/* Formats a Unix time (whole seconds) in the record form; -1 outside the
 * years 0000..9999. */
int store_time_from_unix(time_t t, char out[32]);

/* The position after the last item of a page: its (created_at, id). */
typedef struct {
    char created_at[32];
    char id[32];
} store_position;

/* Writes the opaque cursor text of pos (64 base64url characters). */
void store_cursor_encode(const store_position *pos, char out[128]);
/* Decodes a cursor; -1 unless it is exactly what store_cursor_encode
 * writes for a valid position. */
int store_cursor_decode(const char *text, store_position *pos);

/* A checked list query: limit in range, since/until normalised to the
 * record form ("" = no bound), the cursor decoded. */
typedef struct {
    const char *label; /* NULL = any */
    char since[32];
    char until[32];
    int has_cursor;
    store_position after;
    unsigned limit;
} store_checked_query;

/* Checks q; SS_EINVAL naming the field ("limit", "label", "since", "until",
 * "cursor").  `path` only decorates the message. */
ss_status store_query_check(const store_query *q, store_checked_query *out,
                            const char *path, ss_error *err);

/* Checks a record and its idempotency arguments before a put: id and
 * created_at in their forms, every text NUL-terminated in its array, both
 * JSON texts present, the key 1..STORE_IDEMPOTENCY_KEY_MAX bytes of
 * printable ASCII with a fingerprint of 64 lowercase hex characters.
 * SS_EINVAL naming the field. */
ss_status store_put_check(const store_record *rec, const char *idem_key,
                          const char *fingerprint, ss_error *err);

#endif /* SWAPSPEC_STORE_INTERNAL_H */
