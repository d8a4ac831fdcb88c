/* Verdict rules and image gates.  The rules are the recipe's own (common
 * practice, no source: largest region, total area, count per class; regions
 * under the minimum area are below the limit of discrimination in the sense
 * of ISO 8785 and do not count).  Fail closed: an untrusted image is never
 * PASS whatever the regions say. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <string.h>

#include "core/judge.h"

static void demo_recipe(struct recipe *r)
{
    memset(r, 0, sizeof *r);
    r->nclasses = 4;
    const char *names[] = {"background", "surface", "scratch", "pit"};
    for (int c = 0; c < 4; c++) {
        strcpy(r->cls[c].name, names[c]);
        r->cls[c].is_defect = c >= 2;
    }
    r->mm_per_px_x = r->mm_per_px_y = 0.1;
    r->tol[2] = (struct recipe_tolerance){0.05, 0.5, 1.0, 2};
    r->tol[3] = (struct recipe_tolerance){-1, -1, -1, 0};
    r->gates = (struct recipe_gates){40, 0.02, 0.05, 1.0};
}

static const struct quality good_q = {150, 0.0, 0.4, 5.0};

static struct region reg(int cls, int pixels)
{
    struct region g = {0};
    g.cls = cls;
    g.pixels = pixels;
    g.area_mm2 = pixels * 0.01;
    return g;
}

static void judge_regions(const struct recipe *r, const struct quality *q, struct region *g,
                          int n, struct judgement *j)
{
    struct region_set rs = {0};
    rs.n = n;
    rs.r = g;
    judge_part(r, q, &rs, j);
}

static void test_clean_part_passes(void **state)
{
    (void)state;
    struct recipe r;
    demo_recipe(&r);
    struct judgement j;
    judge_regions(&r, &good_q, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    assert_int_equal(j.nreasons, 0);
}

static void test_small_regions_do_not_count(void **state)
{
    (void)state;
    struct recipe r;
    demo_recipe(&r);
    /* 4 px = 0.04 mm2 < 0.05: three of them, over max_count 2, still PASS */
    struct region g[3] = {reg(2, 4), reg(2, 4), reg(2, 4)};
    struct judgement j;
    judge_regions(&r, &good_q, g, 3, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    assert_int_equal(j.count[2], 0);
    assert_false(judge_region_counts(&r, &g[0]));
    g[0].pixels = 5;
    g[0].area_mm2 = 0.05;  /* at the limit counts */
    assert_true(judge_region_counts(&r, &g[0]));
}

static void test_every_broken_rule_is_listed(void **state)
{
    (void)state;
    struct recipe r;
    demo_recipe(&r);
    /* scratch: 60 px = 0.6 mm2 > 0.5; total 0.6+0.3+0.3 = 1.2 > 1.0; count 3 > 2;
     * pit: any counted pit breaks max_count 0 */
    struct region g[4] = {reg(2, 60), reg(2, 30), reg(2, 30), reg(3, 1)};
    struct judgement j;
    judge_regions(&r, &good_q, g, 4, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_int_equal(j.nreasons, 4);
    assert_string_equal(j.reasons[0].rule, "max_area");
    assert_int_equal(j.reasons[0].cls, 2);
    assert_true(j.reasons[0].measured > 0.599 && j.reasons[0].measured < 0.601);
    assert_true(j.reasons[0].limit == 0.5);
    assert_string_equal(j.reasons[0].unit, "mm2");
    assert_string_equal(j.reasons[1].rule, "max_total");
    assert_true(j.reasons[1].measured > 1.199 && j.reasons[1].measured < 1.201);
    assert_string_equal(j.reasons[2].rule, "max_count");
    assert_true(j.reasons[2].measured == 3);
    assert_string_equal(j.reasons[3].rule, "max_count");
    assert_int_equal(j.reasons[3].cls, 3);
}

static void expect_no_verdict(const struct quality *q, const char *rule)
{
    struct recipe r;
    demo_recipe(&r);
    struct region g[1] = {reg(2, 2)};  /* harmless: the part would pass */
    struct judgement j;
    judge_regions(&r, q, g, 1, &j);
    assert_int_equal(j.verdict, VERDICT_NONE);
    assert_true(j.nreasons >= 1);
    assert_string_equal(j.reasons[0].rule, rule);
    assert_int_equal(j.reasons[0].cls, -1);
}

static void test_untrusted_images_never_pass(void **state)
{
    (void)state;
    expect_no_verdict(&(struct quality){20, 0.0, 0.4, 5.0}, "too_dark");
    expect_no_verdict(&(struct quality){150, 0.10, 0.4, 5.0}, "saturated");
    expect_no_verdict(&(struct quality){150, 0.0, 0.01, 5.0}, "no_part");
    expect_no_verdict(&(struct quality){150, 0.0, 0.4, 0.2}, "blurred");
}

static void test_quality_measures(void **state)
{
    (void)state;
    struct err e;
    /* 10x10 frame, the part is the left 4 columns; grey levels known */
    struct image *img = image_new(10, 10, 1, &e), *cm = image_new(10, 10, 1, &e);
    assert_non_null(img);
    assert_non_null(cm);
    for (int y = 0; y < 10; y++)
        for (int x = 0; x < 4; x++) {
            cm->px[y * 10 + x] = 1;
            img->px[y * 10 + x] = x == 0 ? 255 : 100;
        }
    struct quality q;
    assert_int_equal(judge_measure_quality(img, cm, &q, &e), ST_OK);
    assert_true(q.part_fraction == 0.4);
    assert_true(q.level == 100);        /* median of 10 x 255 and 30 x 100 */
    assert_true(q.saturated == 0.25);   /* the 255 column */
    assert_true(q.sharpness > 0);
    image_free(img);
    image_free(cm);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_clean_part_passes),
        cmocka_unit_test(test_small_regions_do_not_count),
        cmocka_unit_test(test_every_broken_rule_is_listed),
        cmocka_unit_test(test_untrusted_images_never_pass),
        cmocka_unit_test(test_quality_measures),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
