/* core/part, core/zones and core/font: worked examples by hand, refusals
 * of degenerate zones and bad masks, and the font's coverage.  The shapes'
 * agreement with scikit-image is in tests/ref/test_zones.py and
 * test_part.py; here every expected value is worked out in the comment
 * beside it.  Mask files live in a fresh mkdtemp folder removed at the end. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <stdlib.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "core/font.h"
#include "core/pngio.h"
#include "core/zones.h"
#include "tests/testkit.h"

static int setup(void **state)
{
    (void)state;
    return testkit_scratch_setup("test_zones");
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}

static struct zone circle(const char *name, double cx, double cy, double r)
{
    struct zone z = {.shape = ZONE_CIRCLE, .cx = cx, .cy = cy, .r_out = r};
    snprintf(z.name, sizeof z.name, "%s", name);
    return z;
}

static void refused(struct zone z, int code, const char *words)
{
    struct zone_map *m = (struct zone_map *)&m;
    struct err e;
    err_clear(&e);
    assert_int_equal(zone_map_new(&z, 1, &m, &e), code);
    assert_null(m);
    assert_non_null(strstr(e.msg, words));
}

static void test_degenerate_zones_refused(void **state)
{
    (void)state;
    struct zone z = {.name = "flat", .shape = ZONE_RECT, .w = 0, .h = 2};
    refused(z, ST_ERANGE, "zone 'flat': rectangle 0 x 2 mm has no area");
    z.w = 3;
    z.h = -1;
    refused(z, ST_ERANGE, "has no area");
    refused(circle("dot", 0, 0, 0), ST_ERANGE, "zone 'dot': circle radius 0");
    struct zone ring = {.name = "seal", .shape = ZONE_RING, .r_in = 4, .r_out = 4};
    refused(ring, ST_ERANGE, "zone 'seal': ring needs 0 <= inner radius < outer radius");
    ring.r_in = 5;
    refused(ring, ST_ERANGE, "(5, 4 mm)");
    struct zone poly = {.name = "edge", .shape = ZONE_POLYGON, .npoints = 2};
    refused(poly, ST_ERANGE, "zone 'edge': polygon has 2 points (3..16)");
    poly.npoints = 17;
    refused(poly, ST_ERANGE, "polygon has 17 points");
    /* three points on the line v = 2u */
    poly.npoints = 3;
    double line[3][2] = {{0, 0}, {1, 2}, {-3, -6}};
    memcpy(poly.pts, line, sizeof line);
    refused(poly, ST_ERANGE, "zone 'edge': polygon points lie on one line");
    poly.pts[2][1] = NAN;
    refused(poly, ST_ERANGE, "polygon point 3 is not finite");
    struct zone c = circle("nan", NAN, 0, 1);
    refused(c, ST_ERANGE, "zone 'nan': centre or angle is not finite");
    struct zone mk = {.name = "logo", .shape = ZONE_MASK, .mask_mm_per_px = 0};
    refused(mk, ST_ERANGE, "zone 'logo': mask pixel size 0 mm is not positive");

    struct zone many[ZONE_MAX + 1];
    for (int k = 0; k <= ZONE_MAX; k++)
        many[k] = circle("c", 0, 0, 1);
    struct zone_map *m;
    struct err e;
    assert_int_equal(zone_map_new(many, ZONE_MAX + 1, &m, &e), ST_ERANGE);
    assert_string_equal(e.msg, "9 zones (at most 8)");
}

