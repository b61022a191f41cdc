/*
 * flags.c — building the flags of an analysis: stable code, the run it
 * concerns, a sentence saying what it means and what to do, and the numbers
 * behind it.  Owns the analysis' flag array (grown here, freed with the
 * analysis).
 */
#include "internal.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

ss_flag *ss__flag_add(ss_analysis *a, ss_flag_code code, int run,
                      const char *fmt, ...) {
    ss_flag *grown = realloc(a->flags, (a->flag_count + 1) * sizeof *grown);
    if (grown == NULL)
        return NULL;
    a->flags = grown;
    ss_flag *f = &a->flags[a->flag_count++];
    memset(f, 0, sizeof *f);
    f->code = code;
    f->run = run;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(f->message, sizeof f->message, fmt, ap);
    va_end(ap);
    return f;
}

void ss__flag_number(ss_flag *f, const char *name, double value) {
    if (f == NULL || f->number_count >= SS_FLAG_NUMBERS_MAX)
        return;
    char *dst = f->numbers[f->number_count].name;
    size_t len = strnlen(name, sizeof f->numbers[0].name - 1);
    memcpy(dst, name, len);
    dst[len] = '\0';
    f->numbers[f->number_count].value = value;
    f->number_count++;
}
