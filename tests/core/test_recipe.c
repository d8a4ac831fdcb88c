/* core/recipe: the demo recipe fills every field, a minimal recipe gets the
 * documented defaults, and every kind of bad input is refused with the
 * exact `FILE:LINE: ` prefix and its message.  Expected line numbers are
 * counted from the test's own text (line_of), not from the parser.  Bad
 * recipes are written to a fresh mkdtemp folder removed at the end.
 * Reference for the values: recipes/README.md and recipes/ostrel-cap38.ini.
 * Run from the repository root (tests/run.sh does). */
#define _XOPEN_SOURCE 700 /* realpath(3) */
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

#include "core/recipe.h"

#define PRODUCT "[product]\nformat = 1\nid = t-1\nversion = 3\n\n"
#define CLASSES                                                                                \
    "[class background]\ndefect = no\ncolour = #000000\n"                                      \
    "[class surface]\ndefect = no\ncolour = #00Ff00\n"                                         \
    "[class scratch]   ; a comment after the header\ndefect = yes\ncolour = #ff0000\n"
#define FEATURES "[features]\nfamilies = gauss gabor\nsigmas = 1 2\ngabor_frequencies = 0.25\n"
#define CLASSIFIER_HEAD "[classifier]\nmodel = m.ubj\nrounds = 5\ndepth = 3\n"
#define CLASSIFIER_TAIL                                                                        \
    "learning_rate = 0.5\nseed = 0\nthreads = 1\nearly_stop = 0\n"                             \
    "samples_per_class = 10\nvalidation_fraction = 0.5\n"
#define CLASSIFIER CLASSIFIER_HEAD CLASSIFIER_TAIL
#define SCALE "[scale]\nmm_per_px_x = 0.05\nmm_per_px_y = 0.07\n"
#define TOL                                                                                    \
    "[tolerance scratch]\nmin_area_mm2 = none\nmax_area_mm2 = 1\nmax_total_mm2 = none\n"       \
    "max_count = 0\n"
#define GOOD PRODUCT CLASSES FEATURES CLASSIFIER SCALE TOL

static char dir[64];
static char file[128];

static int setup(void **state)
{
    (void)state;
    snprintf(dir, sizeof dir, "/tmp/test_recipe_XXXXXX");
    if (!mkdtemp(dir))
        return -1;
    snprintf(file, sizeof file, "%s/r.ini", dir);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unlink(file);
    return rmdir(dir);
}

static void write_text(const char *text)
{
    FILE *f = fopen(file, "w");
    assert_non_null(f);
    assert_int_equal(fputs(text, f) >= 0, 1);
    assert_int_equal(fclose(f), 0);
}

/* 1-based line of the nth (1 = first) line that contains needle. */
static int line_of(const char *text, const char *needle, int nth)
{
    int line = 1;
    const char *s = text;
    for (;;) {
        const char *eol = strchr(s, '\n');
        size_t len = eol ? (size_t)(eol - s) : strlen(s);
        char buf[256];
        assert_true(len < sizeof buf);
        memcpy(buf, s, len);
        buf[len] = '\0';
        if (strstr(buf, needle) && --nth == 0)
            return line;
        assert_non_null(eol);
        s = eol + 1;
        line++;
    }
}

static void load_ok(const char *text, struct recipe *r)
{
    struct err e;
    err_clear(&e);
    write_text(text);
    int rc = recipe_load(file, r, &e);
    if (rc != ST_OK)
        print_error("unexpected failure: %s\n", e.msg);
    assert_int_equal(rc, ST_OK);
}

/* Loads text and expects code with the message `FILE:LINE: ...what...`
 * (line 0: `FILE: ...what...`); the recipe must be left untouched. */
static void load_bad(const char *text, int code, int line, const char *what)
{
    struct err e;
    err_clear(&e);
    write_text(text);
    static struct recipe r, before;
    memset(&r, 0xab, sizeof r);
    before = r;
    int rc = recipe_load(file, &r, &e);
    char prefix[160];
    if (line > 0)
        snprintf(prefix, sizeof prefix, "%s:%d: ", file, line);
    else
        snprintf(prefix, sizeof prefix, "%s: ", file);
    if (rc != code || strncmp(e.msg, prefix, strlen(prefix)) || !strstr(e.msg, what))
        print_error("got rc %d '%s', want rc %d '%s...%s'\n", rc, e.msg, code, prefix, what);
    assert_int_equal(rc, code);
    assert_int_equal(e.code, code);
    assert_memory_equal(e.msg, prefix, strlen(prefix));
    assert_non_null(strstr(e.msg, what));
    assert_memory_equal(&r, &before, sizeof r);
}