static void test_bad_masks_name_the_file(void **state)
{
    (void)state;
    struct zone z = {.name = "logo", .shape = ZONE_MASK, .mask_mm_per_px = 0.5};
    const char *missing = testkit_path("missing.png");
    snprintf(z.mask_path, sizeof z.mask_path, "%s", missing);
    struct zone_map *m;
    struct err e;
    assert_int_equal(zone_map_new(&z, 1, &m, &e), ST_EIO);
    assert_true(strncmp(e.msg, missing, strlen(missing)) == 0);

    struct err e2;
    struct image *img = image_new(5, 3, 1, &e2);
    assert_non_null(img);
    const char *empty = testkit_path("empty.png");
    assert_int_equal(pngio_save(empty, img, 1, &e2), ST_OK);
    snprintf(z.mask_path, sizeof z.mask_path, "%s", empty);
    assert_int_equal(zone_map_new(&z, 1, &m, &e), ST_EFORMAT);
    char want[256];
    snprintf(want, sizeof want, "%s: mask of zone 'logo' has no pixel inside (all zero)", empty);
    assert_string_equal(e.msg, want);
    image_free(img);

    /* an RGB PNG is not a mask: pngio refuses it, naming the file */
    img = image_new(4, 4, 3, &e2);
    const char *rgb = testkit_path("rgb.png");
    assert_int_equal(pngio_save(rgb, img, 1, &e2), ST_OK);
    snprintf(z.mask_path, sizeof z.mask_path, "%s", rgb);
    assert_int_equal(zone_map_new(&z, 1, &m, &e), ST_EFORMAT);
    assert_true(strncmp(e.msg, rgb, strlen(rgb)) == 0);
    image_free(img);
}

/* A 4 x 2 mask at 1 mm per pixel centred on (0, 0) with only pixel (0, 0)
 * set: that pixel covers p in [-2, -1), q in [-1, 0).  Turned by 90 degrees,
 * local (p, q) = (v, -u), so the point (u, v) = (0.5, -1.5) has p = -1.5,
 * q = -0.5, inside. */
static void test_mask_geometry_by_hand(void **state)
{
    (void)state;
    struct err e;
    struct image *img = image_new(4, 2, 1, &e);
    img->px[0] = 1;
    const char *path = testkit_path("corner.png");
    assert_int_equal(pngio_save(path, img, 1, &e), ST_OK);
    image_free(img);
    struct zone z[2] = {{.name = "a", .shape = ZONE_MASK, .mask_mm_per_px = 1},
                        {.name = "b", .shape = ZONE_MASK, .mask_mm_per_px = 1, .angle_deg = 90}};
    snprintf(z[0].mask_path, sizeof z[0].mask_path, "%s", path);
    snprintf(z[1].mask_path, sizeof z[1].mask_path, "%s", path);
    struct zone_map *m;
    assert_int_equal(zone_map_new(z, 2, &m, &e), ST_OK);
    assert_true(zone_map_contains(m, 0, -1.5, -0.5));
    assert_true(zone_map_contains(m, 0, -2.0, -1.0));    /* the pixel's corner is inside */
    assert_false(zone_map_contains(m, 0, -0.5, -0.5));
    assert_false(zone_map_contains(m, 0, -1.5, 0.5));
    assert_false(zone_map_contains(m, 0, -2.5, -0.5));   /* beyond the mask */
    assert_true(zone_map_contains(m, 1, 0.5, -1.5));
    assert_false(zone_map_contains(m, 1, -1.5, -0.5));
    assert_false(zone_map_contains(m, 2, -1.5, -0.5));   /* no zone 2 */
    zone_map_free(m);
}

/* Rectangle 4 x 2 mm turned 30 degrees about (1, 1): the point at distance
 * 1.9 along its long side is inside, at 2.1 outside; a ring 2..3 mm holds
 * radius 2.5 but not its centre. */
static void test_shapes_by_hand(void **state)
{
    (void)state;
    const double t = acos(-1.0) / 6;
    struct zone z[2] = {{.name = "tab", .shape = ZONE_RECT, .cx = 1, .cy = 1, .w = 4, .h = 2,
                         .angle_deg = 30},
                        {.name = "seal", .shape = ZONE_RING, .cx = -1, .r_in = 2, .r_out = 3}};
    struct zone_map *m;
    struct err e;
    assert_int_equal(zone_map_new(z, 2, &m, &e), ST_OK);
    assert_true(zone_map_contains(m, 0, 1 + 1.9 * cos(t), 1 + 1.9 * sin(t)));
    assert_false(zone_map_contains(m, 0, 1 + 2.1 * cos(t), 1 + 2.1 * sin(t)));
    assert_true(zone_map_contains(m, 0, 1 - 0.9 * sin(t), 1 + 0.9 * cos(t)));
    assert_false(zone_map_contains(m, 0, 1 - 1.1 * sin(t), 1 + 1.1 * cos(t)));
    assert_false(zone_map_contains(m, 1, -1, 0));
    assert_true(zone_map_contains(m, 1, -1 + 2.5 * cos(1.0), 2.5 * sin(1.0)));
    assert_false(zone_map_contains(m, 1, -1 + 3.1, 0));
    zone_map_free(m);
}

