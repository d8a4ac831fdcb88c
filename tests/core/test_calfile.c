/* The calibration file, the recipe's [scale] calibration and the
 * calibration_expired gate.
 *
 * Sources: the seconds of a UTC date are checked against the formula of
 * POSIX.1-2008, Base Definitions 4.16 "Seconds Since the Epoch"; the
 * rest is our own format (README.md, "Calibration file") and the rule that
 * an expired calibration gives NO VERDICT (issue 6: a station only as
 * trustworthy as its last check). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/calfile.h"
#include "core/judge.h"

static char dir[64];

static void path_in(char *buf, size_t n, const char *name)
{
    snprintf(buf, n, "%s/%s", dir, name);
}

/* POSIX.1-2008 4.16, with tm_year counted from 1900 and tm_yday from 0. */
static long long posix_seconds(int year, int yday, int hour, int min, int sec)
{
    long long y = year - 1900;
    return sec + min * 60 + hour * 3600 + (long long)yday * 86400 + (y - 70) * 31536000 +
           ((y - 69) / 4) * 86400 - ((y - 1) / 100) * 86400 + ((y + 299) / 400) * 86400;
}

static struct calfile sample(void)
{
    struct calfile c;
    memset(&c, 0, sizeof c);
    c.format = CALFILE_FORMAT;
    snprintf(c.camera, sizeof c.camera, "bench-2.left");
    c.width = 640;
    c.height = 480;
    c.mm_per_px_x = 0.0731;
    c.mm_per_px_y = 0.0742;
    double h[9] = {0.07, 0.001, -20.5, -0.002, 0.075, -15.25, 1e-5, -2e-5, 1};
    memcpy(c.image_to_plane, h, sizeof h);
    c.tilt_deg = 3.5;
    c.rms_px = 0.12;
    c.worst_px = 0.4;
    c.rms_mm = 0.009;
    c.worst_mm = 0.03;
    c.board_cols = 9;
    c.board_rows = 6;
    c.square_mm = 4.5;
    c.views = 3;
    c.has_lens = 1;
    c.lens.fx = 1200.5;
    c.lens.fy = 1201.25;
    c.lens.cx = 320.5;
    c.lens.cy = 241;
    c.lens.k1 = -0.21;
    c.lens.k2 = 0.07;
    c.lens_corrected = 1;
    c.lens_rms_px = 0.2;
    c.created = posix_seconds(2026, 334, 12, 34, 56); /* 2026-12-01 is day 334 */
    c.valid_days = 30;
    return c;
}

static void test_round_trip(void **state)
{
    (void)state;
    char p[128];
    path_in(p, sizeof p, "a.json");
    struct calfile c = sample(), d;
    struct err e = {0};
    assert_int_equal(calfile_save(p, &c, &e), ST_OK);
    assert_int_equal(calfile_load(p, &d, &e), ST_OK);
    assert_string_equal(d.camera, c.camera);
    assert_int_equal(d.width, 640);
    assert_int_equal(d.height, 480);
    for (int i = 0; i < 9; i++)
        assert_true(d.image_to_plane[i] == c.image_to_plane[i]);
    assert_true(d.mm_per_px_x == c.mm_per_px_x && d.mm_per_px_y == c.mm_per_px_y);
    assert_true(d.worst_mm == c.worst_mm && d.rms_px == c.rms_px && d.tilt_deg == c.tilt_deg);
    assert_true(d.has_lens && d.lens.fx == c.lens.fx && d.lens.k2 == c.lens.k2 &&
                d.lens_corrected == c.lens_corrected);
    assert_int_equal(d.views, 3);
    assert_int_equal(d.valid_days, 30);
    assert_true(d.created == c.created);
    char when[32];
    calfile_format_time(c.created, when, sizeof when);
    assert_string_equal(when, "2026-12-01T12:34:56Z");
    /* a leap day: 2024-02-29 is day 59 of 2024 */
    calfile_format_time(posix_seconds(2024, 59, 0, 0, 0), when, sizeof when);
    assert_string_equal(when, "2024-02-29T00:00:00Z");
    unlink(p);
}