static void test_demo_recipe(void **state)
{
    (void)state;
    static struct recipe r;
    struct err e;
    err_clear(&e);
    int rc = recipe_load("recipes/ostrel-cap38.ini", &r, &e);
    if (rc != ST_OK)
        print_error("%s\n", e.msg);
    assert_int_equal(rc, ST_OK);
    assert_string_equal(r.path, "recipes/ostrel-cap38.ini");
    assert_string_equal(r.dir, "recipes");
    assert_int_equal(r.format, 1);
    assert_string_equal(r.product, "ostrel-cap38");
    assert_int_equal(r.version, 1);
    assert_non_null(strstr(r.description, "Ostrel cap 38"));

    static const struct {
        const char *name;
        int defect;
        uint8_t rgb[3];
    } cls[] = {{"background", 0, {0x1a, 0x1a, 0x1a}},
               {"surface", 0, {0x3c, 0x8c, 0x50}},
               {"scratch", 1, {0xe0, 0xc0, 0x20}},
               {"pit", 1, {0xd0, 0x30, 0x30}},
               {"stain", 1, {0x30, 0x70, 0xe0}}};
    assert_int_equal(r.nclasses, 5);
    for (int c = 0; c < 5; c++) {
        assert_string_equal(r.cls[c].name, cls[c].name);
        assert_int_equal(r.cls[c].is_defect, cls[c].defect);
        assert_memory_equal(r.cls[c].rgb, cls[c].rgb, 3);
        assert_int_equal(recipe_find_class(&r, cls[c].name), c);
    }
    assert_int_equal(recipe_find_class(&r, "dent"), -1);

    assert_int_equal(r.feat.families, FEAT_COLOUR | FEAT_GAUSS | FEAT_GRADIENT | FEAT_LAPLACE |
                                          FEAT_HESSIAN | FEAT_STRUCTURE | FEAT_LOCALSTD |
                                          FEAT_GABOR);
    assert_int_equal(r.feat.nsigmas, 4);
    assert_true(r.feat.sigmas[0] == 1 && r.feat.sigmas[1] == 2 && r.feat.sigmas[2] == 4 &&
                r.feat.sigmas[3] == 8);
    assert_int_equal(r.feat.gabor_orientations, 4);
    assert_int_equal(r.feat.ngabor_freqs, 2);
    assert_true(r.feat.gabor_freqs[0] == 0.1 && r.feat.gabor_freqs[1] == 0.25);
    assert_int_equal(r.feat.normalise, 1);
    assert_int_equal(r.feat.threads, 2);

    assert_string_equal(r.model_path, "recipes/ostrel-cap38.model.json");
    assert_int_equal(r.train.rounds, 60);
    assert_int_equal(r.train.depth, 6);
    assert_true(r.train.eta == 0.3);
    assert_int_equal(r.train.seed, 7);
    assert_int_equal(r.train.threads, 2);
    assert_int_equal(r.train.early_stop, 10);
    assert_int_equal(r.samples_per_class, 2000);
    assert_true(r.validation_fraction == 0.2);
    assert_true(r.mm_per_px_x == 0.17 && r.mm_per_px_y == 0.17);

    static const struct recipe_tolerance tol[] = {{-1, -1, -1, -1, -1, -1, -1},
                                                  {-1, -1, -1, -1, -1, -1, -1},
                                                  {0.15, 2.5, 4.0, 2, 12, -1, -1},
                                                  {0.1, 0.8, 1.5, 3, -1, -1, -1},
                                                  {1.5, 30, 45, 1, -1, -1, -1}};
    for (int c = 0; c < 5; c++)
        assert_memory_equal(&r.tol[c], &tol[c], sizeof tol[c]);
    assert_true(r.merge_gap_mm[2] == 0.35 && r.merge_gap_mm[3] == 0 && r.merge_gap_mm[4] == 1.0);
    assert_int_equal(r.part.orient, 0);
    assert_true(r.part.area_mm2 == -1 && r.part.area_tolerance == 0.15);
    assert_int_equal(r.nzones, 2);
    assert_string_equal(r.zones[0].name, "rim");
    assert_int_equal(r.zones[0].shape, ZONE_RING);
    assert_true(r.zones[0].r_in == 16.5 && r.zones[0].r_out == 19.5);
    assert_string_equal(r.zones[1].name, "bore-edge");
    /* zones restate some limits and keep the class's others */
    static const struct recipe_tolerance rim_scratch = {0.15, 1.2, 4.0, 1, 4, -1, -1};
    static const struct recipe_tolerance rim_pit = {0.1, -1, -1, -1, -1, 2, 0.6};
    assert_memory_equal(recipe_tolerance_for(&r, 2, 0), &rim_scratch, sizeof rim_scratch);
    assert_memory_equal(recipe_tolerance_for(&r, 3, 0), &rim_pit, sizeof rim_pit);
    assert_int_equal(recipe_tolerance_for(&r, 3, 1)->max_count, 1);
    assert_ptr_equal(recipe_tolerance_for(&r, 4, 1), &r.tol[4]);
    assert_ptr_equal(recipe_tolerance_for(&r, 2, -1), &r.tol[2]);
    /* gates at their documented defaults */
    const struct recipe_gates *g = &r.gates;
    assert_true(g->min_level == 40 && g->max_level == 235 && g->max_saturated == 0.02);
    assert_true(g->black_level == 8 && g->max_black == 0.05 && g->min_part_fraction == 0.05);
    assert_true(g->max_part_fraction == 0.9);
    assert_true(g->sharpness_reference == -1 && g->min_sharpness_ratio == 0.5);
    assert_true(g->low_confidence == 0.5 && g->max_low_confidence == 0.1);
    assert_true(g->min_frame_change == 0);
}

