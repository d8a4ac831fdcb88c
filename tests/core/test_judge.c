/* Verdict rules and image gates.
 *
 * Sources: the limit of discrimination (regions under min_area do not count)
 * is ISO 8785:1998 §3.6's "agreed limits of discrimination" (read in the
 * standard's term list as published on iso.org's browsing platform); the
 * N x A notation and "grade = square root of the area in mm" are ISO
 * 10110-7 as summarised by Honor Optics, "Scratch numbers standard"
 * (honoroptics.com); the rule that smaller imperfections may stand in while
 * their total area stays within N A^2 is the standard's substitution rule as
 * commonly summarised (from memory — the standard's own text was not at
 * hand).  Largest area, total area and count per class are common practice,
 * no source.  Fail closed: an untrusted image is never PASS whatever the
 * regions say. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/judge.h"
#include "tests/testkit.h"

static const char recipe_text[] =
    "[product]\nformat = 1\nid = judge-test\nversion = 1\n"
    "[class background]\ndefect = no\ncolour = #000000\n"
    "[class surface]\ndefect = no\ncolour = #00ff00\n"
    "[class scratch]\ndefect = yes\ncolour = #ffff00\n"
    "[class pit]\ndefect = yes\ncolour = #ff0000\n"
    "[features]\nfamilies = gauss\nsigmas = 1\n"
    "[classifier]\nmodel = m.json\nrounds = 1\ndepth = 1\nlearning_rate = 0.3\nseed = 1\n"
    "threads = 1\nearly_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.2\n"
    "[scale]\nmm_per_px_x = 0.1\nmm_per_px_y = 0.1\n"
    "[part]\narea_mm2 = 40\n"
    "[gates]\nsharpness_reference = 100\n"
    "[zone rim]\nshape = ring\nradii = 8 10\n"
    "[zone face]\nshape = circle\nradius = 8\n"
    "[tolerance scratch]\nmin_area_mm2 = 0.05\nmax_area_mm2 = 0.5\nmax_total_mm2 = 1.0\n"
    "max_count = 2\nmax_length_mm = 3\n"
    "[tolerance scratch in rim]\nmax_area_mm2 = 0.2\nmax_count = 0\n"
    "[tolerance pit]\nmin_area_mm2 = none\nmax_area_mm2 = none\nmax_total_mm2 = none\n"
    "max_count = 0\n";

static void load_recipe(struct recipe *r, const char *extra)
{
    testkit_load_recipe(recipe_text, extra, r);
}

/* A well-lit, sharp, whole part in the middle of the frame. */
static const struct quality good_q = {.level = 150, .part_fraction = 0.4, .sharpness = 100,
                                      .frame_change = 12};
static const struct part_pose good_pose = {.found = 1, .pixels = 4000, .area_mm2 = 40,
                                           .cx = 50, .cy = 50, .x0 = 10, .y0 = 10, .x1 = 90,
                                           .y1 = 90, .border_gap = 10};
static const struct judge_refs refs = {.sharpness = 100, .part_area_mm2 = 40, .since_verified_h = -1};

static struct region reg(int id, int cls, int pixels)
{
    struct region g = {0};
    g.id = id;
    g.cls = cls;
    g.zone = -1;
    g.pixels = pixels;
    g.area_mm2 = pixels * 0.01;
    return g;
}

static void judge_with(const struct recipe *r, const struct quality *q,
                       const struct part_pose *p, struct region *g, int n, struct judgement *j)
{
    struct region_set rs = {0};
    rs.n = n;
    rs.r = g;
    judge_part(r, &refs, q, p, &rs, j);
}

