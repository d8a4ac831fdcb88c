/* Defect regions: gap merging, zones, order, labels and measurements on
 * cases small enough to work out by hand.  The gap is the one core/regions.h
 * defines (edge to edge between pixel squares); the expected values are
 * that definition's arithmetic (Pythagoras) done by hand beside each check.
 * Feret length and width follow scikit-image's feret_diameter_max point
 * convention (core/hull.h); tests/ref/test_regions.py holds them to
 * scikit-image and scipy on many regions, these cases are the hand-sized
 * ones. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <math.h>
#include <string.h>

#include "core/regions.h"

#define W 23
#define H 17

static struct image *map(void)
{
    struct err e;
    struct image *m = image_new(W, H, 1, &e);
    assert_non_null(m);
    return m;
}

static void fill(struct image *m, int x0, int y0, int x1, int y1, int cls)
{
    for (int y = y0; y <= y1; y++)
        for (int x = x0; x <= x1; x++)
            m->px[y * m->w + x] = (uint8_t)cls;
}

/* classes 0..3, 2 and 3 defects, pixels 0.1 mm wide and 0.2 mm high */
static struct regions_opts opts(double gap)
{
    struct regions_opts o = {.connectivity = 8, .mm_per_px_x = 0.1, .mm_per_px_y = 0.2,
                             .nclasses = 4};
    o.is_defect[2] = o.is_defect[3] = 1;
    o.merge_gap_mm[2] = o.merge_gap_mm[3] = gap;
    return o;
}

static int count(const struct image *m, const struct regions_opts *o, struct region_set *rs)
{
    struct err e;
    assert_int_equal(regions_find(rs, m, NULL, o, &e), ST_OK);
    return rs->n;
}

static void test_gap_at_the_limit(void **state)
{
    (void)state;
    struct image *m = map();
    struct region_set rs;
    regions_init(&rs);
    /* side by side, k empty columns between: gap k x 0.1 mm */
    struct regions_opts o = opts(0.3);
    fill(m, 2, 5, 4, 7, 2);
    fill(m, 8, 5, 10, 7, 2);    /* 3 empty columns: 0.3 mm, at the limit: one defect */
    assert_int_equal(count(m, &o, &rs), 1);
    assert_int_equal(rs.r[0].fragments, 2);
    o.merge_gap_mm[2] = 0.29;   /* just below 0.3: apart */
    assert_int_equal(count(m, &o, &rs), 2);
    memset(m->px, 0, W * H);
    /* one above the other, 2 empty rows: 0.4 mm */
    fill(m, 2, 2, 4, 3, 2);
    fill(m, 2, 6, 4, 7, 2);
    o.merge_gap_mm[2] = 0.41;
    assert_int_equal(count(m, &o, &rs), 1);
    o.merge_gap_mm[2] = 0.39;
    assert_int_equal(count(m, &o, &rs), 2);
    memset(m->px, 0, W * H);
    /* diagonal: 3 empty columns and 2 empty rows, hypot(0.3, 0.4) = 0.5 mm */
    fill(m, 1, 1, 2, 2, 3);
    fill(m, 6, 5, 7, 6, 3);
    o.merge_gap_mm[3] = 0.5;
    assert_int_equal(count(m, &o, &rs), 1);
    o.merge_gap_mm[3] = 0.49;
    assert_int_equal(count(m, &o, &rs), 2);
    /* no gap set: touching diagonally is one region (8-connectivity) but
     * with 4-connectivity two, and a zero gap merges nothing */
    memset(m->px, 0, W * H);
    fill(m, 3, 3, 3, 3, 2);
    fill(m, 4, 4, 4, 4, 2);
    o = opts(0);
    assert_int_equal(count(m, &o, &rs), 1);
    o.connectivity = 4;
    assert_int_equal(count(m, &o, &rs), 2);
    regions_clear(&rs);
    image_free(m);
}

static void test_chain_of_three(void **state)
{
    (void)state;
    struct image *m = map();
    struct region_set rs;
    regions_init(&rs);
    /* A, B, C 2 columns (0.2 mm) apart: A-C are 0.2 + 0.1 + 0.2 = 0.5 mm
     * apart, beyond the 0.25 limit, but joined through B */
    fill(m, 1, 4, 3, 6, 2);
    fill(m, 6, 4, 6, 6, 2);
    fill(m, 9, 5, 12, 8, 2);
    fill(m, 20, 12, 22, 16, 2);  /* far away: its own defect */
    struct regions_opts o = opts(0.25);
    assert_int_equal(count(m, &o, &rs), 2);
    const struct region *g = &rs.r[0];
    assert_int_equal(g->fragments, 3);
    assert_int_equal(g->pixels, 9 + 3 + 16);
    assert_int_equal(g->x0, 1);
    assert_int_equal(g->y0, 4);
    assert_int_equal(g->x1, 12);
    assert_int_equal(g->y1, 8);
    assert_int_equal(rs.r[1].fragments, 1);
    assert_int_equal(rs.r[1].id, 2);
    /* every pixel of the chain maps to defect 0, the far one to 1 */
    for (int i = 0; i < W * H; i++) {
        int x = i % W;
        int want = m->px[i] != 2 ? -1 : x < 15 ? 0 : 1;
        assert_int_equal(rs.labels[i], want);
    }
    regions_clear(&rs);
    image_free(m);
}