static void test_zones_and_part(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD "[part]\norientation = moments\narea_mm2 = 120\narea_tolerance = none\n"
                 "border_margin_px = 0\nfield = 10 20 300 200\n"
                 "[zone seal]\nshape = rect\ncentre = 1.5 -2\nsize = 4 3\nangle = 30\n"
                 "[zone face]\nshape = polygon\npoints = 0 0 5 0 5 5 0 5.5\n"
                 "[zone hole]\nshape = circle\nradius = 2\n"
                 "[zone logo]\nshape = mask\nmask = logo.png\nmask_mm_per_px = 0.05\n"
                 "[tolerance scratch in face]\nmax_count = 3\n"
                 "[gates]\nmin_frame_change = none\nsharpness_reference = 55\n",
            &r);
    assert_int_equal(r.part.orient, 1);
    assert_true(r.part.area_mm2 == 120 && r.part.area_tolerance == -1);
    assert_int_equal(r.part.border_margin_px, 0);
    assert_memory_equal(r.part.field, ((int[]){10, 20, 300, 200}), 4 * sizeof(int));
    assert_int_equal(r.nzones, 4);
    const struct zone *z = r.zones;
    assert_int_equal(z[0].shape, ZONE_RECT);
    assert_true(z[0].cx == 1.5 && z[0].cy == -2 && z[0].w == 4 && z[0].h == 3);
    assert_true(z[0].angle_deg == 30);
    assert_int_equal(z[1].shape, ZONE_POLYGON);
    assert_int_equal(z[1].npoints, 4);
    assert_true(z[1].pts[3][0] == 0 && z[1].pts[3][1] == 5.5);
    assert_int_equal(z[2].shape, ZONE_CIRCLE);
    assert_true(z[2].r_out == 2 && z[2].cx == 0);
    assert_int_equal(z[3].shape, ZONE_MASK);
    char want[PATH_MAX];
    snprintf(want, sizeof want, "%s/logo.png", dir);
    assert_string_equal(z[3].mask_path, want);
    assert_true(z[3].mask_mm_per_px == 0.05);
    assert_int_equal(recipe_tolerance_for(&r, 2, 1)->max_count, 3);
    assert_true(recipe_tolerance_for(&r, 2, 1)->max_area_mm2 == 1); /* the class's */
    assert_true(r.gates.min_frame_change == -1 && r.gates.sharpness_reference == 55);
}

static void test_zone_errors(void **state)
{
    (void)state;
    const char *text = GOOD "[zone a]\nshape = rect\n";
    load_bad(text, ST_EFORMAT, line_of(text, "[zone a]", 1),
             "[zone a] lacks key 'size' (shape rect)");
    text = GOOD "[zone a]\nshape = circle\nradius = 2\nsize = 1 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "size", 1),
             "key 'size' does not apply to shape circle");
    text = GOOD "[zone a]\nshape = ring\nradii = 3 2\n";
    load_bad(text, ST_ERANGE, line_of(text, "radii", 1), "radii: inner 3 must be below outer 2");
    text = GOOD "[zone a]\nshape = hexagon\n";
    load_bad(text, ST_EFORMAT, line_of(text, "hexagon", 1),
             "shape: 'hexagon' is not one of: rect circle ring polygon mask");
    text = GOOD "[zone a]\nshape = polygon\npoints = 0 0 1 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "points", 1), "points: needs 3..16 points");
    text = GOOD "[zone a]\nshape = mask\nmask = a.pgm\n";
    load_bad(text, ST_EFORMAT, line_of(text, "a.pgm", 1), "mask: 'a.pgm' must end in .png");
    text = GOOD "[tolerance scratch in rim]\nmax_count = 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "[tolerance scratch in rim]", 1),
             "[tolerance scratch in rim] names no zone (no [zone rim])");
    text = GOOD "[zone rim]\nshape = circle\nradius = 1\n[tolerance scratch in rim]\n"
                "merge_gap_mm = 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "merge_gap_mm", 1),
             "merge_gap_mm belongs in [tolerance scratch]");
    text = GOOD "[tolerance scratch of rim]\n";
    load_bad(text, ST_EFORMAT, line_of(text, "of rim", 1),
             "unknown section [tolerance scratch of rim]");
    text = GOOD "[zone rim]\nshape = circle\nradius = 1\n[tolerance scratch in rim]\n"
                "min_area_mm2 = 5\n";
    load_bad(text, ST_ERANGE, line_of(text, "min_area_mm2 = 5", 1),
             "[tolerance scratch in rim]: min_area_mm2 = 5 exceeds max_area_mm2 = 1");
}

static void test_grade_and_gates_errors(void **state)
{
    (void)state;
    static const char *const bad[] = {"3x0.4", "3 x", "x 0.4", "3 * 0.4", "3 x 0.4 x"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        char text[2048], what[96];
        snprintf(text, sizeof text, "%sgrade = %s\n", GOOD, bad[i]);
        snprintf(what, sizeof what, "grade: '%s' is not N x A (ISO 10110-7", bad[i]);
        load_bad(text, ST_EFORMAT, line_of(text, "grade", 1), what);
    }
    const char *text = GOOD "grade = 0 x 0.4\n";
    load_bad(text, ST_ERANGE, line_of(text, "grade", 1), "needs N in 1..10000");
    text = GOOD "[gates]\nmin_level = 200\nmax_level = 100\n";
    load_bad(text, ST_ERANGE, line_of(text, "[gates]", 1),
             "min_level 200 must be below max_level 100");
    text = GOOD "[gates]\nmin_part_fraction = 0.5\nmax_part_fraction = 0.4\n";
    load_bad(text, ST_ERANGE, line_of(text, "[gates]", 1),
             "min_part_fraction 0.5 must be below max_part_fraction 0.4");
    text = GOOD "[gates]\nmin_sharpness = 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "min_sharpness", 1),
             "unknown key 'min_sharpness' in [gates]");
    text = GOOD "[part]\norientation = free\n";
    load_bad(text, ST_EFORMAT, line_of(text, "free", 1),
             "orientation: 'free' is not one of: fixed moments");
    text = GOOD "[part]\nfield = 10 20 5 40\n";
    load_bad(text, ST_EFORMAT, line_of(text, "field", 1), "field: needs four whole pixel numbers");
}

