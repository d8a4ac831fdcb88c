/* station/screen: the operator screen drawn by SDL's software renderer
 * under SDL's offscreen video driver, read back as PNG and checked pixel
 * by pixel; the report-to-state mapping; the keys, fed as synthetic SDL
 * events.  The snapshots stay in screen-shots/ beside this program for a
 * person to look at.
 *
 * Outside sources: the verdict colours are the Okabe & Ito (2008) palette
 * values as published ("Color Universal Design", J*FLY), written out here
 * independently of station/screen_paint.h; contrast is WCAG 2.1's
 * relative luminance and contrast ratio (success criterion 1.4.3, 4.5:1
 * for text); the key and text events are SDL2's documented SDL_KEYDOWN /
 * SDL_TEXTINPUT (what a USB HID barcode scanner in keyboard mode produces:
 * one character event per character, then Return). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <SDL.h>
#include <libgen.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "core/judge.h"
#include "core/overlay.h"
#include "core/regions.h"
#include "core/pngio.h"
#include "station/cli.h"
#include "station/report.h"
#include "station/screen.h"
#include "station/screen_layout.h"
#include "station/simbench.h"
#include "tests/testkit.h"

static const char recipe_text[] =
    "[product]\nformat = 1\nid = screen-test\nversion = 3\n"
    "[class background]\ndefect = no\ncolour = #1a1a1a\n"
    "[class surface]\ndefect = no\ncolour = #3c8c50\n"
    "[class scratch]\ndefect = yes\ncolour = #e0c020\n"
    "[class pit]\ndefect = yes\ncolour = #d03030\n"
    "[class stain]\ndefect = yes\ncolour = #3070e0\n"
    "[features]\nfamilies = gauss\nsigmas = 1\n"
    "[classifier]\nmodel = m.json\nrounds = 1\ndepth = 1\nlearning_rate = 0.3\nseed = 1\n"
    "threads = 1\nearly_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.2\n"
    "[scale]\nmm_per_px_x = 0.17\nmm_per_px_y = 0.17\n"
    "[zone rim]\nshape = ring\nradii = 16.5 19.5\n"
    "[tolerance scratch]\nmin_area_mm2 = 0.15\nmax_area_mm2 = 2.5\nmax_total_mm2 = 4\n"
    "max_count = 3\n"
    "[tolerance pit]\nmin_area_mm2 = 0.1\nmax_area_mm2 = 0.8\nmax_total_mm2 = none\n"
    "max_count = 2\n"
    "[tolerance stain]\nmin_area_mm2 = 1\nmax_area_mm2 = 30\nmax_total_mm2 = 40\n"
    "max_count = 2\n";

/* Okabe & Ito 2008: bluish green, vermilion, yellow, reddish purple, orange */
static const uint8_t OI_GREEN[3] = {0, 158, 115}, OI_VERMILION[3] = {213, 94, 0},
                     OI_YELLOW[3] = {240, 228, 66}, OI_PURPLE[3] = {204, 121, 167},
                     OI_ORANGE[3] = {230, 159, 0};

static struct recipe recipe;
static struct screen *scr;
static char shot_dir[512];
static struct screen_layout L;

static int group_setup(void **state)
{
    (void)state;
    /* SCREEN_TEST_DRIVER=x11 under xvfb-run draws on a real X server */
    const char *driver = getenv("SCREEN_TEST_DRIVER");
    setenv("SDL_VIDEODRIVER", driver ? driver : "offscreen", 1);
    SDL_SetHint(SDL_HINT_RENDER_DRIVER, "software");
    struct screen_options o;
    screen_options_init(&o);
    o.allow_offscreen = 1;
    struct err e;
    err_clear(&e);
    if (screen_new(&o, &scr, &e)) {
        fprintf(stderr, "%s\n", e.msg);
        return -1;
    }
    screen_layout_compute(o.width, o.height, &L);
    return 0;
}

static int group_teardown(void **state)
{
    (void)state;
    screen_free(scr);
    return 0;
}

/* ---- helpers ---- */

static int same(const uint8_t *p, const uint8_t rgb[3], int tol)
{
    return abs(p[0] - rgb[0]) <= tol && abs(p[1] - rgb[1]) <= tol && abs(p[2] - rgb[2]) <= tol;
}