static void test_classes_never_merged(void **state)
{
    (void)state;
    struct image *m = map();
    struct region_set rs;
    regions_init(&rs);
    fill(m, 2, 2, 5, 5, 2);
    fill(m, 6, 2, 9, 5, 3);   /* touching, another class */
    struct regions_opts o = opts(5.0);
    assert_int_equal(count(m, &o, &rs), 2);
    assert_int_equal(rs.r[0].cls, 2);
    assert_int_equal(rs.r[1].cls, 3);
    assert_int_equal(rs.r[0].fragments, 1);
    assert_int_equal(rs.r[1].fragments, 1);
    regions_clear(&rs);
    image_free(m);
}

static void test_merged_measurements(void **state)
{
    (void)state;
    struct image *m = map();
    float conf[W * H];
    for (int i = 0; i < W * H; i++)
        conf[i] = 0.5f;
    struct region_set rs;
    regions_init(&rs);
    /* pixels (4, 3) and (7, 3), 2 empty columns (0.2 mm) apart */
    fill(m, 4, 3, 4, 3, 2);
    fill(m, 7, 3, 7, 3, 2);
    conf[3 * W + 4] = 0.25f;
    conf[3 * W + 7] = 0.75f;
    struct regions_opts o = opts(0.2);
    struct err e;
    assert_int_equal(regions_find(&rs, m, conf, &o, &e), ST_OK);
    assert_int_equal(rs.n, 1);
    const struct region *g = &rs.r[0];
    assert_int_equal(g->fragments, 2);
    assert_int_equal(g->pixels, 2);
    assert_float_equal(g->area_mm2, 2 * 0.1 * 0.2, 1e-15);
    assert_float_equal(g->cx, 5.5, 1e-12);
    assert_float_equal(g->cy, 3.0, 1e-12);
    assert_float_equal(g->mean_conf, 0.5, 1e-7);
    assert_float_equal(g->min_conf, 0.25, 1e-7);
    /* the union's hull is that of the row x = 4..7: edge midpoints
     * (3.5, 3), (7.5, 3), (4..7, 3 +- 0.5); in mm the farthest pair is the
     * two ends, 4 x 0.1 = 0.4 (against hypot(0.3, 0.2) = 0.36 corner to
     * corner) and the narrowest caliper the height, 1 x 0.2 */
    assert_float_equal(g->length_mm, 0.4, 1e-12);
    assert_float_equal(g->width_mm, 0.2, 1e-12);
    assert_float_equal(g->orientation, 0.0, 1e-12);
    assert_int_equal(g->x0, 4);
    assert_int_equal(g->x1, 7);
    regions_clear(&rs);
    image_free(m);
}

static void test_square_and_orientation(void **state)
{
    (void)state;
    struct image *m = map();
    struct region_set rs;
    regions_init(&rs);
    struct regions_opts o = opts(0);
    o.mm_per_px_x = o.mm_per_px_y = 1;
    /* a 16 x 16 square: 256 px; length sqrt(16^2 + 15^2), the value
     * scikit-image's feret_diameter_max gives (its hull's corners are cut
     * at edge midpoints), width 16 */
    fill(m, 3, 0, 18, 15, 2);
    assert_int_equal(count(m, &o, &rs), 1);
    assert_int_equal(rs.r[0].pixels, 256);
    assert_float_equal(rs.r[0].length_mm, sqrt(16 * 16 + 15 * 15), 1e-12);
    assert_float_equal(rs.r[0].width_mm, 16, 1e-12);
    /* a single pixel is the diamond of its edge midpoints: 1 long, 1/sqrt(2)
     * wide (the distance between its parallel sides); with pixels 0.1 x 0.2
     * mm, max(0.1, 0.2) long and 0.1 x 0.2 / hypot(0.1, 0.2) wide */
    memset(m->px, 0, W * H);
    m->px[5 * W + 7] = 2;
    assert_int_equal(count(m, &o, &rs), 1);
    assert_float_equal(rs.r[0].length_mm, 1, 1e-12);
    assert_float_equal(rs.r[0].width_mm, sqrt(0.5), 1e-12);
    struct regions_opts o2 = opts(0);
    assert_int_equal(count(m, &o2, &rs), 1);
    assert_float_equal(rs.r[0].length_mm, 0.2, 1e-12);
    assert_float_equal(rs.r[0].width_mm, 0.1 * 0.2 / hypot(0.1, 0.2), 1e-12);
    /* orientation: from the x axis turning towards +y (down the image) */
    memset(m->px, 0, W * H);
    for (int i = 0; i < 9; i++)
        m->px[(2 + i) * W + 3 + i] = 3;          /* down and right */
    fill(m, 15, 2, 15, 12, 2);                   /* a column */
    assert_int_equal(count(m, &o, &rs), 2);
    assert_float_equal(rs.r[0].orientation, acos(-1) / 2, 1e-12);
    assert_float_equal(rs.r[1].orientation, acos(-1) / 4, 1e-12);
    /* the same diagonal in mm with pixels 0.1 wide, 0.2 high: atan(2) */
    o.mm_per_px_x = 0.1;
    o.mm_per_px_y = 0.2;
    assert_int_equal(count(m, &o, &rs), 2);
    assert_float_equal(rs.r[1].orientation, atan(2.0), 1e-12);
    regions_clear(&rs);
    image_free(m);
}

