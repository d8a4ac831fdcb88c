/* Recipe versions (core/recipever.h): the [product] version line found and
 * rewritten alone, the content hash, the record beside the file.
 *
 * Sources: the content hash is checked against SHA-256 (FIPS 180-4) of the
 * file's bytes with the version digits cut out by hand in the test (through
 * core/sha256's nettle); the INI reading of sections (a `version` key under
 * another section is not the recipe's) follows inih's rules as
 * recipes/README.md states them.  The rest is our own rule (recipever.h). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/recipever.h"
#include "tests/testkit.h"

static const char *write_file(const char *name, const char *text)
{
    const char *p = testkit_path(name);
    FILE *f = fopen(p, "wb");
    assert_non_null(f);
    fputs(text, f);
    assert_int_equal(fclose(f), 0);
    return p;
}

static char *read_all(const char *path)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    static char buf[4096];
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = 0;
    return buf;
}

static const char *RECIPE_A =
    "; notes\n[notes]\nversion = 3\n\n[product]\nid = cap\n  version = 7   ; seventh\n"
    "[tolerance scratch]\nmax_count = 2\n";

static void test_content_hash_leaves_out_the_version_value(void **state)
{
    (void)state;
    const char *p = write_file("a.ini", RECIPE_A);
    struct recipever v;
    struct err e;
    err_clear(&e);
    assert_int_equal(recipever_read(p, &v, &e), ST_OK);
    assert_int_equal(v.version, 7);
    assert_false(v.recorded);
    /* the bytes with "7" of [product] cut out by hand */
    const char *cut = "; notes\n[notes]\nversion = 3\n\n[product]\nid = cap\n  version =    ; seventh\n"
                      "[tolerance scratch]\nmax_count = 2\n";
    char want[SHA256_HEX_LEN];
    sha256_hex_buffer(cut, strlen(cut), want);
    assert_string_equal(v.content_sha256, want);
}

static void test_save_increments_on_change_only(void **state)
{
    (void)state;
    const char *p = write_file("b.ini", RECIPE_A);
    testkit_path("b.ini.version.json");
    struct recipever v;
    struct err e;
    err_clear(&e);
    int changed = -1;
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_OK);   /* first: records */
    assert_int_equal(changed, 0);
    assert_true(v.first_save);
    assert_int_equal(v.version, 7);
    assert_string_equal(read_all(p), RECIPE_A);
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_OK);   /* unchanged */
    assert_int_equal(changed, 0);
    assert_false(v.first_save);
    assert_string_equal(read_all(p), RECIPE_A);
    assert_int_equal(recipever_check(p, &e), ST_OK);
    /* an edit: refused until saved, then version 8 and nothing else rewritten */
    write_file("b.ini", "; notes\n[notes]\nversion = 3\n\n[product]\nid = cap\n  version = 7   ; "
                        "seventh\n[tolerance scratch]\nmax_count = 3\n");
    assert_int_equal(recipever_check(p, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, p));
    assert_non_null(strstr(e.msg, "version 7 was saved"));
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_OK);
    assert_int_equal(changed, 1);
    assert_int_equal(v.version, 8);
    assert_string_equal(read_all(p), "; notes\n[notes]\nversion = 3\n\n[product]\nid = cap\n  "
                                     "version = 8   ; seventh\n[tolerance scratch]\nmax_count = 3\n");
    assert_int_equal(recipever_check(p, &e), ST_OK);
    /* only the number changed by hand: the same content, no new version */
    write_file("b.ini", "; notes\n[notes]\nversion = 3\n\n[product]\nid = cap\n  version = 12   ; "
                        "seventh\n[tolerance scratch]\nmax_count = 3\n");
    assert_int_equal(recipever_check(p, &e), ST_OK);
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_OK);
    assert_int_equal(changed, 0);
    /* a hand-raised number and an edit: one more than the larger */
    write_file("b.ini", "[product]\nversion = 12\n[tolerance scratch]\nmax_count = 4\n");
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_OK);
    assert_int_equal(v.version, 13);
    assert_string_equal(read_all(p), "[product]\nversion = 13\n[tolerance scratch]\nmax_count = 4\n");
}

static void test_bad_files_are_named(void **state)
{
    (void)state;
    struct recipever v;
    struct err e;
    err_clear(&e);
    int changed;
    const char *p = write_file("c.ini", "[notes]\nversion = 3\n[product]\nid = cap\n");
    assert_int_equal(recipever_save(p, &v, &changed, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, p));
    assert_non_null(strstr(e.msg, "[product] version"));
    p = write_file("d.ini", "[product]\nversion = 2\n");
    const char *rec = write_file("d.ini.version.json", "{\"format\": 1, \"version\": \"two\"}");
    assert_int_equal(recipever_check(p, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, rec));
    assert_int_equal(recipever_read(testkit_path("missing.ini"), &v, &e), ST_EIO);
}

static int setup(void **state)
{
    (void)state;
    return testkit_scratch_setup("test_recipever");
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_content_hash_leaves_out_the_version_value),
        cmocka_unit_test(test_save_increments_on_change_only),
        cmocka_unit_test(test_bad_files_are_named),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
