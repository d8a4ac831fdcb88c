/* Zones follow the part: a defect moved across a zone's boundary on a
 * turned part switches the tolerance that judges it, whatever the turn.
 *
 * The part is drawn here from its own geometry (a 10 x 4 mm bar with a tab
 * at its +x end, 0.1 mm per pixel), turned by a known angle; the defect is
 * placed by that same known geometry, not by the station's pose, so the
 * test holds the pose, the zone map, the regions' zones and the verdict to
 * the drawing (the rule itself — a zone's own tolerance judges what lies in
 * it — is the recipe format's, recipes/README.md). */
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
#include "core/part.h"
#include "core/regions.h"
#include "core/zones.h"
#include "tests/testkit.h"

#define W 201
#define H 163
#define S 0.1 /* mm per pixel */

static const char recipe_text[] =
    "[product]\nformat = 1\nid = zoning-test\nversion = 1\n"
    "[class background]\ndefect = no\ncolour = #000000\n"
    "[class surface]\ndefect = no\ncolour = #00ff00\n"
    "[class scratch]\ndefect = yes\ncolour = #ffff00\n"
    "[features]\nfamilies = gauss\nsigmas = 1\n"
    "[classifier]\nmodel = m.json\nrounds = 1\ndepth = 1\nlearning_rate = 0.3\nseed = 1\n"
    "threads = 1\nearly_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.2\n"
    "[scale]\nmm_per_px_x = 0.1\nmm_per_px_y = 0.1\n"
    "[part]\norientation = moments\n"
    /* the tab end: x from 1 to 5 mm, the bar's full height */
    "[zone tab-end]\nshape = rect\ncentre = 3 0\nsize = 4 6\n"
    "[tolerance scratch]\nmin_area_mm2 = none\nmax_area_mm2 = none\nmax_total_mm2 = none\n"
    "max_count = 5\n"
    "[tolerance scratch in tab-end]\nmax_count = 0\n";

static void load_recipe(struct recipe *r)
{
    testkit_load_recipe(recipe_text, "", r);
}

/* Part coordinates (mm) of pixel (x, y) for a part centred at (cx, cy)
 * turned by a. */
static void to_part(double cx, double cy, double a, int x, int y, double *u, double *v)
{
    double dx = (x - cx) * S, dy = (y - cy) * S;
    *u = dx * cos(a) + dy * sin(a);
    *v = -dx * sin(a) + dy * cos(a);
}

/* The bar with its tab, and a 0.5 mm square defect centred at (du, dv). */
static void draw(struct image *cm, double cx, double cy, double a, double du, double dv)
{
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            double u, v;
            to_part(cx, cy, a, x, y, &u, &v);
            int bar = fabs(u) <= 5 && fabs(v) <= 2;
            int tab = u > 5 && u <= 6.5 && fabs(v) <= 1;
            int defect = fabs(u - du) <= 0.25 && fabs(v - dv) <= 0.25;
            cm->px[y * W + x] = defect ? 2 : (bar || tab) ? 1 : 0;
        }
}

static struct judgement judge_drawing(const struct recipe *r, struct zone_map *zm,
                                      struct image *cm, struct part_pose *pose,
                                      struct region_set *rs)
{
    struct err e;
    err_clear(&e);
    assert_int_equal(part_locate(cm, S, S, PART_ORIENT_MOMENTS, pose, &e), ST_OK);
    assert_int_equal(zone_map_paint(zm, pose, W, H, S, S, &e), ST_OK);
    struct regions_opts o;
    judge_regions_opts(r, zone_map_image(zm), &o);
    assert_int_equal(regions_find(rs, cm, NULL, &o, &e), ST_OK);
    struct judgement j;
    judge_tolerances(r, rs, &j);
    return j;
}

static void test_defect_crossing_a_zone_boundary(void **state)
{
    (void)state;
    static struct recipe r;
    load_recipe(&r);
    struct err e;
    err_clear(&e);
    struct zone_map *zm = NULL;
    assert_int_equal(zone_map_new(r.zones, r.nzones, &zm, &e), ST_OK);
    struct image *cm = image_new(W, H, 1, &e);
    assert_non_null(cm);
    struct region_set rs;
    regions_init(&rs);
    const double turns_deg[] = {0, 30, 137, 200, 290};
    for (size_t t = 0; t < sizeof turns_deg / sizeof turns_deg[0]; t++) {
        double a = turns_deg[t] * 3.14159265358979323846 / 180;
        /* the defect slides along the bar's axis through the zone's edge.
         * Zones are placed from the part's centroid, which the tab moves
         * 3 mm2 x 5.75 mm / 43 mm2 = 0.401 mm along the axis, so the edge
         * at x = 1 mm lies at u = 1.401 here; the defect's square reaches
         * 0.25 mm either side of its centre */
        const struct {
            double u;
            int in_zone;
        } at[] = {{-3, 0}, {0.9, 0}, {1.5, 1}, {3.4, 1}, {-1.5, 0}};
        for (size_t k = 0; k < sizeof at / sizeof at[0]; k++) {
            draw(cm, 100.3, 80.6, a, at[k].u, 0.4);
            struct part_pose pose;
            struct judgement j = judge_drawing(&r, zm, cm, &pose, &rs);
            /* the pose turns with the drawing (the tab fixes the half turn) */
            double da = remainder(pose.angle - a, 2 * 3.14159265358979323846);
            if (fabs(da) > 0.02)
                fail_msg("turn %g deg: pose angle off by %g rad", turns_deg[t], da);
            assert_false(pose.isotropic);
            assert_int_equal(rs.n, 1);
            assert_int_equal(rs.r[0].zone, at[k].in_zone ? 0 : -1);
            if (at[k].in_zone) {
                assert_int_equal(j.verdict, VERDICT_FAIL);
                assert_int_equal(j.nreasons, 1);
                assert_string_equal(j.reasons[0].rule, "max_count");
                assert_int_equal(j.reasons[0].zone, 0);
            } else {
                assert_int_equal(j.verdict, VERDICT_PASS);
            }
        }
    }
    regions_clear(&rs);
    image_free(cm);
    zone_map_free(zm);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_defect_crossing_a_zone_boundary),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