static long count_rgb(const struct image *img, struct screen_rect r, const uint8_t rgb[3], int tol)
{
    long n = 0;
    for (int y = r.y; y < r.y + r.h; y++)
        for (int x = r.x; x < r.x + r.w; x++)
            n += same(&img->px[((size_t)y * img->w + x) * 3], rgb, tol);
    return n;
}

/* Pixels darker than 60 in every channel: the black ink of the panel. */
static long count_dark(const struct image *img, struct screen_rect r)
{
    static const uint8_t black[3] = {0, 0, 0};
    return count_rgb(img, r, black, 60);
}

static const uint8_t *pixel(const struct image *img, int x, int y)
{
    return &img->px[((size_t)y * img->w + x) * 3];
}

/* WCAG 2.1 relative luminance of an sRGB colour */
static double luminance(const uint8_t rgb[3])
{
    double l[3];
    for (int i = 0; i < 3; i++) {
        double c = rgb[i] / 255.0;
        l[i] = c <= 0.03928 ? c / 12.92 : pow((c + 0.055) / 1.055, 2.4);
    }
    return 0.2126 * l[0] + 0.7152 * l[1] + 0.0722 * l[2];
}

static double contrast(const uint8_t a[3], const uint8_t b[3])
{
    double la = luminance(a), lb = luminance(b);
    return la > lb ? (la + 0.05) / (lb + 0.05) : (lb + 0.05) / (la + 0.05);
}

/* Draws st, snapshots it to screen-shots/NAME.png and reads it back. */
static struct image *shot(const struct screen_state *st, const char *name)
{
    struct err e;
    err_clear(&e);
    char path[600];
    snprintf(path, sizeof path, "%s/%s.png", shot_dir, name);
    if (screen_draw(scr, st, &e) || screen_snapshot(scr, path, &e))
        fail_msg("%s", e.msg);
    struct image *img = NULL;
    if (pngio_load_rgb(path, &img, &e))
        fail_msg("%s", e.msg);
    assert_int_equal(img->w, 1280);
    assert_int_equal(img->h, 800);
    return img;
}

/* A simulated-bench frame: index i of seed 5, with or without defects. */
static struct image *bench_frame(int want_defects)
{
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    struct err e;
    for (int i = 0; i < 40; i++) {
        struct image *img, *truth;
        struct simbench_truth info;
        if (simbench_render(5, i, &c, 640, 480, &img, &truth, &info, &e))
            fail_msg("%s", e.msg);
        image_free(truth);
        if ((info.ndefects > 0) == want_defects)
            return img;
        image_free(img);
    }
    fail_msg("no simulated part %s defects in 40", want_defects ? "with" : "without");
    return NULL;
}

static void base_state(struct screen_state *st)
{
    screen_state_init(st);
    snprintf(st->recipe, sizeof st->recipe, "screen-test version 3");
    snprintf(st->calibration, sizeof st->calibration,
             "0.1700 mm/px, made 2026-11-20, valid 23 more days");
    snprintf(st->camera, sizeof st->camera, "simulated bench 640 x 480");
    st->fps = 29.97;
    snprintf(st->status, sizeof st->status, "waiting for a part");
    snprintf(st->operator_id, sizeof st->operator_id, "A. Lindqvist");
    snprintf(st->serial, sizeof st->serial, "SN-0041");
    st->inspected = 128;
    st->passed = 119;
    st->failed = 7;
    st->no_verdict = 2;
}

/* A reason in the judge's own words, as report.c writes it. */
static json_t *reason(const char *rule, int cls, int zone, int region, double measured,
                      double limit, const char *unit)
{
    struct reason x = {.cls = cls, .zone = zone, .region = region, .measured = measured,
                       .limit = limit};
    snprintf(x.rule, sizeof x.rule, "%s", rule);
    snprintf(x.unit, sizeof x.unit, "%s", unit);
    char words[200];
    judge_describe_reason(&recipe, &x, words, sizeof words);
    return json_pack("{s:s,s:s,s:o,s:o,s:f,s:f,s:s,s:s,s:s}", "rule", rule, "class",
                     cls >= 0 ? recipe.cls[cls].name : "image", "zone",
                     zone >= 0 ? json_string(recipe.zones[zone].name) : json_null(), "region",
                     region > 0 ? json_integer(region) : json_null(), "measured", measured,
                     "limit", limit, "limit_kind", "max", "unit", unit, "text", words);
}

