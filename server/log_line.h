/*
 * log_line.h — the service's log: one JSON object per line on stderr
 * (request lines, shutdown, reprocessing progress), written whole under the
 * stream's lock so that lines from several threads never interleave.
 */
#ifndef SWAPSPEC_LOG_LINE_H
#define SWAPSPEC_LOG_LINE_H

#include <jansson.h>

/* Writes line (keys sorted, reals with six significant digits) and
 * releases it; NULL is ignored. */
void log_line(json_t *line);

#endif /* SWAPSPEC_LOG_LINE_H */
