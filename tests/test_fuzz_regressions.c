/*
 * test_fuzz_regressions.c — replays saved fuzz inputs through the bodies
 * of the fuzz targets (tests/fuzz/entry_*.c), compiled here with the normal
 * build (and with the sanitizers in the sanitizer tree), so that every
 * input the fuzzers once failed on stays fixed.
 *
 * For each target (tests/fuzz/fuzz_entry.h) two sets are replayed:
 * tests/fuzz/regressions/<target>/ (inputs that found a bug; each file's
 * name says which) and tests/fuzz/corpus/<target>/ (the seeds: requests
 * from samples/ and from the other tests, which must keep passing every
 * invariant too).  A file passes when the body returns 0; the assertion
 * message carries the body's verdict.  The invariants and their sources
 * are stated in the bodies.  Each seed set must hold at least one file, so
 * that a moved directory cannot make the test pass on nothing (a target may
 * have no regressions yet).
 */
#include <criterion/criterion.h>
#include <dirent.h>
#include <gsl/gsl_errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "fuzz_entry.h"

static void fr_setup(void) {
    gsl_set_error_handler_off();
    unsetenv("FUZZ_LENIENT"); /* the replay checks everything */
}

static void fr_teardown(void) { fuzz_entry_cleanup(); }

static const fuzz_target *fr_target(const char *name) {
    for (size_t i = 0; i < fuzz_target_count; i++)
        if (strcmp(fuzz_targets[i].name, name) == 0)
            return &fuzz_targets[i];
    cr_assert_fail("no fuzz target named %s", name);
    return NULL;
}

/* Reads a whole file (at most 1 MiB); NULL when it cannot. */
static unsigned char *fr_read(const char *path, size_t *len) {
    FILE *f = fopen(path, "rb");
    if (f == NULL)
        return NULL;
    size_t cap = 1u << 20;
    unsigned char *buf = malloc(cap);
    *len = buf ? fread(buf, 1, cap, f) : 0;
    fclose(f);
    return buf;
}

/* Replays every regular file of tests/fuzz/<set>/<target>/ (a missing
 * directory holds none); returns how many there were. */
static size_t fr_replay(const char *set, const char *name) {
    const fuzz_target *t = fr_target(name);
    char dir[512];
    snprintf(dir, sizeof dir, "%s/tests/fuzz/%s/%s", SWAPSPEC_SOURCE_DIR, set,
             name);
    DIR *d = opendir(dir);
    size_t files = 0;
    if (d == NULL)
        return 0;
    struct dirent *e;
    while ((e = readdir(d)) != NULL) {
        if (e->d_name[0] == '.' || strcmp(e->d_name, "README.md") == 0)
            continue;
        char path[1024];
        snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
        size_t len = 0;
        unsigned char *data = fr_read(path, &len);
        cr_assert(data != NULL, "cannot read %s", path);
        fuzz_verdict v;
        v.message[0] = '\0';
        int bad = t->one(data, len, &v);
        free(data);
        cr_expect(bad == 0, "%s/%s/%s: %s", set, name, e->d_name, v.message);
        files++;
    }
    closedir(d);
    return files;
}

#define FR_TARGET(target)                                                      \
    Test(fuzz_regressions, target, .init = fr_setup, .fini = fr_teardown,      \
         .timeout = 300) {                                                     \
        fr_replay("regressions", #target);                                     \
    }                                                                          \
    Test(fuzz_corpus, target, .init = fr_setup, .fini = fr_teardown,           \
         .timeout = 300) {                                                     \
        cr_assert(fr_replay("corpus", #target) >= 1,                           \
                  "tests/fuzz/corpus/" #target "/ is empty");                  \
    }

FR_TARGET(analysis_body)
FR_TARGET(compute_body)
FR_TARGET(query_path)
FR_TARGET(inversion)

/* The table of targets matches the directories replayed above. */
Test(fuzz_regressions, target_table) {
    cr_assert_eq(fuzz_target_count, 4);
    const char *names[] = {"analysis_body", "compute_body", "query_path",
                           "inversion"};
    for (size_t i = 0; i < 4; i++)
        cr_expect(fr_target(names[i])->one != NULL, "%s", names[i]);
}
