/* testkit: what several cmocka tests share — a scratch folder removed with
 * everything in it at the end, and a recipe loaded from text.  Include after
 * <cmocka.h>; everything is static, one copy per test program that includes it. */
#ifndef ST_TESTKIT_H
#define ST_TESTKIT_H

#include <dirent.h>
#include <string.h>
#include <sys/stat.h>
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

/* Removes path and, for a folder, everything in it; links are removed, not
 * followed. */
static inline int testkit_remove(const char *path)
{
    struct stat st;
    if (lstat(path, &st))
        return -1;
    if (!S_ISDIR(st.st_mode))
        return unlink(path);
    DIR *d = opendir(path);
    if (!d)
        return -1;
    int rc = 0;
    struct dirent *en;
    while ((en = readdir(d)) != NULL) {
        if (!strcmp(en->d_name, ".") || !strcmp(en->d_name, ".."))
            continue;
        char sub[512];
        if ((size_t)snprintf(sub, sizeof sub, "%s/%s", path, en->d_name) >= sizeof sub) {
            rc = -1; /* nothing a test makes is nested this deep */
            continue;
        }
        rc |= testkit_remove(sub);
    }
    closedir(d);
    return rc | rmdir(path);
}

/* Removes the folder and everything in it (a log leaves its WAL, key and
 * evidence folders beside the files a test named). */
static inline int testkit_scratch_teardown(void)
{
    return testkit_remove(testkit_dir);
}

/* NAME inside the scratch folder; the text stays valid for the next
 * TESTKIT_MAX_FILES - 1 calls. */
static inline const char *testkit_path(const char *name)
{
    char *p = testkit_paths[testkit_npaths];
    testkit_npaths = (testkit_npaths + 1) % TESTKIT_MAX_FILES;
    snprintf(p, sizeof testkit_paths[0], "%s/%s", testkit_dir, name);
    return p;
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