static json_t *region(int id, const char *cls, double mm2, int counted)
{
    return json_pack("{s:i,s:s,s:n,s:i,s:f,s:b}", "id", id, "class", cls, "zone", "pixels",
                     (int)(mm2 / 0.0289), "area_mm2", mm2, "counted", counted);
}

/* A FAIL report with report.c's keys (schema 1): two scratches and a
 * small one under min_area, two pits, seven reasons of which six fit, and
 * two more the judge left out. */
static json_t *fail_report(void)
{
    json_t *reasons = json_array();
    json_array_append_new(reasons, reason("max_area", 2, 0, 3, 2.91, 2.5, "mm2"));
    json_array_append_new(reasons, reason("max_count", 3, -1, 0, 3, 2, "count"));
    json_array_append_new(reasons, reason("max_area", 3, -1, 5, 0.93, 0.8, "mm2"));
    for (int i = 0; i < 4; i++)
        json_array_append_new(reasons, reason("max_area", 3, -1, 6 + i, 0.9 + i * 0.01, 0.8,
                                              "mm2"));
    json_t *regions = json_array();
    json_array_append_new(regions, region(3, "scratch", 2.91, 1));
    json_array_append_new(regions, region(4, "scratch", 0.52, 1));
    json_array_append_new(regions, region(5, "scratch", 0.08, 0));
    json_array_append_new(regions, region(6, "pit", 0.93, 1));
    json_array_append_new(regions, region(7, "pit", 0.31, 1));
    json_array_append_new(regions, region(8, "pit", 0.22, 1));
    return json_pack("{s:i,s:s,s:s,s:o,s:i,s:o,s:s,s:i,s:I}", "schema", REPORT_SCHEMA, "image",
                     "bench-0007.png", "verdict", "FAIL", "reasons", reasons, "reasons_omitted",
                     2, "regions", regions, "recipe", "screen-test", "recipe_version", 3,
                     "log_seq", (json_int_t)1207);
}

/* The judge's own verdict on a simulated part's truth map
 * (judge_tolerances, as the evaluation judges known truth), written with
 * report.c's keys: reasons in judge_describe_reason's words, regions with
 * judge_region_counts. */
static json_t *truth_report(const struct region_set *rs, const struct judgement *j)
{
    json_t *reasons = json_array(), *regions = json_array();
    for (int i = 0; i < j->nreasons; i++) {
        const struct reason *x = &j->reasons[i];
        json_array_append_new(reasons, reason(x->rule, x->cls, x->zone, x->region, x->measured,
                                              x->limit, x->unit));
    }
    for (int i = 0; i < rs->n; i++)
        json_array_append_new(regions, region(rs->r[i].id, recipe.cls[rs->r[i].cls].name,
                                              rs->r[i].area_mm2,
                                              judge_region_counts(&recipe, &rs->r[i])));
    return json_pack("{s:i,s:s,s:s,s:o,s:i,s:o,s:I}", "schema", REPORT_SCHEMA, "image", "bench",
                     "verdict", judge_verdict_name(j->verdict), "reasons", reasons,
                     "reasons_omitted", j->omitted, "regions", regions, "log_seq",
                     (json_int_t)1208);
}

/* ---- tests ---- */

static void test_refuses_offscreen_without_the_flag(void **state)
{
    (void)state;
    if (strcmp(SDL_GetCurrentVideoDriver(), "offscreen"))
        skip();
    struct screen_options o;
    screen_options_init(&o);
    struct screen *s = (struct screen *)&o;
    struct err e;
    err_clear(&e);
    assert_int_not_equal(screen_new(&o, &s, &e), ST_OK);
    assert_null(s);
    assert_non_null(strstr(e.msg, "'offscreen'"));
    assert_non_null(strstr(e.msg, "--headless"));
    assert_null(strchr(e.msg, '\n'));
}

static void test_missing_font_names_the_path(void **state)
{
    (void)state;
    struct screen_options o;
    screen_options_init(&o);
    o.allow_offscreen = 1;
    o.font = "/nonexistent/NoSuchFont.ttf";
    struct screen *s = NULL;
    struct err e;
    err_clear(&e);
    assert_int_equal(screen_new(&o, &s, &e), ST_EIO);
    assert_null(s);
    assert_non_null(strstr(e.msg, "/nonexistent/NoSuchFont.ttf"));
}

/* 1280 x 800 by hand: header 26 + 18 + 3 x 8 = 68 high, caution 18 + 16 =
 * 34 at the bottom, input 22 + 24 = 46 above it; the picture takes the
 * left 3/5 (768 px) less an 8 px margin on the left, between header
 * and input. */
