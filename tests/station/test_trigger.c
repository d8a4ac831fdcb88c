/* station/trigger: the automatic trigger fires once per part placed and is
 * re-armed only after the part has left (with hysteresis), a frozen camera
 * is told from a still part under a live one, and the measures are what
 * recipes/README.md ([trigger]) defines them to be.  Expected frame numbers
 * and values are worked out by hand from those definitions beside each
 * check (no outside library computes this trigger; the block means are
 * plain arithmetic).  Frames are 96x64 (12 x 8 blocks of 8x8 = 96 blocks),
 * a dark mat of grey 40 with +-3 uniform noise and a bright square part. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <string.h>

#include "station/trigger.h"

#define W 96
#define H 64
#define NOPART -1000

static struct recipe_trigger params(void)
{
    /* the defaults recipes/README.md lists */
    return (struct recipe_trigger){RECIPE_TRIGGER_KEY, 5, 1.5, 24, 0.05, 0.02, 3, 10};
}

/* The mat with noise from `seed` and a pw x ph part of grey 170 at (px, 16). */
static void draw(struct image *img, int px, int pw, int ph, uint32_t seed)
{
    uint32_t s = seed * 2654435761u + 1;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            s = s * 1664525u + 1013904223u;
            int v = 40 + (int)((s >> 24) % 7) - 3;
            if (x >= px && x < px + pw && y >= 16 && y < 16 + ph)
                v = 170 + (int)((s >> 16) % 7) - 3;
            for (int c = 0; c < 3; c++)
                img->px[(y * W + x) * 3 + c] = (uint8_t)v;
        }
}

struct run {
    struct trigger *t;
    struct image *img;
    uint32_t frame;
    int fires;
};

static void run_open(struct run *r, int mode)
{
    struct err e = {0};
    struct recipe_trigger p = params();
    memset(r, 0, sizeof *r);
    assert_int_equal(trigger_new(&p, mode, &r->t, &e), ST_OK);
    r->img = image_new(W, H, 3, &e);
    assert_non_null(r->img);
}

static void run_close(struct run *r)
{
    trigger_free(r->t);
    image_free(r->img);
}

/* One frame with the part at px (NOPART: none) and size pw x ph. */
static unsigned feed(struct run *r, int px, int pw, int ph)
{
    struct err e = {0};
    unsigned ev;
    draw(r->img, px, pw, ph, r->frame++);
    assert_int_equal(trigger_feed(r->t, r->img, &ev, &e), ST_OK);
    r->fires += (ev & TRIGGER_FIRE) != 0;
    return ev;
}

static void test_auto_once_per_part(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_AUTO);
    /* frames 0..5 empty: frame 0 has no last frame, frames 1..5 are still,
     * so still_count reaches still_frames = 5 at frame 5: learned there */
    for (int i = 0; i < 5; i++)
        assert_false(feed(&r, NOPART, 0, 0) & TRIGGER_LEARNED);
    assert_true(feed(&r, NOPART, 0, 0) & TRIGGER_LEARNED);
    /* frames 6..8 the part (32x24 = 4x3 blocks, share 12/96 = 0.125 > 0.05)
     * slides in; frames 9.. it lies still at x 32: still_count 1 at frame 9,
     * 5 at frame 13 -> one inspection there, none after */
    feed(&r, 0, 32, 24);
    feed(&r, 16, 32, 24);
    feed(&r, 32, 32, 24);
    for (int i = 9; i < 13; i++)
        assert_false(feed(&r, 32, 32, 24) & TRIGGER_FIRE);
    assert_true(feed(&r, 32, 32, 24) & TRIGGER_FIRE);
    for (int i = 14; i < 19; i++)
        assert_false(feed(&r, 32, 32, 24) & TRIGGER_FIRE);
    struct trigger_view v;
    trigger_view(r.t, &v);
    assert_true(v.present && !v.armed);
    assert_true(v.presence == 12.0 / 96.0);
    /* frames 19, 20, 21 empty: share 0 < 0.02 for leave_frames = 3 frames,
     * armed again at frame 21, not before */
    feed(&r, NOPART, 0, 0);
    feed(&r, NOPART, 0, 0);
    trigger_view(r.t, &v);
    assert_true(v.present && !v.armed);
    feed(&r, NOPART, 0, 0);
    trigger_view(r.t, &v);
    assert_true(!v.present && v.armed);
    /* the next part at x 48: frame 22 it appears (moving), 23..27 still:
     * fires at frame 27 */
    feed(&r, 48, 32, 24);
    for (int i = 23; i < 27; i++)
        assert_false(feed(&r, 48, 32, 24) & TRIGGER_FIRE);
    assert_true(feed(&r, 48, 32, 24) & TRIGGER_FIRE);
    assert_int_equal(r.fires, 2);
    run_close(&r);
}

/* A part half out of view (share between leave_share and enter_share), or
 * gone for fewer than leave_frames frames, has not left: no second
 * inspection of the same part. */
static void test_hysteresis(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_AUTO);
    for (int i = 0; i < 6; i++)
        feed(&r, NOPART, 0, 0);
    for (int i = 0; i < 8; i++)
        feed(&r, 32, 32, 24);
    assert_int_equal(r.fires, 1);
    /* a 24x8 part: 3 x 1 blocks, share 3/96 = 0.031, for 10 frames */
    for (int i = 0; i < 10; i++)
        feed(&r, 32, 24, 8);
    /* gone for 2 frames only (leave_frames 3), then back */
    feed(&r, NOPART, 0, 0);
    feed(&r, NOPART, 0, 0);
    for (int i = 0; i < 10; i++)
        feed(&r, 32, 32, 24);
    assert_int_equal(r.fires, 1);
    struct trigger_view v;
    trigger_view(r.t, &v);
    assert_true(v.present && !v.armed);
    /* the camera was lost meanwhile and the part got its record that way:
     * disarmed until it leaves, even after a relearn-free restart */
    trigger_restart(r.t);
    trigger_disarm(r.t);
    for (int i = 0; i < 8; i++)
        feed(&r, 32, 32, 24);
    assert_int_equal(r.fires, 1);
    run_close(&r);
}