/* Two overlapping circles on a pose at (10, 5), angle 0, 1 mm per pixel:
 * the earlier zone owns the overlap; pixel (10 + u, 5 + v) is part (u, v). */
static void test_paint_priority_and_sizes(void **state)
{
    (void)state;
    struct zone z[2] = {circle("first", 0, 0, 2), circle("second", 2, 0, 2)};
    struct zone_map *m;
    struct err e;
    assert_int_equal(zone_map_new(z, 2, &m, &e), ST_OK);
    assert_null(zone_map_image(m));
    struct part_pose p = {.found = 1, .cx = 10, .cy = 5};
    assert_int_equal(zone_map_paint(m, &p, 21, 11, 1, 1, &e), ST_OK);
    const struct image *map = zone_map_image(m);
    assert_int_equal(map->w, 21);
    assert_int_equal(map->h, 11);
    assert_int_equal(map->px[5 * 21 + 10], 0);   /* (0, 0) */
    assert_int_equal(map->px[5 * 21 + 11], 0);   /* (1, 0): in both */
    assert_int_equal(map->px[5 * 21 + 13], 1);   /* (3, 0): second only */
    assert_int_equal(map->px[5 * 21 + 15], ZONE_NONE);
    assert_int_equal(map->px[0], ZONE_NONE);
    int count[2] = {0};
    for (int i = 0; i < 21 * 11; i++)
        if (map->px[i] != ZONE_NONE)
            count[map->px[i]]++;
    /* lattice points within radius 2 (13, inclusive), and the second's
     * 13 less the 5 also within 2 of (0, 0): (0,0), (1,0), (2,0), (1,+-1) */
    assert_int_equal(count[0], 13);
    assert_int_equal(count[1], 8);
    zone_map_free(m);

    /* a zone far off the frame paints nothing; one over the edge is cut */
    struct zone off[2] = {circle("far", 1e12, -1e12, 5), circle("edge", -10, 0, 2)};
    assert_int_equal(zone_map_new(off, 2, &m, &e), ST_OK);
    assert_int_equal(zone_map_paint(m, &p, 21, 11, 1, 1, &e), ST_OK);
    map = zone_map_image(m);
    count[0] = count[1] = 0;
    for (int i = 0; i < 21 * 11; i++)
        if (map->px[i] != ZONE_NONE)
            count[map->px[i]]++;
    /* the circle about pixel (0, 5): its 13 points less those at x < 0,
     * so 5 at x = 0, 3 at x = 1, 1 at x = 2 */
    assert_int_equal(count[0], 0);
    assert_int_equal(count[1], 9);
    p.found = 0;
    assert_int_equal(zone_map_paint(m, &p, 7, 30, 1, 1, &e), ST_OK);
    map = zone_map_image(m);
    assert_int_equal(map->w * map->h, 210);
    for (int i = 0; i < 210; i++)
        assert_int_equal(map->px[i], ZONE_NONE);
    assert_int_equal(zone_map_paint(m, &p, 7, 30, 0, 1, &e), ST_EINVAL);
    zone_map_free(m);
    zone_map_free(NULL);
}