static void test_minimal_defaults(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD "[gates]\nmin_sharpness_ratio = 0\n", &r);
    assert_string_equal(r.product, "t-1");
    assert_int_equal(r.version, 3);
    assert_string_equal(r.description, "");
    assert_memory_equal(r.cls[1].rgb, ((uint8_t[]){0, 255, 0}), 3);
    assert_int_equal(r.feat.families, FEAT_GAUSS | FEAT_GABOR);
    assert_int_equal(r.feat.gabor_orientations, 4);
    assert_int_equal(r.feat.normalise, 1);
    assert_int_equal(r.feat.threads, 2);
    char want[PATH_MAX];
    snprintf(want, sizeof want, "%s/m.ubj", dir);
    assert_string_equal(r.model_path, want);
    assert_true(r.tol[2].min_area_mm2 == -1 && r.tol[2].max_area_mm2 == 1);
    assert_true(r.tol[2].max_total_mm2 == -1 && r.tol[2].max_count == 0);
    assert_true(r.gates.min_level == 40 && r.gates.min_sharpness_ratio == 0);
    assert_true(r.tol[2].max_length_mm == -1 && r.tol[2].grade_n == -1);
    assert_int_equal(r.nzones, 0);
    assert_int_equal(r.part.field[0], -1);
    assert_int_equal(r.part.border_margin_px, 2);
    assert_int_equal(r.coarse_classify, 0);
}

/* [classifier] coarse: the approximation of core/inspect.c, off unless asked for */
static void test_coarse_key(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(PRODUCT CLASSES FEATURES CLASSIFIER_HEAD CLASSIFIER_TAIL "coarse = yes\n" SCALE TOL, &r);
    assert_int_equal(r.coarse_classify, 1);
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER_HEAD CLASSIFIER_TAIL "coarse = half\n" SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "coarse", 1), "coarse: 'half' is not yes or no");
}

static void test_subfolder_model_and_no_gabor(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(PRODUCT CLASSES "[features]\nfamilies = colour\nsigmas = 0.5\n"
            "[classifier]\nmodel = models/./x.json\nrounds = 5\ndepth = 3\n" CLASSIFIER_TAIL
            SCALE TOL,
            &r);
    char want[PATH_MAX];
    snprintf(want, sizeof want, "%s/models/./x.json", dir);
    assert_string_equal(r.model_path, want);
    assert_int_equal(r.feat.ngabor_freqs, 0);
}

/* Every path a recipe names stays in its folder (recipes/README.md, "Paths"):
 * absolute paths and '..' are refused as written, a symbolic link by where
 * it leads (realpath(3)), a link to nothing because writing through it
 * would create its target. */
static void test_paths_stay_in_folder(void **state)
{
    (void)state;
    static struct recipe r;
    char outside[] = "/tmp/test_recipe_out_XXXXXX", link_out[128], link_in[128], gone[128];
    assert_non_null(mkdtemp(outside));
    snprintf(link_out, sizeof link_out, "%s/out", dir);
    snprintf(link_in, sizeof link_in, "%s/in", dir);
    snprintf(gone, sizeof gone, "%s/gone.json", dir);
    assert_int_equal(symlink(outside, link_out), 0);
    assert_int_equal(symlink(".", link_in), 0);
    assert_int_equal(symlink("/nonexistent/m.json", gone), 0);

    static const char abs_model[] =
        PRODUCT CLASSES FEATURES "[classifier]\nmodel = /srv/models/x.json\n";
    load_bad(abs_model, ST_EFORMAT, line_of(abs_model, "model =", 1),
             "model: '/srv/models/x.json' is an absolute path; a recipe's files lie in its folder");
    static const char up[] = GOOD "[lighting]\nflat_field = a/../../bench.flat\n";
    load_bad(up, ST_EFORMAT, line_of(up, "flat_field", 1),
             "flat_field: 'a/../../bench.flat' contains '..'");
    static const char via_link[] = GOOD "[verification]\ninterval_hours = 8\n"
                                        "[master a]\nimage = out/a.png\nexpect = pass\n";
    static char what[3 * PATH_MAX];
    char real_out[PATH_MAX], real_dir[PATH_MAX];
    assert_non_null(realpath(outside, real_out));
    assert_non_null(realpath(dir, real_dir));
    snprintf(what, sizeof what,
             "image: %s/out/a.png leads to %s/a.png, outside the recipe's folder %s", dir,
             real_out, real_dir);
    load_bad(via_link, ST_EFORMAT, line_of(via_link, "image =", 1), what);
    static const char dangling[] =
        PRODUCT CLASSES FEATURES "[classifier]\nmodel = gone.json\n";
    snprintf(what, sizeof what, "model: cannot resolve %s: a link to nothing", gone);
    load_bad(dangling, ST_EFORMAT, line_of(dangling, "model =", 1), what);
    /* a link that stays inside, and a file not made yet in a missing folder */
    load_ok(PRODUCT CLASSES FEATURES "[classifier]\nmodel = in/in/new/m.json\nrounds = 5\n"
            "depth = 3\n" CLASSIFIER_TAIL SCALE TOL, &r);

    unlink(link_out);
    unlink(link_in);
    unlink(gone);
    rmdir(outside);
}

