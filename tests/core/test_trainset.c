/* The class-balanced pixel sample.  Reference for the generator:
 * splitmix64's published first output for seed 0 (0xe220a8397b1dcdaf, from
 * the reference implementation by S. Vigna; value from memory, also the
 * widely quoted test vector). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <string.h>

#include "core/rng.h"
#include "core/trainset.h"

static void test_splitmix64_vector(void **state)
{
    (void)state;
    uint64_t s = 0;
    assert_true(rng_splitmix64(&s) == 0xe220a8397b1dcdafull);
}

/* 9x7 stack whose feature 0 is the pixel index, labels: 40 px class 0,
 * 3 px class 2, the rest unlabelled (255). */
static void fixture(struct fstack **fs, struct image **lab)
{
    struct err e;
    *fs = fstack_new(9, 7, 2, &e);
    *lab = image_new(9, 7, 1, &e);
    assert_non_null(*fs);
    assert_non_null(*lab);
    for (int i = 0; i < 63; i++) {
        (*fs)->v[2 * i] = (float)i;
        (*fs)->v[2 * i + 1] = -1;
        (*lab)->px[i] = i < 40 ? 0 : (i < 43 ? 2 : 255);
    }
}

static void test_cap_and_unlabelled(void **state)
{
    (void)state;
    struct fstack *fs;
    struct image *lab;
    fixture(&fs, &lab);
    struct trainset ts;
    trainset_init(&ts, 2, 3);
    uint64_t rng = 7;
    struct err e;
    assert_int_equal(trainset_add_image(&ts, fs, lab, 10, &rng, &e), ST_OK);
    assert_int_equal(ts.n, 13);
    assert_int_equal(ts.per_class[0], 10);
    assert_int_equal(ts.per_class[1], 0);
    assert_int_equal(ts.per_class[2], 3);
    assert_int_equal(ts.images_with[2], 1);
    for (size_t i = 0; i < ts.n; i++) {
        int px = (int)ts.x[2 * i];
        assert_true(px < 43);                           /* never an unlabelled pixel */
        assert_int_equal((int)ts.y[i], px < 40 ? 0 : 2); /* the row carries its own label */
    }
    /* same seed, same sample */
    struct trainset again;
    trainset_init(&again, 2, 3);
    rng = 7;
    assert_int_equal(trainset_add_image(&again, fs, lab, 10, &rng, &e), ST_OK);
    assert_memory_equal(ts.x, again.x, ts.n * 2 * sizeof(float));

    struct trainset tr, va;
    assert_int_equal(trainset_split(&ts, 0.3, 1, &tr, &va, &e), ST_OK);
    assert_int_equal(tr.n + va.n, ts.n);
    assert_true(va.per_class[2] >= 1);   /* every class with >= 2 rows is validated */
    assert_true(tr.per_class[2] >= 1);
    trainset_clear(&tr);
    trainset_clear(&va);
    trainset_clear(&again);
    trainset_clear(&ts);
    fstack_free(fs);
    image_free(lab);
}

static void test_bad_label_refused(void **state)
{
    (void)state;
    struct fstack *fs;
    struct image *lab;
    fixture(&fs, &lab);
    lab->px[5] = 7;
    struct trainset ts;
    trainset_init(&ts, 2, 3);
    uint64_t rng = 1;
    struct err e;
    assert_int_equal(trainset_add_image(&ts, fs, lab, 10, &rng, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "label value 7"));
    trainset_clear(&ts);
    fstack_free(fs);
    image_free(lab);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_splitmix64_vector),
        cmocka_unit_test(test_cap_and_unlabelled),
        cmocka_unit_test(test_bad_label_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
