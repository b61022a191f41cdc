/*
 * auth.h — bearer-token access control for the service.
 *
 * A tokens file holds lines `role sha256hex(token)` (roles read, write,
 * admin; `#` starts a comment).  Only hashes are kept in memory; a request's
 * token is hashed and compared in constant time against every entry.
 * Without a tokens file every request is allowed (the daemon then refuses
 * to listen beyond loopback).
 */
#ifndef SWAPSPEC_AUTH_H
#define SWAPSPEC_AUTH_H

#include <stddef.h>

#include "swapspec.h"

typedef enum {
    AUTH_NONE = 0, /* no valid token */
    AUTH_READ = 1,
    AUTH_WRITE = 2,
    AUTH_ADMIN = 3
} auth_role;

typedef struct auth_tokens auth_tokens;

/* Loads the tokens file.  SS_ENOTFOUND when it cannot be read; SS_EINVAL
 * naming "tokens" (with the line number) for a malformed line. */
ss_status auth_tokens_load(const char *path, auth_tokens **out, ss_error *err);
void auth_tokens_free(auth_tokens *t); /* accepts NULL */
size_t auth_tokens_count(const auth_tokens *t);

/* The role of the token in an Authorization header value ("Bearer xyz"),
 * AUTH_NONE when absent, malformed or unknown.  tokens NULL (no access
 * control configured): AUTH_ADMIN. */
auth_role auth_check(const auth_tokens *tokens, const char *authorization);

/* "read", "write", "admin", "none". */
const char *auth_role_name(auth_role r);

/* SHA-256 of data as 64 lowercase hex characters plus NUL. */
void auth_sha256_hex(const void *data, size_t len, char out[65]);

#endif /* SWAPSPEC_AUTH_H */