/* [lighting], [verification] and [master NAME] (recipes/README.md): paths
 * resolve against the recipe's folder; masters need both verdicts. */
#define MASTERS                                                                                \
    "[verification]\ninterval_hours = 8\n"                                                     \
    "[master good-1]\nimage = masters/good.png\nexpect = pass\n"                               \
    "[master over]\nimage = over.png\nexpect = fail\n"

static void test_lighting_and_masters(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD "[lighting]\nflat_field = bench.flat\n" MASTERS, &r);
    char want[PATH_MAX];
    snprintf(want, sizeof want, "%s/bench.flat", dir);
    assert_string_equal(r.flat_field, want);
    assert_true(r.verify_interval_hours == 8);
    assert_int_equal(r.nmasters, 2);
    snprintf(want, sizeof want, "%s/masters/good.png", dir);
    assert_string_equal(r.masters[0].name, "good-1");
    assert_string_equal(r.masters[0].image, want);
    assert_int_equal(r.masters[0].expect, 0);   /* VERDICT_PASS */
    snprintf(want, sizeof want, "%s/over.png", dir);
    assert_string_equal(r.masters[1].image, want);
    assert_int_equal(r.masters[1].expect, 1);   /* VERDICT_FAIL */
    load_ok(GOOD, &r);
    assert_string_equal(r.flat_field, "");
    assert_int_equal(r.nmasters, 0);
    assert_true(r.verify_interval_hours == -1);

    static const char only_pass[] = GOOD "[verification]\ninterval_hours = 8\n"
                                         "[master a]\nimage = a.png\nexpect = pass\n";
    load_bad(only_pass, ST_EFORMAT, line_of(only_pass, "[master a]", 1), "no fail");
    static const char no_interval[] = GOOD "[master a]\nimage = a.png\nexpect = pass\n"
                                           "[master b]\nimage = b.png\nexpect = fail\n";
    load_bad(no_interval, ST_EFORMAT, 0, "without a [verification] interval_hours");
    static const char lonely[] = GOOD "[verification]\ninterval_hours = 8\n";
    load_bad(lonely, ST_EFORMAT, line_of(lonely, "[verification]", 1), "without any [master");
    static const char word[] = GOOD MASTERS "[master c]\nimage = c.png\nexpect = PASS\n";
    load_bad(word, ST_EFORMAT, line_of(word, "expect = PASS", 1), "PASS");
    static const char zero[] = GOOD "[verification]\ninterval_hours = 0\n";
    load_bad(zero, ST_ERANGE, line_of(zero, "interval_hours", 1), "interval_hours");
    static const char jpg[] = GOOD MASTERS "[master d]\nimage = d.jpg\nexpect = fail\n";
    load_bad(jpg, ST_EFORMAT, line_of(jpg, "d.jpg", 1), ".png");
    static const char nokey[] = GOOD "[lighting]\n";
    load_bad(nokey, ST_EFORMAT, line_of(nokey, "[lighting]", 1), "lacks key 'flat_field'");
}

/* Without multi-line values an indented line is a key of its own. */
static void test_indented_line_is_a_key(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER "    rounds = 9\n" SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "rounds", 2),
             "duplicate key 'rounds' in [classifier] (first on line");
}

static void test_unknown_section(void **state)
{
    (void)state;
    const char *text = GOOD "[lamp]\nlux = 5\n";
    load_bad(text, ST_EFORMAT, line_of(text, "[lamp]", 1), "unknown section [lamp]");
}

static void test_unknown_key(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER_HEAD "gamma = 1\n" CLASSIFIER_TAIL
        SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "gamma", 1), "unknown key 'gamma' in [classifier]");
}

static void test_duplicate_key(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER_HEAD "depth = 4\n" CLASSIFIER_TAIL
        SCALE TOL;
    char what[96];
    snprintf(what, sizeof what, "duplicate key 'depth' in [classifier] (first on line %d)",
             line_of(text, "depth", 1));
    load_bad(text, ST_EFORMAT, line_of(text, "depth", 2), what);
}

static void test_duplicate_class(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES "[class  surface ]\ndefect = no\ncolour = #010101\n"
        FEATURES CLASSIFIER SCALE TOL;
    char what[96];
    snprintf(what, sizeof what, "duplicate class 'surface' (first on line %d)",
             line_of(text, "[class surface]", 1));
    load_bad(text, ST_EFORMAT, line_of(text, "[class  surface ]", 1), what);
}

static void test_duplicate_section(void **state)
{
    (void)state;
    const char *text = GOOD SCALE;
    load_bad(text, ST_EFORMAT, line_of(text, "[scale]", 2), "duplicate section [scale]");
}