static void test_part_round_trip_and_refusals(void **state)
{
    (void)state;
    struct part_pose p = {.found = 1, .cx = 40.25, .cy = 17.5, .angle = 2.2};
    double u, v, x, y;
    part_to_part_mm(&p, 0.2, 0.35, 13.0, 29.0, &u, &v);
    part_to_image_px(&p, 0.2, 0.35, u, v, &x, &y);
    assert_true(fabs(x - 13.0) < 1e-12 && fabs(y - 29.0) < 1e-12);
    /* the centroid is the origin; one pixel along +x at angle 0 is u = sx */
    p.angle = 0;
    part_to_part_mm(&p, 0.2, 0.35, 41.25, 17.5, &u, &v);
    assert_true(fabs(u - 0.2) < 1e-12 && fabs(v) < 1e-12);

    struct err e;
    struct image *rgb = image_new(3, 3, 3, &e), *one = image_new(5, 4, 1, &e);
    assert_int_equal(part_locate(rgb, 1, 1, PART_ORIENT_MOMENTS, &p, &e), ST_EINVAL);
    assert_int_equal(part_locate(one, 0, 1, PART_ORIENT_MOMENTS, &p, &e), ST_EINVAL);
    /* a single pixel at (3, 1): found, no extent, so isotropic with angle 0,
     * and 1 px from the top and right edges */
    one->px[1 * 5 + 3] = 1;
    assert_int_equal(part_locate(one, 0.5, 0.25, PART_ORIENT_MOMENTS, &p, &e), ST_OK);
    assert_true(p.found && p.pixels == 1 && p.isotropic && p.angle == 0);
    assert_true(p.cx == 3 && p.cy == 1 && p.area_mm2 == 0.125 && p.border_gap == 1);
    image_free(rgb);
    image_free(one);
}

static int ink(const struct image *img)
{
    int n = 0;
    for (int i = 0; i < img->w * img->h; i++)
        n += img->px[3 * i] != 0;
    return n;
}

static void test_font(void **state)
{
    (void)state;
    /* 5 cells wide, 6 per advance: n glyphs span 6n - 1 cells */
    assert_int_equal(font_text_width("", 3), 0);
    assert_int_equal(font_text_width("A", 1), 5);
    assert_int_equal(font_text_width("AB", 2), 22);
    assert_int_equal(font_text_width("mm²", 1), 17);     /* "²" is one glyph */
    assert_int_equal(font_text_width("a—b", 1), 17);
    static const uint8_t white[3] = {255, 255, 255};
    struct err e;
    struct image *img = image_new(FONT_CELL_W, FONT_CELL_H, 3, &e);
    /* '1' is drawn with 10 cells: a stem of 7, a flag and a foot of 3 */
    font_draw_text(img, 0, 0, "1", 1, white);
    assert_int_equal(ink(img), 10);
    assert_int_equal(img->px[(0 * FONT_CELL_W + 2) * 3], 255);
    assert_int_equal(img->px[(6 * FONT_CELL_W + 1) * 3], 255);

    /* every documented character has its own glyph, unlike any other */
    static const char set[] = " 0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz"
                              ".,-:;#><%/()+=!?'_";
    const size_t n = sizeof set - 1, cell = FONT_CELL_W * FONT_CELL_H * 3;
    static uint8_t drawn[sizeof set + 1][FONT_CELL_W * FONT_CELL_H * 3];
    for (size_t i = 0; i <= n; i++) {
        char s[4] = {set[i], 0};
        if (i == n)
            strcpy(s, "²");
        memset(img->px, 0, cell);
        font_draw_text(img, 0, 0, s, 1, white);
        memcpy(drawn[i], img->px, cell);
    }
    for (size_t i = 0; i <= n; i++)
        for (size_t k = i + 1; k <= n; k++)
            if (memcmp(drawn[i], drawn[k], cell) == 0)
                fail_msg("glyphs %zu and %zu are the same", i, k);
    /* an unknown character draws as '?' */
    memset(img->px, 0, cell);
    font_draw_text(img, 0, 0, "~", 1, white);
    assert_memory_equal(img->px, drawn[strchr(set, '?') - set], cell);
    image_free(img);

    /* clipping: text off every edge stays inside the image (ASan watches) */
    img = image_new(7, 6, 3, &e);
    font_draw_text(img, -4, -5, "W#8", 2, white);
    font_draw_text(img, 5, 4, "W#8", 3, white);
    assert_true(ink(img) > 0);
    image_free(img);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_degenerate_zones_refused),
        cmocka_unit_test(test_bad_masks_name_the_file),
        cmocka_unit_test(test_mask_geometry_by_hand),
        cmocka_unit_test(test_shapes_by_hand),
        cmocka_unit_test(test_paint_priority_and_sizes),
        cmocka_unit_test(test_part_round_trip_and_refusals),
        cmocka_unit_test(test_font),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
