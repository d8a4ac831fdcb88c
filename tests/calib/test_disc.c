/* Scale from a disc of known diameter.  Reference: plane geometry — a disc
 * of radius R centred at (cx, cy), sampled at pixel centres, occupies the
 * columns x with |x - cx| <= R, so its extent is 2*floor(R + frac) + 1
 * pixels, computed here independently per case. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <math.h>
#include <string.h>

#include "calib/disc.h"

static struct image *draw_ellipse(int w, int h, double cx, double cy, double rx, double ry,
                                  double bore)
{
    struct err e;
    struct image *m = image_new(w, h, 1, &e);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double u = (x - cx) / rx, v = (y - cy) / ry;
            double d = u * u + v * v;
            m->px[y * w + x] = d <= 1 && d > bore * bore ? 1 : 0;
        }
    return m;
}

/* occupied columns of a centred ellipse, counted directly */
static int extent(double c, double r, int n)
{
    int k = 0;
    for (int x = 0; x < n; x++)
        k += fabs(x - c) <= r;
    return k;
}

static void test_round_disc(void **state)
{
    (void)state;
    struct image *m = draw_ellipse(301, 257, 150.3, 127.8, 111.6, 111.6, 0.22);
    struct disc_scale s;
    struct err e;
    assert_int_equal(disc_measure_scale(m, 38.0, &s, &e), ST_OK);
    assert_true(s.width_px == extent(150.3, 111.6, 301));
    assert_true(s.height_px == extent(127.8, 111.6, 257));
    /* within one pixel of the true diameter 223.2 px: scale within 0.5 % */
    assert_true(fabs(s.mm_per_px_x - 38.0 / 223.2) / (38.0 / 223.2) < 0.005);
    assert_true(fabs(s.aspect - 1) < 0.01);
    image_free(m);
}

static void test_tilt_shows_as_aspect(void **state)
{
    (void)state;
    struct image *m = draw_ellipse(301, 257, 150, 128, 110, 100, 0);
    struct disc_scale s;
    struct err e;
    assert_int_equal(disc_measure_scale(m, 38.0, &s, &e), ST_OK);
    assert_true(s.mm_per_px_y > s.mm_per_px_x);
    assert_true(fabs(s.aspect - 221.0 / 201.0) < 1e-9);
    image_free(m);
}

static void test_refusals(void **state)
{
    (void)state;
    struct disc_scale s;
    struct err e;
    struct image *cut = draw_ellipse(100, 100, 10, 50, 30, 30, 0);
    assert_int_equal(disc_measure_scale(cut, 38.0, &s, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "border"));
    struct image *none = draw_ellipse(100, 100, 50, 50, 0.1, 0.1, 0.5);
    assert_int_equal(disc_measure_scale(none, 38.0, &s, &e), ST_EFORMAT);
    struct image *tiny = draw_ellipse(100, 100, 50, 50, 5, 5, 0);
    assert_int_equal(disc_measure_scale(tiny, 38.0, &s, &e), ST_ERANGE);
    assert_int_equal(disc_measure_scale(tiny, -1, &s, &e), ST_ERANGE);
    image_free(cut);
    image_free(none);
    image_free(tiny);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_disc),
        cmocka_unit_test(test_tilt_shows_as_aspect),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