static void test_bad_numbers(void **state)
{
    (void)state;
    static const char *const bad[] = {"0.1x", "nan", "inf", "0x1p-2", "", "0.1 0.2"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        char text[2048], what[64];
        snprintf(text, sizeof text, "%s%s%s%slearning_rate = %s\nseed = 0\nthreads = 1\n"
                 "early_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.5\n%s%s",
                 PRODUCT, CLASSES, FEATURES, CLASSIFIER_HEAD, bad[i], SCALE, TOL);
        snprintf(what, sizeof what, "learning_rate: '%s' is not a number", bad[i]);
        load_bad(text, ST_EFORMAT, line_of(text, "learning_rate", 1), what);
    }
    const char *text = PRODUCT CLASSES FEATURES "[classifier]\nmodel = m.ubj\nrounds = 5.0\n";
    load_bad(text, ST_EFORMAT, line_of(text, "rounds", 1), "rounds: '5.0' is not an integer");
}

static void test_out_of_range(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES "[classifier]\nmodel = m.ubj\nrounds = 5\n"
                                                "depth = 17\n";
    load_bad(text, ST_ERANGE, line_of(text, "depth", 1),
             "depth = 17 is out of range; allowed: 1..16");
    text = PRODUCT CLASSES FEATURES "[classifier]\nlearning_rate = 0\n";
    load_bad(text, ST_ERANGE, line_of(text, "learning_rate", 1),
             "learning_rate = 0 is out of range; allowed: (0, 1]");
    text = PRODUCT CLASSES "[features]\nsigmas = 1 20\n";
    load_bad(text, ST_ERANGE, line_of(text, "sigmas", 1),
             "sigmas: 20 is out of range; allowed: [0.5, 16]");
    text = PRODUCT CLASSES "[features]\nsigmas = 2 1\n";
    load_bad(text, ST_EFORMAT, line_of(text, "sigmas", 1), "sigmas: values must increase");
    text = PRODUCT "[tolerance pit]\nmax_count = -1\n";
    load_bad(text, ST_ERANGE, line_of(text, "max_count", 1),
             "max_count = -1 is out of range; allowed: >= 0 or none");
    text = "[scale]\nmm_per_px_x = 100.5\n";
    load_bad(text, ST_ERANGE, 2, "mm_per_px_x = 100.5 is out of range; allowed: (0, 100]");
}

static void test_min_area_above_max(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER SCALE
        "[tolerance scratch]\nmin_area_mm2 = 2\nmax_area_mm2 = 1\nmax_total_mm2 = none\n"
        "max_count = 0\n";
    load_bad(text, ST_ERANGE, line_of(text, "min_area_mm2", 1),
             "min_area_mm2 = 2 exceeds max_area_mm2 = 1");
}

static void test_missing_key(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER_HEAD "learning_rate = 0.5\nthreads = 1\n"
        "early_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.5\n" SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "[classifier]", 1),
             "[classifier] lacks key 'seed'");
    text = PRODUCT CLASSES "[features]\nfamilies = gabor\nsigmas = 1\n" CLASSIFIER SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "[features]", 1),
             "[features] lacks key 'gabor_frequencies' (required with family gabor)");
}

static void test_missing_section(void **state)
{
    (void)state;
    load_bad(PRODUCT CLASSES FEATURES CLASSIFIER TOL, ST_EFORMAT, 0, "missing section [scale]");
}

static void test_missing_tolerance(void **state)
{
    (void)state;
    const char *text = PRODUCT CLASSES FEATURES CLASSIFIER SCALE;
    load_bad(text, ST_EFORMAT, line_of(text, "[class scratch]", 1),
             "defect class 'scratch' has no [tolerance scratch]");
}

static void test_tolerance_for_non_defect(void **state)
{
    (void)state;
    const char *text = GOOD "[tolerance surface]\nmin_area_mm2 = 0\nmax_area_mm2 = none\n"
                            "max_total_mm2 = none\nmax_count = none\n";
    load_bad(text, ST_EFORMAT, line_of(text, "[tolerance surface]", 1),
             "class 'surface' is not a defect");
    text = GOOD "[tolerance dent]\nmin_area_mm2 = 0\nmax_area_mm2 = none\n"
                "max_total_mm2 = none\nmax_count = none\n";
    load_bad(text, ST_EFORMAT, line_of(text, "[tolerance dent]", 1),
             "[tolerance dent] names no class");
}

static void test_newer_format(void **state)
{
    (void)state;
    load_bad("; a later station's recipe\n[product]\nformat = 2\n", ST_EFORMAT, 3,
             "format 2 is newer than this station supports (1)");
}

static void test_bad_colour(void **state)
{
    (void)state;
    const char *text = PRODUCT "[class background]\ndefect = no\ncolour = #12345g\n";
    load_bad(text, ST_EFORMAT, line_of(text, "colour", 1), "colour: '#12345g' is not #rrggbb");
    text = PRODUCT "[class background]\ndefect = no\ncolour = 123456\n";
    load_bad(text, ST_EFORMAT, line_of(text, "colour", 1), "colour: '123456' is not #rrggbb");
}