/* Writes text to name and returns the load's status, e filled. */
static int load_text(const char *text, struct err *e)
{
    char p[128];
    path_in(p, sizeof p, "bad.json");
    FILE *f = fopen(p, "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
    struct calfile c;
    int rc = calfile_load(p, &c, e);
    unlink(p);
    return rc;
}

static void test_refusals(void **state)
{
    (void)state;
    char p[128], text[4096];
    path_in(p, sizeof p, "good.json");
    struct calfile c = sample();
    struct err e = {0};
    assert_int_equal(calfile_save(p, &c, &e), ST_OK);
    FILE *f = fopen(p, "r");
    size_t n = fread(text, 1, sizeof text - 1, f);
    fclose(f);
    unlink(p);
    text[n] = '\0';
    static const struct {
        const char *from, *to, *says;
        int code;
    } cases[] = {
        {"\"format\": 2", "\"format\": 3", "newer than this station supports (2)", ST_EFORMAT},
        {"\"corrected_pixels\": true", "\"corrected_pixels\": 1", "'lens.corrected_pixels'",
         ST_EFORMAT},
        /* 1 + 3 k1 r^2 + 5 k2 r^4 < 0 before the corners (r^2 = 0.11): the model folds */
        {"\"k1\": -0.2", "\"k1\": -5.2", "cannot be undone over the 640x480 frame", ST_ERANGE},
        {"\"valid_days\": 30", "\"valid_days\": 0", "'valid_days' = 0 outside", ST_ERANGE},
        {"\"created\": \"2026-12-01T12:34:56Z\"", "\"created\": \"2026-02-30T12:34:56Z\"",
         "'created'", ST_EFORMAT},
        {"\"camera\": \"bench-2.left\"", "\"camera\": \"bench 2\"", "'camera'", ST_EFORMAT},
        {"\"width\": 640", "\"width\": 640.5", "'width' missing or not an integer", ST_EFORMAT},
        {"\"mm_per_px_x\": 0", "\"mm_per_px_x\": -0", "'mm_per_px_x'", ST_ERANGE},
        {"\"views\": 3", "\"views\": \"3\"", "'views'", ST_EFORMAT},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char edited[4096];
        const char *at = strstr(text, cases[i].from);
        assert_non_null(at);
        snprintf(edited, sizeof edited, "%.*s%s%s", (int)(at - text), text, cases[i].to,
                 at + strlen(cases[i].from));
        int rc = load_text(edited, &e);
        if (rc != cases[i].code || !strstr(e.msg, cases[i].says) || !strstr(e.msg, "bad.json"))
            fail_msg("case %zu: rc %d, '%s'", i, rc, e.msg);
    }
    /* a format 1 file's homography was fitted to the pixels as seen, so its
     * lens is never applied before it, whatever else the file says */
    char old[4096];
    const char *at = strstr(text, "\"format\": 2");
    assert_non_null(at);
    snprintf(old, sizeof old, "%.*s\"format\": 1%s", (int)(at - text), text, at + 11);
    path_in(p, sizeof p, "old.json");
    f = fopen(p, "w");
    fputs(old, f);
    fclose(f);
    assert_int_equal(calfile_load(p, &c, &e), ST_OK);
    unlink(p);
    assert_true(c.has_lens && c.lens.k1 == -0.21 && !c.lens_corrected);
    assert_int_equal(load_text("[1, 2]", &e), ST_EFORMAT);
    assert_int_equal(load_text("{\"format\": 1,", &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "bad.json:"));
}

static int write_recipe(const char *scale, struct recipe *r, struct err *e)
{
    char p[128];
    path_in(p, sizeof p, "r.ini");
    FILE *f = fopen(p, "w");
    fprintf(f, "[product]\nformat = 1\nid = cal-test\nversion = 1\n"
               "[class background]\ndefect = no\ncolour = #000000\n"
               "[class surface]\ndefect = no\ncolour = #00ff00\n"
               "[class pit]\ndefect = yes\ncolour = #ff0000\n"
               "[features]\nfamilies = gauss\nsigmas = 1\n"
               "[classifier]\nmodel = m.json\nrounds = 1\ndepth = 1\nlearning_rate = 0.3\n"
               "seed = 1\nthreads = 1\nearly_stop = 0\nsamples_per_class = 10\n"
               "validation_fraction = 0.2\n"
               "[scale]\n%s\n"
               "[part]\narea_mm2 = 40\n[gates]\nsharpness_reference = 100\n"
               "[tolerance pit]\nmin_area_mm2 = 0\nmax_area_mm2 = 1\nmax_total_mm2 = 2\n"
               "max_count = 3\n",
            scale);
    fclose(f);
    int rc = recipe_load(p, r, e);
    unlink(p);
    return rc;
}

static void test_recipe_scale_one_way(void **state)
{
    (void)state;
    struct recipe *r = malloc(sizeof *r);
    struct err e = {0};
    char p[128];
    path_in(p, sizeof p, "cal.json");
    struct calfile c = sample();
    assert_int_equal(calfile_save(p, &c, &e), ST_OK);
    assert_int_equal(write_recipe("calibration = cal.json", r, &e), ST_OK);
    assert_true(r->has_calibration);
    assert_true(r->mm_per_px_x == c.mm_per_px_x && r->mm_per_px_y == c.mm_per_px_y);
    struct regions_opts o;
    judge_regions_opts(r, NULL, &o);
    assert_non_null(o.image_to_plane);
    /* the lens goes with a homography fitted to corrected pixels, and only then */
    assert_true(o.lens && o.lens->k1 == c.lens.k1);
    c.lens_corrected = 0;
    assert_int_equal(calfile_save(p, &c, &e), ST_OK);
    assert_int_equal(write_recipe("calibration = cal.json", r, &e), ST_OK);
    judge_regions_opts(r, NULL, &o);
    assert_true(o.image_to_plane && !o.lens);
    assert_int_equal(write_recipe("calibration = cal.json\nmm_per_px_x = 0.1", r, &e),
                     ST_EFORMAT);
    assert_non_null(strstr(e.msg, "both calibration and mm_per_px_x"));
    assert_int_equal(write_recipe("mm_per_px_x = 0.1", r, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "needs mm_per_px_x and mm_per_px_y, or calibration"));
    assert_int_equal(write_recipe("calibration = none.json", r, &e), ST_EIO);
    assert_non_null(strstr(e.msg, "none.json: cannot open"));
    assert_int_equal(write_recipe("mm_per_px_x = 0.1\nmm_per_px_y = 0.1", r, &e), ST_OK);
    assert_false(r->has_calibration);
    judge_regions_opts(r, NULL, &o);
    assert_null(o.image_to_plane);
    unlink(p);
    free(r);
}

/* A good frame judged with a calibration of the given age. */
static struct judgement judge_at(const struct recipe *r, double age_days)
{
    struct quality q = {.level = 150, .part_fraction = 0.4, .sharpness = 100,
                        .frame_change = 12};
    struct part_pose pose = {.found = 1, .pixels = 4000, .area_mm2 = 40, .cx = 50, .cy = 50,
                             .x0 = 10, .y0 = 10, .x1 = 90, .y1 = 90, .border_gap = 10};
    struct judge_refs refs = {.sharpness = 100, .part_area_mm2 = 40,
                              .calibration_age_days = age_days};
    struct region_set rs;
    regions_init(&rs);
    struct judgement j;
    judge_part(r, &refs, &q, &pose, &rs, &j);
    regions_clear(&rs);
    return j;
}

static void test_expired_calibration_gives_no_verdict(void **state)
{
    (void)state;
    struct recipe *r = malloc(sizeof *r);
    struct err e = {0};
    char p[128];
    path_in(p, sizeof p, "cal.json");
    struct calfile c = sample();
    c.created = posix_seconds(2020, 0, 0, 0, 0);
    assert_int_equal(calfile_save(p, &c, &e), ST_OK);
    assert_int_equal(write_recipe("calibration = cal.json", r, &e), ST_OK);
    double age = calfile_age_days(&r->cal, time(NULL));
    assert_true(age > 30);
    struct judgement j = judge_at(r, age);
    assert_int_equal(j.verdict, VERDICT_NONE);
    assert_string_equal(j.reasons[0].rule, "calibration_expired");
    char words[160];
    judge_describe_reason(r, &j.reasons[0], words, sizeof words);
    assert_non_null(strstr(words, "calibration expired: age"));
    assert_non_null(strstr(words, "> 30 days"));
    /* within its validity the same frame passes, on the last day too */
    assert_int_equal(judge_at(r, 29.5).verdict, VERDICT_PASS);
    assert_int_equal(judge_at(r, 30).verdict, VERDICT_PASS);
    assert_int_equal(judge_at(r, 30.01).verdict, VERDICT_NONE);
    unlink(p);
    free(r);
}

static int setup(void **state)
{
    (void)state;
    snprintf(dir, sizeof dir, "/tmp/test_calfile_XXXXXX");
    return mkdtemp(dir) ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    return rmdir(dir);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_recipe_scale_one_way),
        cmocka_unit_test(test_expired_calibration_gives_no_verdict),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
