/*
 * levels.c — energy levels: the diagrams of a set grouped by content sum
 * (one energy per content under a calibration), with the total probability
 * of each group.  Groups of two or more diagrams are the degenerate energies
 * that no energy resolution can split (domain.md §2).  Owns ss_levels.
 */
#include "swapspec.h"

#include <stdlib.h>

typedef struct {
    int64_t content;
    double prob;
    size_t index;
} ss__member;

static int ss__cmp_member(const void *pa, const void *pb) {
    const ss__member *a = pa, *b = pb;
    if (a->content != b->content)
        return a->content < b->content ? -1 : 1;
    if (a->prob != b->prob)
        return a->prob < b->prob ? 1 : -1;
    return (a->index > b->index) - (a->index < b->index);
}

ss_status ss_levels_alloc(const ss_diagram_set *set, const double *probability,
                          ss_levels **out, ss_error *err) {
    if (set == NULL)
        return ss_error_set(err, SS_EINVAL, "diagrams", "no diagram set");
    size_t n = set->count;
    ss__member *tmp = malloc((n ? n : 1) * sizeof *tmp);
    ss_levels *lv = calloc(1, sizeof *lv);
    if (tmp == NULL || lv == NULL)
        goto oom;
    for (size_t i = 0; i < n; i++) {
        tmp[i].content = set->content[i];
        tmp[i].prob = probability ? probability[i] : 0.0;
        tmp[i].index = i;
    }
    qsort(tmp, n, sizeof *tmp, ss__cmp_member);
    size_t groups = 0;
    for (size_t i = 0; i < n; i++)
        if (i == 0 || tmp[i].content != tmp[i - 1].content)
            groups++;
    lv->count = groups;
    lv->content = malloc((groups ? groups : 1) * sizeof *lv->content);
    lv->probability = calloc(groups ? groups : 1, sizeof *lv->probability);
    lv->first = malloc((groups + 1) * sizeof *lv->first);
    lv->members = malloc((n ? n : 1) * sizeof *lv->members);
    if (lv->content == NULL || lv->probability == NULL || lv->first == NULL ||
        lv->members == NULL)
        goto oom;
    size_t g = 0;
    long double acc = 0.0L;
    for (size_t i = 0; i < n; i++) {
        if (i == 0 || tmp[i].content != tmp[i - 1].content) {
            if (i > 0)
                lv->probability[g++] = (double)acc;
            acc = 0.0L;
            lv->content[g] = tmp[i].content;
            lv->first[g] = i;
        }
        acc += tmp[i].prob;
        lv->members[i] = tmp[i].index;
    }
    if (n > 0)
        lv->probability[g] = (double)acc;
    lv->first[groups] = n;
    free(tmp);
    *out = lv;
    return SS_OK;
oom:
    free(tmp);
    ss_levels_free(lv);
    return ss_error_set(err, SS_ENOMEM, "", NULL);
}

void ss_levels_free(ss_levels *levels) {
    if (levels == NULL)
        return;
    free(levels->content);
    free(levels->probability);
    free(levels->first);
    free(levels->members);
    free(levels);
}