static void test_class_rules(void **state)
{
    (void)state;
    const char *text = PRODUCT "[class dirt]\ndefect = yes\ncolour = #000000\n" CLASSES FEATURES
        CLASSIFIER SCALE TOL;
    load_bad(text, ST_EFORMAT, line_of(text, "defect = yes", 1),
             "class 'dirt' comes first, so it is the background and must have defect = no");
    text = PRODUCT "[class background]\ndefect = no\ncolour = #000000\n"
                   "[class scratch]\ndefect = yes\ncolour = #ff0000\n" FEATURES CLASSIFIER SCALE
                       TOL;
    load_bad(text, ST_EFORMAT, 0, "needs a class with defect = no besides the background");
    text = PRODUCT "[class Scratch]\n";
    load_bad(text, ST_EFORMAT, line_of(text, "Scratch", 1),
             "class name 'Scratch' must be 1..31 of a-z 0-9 _ -");
}

static void test_syntax(void **state)
{
    (void)state;
    const char *text = PRODUCT "rounds 5\n";
    load_bad(text, ST_EFORMAT, line_of(text, "rounds", 1), "expected [section] or key = value");
    load_bad("seed = 1\n", ST_EFORMAT, 1, "key 'seed' before any section");
    load_bad("[product\n", ST_EFORMAT, 1, "section header lacks ']'");
    load_bad("\n[product] x\n", ST_EFORMAT, 2, "text after ']'");
    char text2[512];
    snprintf(text2, sizeof text2, "[product]\ndescription = %0300d\n", 0);
    load_bad(text2, ST_EFORMAT, 2, "line longer than");
    load_bad("[features]\nfamilies = gauss sobel\n", ST_EFORMAT, 2,
             "families: 'sobel' is not one of: colour gauss");
    load_bad("[features]\nfamilies = gauss gauss\n", ST_EFORMAT, 2,
             "families: 'gauss' listed twice");
    load_bad("[classifier]\nmodel = m.bin\n", ST_EFORMAT, 2, "model: 'm.bin' must end in .json");
}

static void test_missing_file(void **state)
{
    (void)state;
    static struct recipe r;
    struct err e;
    err_clear(&e);
    char path[160];
    snprintf(path, sizeof path, "%s/none.ini", dir);
    assert_int_equal(recipe_load(path, &r, &e), ST_EIO);
    assert_int_equal(e.code, ST_EIO);
    char prefix[176];
    snprintf(prefix, sizeof prefix, "%s: cannot open", path);
    assert_memory_equal(e.msg, prefix, strlen(prefix));
}

/* [evidence] pass: none (default), all, every N. */
static void test_evidence_section(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD, &r);
    assert_int_equal(r.evidence_pass, RECIPE_PASS_NONE);
    load_ok(GOOD "[evidence]\npass = all\n", &r);
    assert_int_equal(r.evidence_pass, RECIPE_PASS_ALL);
    load_ok(GOOD "[evidence]\npass = every  25\n", &r);
    assert_int_equal(r.evidence_pass, RECIPE_PASS_EVERY);
    assert_int_equal(r.evidence_every, 25);
    const char *zero = GOOD "[evidence]\npass = every 0\n";
    load_bad(zero, ST_ERANGE, line_of(zero, "every", 1), "pass");
    const char *odd = GOOD "[evidence]\npass = sometimes\n";
    load_bad(odd, ST_EFORMAT, line_of(odd, "sometimes", 1), "is not none, all or every N");
    const char *junk = GOOD "[evidence]\npass = every 3x\n";
    load_bad(junk, ST_EFORMAT, line_of(junk, "every", 1), "is not none, all or every N");
}

/* [camera]: optional keys, the set and required masks, and the refusals
 * (recipes/README.md, [camera]). */
static void test_camera_section(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD, &r);
    assert_int_equal(r.camera.set, 0);
    assert_int_equal(r.camera.required, 0);
    assert_int_equal(r.camera.width, 0);
    assert_int_equal(r.camera.stall_ms, 2000);
    load_ok(GOOD "[camera]\nwidth = 640\nheight = 480\nfps = 30\nexposure = 156\n"
                 "power_line = 50\nfocus = 0\nrequired = power_line  exposure\nstall_ms = 500\n",
            &r);
    assert_int_equal(r.camera.width, 640);
    assert_int_equal(r.camera.height, 480);
    assert_true(r.camera.fps == 30.0);
    assert_int_equal(r.camera.exposure, 156);
    assert_int_equal(r.camera.power_line, RCAM_PL_50HZ);
    assert_int_equal(r.camera.focus, 0);
    assert_int_equal(r.camera.stall_ms, 500);
    assert_int_equal(r.camera.set, RCAM_EXPOSURE | RCAM_FOCUS | RCAM_POWER_LINE);
    assert_int_equal(r.camera.required, RCAM_EXPOSURE | RCAM_POWER_LINE);
    load_ok(GOOD "[camera]\npower_line = off\ngain = 7\nwhite_balance_k = 4600\n", &r);
    assert_int_equal(r.camera.power_line, RCAM_PL_OFF);
    assert_int_equal(r.camera.set, RCAM_GAIN | RCAM_WHITE_BALANCE | RCAM_POWER_LINE);

    const char *unset = GOOD "[camera]\ngain = 3\nrequired = gain focus\n";
    load_bad(unset, ST_EFORMAT, line_of(unset, "required", 1),
             "required lists 'focus' but [camera] gives no focus value");
    const char *unknown = GOOD "[camera]\nrequired = gain zoom\n";
    load_bad(unknown, ST_EFORMAT, line_of(unknown, "zoom", 1), "'zoom' is not one of");
    const char *twice = GOOD "[camera]\ngain = 1\nrequired = gain gain\n";
    load_bad(twice, ST_EFORMAT, line_of(twice, "required", 1), "'gain' listed twice");
    const char *hz = GOOD "[camera]\npower_line = 55\n";
    load_bad(hz, ST_EFORMAT, line_of(hz, "55", 1), "'55' is not one of: off 50 60");
    const char *half = GOOD "[camera]\nwidth = 640\n";
    load_bad(half, ST_EFORMAT, line_of(half, "width", 1), "needs width and height together");
    const char *neg = GOOD "[camera]\nexposure = 0\n";
    load_bad(neg, ST_ERANGE, line_of(neg, "exposure", 1), "exposure = 0 is out of range");
    const char *slow = GOOD "[camera]\nfps = 0\n";
    load_bad(slow, ST_ERANGE, line_of(slow, "fps", 1), "fps = 0 is out of range");
    const char *dup = GOOD "[camera]\ngain = 1\n[camera]\n";
    load_bad(dup, ST_EFORMAT, line_of(dup, "[camera]", 2), "duplicate section [camera]");
}

