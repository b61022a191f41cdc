/*
 * auth.c — the tokens file, SHA-256 (GnuTLS, already linked by
 * libmicrohttpd) and constant-time comparison of token hashes.  Owns the
 * list of (role, hash) entries.
 */
#include "auth.h"

#include <ctype.h>
#include <gnutls/crypto.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

typedef struct {
    auth_role role;
    unsigned char hash[32];
} auth_entry;

struct auth_tokens {
    auth_entry *entries;
    size_t count;
};

const char *auth_role_name(auth_role r) {
    static const char *const names[] = {"none", "read", "write", "admin"};
    return (unsigned)r <= AUTH_ADMIN ? names[r] : "none";
}

void auth_sha256_hex(const void *data, size_t len, char out[65]) {
    unsigned char digest[32];
    gnutls_hash_fast(GNUTLS_DIG_SHA256, data, len, digest);
    for (int i = 0; i < 32; i++)
        snprintf(out + 2 * i, 3, "%02x", digest[i]);
}

static int auth_hex_value(int c) {
    if (c >= '0' && c <= '9')
        return c - '0';
    c = tolower(c);
    return c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
}

static int auth_parse_hash(const char *hex, unsigned char out[32]) {
    if (strlen(hex) != 64)
        return 0;
    for (int i = 0; i < 32; i++) {
        int hi = auth_hex_value(hex[2 * i]),
            lo = auth_hex_value(hex[2 * i + 1]);
        if (hi < 0 || lo < 0)
            return 0;
        out[i] = (unsigned char)(hi * 16 + lo);
    }
    return 1;
}

static auth_role auth_parse_role(const char *word) {
    if (strcmp(word, "read") == 0)
        return AUTH_READ;
    if (strcmp(word, "write") == 0)
        return AUTH_WRITE;
    if (strcmp(word, "admin") == 0)
        return AUTH_ADMIN;
    return AUTH_NONE;
}

ss_status auth_tokens_load(const char *path, auth_tokens **out, ss_error *err) {
    FILE *f = fopen(path, "r");
    if (f == NULL)
        return ss_error_set(err, SS_ENOTFOUND, "tokens",
                            "cannot read the tokens file '%s'", path);
    auth_tokens *t = calloc(1, sizeof *t);
    char line[512];
    int lineno = 0;
    ss_status st = t ? SS_OK : ss_error_set(err, SS_ENOMEM, "tokens", NULL);
    while (st == SS_OK && fgets(line, sizeof line, f) != NULL) {
        lineno++;
        char *hash = strchr(line, '#');
        if (hash)
            *hash = '\0';
        char role[32], hex[128], extra[8];
        int n = sscanf(line, "%31s %127s %7s", role, hex, extra);
        if (n <= 0)
            continue;
        auth_entry e;
        e.role = auth_parse_role(role);
        if (n != 2 || e.role == AUTH_NONE || !auth_parse_hash(hex, e.hash)) {
            st = ss_error_set(err, SS_EINVAL, "tokens",
                              "tokens file '%s', line %d: expected "
                              "'read|write|admin <64 hex digits of "
                              "sha256(token)>'",
                              path, lineno);
            break;
        }
        auth_entry *grown = realloc(t->entries, (t->count + 1) * sizeof *grown);
        if (grown == NULL) {
            st = ss_error_set(err, SS_ENOMEM, "tokens", NULL);
            break;
        }
        t->entries = grown;
        t->entries[t->count++] = e;
    }
    fclose(f);
    if (st != SS_OK) {
        auth_tokens_free(t);
        return st;
    }
    *out = t;
    return SS_OK;
}

void auth_tokens_free(auth_tokens *t) {
    if (t == NULL)
        return;
    free(t->entries);
    free(t);
}

size_t auth_tokens_count(const auth_tokens *t) { return t ? t->count : 0; }

auth_role auth_check(const auth_tokens *tokens, const char *authorization) {
    if (tokens == NULL)
        return AUTH_ADMIN;
    if (authorization == NULL || strncasecmp(authorization, "Bearer ", 7) != 0)
        return AUTH_NONE;
    const char *token = authorization + 7;
    while (*token == ' ')
        token++;
    if (*token == '\0')
        return AUTH_NONE;
    unsigned char digest[32];
    gnutls_hash_fast(GNUTLS_DIG_SHA256, token, strlen(token), digest);
    /* constant time over every entry: no early exit on a match */
    auth_role role = AUTH_NONE;
    for (size_t i = 0; i < tokens->count; i++) {
        unsigned diff = 0;
        for (int k = 0; k < 32; k++)
            diff |= (unsigned)(digest[k] ^ tokens->entries[i].hash[k]);
        unsigned match = 1u & ((diff - 1u) >> 8); /* 1 iff diff == 0 */
        if (match && tokens->entries[i].role > role)
            role = tokens->entries[i].role;
    }
    return role;
}
