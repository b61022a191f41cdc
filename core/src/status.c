/*
 * status.c — the status table and the caller-owned error record.
 *
 * Owns nothing but constant strings: every name, message and HTTP status
 * comes from the one X-macro table SS_STATUS_MAP in swapspec.h, so the core's
 * errors and the server's problem responses cannot drift apart.
 */
#include "swapspec.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

static const struct {
    const char *name;
    int http;
    const char *message;
} ss__status_rows[] = {
#define SS_X_ROW(e, name, http, msg) {name, http, msg},
    SS_STATUS_MAP(SS_X_ROW)
#undef SS_X_ROW
};

const char *ss_status_name(ss_status code) {
    if ((unsigned)code >= SS_STATUS_COUNT)
        return "unknown";
    return ss__status_rows[code].name;
}

const char *ss_status_message(ss_status code) {
    if ((unsigned)code >= SS_STATUS_COUNT)
        return "unknown status";
    return ss__status_rows[code].message;
}

int ss_status_http(ss_status code) {
    if ((unsigned)code >= SS_STATUS_COUNT)
        return 500;
    return ss__status_rows[code].http;
}

void ss_error_clear(ss_error *err) {
    if (err == NULL)
        return;
    err->code = SS_OK;
    err->field[0] = '\0';
    err->message[0] = '\0';
}

ss_status ss_error_set(ss_error *err, ss_status code, const char *field,
                       const char *fmt, ...) {
    if (err == NULL || err->code != SS_OK || code == SS_OK)
        return code;
    err->code = code;
    snprintf(err->field, sizeof err->field, "%s", field ? field : "");
    if (fmt == NULL) {
        snprintf(err->message, sizeof err->message, "%s",
                 ss_status_message(code));
        return code;
    }
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err->message, sizeof err->message, fmt, ap);
    va_end(ap);
    return code;
}