static void test_layout(void **state)
{
    (void)state;
    assert_int_equal(L.header.h, 68);
    assert_int_equal(L.caution.y, 766);
    assert_int_equal(L.caution.y + L.caution.h, 800);
    assert_int_equal(L.input.y, 720);
    assert_int_equal(L.picture.x, 8);
    assert_int_equal(L.picture.y, 68);
    assert_int_equal(L.picture.w, 760);
    assert_int_equal(L.picture.h, 652);
    /* the right column stacks without overlap and stays on screen */
    assert_true(L.verdict.x >= L.picture.x + L.picture.w);
    assert_true(L.reasons.y >= L.verdict.y + L.verdict.h);
    assert_true(L.bars.y >= L.reasons.y + L.reasons.h);
    assert_true(L.counters.y >= L.bars.y + L.bars.h);
    assert_true(L.counters.y + L.counters.h <= L.input.y);
    assert_true(L.verdict.x + L.verdict.w <= 1280);
    assert_true(L.symbol.x + L.symbol.w <= L.word.x);
    /* 4:3 into 760 x 652: full width, 760 * 480 / 640 = 570 high, bands of
     * (652 - 570) / 2 = 41 above and below */
    struct screen_rect f = screen_layout_fit(640, 480, L.picture);
    assert_int_equal(f.x, 8);
    assert_int_equal(f.w, 760);
    assert_int_equal(f.h, 570);
    assert_int_equal(f.y, 68 + 41);
    /* 1:2 portrait: full height 652, width 326, centred: 8 + (760 - 326) / 2 = 225 */
    f = screen_layout_fit(100, 200, L.picture);
    assert_int_equal(f.h, 652);
    assert_int_equal(f.w, 326);
    assert_int_equal(f.x, 225);
    /* 1279 x 1 (wider than any area): full width, height rounded down to 0 */
    f = screen_layout_fit(1279, 1, L.picture);
    assert_int_equal(f.w, 760);
    assert_int_equal(f.h, 0);
}

static void test_state_from_report(void **state)
{
    (void)state;
    struct screen_state st;
    screen_state_init(&st);
    assert_int_equal(st.verdict, -1);
    json_t *rep = fail_report();
    screen_state_set_report(&st, &recipe, rep);
    assert_int_equal(st.verdict, VERDICT_FAIL);
    assert_int_equal(st.log_seq, 1207);
    /* seven reasons, six shown; one left plus the judge's two omitted */
    assert_int_equal(st.nreasons, SCREEN_MAX_REASONS);
    assert_int_equal(st.more_reasons, 3);
    const json_t *r0 = json_array_get(json_object_get(rep, "reasons"), 0);
    assert_string_equal(st.reasons[0], json_string_value(json_object_get(r0, "text")));
    assert_non_null(strstr(st.reasons[0], "2.91"));
    assert_non_null(strstr(st.reasons[0], "mm²"));
    /* one bar per defect class in recipe order */
    assert_int_equal(st.nbars, 3);
    assert_string_equal(st.bars[0].name, "scratch");
    /* counted scratches 2.91 + 0.52 (the 0.08 one is not counted) of max_total 4 */
    assert_true(fabs(st.bars[0].value - 3.43) < 1e-9);
    assert_true(fabs(st.bars[0].limit - 4) < 1e-9);
    assert_string_equal(st.bars[0].unit, "mm²");
    /* pit has no area limit: its count 3 against max_count 2 */
    assert_string_equal(st.bars[1].name, "pit");
    assert_true(fabs(st.bars[1].value - 3) < 1e-9);
    assert_true(fabs(st.bars[1].limit - 2) < 1e-9);
    assert_string_equal(st.bars[1].unit, "regions");
    assert_true(fabs(st.bars[2].value) < 1e-9);
    assert_true(fabs(st.bars[2].limit - 40) < 1e-9);
    json_decref(rep);

    /* report_json_error's own shape: NO_VERDICT, the message as the reason */
    struct err e;
    err_set(&e, ST_EFORMAT, "bench-0009.png: truncated or corrupt PNG");
    rep = report_json_error("bench-0009.png", &e);
    screen_state_set_report(&st, &recipe, rep);
    assert_int_equal(st.verdict, VERDICT_NONE);
    assert_int_equal(st.log_seq, -1);
    assert_int_equal(st.nreasons, 1);
    assert_string_equal(st.reasons[0], e.msg);
    assert_int_equal(st.more_reasons, 0);
    /* not judged, so no bars (the FAIL report's bars are gone too) */
    assert_int_equal(st.nbars, 0);
    json_decref(rep);

    /* a verdict word the screen does not know is no verdict, never PASS */
    rep = json_pack("{s:i,s:s,s:[],s:[]}", "schema", 1, "verdict", "MAYBE", "reasons", "regions");
    screen_state_set_report(&st, &recipe, rep);
    assert_int_equal(st.verdict, VERDICT_NONE);
    json_decref(rep);
}

