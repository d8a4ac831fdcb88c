/* station/viewer: the keys and the picture of each mode, without a window
 * (tests/ref/test_audit.py renders the window headless and checks its
 * screenshot against the evidence files).  Expected sizes worked by hand. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <SDL.h>
#include <string.h>

#include "station/viewer.h"

static void test_keys(void **state)
{
    (void)state;
    assert_int_equal(viewer_key(VIEWER_SIDE, SDLK_TAB), VIEWER_FRAME);
    assert_int_equal(viewer_key(VIEWER_FRAME, SDLK_SPACE), VIEWER_OVERLAY);
    assert_int_equal(viewer_key(VIEWER_OVERLAY, SDLK_TAB), VIEWER_SIDE);
    assert_int_equal(viewer_key(VIEWER_SIDE, SDLK_3), VIEWER_OVERLAY);
    assert_int_equal(viewer_key(VIEWER_OVERLAY, SDLK_2), VIEWER_FRAME);
    assert_int_equal(viewer_key(VIEWER_FRAME, SDLK_1), VIEWER_SIDE);
    assert_int_equal(viewer_key(VIEWER_FRAME, SDLK_a), VIEWER_FRAME);
    assert_int_equal(viewer_key(VIEWER_FRAME, SDLK_q), -1);
    assert_int_equal(viewer_key(VIEWER_SIDE, SDLK_ESCAPE), -1);
}

static struct image *filled(int w, int h, uint8_t v)
{
    struct err e;
    struct image *img = image_new(w, h, 3, &e);
    assert_non_null(img);
    memset(img->px, v, (size_t)w * h * 3);
    return img;
}

static void test_compose(void **state)
{
    (void)state;
    struct err e;
    struct image *f = filled(31, 17, 10), *o = filled(31, 17, 200);
    /* side by side: 31 + 8 + 31 = 70 wide, frame | grey gap | overlay */
    struct image *s = viewer_compose(f, o, VIEWER_SIDE, &e);
    assert_non_null(s);
    assert_int_equal(s->w, 70);
    assert_int_equal(s->h, 17);
    assert_int_equal(s->px[(5 * 70 + 30) * 3], 10);
    assert_int_equal(s->px[(5 * 70 + 31) * 3], 96);
    assert_int_equal(s->px[(5 * 70 + 38) * 3], 96);
    assert_int_equal(s->px[(5 * 70 + 39) * 3], 200);
    image_free(s);
    s = viewer_compose(f, o, VIEWER_OVERLAY, &e);
    assert_int_equal(s->w, 31);
    assert_int_equal(s->px[0], 200);
    image_free(s);
    /* no overlay: the frame whatever the mode */
    s = viewer_compose(f, NULL, VIEWER_SIDE, &e);
    assert_int_equal(s->w, 31);
    assert_int_equal(s->px[0], 10);
    image_free(s);
    struct image *wrong = filled(30, 17, 0);
    assert_null(viewer_compose(f, wrong, VIEWER_SIDE, &e));
    assert_int_equal(e.code, ST_EINVAL);
    image_free(wrong);
    image_free(f);
    image_free(o);
}

/* 1001 x 601 side by side is 2010 x 601: too wide for 1600, so the longer
 * side becomes 1600 and the height 601 * 1600 / 2010 = 478 (rounded down). */
static void test_compose_fits_the_screen(void **state)
{
    (void)state;
    struct err e;
    struct image *f = filled(1001, 601, 50), *o = filled(1001, 601, 150);
    struct image *s = viewer_compose(f, o, VIEWER_SIDE, &e);
    assert_non_null(s);
    assert_int_equal(s->w, 1600);
    assert_int_equal(s->h, 478);
    assert_true(s->w <= VIEWER_MAX_W && s->h <= VIEWER_MAX_H);
    image_free(s);
    image_free(f);
    image_free(o);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_keys),
        cmocka_unit_test(test_compose),
        cmocka_unit_test(test_compose_fits_the_screen),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
