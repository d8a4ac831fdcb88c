/* testkit: what several cmocka tests share — a scratch folder whose files
 * are removed at the end, and a recipe loaded from text.  Include after
 * <cmocka.h>; everything is static, one copy per test program that includes it. */
#ifndef ST_TESTKIT_H
#define ST_TESTKIT_H

#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

#include "core/recipe.h"

#define TESTKIT_MAX_FILES 16

static char testkit_dir[64];
static char testkit_paths[TESTKIT_MAX_FILES][128];
static int testkit_npaths;

/* A fresh folder /tmp/PREFIX.XXXXXX; 0 or -1 (a cmocka group setup's result). */
static inline int testkit_scratch_setup(const char *prefix)
{
    snprintf(testkit_dir, sizeof testkit_dir, "/tmp/%s.XXXXXX", prefix);
    return mkdtemp(testkit_dir) ? 0 : -1;
}

/* Removes every file testkit_path named, then the folder. */
static inline int testkit_scratch_teardown(void)
{
    for (int i = 0; i < testkit_npaths; i++)
        unlink(testkit_paths[i]);
    return rmdir(testkit_dir);
}

/* NAME inside the scratch folder, removed at teardown. */
static inline const char *testkit_path(const char *name)
{
    assert_true(testkit_npaths < TESTKIT_MAX_FILES);
    snprintf(testkit_paths[testkit_npaths], sizeof testkit_paths[0], "%s/%s", testkit_dir, name);
    return testkit_paths[testkit_npaths++];
}

/* Loads the recipe text + extra (written to a temporary file) or fails the
 * test with the parser's message. */
static inline void testkit_load_recipe(const char *text, const char *extra, struct recipe *r)
{
    char path[] = "/tmp/testkit_recipe_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    FILE *f = fdopen(fd, "w");
    assert_non_null(f);
    fputs(text, f);
    fputs(extra, f);
    assert_int_equal(fclose(f), 0);
    struct err e;
    err_clear(&e);
    int rc = recipe_load(path, r, &e);
    unlink(path);
    if (rc)
        fail_msg("%s", e.msg);
}

#endif