/* A 640 x 480 frame in four solid quadrants, none a screen colour. */
static struct image *quadrants(void)
{
    static const uint8_t q[4][3] = {{200, 30, 200}, {30, 200, 30}, {30, 30, 200}, {140, 140, 20}};
    struct err e;
    struct image *img = image_new(640, 480, 3, &e);
    assert_non_null(img);
    for (int y = 0; y < 480; y++)
        for (int x = 0; x < 640; x++)
            memcpy(&img->px[((size_t)y * 640 + x) * 3], q[(y >= 240) * 2 + (x >= 320)], 3);
    return img;
}

static void test_picture_letterboxed(void **state)
{
    (void)state;
    struct image *frame = quadrants();
    struct screen_state st;
    base_state(&st);
    st.frame = frame;
    struct image *img = shot(&st, "screen-letterbox");
    struct screen_rect f = screen_layout_fit(640, 480, L.picture);
    static const uint8_t black[3] = {0, 0, 0};
    /* the bands above and below are black, the picture fills the width */
    struct screen_rect top = {L.picture.x, L.picture.y, L.picture.w, f.y - L.picture.y};
    struct screen_rect bottom = {L.picture.x, f.y + f.h, L.picture.w,
                                 L.picture.y + L.picture.h - f.y - f.h};
    assert_true(top.h > 30 && bottom.h > 30);
    assert_int_equal(count_rgb(img, top, black, 0), (long)top.w * top.h);
    assert_int_equal(count_rgb(img, bottom, black, 0), (long)bottom.w * bottom.h);
    /* each quadrant's middle lands where the aspect-kept scaling puts it */
    for (int qy = 0; qy < 2; qy++)
        for (int qx = 0; qx < 2; qx++) {
            int x = f.x + f.w * (2 * qx + 1) / 4, y = f.y + f.h * (2 * qy + 1) / 4;
            const uint8_t *want = &frame->px[((size_t)(120 + 240 * qy) * 640 + 160 + 320 * qx) * 3];
            assert_true(same(pixel(img, x, y), want, 0));
        }
    /* the picture's first and last rows are the frame's, not a band */
    assert_true(same(pixel(img, f.x + 5, f.y), frame->px, 0));
    assert_true(same(pixel(img, f.x + 5, f.y + f.h - 1), &frame->px[(size_t)479 * 640 * 3], 0));
    image_free(img);

    /* F3 with a current verdict: the overlay replaces the live picture */
    struct err e;
    struct image *ov = image_new(320, 240, 3, &e);
    memset(ov->px, 77, (size_t)320 * 240 * 3);
    st.overlay = ov;
    st.show_overlay = 1;
    st.verdict = VERDICT_FAIL;
    img = shot(&st, "screen-overlay");
    static const uint8_t grey77[3] = {77, 77, 77};
    assert_true(same(pixel(img, f.x + f.w / 2, f.y + f.h / 4), grey77, 0));
    /* without a verdict there is nothing the overlay belongs to */
    st.verdict = -1;
    image_free(img);
    img = shot(&st, "screen-overlay-no-verdict");
    assert_false(same(pixel(img, f.x + f.w / 2, f.y + f.h / 4), grey77, 0));
    image_free(img);
    image_free(ov);
    image_free(frame);
}

/* The share of the verdict panel in exactly the verdict colour. */
static double panel_share(const struct image *img, const uint8_t rgb[3])
{
    return (double)count_rgb(img, L.verdict, rgb, 0) / ((double)L.verdict.w * L.verdict.h);
}

static void check_panel(const struct image *img, const uint8_t rgb[3])
{
    assert_true(panel_share(img, rgb) > 0.5);
    /* the word is drawn in black ink, readable on the colour */
    assert_true(count_dark(img, L.word) > 800);
    static const uint8_t black[3] = {0, 0, 0};
    assert_true(contrast(rgb, black) >= 4.5);
    /* the caution is always on screen: light text on the black band */
    static const uint8_t light[3] = {242, 242, 242};
    assert_true(count_rgb(img, L.caution, light, 40) > 800);
}