static void test_clean_part_passes(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    struct judgement j;
    judge_with(&r, &good_q, &good_pose, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    assert_int_equal(j.nreasons, 0);
}

/* The verification gate: a good frame is refused once the last passing
 * master-part verification is older than the recipe's interval (the rule
 * of issue 6; the interval is the recipe's), whatever the frame shows. */
static void test_verification_due(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "[verification]\ninterval_hours = 8\n"
                    "[master a]\nimage = a.png\nexpect = pass\n"
                    "[master b]\nimage = b.png\nexpect = fail\n");
    struct region_set rs = {0};
    struct judgement j;
    struct judge_refs at = refs;
    const double ages[] = {-1, 0, 7.9, 8};
    for (size_t i = 0; i < sizeof ages / sizeof ages[0]; i++) {
        at.since_verified_h = ages[i];
        judge_part(&r, &at, &good_q, &good_pose, &rs, &j);
        assert_int_equal(j.verdict, VERDICT_PASS);
    }
    at.since_verified_h = 8.01;
    judge_part(&r, &at, &good_q, &good_pose, &rs, &j);
    assert_int_equal(j.verdict, VERDICT_NONE);
    assert_int_equal(j.nreasons, 1);
    assert_string_equal(j.reasons[0].rule, "verification_due");
    assert_true(j.reasons[0].measured == 8.01 && j.reasons[0].limit == 8);
    char text[160];
    judge_describe_reason(&r, &j.reasons[0], text, sizeof text);
    assert_string_equal(text, "verification due: hours since the last passing one 8.01 h > 8 h");
    /* refused even with no part in view: the gate is about the station */
    struct part_pose none = {0};
    at.since_verified_h = JUDGE_NEVER_VERIFIED_H;
    judge_part(&r, &at, &good_q, &none, &rs, &j);
    assert_int_equal(j.verdict, VERDICT_NONE);
    assert_string_equal(j.reasons[0].rule, "verification_due");
    judge_describe_reason(&r, &j.reasons[0], text, sizeof text);
    assert_string_equal(text, "verification due: no passing one on record (needed every 8 h)");
    /* a recipe without masters has no interval */
    load_recipe(&r, "");
    judge_part(&r, &at, &good_q, &good_pose, &rs, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
}

static void test_small_regions_do_not_count(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    /* 4 px = 0.04 mm2 < 0.05: three of them, over max_count 2, still PASS */
    struct region g[3] = {reg(1, 2, 4), reg(2, 2, 4), reg(3, 2, 4)};
    struct judgement j;
    judge_with(&r, &good_q, &good_pose, g, 3, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    assert_int_equal(j.count[2], 0);
    assert_false(judge_region_counts(&r, &g[0]));
    g[0].pixels = 5;
    g[0].area_mm2 = 0.05; /* at the limit counts */
    assert_true(judge_region_counts(&r, &g[0]));
}

static void test_every_broken_rule_is_listed(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    /* scratch 1: 60 px = 0.6 mm2 > 0.5 and 4 mm long > 3; scratch 2 and 3
     * are fine alone; total 1.2 > 1.0; count 3 > 2; a pit breaks count 0 */
    struct region g[4] = {reg(1, 2, 60), reg(2, 2, 30), reg(3, 2, 30), reg(4, 3, 1)};
    g[0].length_mm = 4;
    struct judgement j;
    judge_with(&r, &good_q, &good_pose, g, 4, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_int_equal(j.nreasons, 5);
    assert_string_equal(j.reasons[0].rule, "max_area");
    assert_int_equal(j.reasons[0].region, 1);
    assert_int_equal(j.reasons[0].cls, 2);
    assert_int_equal(j.reasons[0].zone, -1);
    assert_true(fabs(j.reasons[0].measured - 0.6) < 1e-9);
    assert_true(j.reasons[0].limit == 0.5);
    assert_false(j.reasons[0].below);
    assert_string_equal(j.reasons[0].unit, "mm2");
    assert_string_equal(j.reasons[1].rule, "max_length");
    assert_int_equal(j.reasons[1].region, 1);
    assert_string_equal(j.reasons[1].unit, "mm");
    assert_string_equal(j.reasons[2].rule, "max_total");
    assert_int_equal(j.reasons[2].region, 0);
    assert_true(fabs(j.reasons[2].measured - 1.2) < 1e-9);
    assert_string_equal(j.reasons[3].rule, "max_count");
    assert_true(j.reasons[3].measured == 3);
    assert_string_equal(j.reasons[4].rule, "max_count");
    assert_int_equal(j.reasons[4].cls, 3);
    char words[200];
    judge_describe_reason(&r, &j.reasons[0], words, sizeof words);
    assert_string_equal(words, "scratch: region 1 area 0.6 mm² > 0.5 mm²");
}

/* A zone's own tolerance judges the regions in it; a zone without one for
 * a class leaves that class to the class's tolerance, pooled. */
static void test_zone_tolerances(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    assert_int_equal(r.nzones, 2);
    assert_int_equal(r.ztol_set[0][2], 1);          /* scratch in rim */
    assert_int_equal(r.ztol_set[1][2], 0);          /* face: class default */
    const struct recipe_tolerance *t = recipe_tolerance_for(&r, 2, 0);
    assert_true(t->max_area_mm2 == 0.2 && t->max_count == 0);
    assert_true(t->max_total_mm2 == 1.0 && t->max_length_mm == 3); /* inherited */
    /* a 0.3 mm2 scratch: fine on the face, out of tolerance on the rim */
    struct region g = reg(1, 2, 30);
    struct judgement j;
    g.zone = 1;
    judge_with(&r, &good_q, &good_pose, &g, 1, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    g.zone = 0;
    judge_with(&r, &good_q, &good_pose, &g, 1, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_int_equal(j.nreasons, 2);
    assert_string_equal(j.reasons[0].rule, "max_area");
    assert_int_equal(j.reasons[0].zone, 0);
    assert_string_equal(j.reasons[1].rule, "max_count");
    assert_int_equal(j.reasons[1].zone, 0);
    char words[200];
    judge_describe_reason(&r, &j.reasons[0], words, sizeof words);
    assert_string_equal(words, "scratch in rim: region 1 area 0.3 mm² > 0.2 mm²");
    /* face and outside pool under the class's count of 2 */
    struct region h[3] = {reg(1, 2, 10), reg(2, 2, 10), reg(3, 2, 10)};
    h[0].zone = 1;
    h[1].zone = -1;
    h[2].zone = 1;
    judge_with(&r, &good_q, &good_pose, h, 3, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_string_equal(j.reasons[0].rule, "max_count");
    assert_int_equal(j.reasons[0].zone, -1);
}

/* ISO 10110-7 "3 x 0.4": at most 3 imperfections of grade 0.4 (0.16 mm2
 * each); smaller ones while the total stays within 3 x 0.4^2 = 0.48 mm2. */
static void test_iso10110_grade(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "[tolerance pit in face]\nmax_count = none\ngrade = 3 x 0.4\n");
    const struct recipe_tolerance *t = recipe_tolerance_for(&r, 3, 1);
    assert_int_equal(t->grade_n, 3);
    assert_true(t->grade_a_mm == 0.4);
    struct region g[13];
    struct judgement j;
    /* three of exactly grade 0.4: allowed */
    for (int i = 0; i < 3; i++) {
        g[i] = reg(i + 1, 3, 16);
        g[i].zone = 1;
    }
    judge_with(&r, &good_q, &good_pose, g, 3, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    /* one of 0.2 mm2: grade 0.447 > 0.4 */
    g[0] = reg(1, 3, 20);
    g[0].zone = 1;
    judge_with(&r, &good_q, &good_pose, g, 1, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_string_equal(j.reasons[0].rule, "grade_size");
    assert_true(fabs(j.reasons[0].measured - sqrt(0.2)) < 1e-9);
    /* ten of grade 0.2 (0.04 mm2): total 0.40 <= 0.48, allowed though more
     * than three */
    for (int i = 0; i < 13; i++) {
        g[i] = reg(i + 1, 3, 4);
        g[i].zone = 1;
    }
    judge_with(&r, &good_q, &good_pose, g, 10, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    /* thirteen: 0.52 > 0.48 */
    judge_with(&r, &good_q, &good_pose, g, 13, &j);
    assert_int_equal(j.verdict, VERDICT_FAIL);
    assert_int_equal(j.nreasons, 1);
    assert_string_equal(j.reasons[0].rule, "grade_total");
    assert_true(fabs(j.reasons[0].limit - 0.48) < 1e-9);
    assert_true(fabs(j.reasons[0].measured - 0.52) < 1e-9);
}

/* A harmless region with the given quality and pose must be NO VERDICT
 * with `rule` among the reasons. */
static void expect_no_verdict(const struct recipe *r, const struct quality *q,
                              const struct part_pose *p, const char *rule)
{
    struct region g[1] = {reg(1, 2, 2)};
    struct judgement j;
    judge_with(r, q, p, g, 1, &j);
    assert_int_equal(j.verdict, VERDICT_NONE);
    int found = 0;
    for (int i = 0; i < j.nreasons; i++) {
        found |= !strcmp(j.reasons[i].rule, rule);
        assert_int_equal(j.reasons[i].cls, -1);
    }
    if (!found)
        fail_msg("expected reason %s, first is %s", rule, j.reasons[0].rule);
}

static void test_untrusted_images_never_pass(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    struct quality q;
    struct part_pose p = good_pose;
#define WITH(field, value, rule)                                                            \
    do {                                                                                    \
        q = good_q;                                                                         \
        q.field = value;                                                                    \
        expect_no_verdict(&r, &q, &good_pose, rule);                                        \
    } while (0)
    WITH(level, 20, "too_dark");
    WITH(level, 250, "too_bright");
    WITH(saturated, 0.10, "saturated");
    WITH(black, 0.2, "black");
    WITH(part_fraction, 0.01, "no_part");
    WITH(part_fraction, 0.95, "no_part"); /* "part" everywhere: an empty scene */
    WITH(sharpness, 40, "blurred");
    WITH(unsure, 0.3, "unsure");
    WITH(frame_change, 0, "frozen");
#undef WITH
    p.found = 0;
    expect_no_verdict(&r, &good_q, &p, "no_part");
    p = good_pose;
    p.area_mm2 = 20; /* half a part */
    expect_no_verdict(&r, &good_q, &p, "part_size");
    p.area_mm2 = 60;
    expect_no_verdict(&r, &good_q, &p, "part_size");
    p = good_pose;
    p.border_gap = 0;
    expect_no_verdict(&r, &good_q, &p, "part_at_border");

    /* a defective part in a dark image: still no verdict, not FAIL */
    struct region bad = reg(1, 3, 50);
    struct judgement j;
    q = good_q;
    q.level = 10;
    judge_with(&r, &q, &good_pose, &bad, 1, &j);
    assert_int_equal(j.verdict, VERDICT_NONE);
}

static void test_gate_settings(void **state)
{
    (void)state;
    struct recipe r;
    load_recipe(&r, "");
    struct judgement j;
    struct quality q = good_q;
    /* the first frame has no last frame: not frozen */
    q.frame_change = -1;
    judge_with(&r, &q, &good_pose, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    /* min_frame_change = none turns the frozen check off */
    q.frame_change = 0;
    r.gates.min_frame_change = -1;
    judge_with(&r, &q, &good_pose, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    /* the field: the part's box (10..90) must lie inside it */
    r.part.field[0] = 20;
    r.part.field[1] = 0;
    r.part.field[2] = 99;
    r.part.field[3] = 99;
    expect_no_verdict(&r, &good_q, &good_pose, "outside_field");
    r.part.field[0] = 10;
    judge_with(&r, &good_q, &good_pose, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
    /* sharpness at exactly half the reference still passes */
    q = good_q;
    q.sharpness = 50;
    judge_with(&r, &q, &good_pose, NULL, 0, &j);
    assert_int_equal(j.verdict, VERDICT_PASS);
}

static void test_quality_measures(void **state)
{
    (void)state;
    struct err e;
    struct recipe r;
    load_recipe(&r, "");
    /* 10x10 frame, the part is the left 4 columns; grey levels known */
    struct image *img = image_new(10, 10, 1, &e), *cm = image_new(10, 10, 1, &e);
    assert_non_null(img);
    assert_non_null(cm);
    memset(img->px, 0, 100);
    memset(cm->px, 0, 100);
    for (int y = 0; y < 10; y++)
        for (int x = 0; x < 4; x++) {
            cm->px[y * 10 + x] = 1;
            img->px[y * 10 + x] = x == 0 ? 255 : x == 3 ? 4 : 100;
        }
    float conf[100];
    for (int i = 0; i < 100; i++)
        conf[i] = i % 10 == 1 ? 0.3f : 0.9f;
    uint8_t grey[100], last[100];
    memset(last, 10, sizeof last);
    struct quality q;
    assert_int_equal(judge_measure_quality(&r, img, cm, conf, grey, last, &q, &e), ST_OK);
    assert_true(q.part_fraction == 0.4);
    assert_true(fabs(q.level - (255 + 100 + 100 + 4) / 4.0) < 1e-9);
    assert_true(q.saturated == 0.25); /* the 255 column */
    assert_true(q.black == 0.25);     /* the column at 4 <= black_level 8 */
    assert_true(q.unsure == 0.25);    /* column 1 */
    /* interior (4 part neighbours): columns 1 and 2, rows 1..8; the
     * Laplacian is 255+100-200 = 155 in column 1, 100+4-200 = -96 in
     * column 2; variance (155 - 29.5)^2 = 15750.25, scaled by
     * (128/114.75)^2 */
    double want = 15750.25 * (128 / 114.75) * (128 / 114.75);
    assert_true(fabs(q.sharpness - want) < 1e-6 * want);
    /* frame change: mean |grey - 10| over all 100 pixels */
    double change = (10 * (245 + 90 + 90 + 6) + 60 * 10) / 100.0;
    assert_true(fabs(q.frame_change - change) < 1e-9);
    assert_int_equal(judge_measure_quality(&r, img, cm, NULL, grey, NULL, &q, &e), ST_OK);
    assert_true(q.frame_change == -1 && q.unsure == 0);
    image_free(img);
    image_free(cm);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_clean_part_passes),
        cmocka_unit_test(test_verification_due),
        cmocka_unit_test(test_small_regions_do_not_count),
        cmocka_unit_test(test_every_broken_rule_is_listed),
        cmocka_unit_test(test_zone_tolerances),
        cmocka_unit_test(test_iso10110_grade),
        cmocka_unit_test(test_untrusted_images_never_pass),
        cmocka_unit_test(test_gate_settings),
        cmocka_unit_test(test_quality_measures),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