/* K identical frames are a frozen camera; a still part under a live
 * (noisy) camera never is; nothing fires while frozen, even continuous. */
static void test_frozen_camera(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_CONTINUOUS);
    for (int i = 0; i < 100; i++)
        assert_false(feed(&r, 32, 32, 24) & TRIGGER_FROZEN);
    assert_int_equal(r.fires, 100);
    /* the same bytes again and again: the 10th identical frame in a row
     * (frozen_frames 10) is the first frozen one */
    struct err e = {0};
    unsigned ev;
    draw(r.img, 32, 32, 24, 12345);
    int fires = 0, frozen_at = -1;
    for (int i = 1; i <= 15; i++) {
        assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
        fires += (ev & TRIGGER_FIRE) != 0;
        if (ev & TRIGGER_FROZEN)
            frozen_at = i;
    }
    assert_int_equal(frozen_at, 10);
    assert_int_equal(fires, 9);
    /* the picture moves again */
    assert_true(feed(&r, 32, 32, 24) & TRIGGER_MOVING);
    assert_true(feed(&r, 32, 32, 24) & TRIGGER_FIRE);
    run_close(&r);
}

/* A camera that freezes while a part slides in: the repeated frames are not
 * "still", so the auto trigger never fires on them; the 10th identical
 * frame is the frozen camera. */
static void test_frozen_mid_motion(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_AUTO);
    for (int i = 0; i < 6; i++)
        feed(&r, NOPART, 0, 0);
    feed(&r, 0, 32, 24);
    struct err e = {0};
    unsigned ev, all = 0;
    draw(r.img, 16, 32, 24, 999);
    int frozen_at = -1;
    for (int i = 1; i <= 20; i++) {
        assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
        all |= ev;
        if (ev & TRIGGER_FROZEN)
            frozen_at = i;
    }
    assert_false(all & TRIGGER_FIRE);
    assert_int_equal(frozen_at, 10);
    struct trigger_view v;
    trigger_view(r.t, &v);
    assert_true(v.frozen && v.present && v.armed && v.still_count == 0);
    run_close(&r);
}

/* The measures by hand: every pixel 3 levels brighter is a stillness of
 * exactly 3; a block-aligned 16x16 square is 4 of 96 blocks. */
static void test_measures(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_KEY);
    struct err e = {0};
    unsigned ev;
    struct trigger_view v;
    memset(r.img->px, 40, (size_t)W * H * 3);
    assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
    trigger_view(r.t, &v);
    assert_true(v.stillness == -1 && v.presence == -1 && !v.learned);
    memset(r.img->px, 43, (size_t)W * H * 3);
    assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
    trigger_view(r.t, &v);
    assert_true(v.stillness == 3.0);
    /* still frames alternating 44/43 (a change of 1 level, never identical):
     * learned at the 5th still frame; key mode never fires */
    for (int i = 0; i < 5; i++) {
        memset(r.img->px, 44 - (i & 1), (size_t)W * H * 3);
        assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
        assert_false(ev & TRIGGER_FIRE);
    }
    trigger_view(r.t, &v);
    assert_true(v.learned);
    for (int y = 16; y < 32; y++)
        memset(r.img->px + ((size_t)y * W + 16) * 3, 100, 16 * 3);
    assert_int_equal(trigger_feed(r.t, r.img, &ev, &e), ST_OK);
    trigger_view(r.t, &v);
    assert_true(v.presence == 4.0 / 96.0);
    /* 4/96 = 0.042 is below enter_share 0.05: not a part yet */
    assert_true(!v.present && !(ev & TRIGGER_FIRE));
    /* a frame smaller than one block is refused, naming the size */
    struct image *tiny = image_new(7, 7, 3, &e);
    assert_int_equal(trigger_feed(r.t, tiny, &ev, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "7x7"));
    image_free(tiny);
    assert_int_equal(trigger_mode_parse("continuous"), RECIPE_TRIGGER_CONTINUOUS);
    assert_int_equal(trigger_mode_parse("sometimes"), -1);
    assert_string_equal(trigger_mode_name(RECIPE_TRIGGER_AUTO), "auto");
    run_close(&r);
}

/* F6: the bench learned again (after the light changed) at the next still
 * view, so the part now counts against the new empty view. */
static void test_relearn(void **state)
{
    (void)state;
    struct run r;
    run_open(&r, RECIPE_TRIGGER_AUTO);
    for (int i = 0; i < 6; i++)
        feed(&r, NOPART, 0, 0);
    trigger_relearn(r.t);
    int learned_at = -1;
    for (int i = 0; i < 6; i++)
        if (feed(&r, NOPART, 0, 0) & TRIGGER_LEARNED)
            learned_at = i;
    /* still_count is already past 5, so the very next frame is learned */
    assert_int_equal(learned_at, 0);
    run_close(&r);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_auto_once_per_part),
        cmocka_unit_test(test_hysteresis),
        cmocka_unit_test(test_frozen_camera),
        cmocka_unit_test(test_frozen_mid_motion),
        cmocka_unit_test(test_measures),
        cmocka_unit_test(test_relearn),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