/* [trigger]: the defaults recipes/README.md states, every key read, the
 * word list and the hysteresis order refused when reversed. */
static void test_trigger_section(void **state)
{
    (void)state;
    static struct recipe r;
    load_ok(GOOD, &r);
    assert_int_equal(r.trigger.mode, RECIPE_TRIGGER_KEY);
    assert_int_equal(r.trigger.still_frames, 5);
    assert_true(r.trigger.still_level == 1.5 && r.trigger.presence_level == 24);
    assert_true(r.trigger.enter_share == 0.05 && r.trigger.leave_share == 0.02);
    assert_int_equal(r.trigger.leave_frames, 3);
    assert_int_equal(r.trigger.frozen_frames, 10);
    load_ok(GOOD "[trigger]\nmode = continuous\nstill_frames = 7\nstill_level = 2.5\n"
                 "presence_level = 30\nenter_share = 0.1\nleave_share = 0\nleave_frames = 4\n"
                 "frozen_frames = 3\n",
            &r);
    assert_int_equal(r.trigger.mode, RECIPE_TRIGGER_CONTINUOUS);
    assert_int_equal(r.trigger.still_frames, 7);
    assert_true(r.trigger.still_level == 2.5 && r.trigger.presence_level == 30);
    assert_true(r.trigger.enter_share == 0.1 && r.trigger.leave_share == 0);
    assert_int_equal(r.trigger.leave_frames, 4);
    assert_int_equal(r.trigger.frozen_frames, 3);
    load_ok(GOOD "[trigger]\nmode = auto\n", &r);
    assert_int_equal(r.trigger.mode, RECIPE_TRIGGER_AUTO);
    const char *text = GOOD "[trigger]\nmode = sometimes\n";
    load_bad(text, ST_EFORMAT, line_of(text, "sometimes", 1),
             "mode: 'sometimes' is not one of: key auto continuous");
    text = GOOD "[trigger]\nenter_share = 0.02\nleave_share = 0.03\n";
    load_bad(text, ST_ERANGE, line_of(text, "[trigger]", 1),
             "leave_share 0.03 must be below enter_share 0.02");
    text = GOOD "[trigger]\nfrozen_frames = 1\n";
    load_bad(text, ST_ERANGE, line_of(text, "frozen_frames", 1), "frozen_frames = 1 is out of range");
    text = GOOD "[trigger]\nstill_level = 0\n";
    load_bad(text, ST_ERANGE, line_of(text, "still_level", 1), "still_level = 0 is out of range");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_camera_section),
        cmocka_unit_test(test_demo_recipe),
        cmocka_unit_test(test_zones_and_part),
        cmocka_unit_test(test_zone_errors),
        cmocka_unit_test(test_grade_and_gates_errors),
        cmocka_unit_test(test_evidence_section),
        cmocka_unit_test(test_trigger_section),
        cmocka_unit_test(test_minimal_defaults),
        cmocka_unit_test(test_coarse_key),
        cmocka_unit_test(test_subfolder_model_and_no_gabor),
        cmocka_unit_test(test_paths_stay_in_folder),
        cmocka_unit_test(test_lighting_and_masters),
        cmocka_unit_test(test_indented_line_is_a_key),
        cmocka_unit_test(test_unknown_section),
        cmocka_unit_test(test_unknown_key),
        cmocka_unit_test(test_duplicate_key),
        cmocka_unit_test(test_duplicate_class),
        cmocka_unit_test(test_duplicate_section),
        cmocka_unit_test(test_bad_numbers),
        cmocka_unit_test(test_out_of_range),
        cmocka_unit_test(test_min_area_above_max),
        cmocka_unit_test(test_missing_key),
        cmocka_unit_test(test_missing_section),
        cmocka_unit_test(test_missing_tolerance),
        cmocka_unit_test(test_tolerance_for_non_defect),
        cmocka_unit_test(test_newer_format),
        cmocka_unit_test(test_bad_colour),
        cmocka_unit_test(test_class_rules),
        cmocka_unit_test(test_syntax),
        cmocka_unit_test(test_missing_file),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