/* Dark pixels of the symbol square, as a mask. */
static void symbol_mask(const struct image *img, uint8_t *mask)
{
    for (int y = 0; y < L.symbol.h; y++)
        for (int x = 0; x < L.symbol.w; x++) {
            const uint8_t *p = pixel(img, L.symbol.x + x, L.symbol.y + y);
            mask[y * L.symbol.w + x] = p[0] < 60 && p[1] < 60 && p[2] < 60;
        }
}

static void test_verdict_states(void **state)
{
    (void)state;
    struct image *good = bench_frame(0), *bad = bench_frame(1);
    struct screen_state st;
    base_state(&st);
    st.frame = good;
    st.verdict = VERDICT_PASS;
    st.log_seq = 1206;
    st.nbars = 0;
    json_t *rep = json_pack("{s:i,s:s,s:[],s:[],s:I}", "schema", 1, "verdict", "PASS",
                            "reasons", "regions", "log_seq", (json_int_t)1206);
    screen_state_set_report(&st, &recipe, rep);
    json_decref(rep);
    struct image *pass = shot(&st, "screen-pass");
    check_panel(pass, OI_GREEN);

    base_state(&st);
    st.frame = bad;
    rep = fail_report();
    screen_state_set_report(&st, &recipe, rep);
    json_decref(rep);
    snprintf(st.status, sizeof st.status, "remove the part");
    struct image *fail = shot(&st, "screen-fail");
    check_panel(fail, OI_VERMILION);
    /* an over-limit bar shows vermilion inside the bars section too */
    assert_true(count_rgb(fail, L.bars, OI_VERMILION, 0) > 200);

    base_state(&st);
    st.frame = good;
    struct err e;
    err_set(&e, ST_EINVAL, "too dark: part level 31 < 40");
    rep = report_json_error("live", &e);
    screen_state_set_report(&st, &recipe, rep);
    json_decref(rep);
    struct image *none = shot(&st, "screen-no-verdict");
    check_panel(none, OI_YELLOW);

    /* told apart by shape, not only colour: the symbols differ in much of
     * their square (tick against cross, cross against hatch) */
    size_t n = (size_t)L.symbol.w * L.symbol.h;
    uint8_t *a = malloc(n), *b = malloc(n), *c = malloc(n);
    symbol_mask(pass, a);
    symbol_mask(fail, b);
    symbol_mask(none, c);
    size_t ab = 0, bc = 0, inked = 0;
    for (size_t i = 0; i < n; i++) {
        ab += a[i] != b[i];
        bc += b[i] != c[i];
        inked += a[i];
    }
    assert_true(inked > n / 20);
    assert_true(ab > n / 20);
    assert_true(bc > n / 20);
    free(a);
    free(b);
    free(c);
    /* and each panel is in its own colour only */
    assert_true(panel_share(pass, OI_VERMILION) < 0.01 && panel_share(fail, OI_GREEN) < 0.01);
    assert_true(panel_share(none, OI_GREEN) < 0.01 && panel_share(none, OI_VERMILION) < 0.01);
    image_free(pass);
    image_free(fail);
    image_free(none);
    image_free(good);
    image_free(bad);
}

/* A simulated part the judge fails: the bars are the judge's own totals,
 * the reasons its own words; F3 shows the overlay core/overlay draws. */