static void test_zones(void **state)
{
    (void)state;
    struct image *m = map(), *z = map();
    memset(z->px, 255, W * H);
    fill(z, 0, 0, 9, H - 1, 2);    /* zone 2 on the left, zone 1 in a band */
    fill(z, 8, 0, 12, H - 1, 1);
    struct region_set rs;
    regions_init(&rs);
    fill(m, 1, 1, 3, 3, 2);        /* zone 2 only */
    fill(m, 6, 5, 9, 6, 2);        /* zones 2 and 1: the lower index */
    fill(m, 18, 10, 20, 12, 2);    /* outside every zone */
    /* three fragments merged (0.2 mm apart: 2 empty columns, then 1 empty
     * row), two outside every zone and one in zone 1: the defect is in 1 */
    fill(m, 16, 1, 17, 1, 3);
    fill(m, 13, 1, 13, 1, 3);
    fill(m, 12, 3, 12, 3, 3);
    struct regions_opts o = opts(0.35);
    o.merge_gap_mm[2] = 0;
    o.zones = z;
    assert_int_equal(count(m, &o, &rs), 4);
    assert_int_equal(rs.r[0].zone, 2);
    assert_int_equal(rs.r[1].zone, 1);
    assert_int_equal(rs.r[2].zone, -1);
    assert_int_equal(rs.r[3].cls, 3);
    assert_int_equal(rs.r[3].fragments, 3);
    assert_int_equal(rs.r[3].zone, 1);
    o.zones = NULL;
    assert_int_equal(count(m, &o, &rs), 4);
    for (int i = 0; i < rs.n; i++)
        assert_int_equal(rs.r[i].zone, -1);
    regions_clear(&rs);
    image_free(z);
    image_free(m);
}

static void test_order_and_reuse(void **state)
{
    (void)state;
    struct image *m = map();
    struct region_set rs;
    regions_init(&rs);
    fill(m, 1, 1, 2, 2, 3);     /* first in raster order, but class 3 */
    fill(m, 10, 4, 11, 5, 2);
    fill(m, 5, 8, 5, 8, 2);
    struct regions_opts o = opts(0);
    assert_int_equal(count(m, &o, &rs), 3);
    int want_cls[] = {2, 2, 3}, want_x0[] = {10, 5, 1};
    for (int i = 0; i < 3; i++) {
        assert_int_equal(rs.r[i].id, i + 1);
        assert_int_equal(rs.r[i].cls, want_cls[i]);
        assert_int_equal(rs.r[i].x0, want_x0[i]);
        assert_int_equal(rs.labels[rs.r[i].y0 * W + rs.r[i].x0], i);
    }
    /* a smaller frame next: nothing of the first is left over */
    struct err e;
    struct image *s = image_new(5, 3, 1, &e);
    assert_non_null(s);
    s->px[7] = 2;
    assert_int_equal(count(s, &o, &rs), 1);
    assert_int_equal(rs.r[0].pixels, 1);
    assert_int_equal(rs.r[0].x0, 2);
    assert_int_equal(rs.r[0].y0, 1);
    for (int i = 0; i < 15; i++)
        assert_int_equal(rs.labels[i], i == 7 ? 0 : -1);
    memset(s->px, 0, 15);
    assert_int_equal(count(s, &o, &rs), 0);
    image_free(s);
    regions_clear(&rs);
    regions_clear(&rs);   /* clearing twice is harmless */
    image_free(m);
}

static void test_bad_options(void **state)
{
    (void)state;
    struct image *m = map();
    struct err e;
    struct region_set rs;
    regions_init(&rs);
    struct regions_opts o = opts(0);
    o.connectivity = 6;
    assert_int_equal(regions_find(&rs, m, NULL, &o, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, "connectivity 6"));
    o = opts(0);
    o.mm_per_px_y = 0;
    assert_int_equal(regions_find(&rs, m, NULL, &o, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, "pixel size"));
    o = opts(0);
    struct image *z = image_new(W, H - 1, 1, &e);
    assert_non_null(z);
    o.zones = z;
    assert_int_equal(regions_find(&rs, m, NULL, &o, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, "zone map"));
    image_free(z);
    regions_clear(&rs);
    image_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_gap_at_the_limit),
        cmocka_unit_test(test_chain_of_three),
        cmocka_unit_test(test_classes_never_merged),
        cmocka_unit_test(test_merged_measurements),
        cmocka_unit_test(test_square_and_orientation),
        cmocka_unit_test(test_zones),
        cmocka_unit_test(test_order_and_reuse),
        cmocka_unit_test(test_bad_options),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
