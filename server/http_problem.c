/*
 * http_problem.c — RFC 9457 problem details from the core's error record:
 * type urn:swapspec:problem:<name>, title and status from the one status
 * table (SS_STATUS_MAP), detail = the error's sentence, and an `errors` list
 * with a JSON pointer (RFC 6901) to the faulty field.  Owns nothing beyond
 * the document it returns.
 */
#include <stdio.h>
#include <string.h>

#include "http.h"

void http_field_pointer(const char *field, char *out, size_t cap) {
    size_t used = 0;
    if (cap == 0)
        return;
    out[0] = '\0';
    if (field == NULL || field[0] == '\0')
        return;
    /* segments split at '.', '[' and ']'; '~' and '/' escaped (RFC 6901) */
    int start = 1;
    for (const char *c = field; *c && used + 3 < cap; c++) {
        if (*c == '.' || *c == '[' || *c == ']') {
            start = 1;
            continue;
        }
        if (start) {
            out[used++] = '/';
            start = 0;
        }
        if (*c == '~' || *c == '/') {
            out[used++] = '~';
            out[used++] = *c == '~' ? '0' : '1';
        } else {
            out[used++] = *c;
        }
    }
    out[used] = '\0';
}

json_t *http_problem_doc(const ss_error *err, unsigned *status) {
    ss_status code = err->code == SS_OK ? SS_EINTERNAL : err->code;
    char type[96], pointer[192]; /* a 95-byte field, each byte escaped */
    snprintf(type, sizeof type, "urn:swapspec:problem:%s",
             ss_status_name(code));
    *status = (unsigned)ss_status_http(code);
    const char *detail =
        err->message[0] ? err->message : ss_status_message(code);
    json_t *doc = json_pack("{s:s,s:s,s:i,s:s}", "type", type, "title",
                            ss_status_message(code), "status", (int)*status,
                            "detail", detail);
    if (doc == NULL)
        return NULL;
    if (err->field[0]) {
        http_field_pointer(err->field, pointer, sizeof pointer);
        json_object_set_new(
            doc, "errors",
            json_pack("[{s:s,s:s}]", "pointer", pointer, "detail", detail));
    }
    return doc;
}