static void test_judged_bench_part(void **state)
{
    (void)state;
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    struct err e;
    struct region_set rs;
    regions_init(&rs);
    struct regions_opts o;
    judge_regions_opts(&recipe, NULL, &o);
    struct judgement j;
    struct image *frame = NULL, *truth = NULL;
    int i;
    for (i = 0; i < 60; i++) {
        assert_int_equal(simbench_render(11, i, &cond, 480, 360, &frame, &truth, NULL, &e), ST_OK);
        assert_int_equal(regions_find(&rs, truth, NULL, &o, &e), ST_OK);
        judge_tolerances(&recipe, &rs, &j);
        if (j.verdict == VERDICT_FAIL && j.nreasons >= 2)
            break;
        image_free(frame);
        image_free(truth);
    }
    assert_true(i < 60);
    json_t *rep = truth_report(&rs, &j);
    struct screen_state st;
    base_state(&st);
    screen_state_set_report(&st, &recipe, rep);
    json_decref(rep);
    assert_int_equal(st.verdict, VERDICT_FAIL);
    char words[200];
    judge_describe_reason(&recipe, &j.reasons[0], words, sizeof words);
    assert_string_equal(st.reasons[0], words);
    for (int b = 0, c = 0; c < recipe.nclasses; c++) {
        if (!recipe.cls[c].is_defect)
            continue;
        double want = recipe.tol[c].max_total_mm2 < 0 ? j.count[c] : j.total_mm2[c];
        assert_true(fabs(st.bars[b++].value - want) < 1e-9);
    }
    struct image *ov = overlay_inspection(frame, truth, &rs, NULL, &recipe, &j, &e);
    assert_non_null(ov);
    st.frame = frame;
    st.overlay = ov;
    st.show_overlay = 1;
    snprintf(st.camera, sizeof st.camera, "simulated bench 480 x 360");
    snprintf(st.status, sizeof st.status, "remove the part");
    struct image *img = shot(&st, "screen-fail-overlay");
    check_panel(img, OI_VERMILION);
    /* the overlay, taller than the frame by its banner, keeps its own aspect */
    struct screen_rect f = screen_layout_fit(ov->w, ov->h, L.picture);
    assert_true(f.w < L.picture.w && f.h == L.picture.h);
    static const uint8_t black[3] = {0, 0, 0};
    struct screen_rect left = {L.picture.x, L.picture.y, f.x - L.picture.x, L.picture.h};
    assert_int_equal(count_rgb(img, left, black, 0), (long)left.w * left.h);
    image_free(img);
    image_free(ov);
    image_free(frame);
    image_free(truth);
    regions_clear(&rs);
}

static void test_camera_lost_and_halted(void **state)
{
    (void)state;
    struct screen_state st;
    base_state(&st);
    st.camera_lost = 1;
    st.verdict = VERDICT_NONE;
    snprintf(st.camera, sizeof st.camera, "/dev/video2: device unplugged (ENODEV)");
    snprintf(st.status, sizeof st.status, "reconnecting to the camera");
    st.fps = 0;
    st.nreasons = 1;
    snprintf(st.reasons[0], SCREEN_TEXT, "camera lost: /dev/video2");
    struct image *lost = shot(&st, "screen-camera-lost");
    /* the picture area carries the orange notice and its words */
    assert_true(count_rgb(lost, L.picture, OI_ORANGE, 0) > 2000);
    static const uint8_t light[3] = {242, 242, 242};
    assert_true(count_rgb(lost, L.picture, light, 40) > 300);
    check_panel(lost, OI_YELLOW);
    image_free(lost);

    struct image *frame = quadrants();
    base_state(&st);
    st.frame = frame;
    st.verdict = VERDICT_PASS;
    snprintf(st.halted, sizeof st.halted,
             "the inspection log cannot be written: /var/lib/station/log.db: disk full");
    struct image *halt = shot(&st, "screen-halted");
    /* a halt outranks the last verdict: its own colour, not PASS's */
    check_panel(halt, OI_PURPLE);
    assert_true(panel_share(halt, OI_GREEN) < 0.01);
    /* and a band across the top of the picture says so */
    struct screen_rect band = {L.picture.x, L.picture.y, L.picture.w, 40};
    assert_true(count_rgb(halt, band, OI_PURPLE, 0) > band.w * band.h / 2);
    image_free(halt);
    image_free(frame);

    /* the key help (F1) over the picture: a sky-blue frame, the key names */
    base_state(&st);
    st.show_help = 1;
    struct image *help = shot(&st, "screen-help");
    static const uint8_t sky[3] = {86, 180, 233};
    assert_true(count_rgb(help, L.help, sky, 30) > 2 * (L.help.w + L.help.h));
    image_free(help);
}

static void flush(void)
{
    SDL_PumpEvents();
    SDL_FlushEvents(SDL_FIRSTEVENT, SDL_LASTEVENT);
}

static void push_text(const char *s)
{
    for (; *s; s++) {
        SDL_Event ev = {0};
        ev.type = SDL_TEXTINPUT;
        ev.text.text[0] = *s;
        assert_int_equal(SDL_PushEvent(&ev), 1);
    }
}

