/*
 * log_line.c — one JSON log line on stderr (see log_line.h).  Owns nothing
 * beyond the line it is handed.
 */
#include "log_line.h"

#include <stdio.h>
#include <stdlib.h>

void log_line(json_t *line) {
    if (line == NULL)
        return;
    char *text = json_dumps(line, JSON_COMPACT | JSON_SORT_KEYS |
                                      JSON_REAL_PRECISION(6));
    if (text != NULL) {
        flockfile(stderr);
        fprintf(stderr, "%s\n", text);
        fflush(stderr);
        funlockfile(stderr);
    }
    free(text);
    json_decref(line);
}