static void push_key(SDL_Keycode k)
{
    SDL_Event ev = {0};
    ev.type = SDL_KEYDOWN;
    ev.key.state = SDL_PRESSED;
    ev.key.keysym.sym = k;
    assert_int_equal(SDL_PushEvent(&ev), 1);
}

/* Polls until the queue is empty; counts each action. */
static void poll_all(struct screen_state *st, int counts[8])
{
    memset(counts, 0, 8 * sizeof counts[0]);
    while (SDL_PeepEvents(NULL, 0, SDL_PEEKEVENT, SDL_FIRSTEVENT, SDL_LASTEVENT) > 0)
        counts[screen_poll(scr, st, 0)]++;
}

static void test_keys(void **state)
{
    (void)state;
    struct screen_state st;
    screen_state_init(&st);
    int n[8];
    flush();
    /* a scanner's burst: characters, then Enter; lands in the serial, no
     * trigger, no quit, even with letters that are shortcuts elsewhere */
    push_text("SN-0042");
    push_key(SDLK_RETURN);
    poll_all(&st, n);
    assert_string_equal(st.serial, "SN-0042");
    assert_string_equal(st.input, "");
    assert_int_equal(n[SCREEN_COMMITTED], 1);
    assert_int_equal(n[SCREEN_TRIGGER] + n[SCREEN_QUIT] + n[SCREEN_SNAPSHOT] + n[SCREEN_RELEARN], 0);
    push_text("q Q\x1b");   /* a control character is dropped, printable ones kept */
    poll_all(&st, n);
    assert_string_equal(st.input, "q Q");
    assert_int_equal(n[SCREEN_QUIT], 0);
    /* Enter on an empty line is the key trigger */
    st.input[0] = 0;
    push_key(SDLK_RETURN);
    poll_all(&st, n);
    assert_int_equal(n[SCREEN_TRIGGER], 1);
    /* F2 switches to the operator field; Backspace edits */
    push_key(SDLK_F2);
    push_text("ANNX");
    push_key(SDLK_BACKSPACE);
    push_key(SDLK_KP_ENTER);
    poll_all(&st, n);
    assert_int_equal(st.field, SCREEN_FIELD_OPERATOR);
    assert_string_equal(st.operator_id, "ANN");
    assert_string_equal(st.serial, "SN-0042");
    /* function keys */
    push_key(SDLK_F5);
    push_key(SDLK_F6);
    push_key(SDLK_F12);
    push_key(SDLK_F3);
    push_key(SDLK_F1);
    poll_all(&st, n);
    assert_int_equal(n[SCREEN_TRIGGER], 1);
    assert_int_equal(n[SCREEN_RELEARN], 1);
    assert_int_equal(n[SCREEN_SNAPSHOT], 1);
    assert_int_equal(st.show_overlay, 1);
    assert_int_equal(st.show_help, 1);
    /* Escape closes the help, then clears a typed line, then quits */
    push_text("x");
    push_key(SDLK_ESCAPE);
    push_key(SDLK_ESCAPE);
    poll_all(&st, n);
    assert_int_equal(st.show_help, 0);
    assert_string_equal(st.input, "");
    assert_int_equal(n[SCREEN_QUIT], 0);
    push_key(SDLK_ESCAPE);
    poll_all(&st, n);
    assert_int_equal(n[SCREEN_QUIT], 1);
    /* a line longer than the operator field keeps what fits: 31 bytes */
    for (int i = 0; i < 9; i++)
        push_text("0123456");
    push_key(SDLK_RETURN);
    poll_all(&st, n);
    assert_int_equal(strlen(st.input), 0);
    assert_int_equal(strlen(st.operator_id), 31);
    assert_string_equal(st.serial, "SN-0042");
}

int main(int argc, char **argv)
{
    (void)argc;
    char self[512];
    snprintf(self, sizeof self, "%s", argv[0]);
    snprintf(shot_dir, sizeof shot_dir, "%s/screen-shots", dirname(self));
    mkdir(shot_dir, 0777);
    testkit_load_recipe(recipe_text, "", &recipe);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_refuses_offscreen_without_the_flag),
        cmocka_unit_test(test_missing_font_names_the_path),
        cmocka_unit_test(test_layout),
        cmocka_unit_test(test_state_from_report),
        cmocka_unit_test(test_picture_letterboxed),
        cmocka_unit_test(test_verdict_states),
        cmocka_unit_test(test_judged_bench_part),
        cmocka_unit_test(test_camera_lost_and_halted),
        cmocka_unit_test(test_keys),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
