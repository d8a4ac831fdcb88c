/* station/label_*: the labelling tool driven by scripted SDL events under
 * SDL's offscreen video driver with the software renderer; the saved masks
 * read back through libpng and compared pixel for pixel with masks this
 * test computes on its own.
 *
 * Outside sources: a disc is the set of pixel centres within r of its
 * centre ((x - cx)² + (y - cy)² <= r², the usual digital disc, e.g.
 * scikit-image's draw.disk with centre and radius); a line's samples are
 * the DDA points (x0 + round(k dx / n), y0 + round(k dy / n)), k = 1..n,
 * n = max(|dx|, |dy|) (the digital differential analyser as textbooks
 * give it; common practice, no single source); the fill is checked
 * against scikit-image's segmentation.flood in tests/ref/test_label_fill.py;
 * here against a rectangle painted into the picture, whose pixels are
 * exactly the region a 4-connected fill of its colour must find.  IoU is
 * the Jaccard index per class averaged over the classes present (sklearn's
 * jaccard_score(average=None), the definition core/metrics.h states and
 * tests/ref/test_metrics.py holds it to).  The snapshots stay in
 * label-shots/ beside this program for a person to look at. */
#define _XOPEN_SOURCE 700   /* nftw */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <SDL.h>
#include <ftw.h>
#include <libgen.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "core/metrics.h"
#include "core/pngio.h"
#include "station/label_app.h"
#include "station/label_doc.h"
#include "station/simbench.h"

#define W 97
#define H 61
/* the rectangle the fill must find, in a colour far from the gradient */
#define RX0 60
#define RY0 10
#define RX1 80   /* exclusive */
#define RY1 30

static char shot_dir[512];
static char dir[64];

static int rm_one(const char *p, const struct stat *st, int flag, struct FTW *f)
{
    (void)st, (void)flag, (void)f;
    return remove(p);
}

static void rm_tree(const char *p)
{
    nftw(p, rm_one, 8, FTW_DEPTH | FTW_PHYS);
}

static void write_png(const char *path, const struct image *img)
{
    struct err e;
    err_clear(&e);
    if (pngio_save(path, img, 1, &e))
        fail_msg("%s", e.msg);
}

/* A fresh dataset of two W x H pictures: a gradient with the rectangle. */
static void make_dataset(void)
{
    rm_tree(dir);
    char p[128];
    snprintf(p, sizeof p, "%s/images", dir);
    assert_int_equal(mkdir(dir, 0777), 0);
    assert_int_equal(mkdir(p, 0777), 0);
    struct err e;
    struct image *img = image_new(W, H, 3, &e);
    assert_non_null(img);
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++) {
            uint8_t *px = &img->px[((size_t)y * W + x) * 3];
            int in = x >= RX0 && x < RX1 && y >= RY0 && y < RY1;
            px[0] = in ? 200 : (uint8_t)(x * 2);
            px[1] = in ? 40 : (uint8_t)(y * 3);
            px[2] = in ? 40 : 128;
        }
    snprintf(p, sizeof p, "%s/images/a.png", dir);
    write_png(p, img);
    snprintf(p, sizeof p, "%s/images/b.png", dir);
    write_png(p, img);
    image_free(img);
}

static struct label_app *open_app(const char *recipe, struct err *e)
{
    struct label_app_options o = {0};
    label_view_options_init(&o.view);
    o.view.allow_offscreen = 1;
    o.dir = dir;
    o.recipe = recipe;
    struct label_app *a = NULL;
    err_clear(e);
    label_app_new(&o, &a, e);
    return a;
}

static void run_script(struct label_app *a, const char *text)
{
    char path[128];
    snprintf(path, sizeof path, "%s/script.txt", dir);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    assert_int_equal(fclose(f), 0);
    struct err e;
    err_clear(&e);
    if (label_app_script(a, path, &e))
        fail_msg("%s", e.msg);
    unlink(path);
}

/* The test's own rasterisation (see the head comment). */
static void disc(uint8_t *m, int cx, int cy, int r, uint8_t v)
{
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            if ((x - cx) * (x - cx) + (y - cy) * (y - cy) <= r * r)
                m[y * W + x] = v;
}

static long round_half_away(double v)
{
    return v < 0 ? -(long)(-v + 0.5) : (long)(v + 0.5);
}

static void stroke(uint8_t *m, const int (*pt)[2], int n, int r, uint8_t v)
{
    disc(m, pt[0][0], pt[0][1], r, v);
    for (int i = 1; i < n; i++) {
        int dx = pt[i][0] - pt[i - 1][0], dy = pt[i][1] - pt[i - 1][1];
        int steps = abs(dx) > abs(dy) ? abs(dx) : abs(dy);
        for (int k = 1; k <= steps; k++)
            disc(m, pt[i - 1][0] + (int)round_half_away((double)k * dx / steps),
                 pt[i - 1][1] + (int)round_half_away((double)k * dy / steps), r, v);
    }
}

static struct image *load_saved(const char *stem)
{
    char p[128];
    snprintf(p, sizeof p, "%s/labels/%s.png", dir, stem);
    struct image *lab = NULL;
    struct err e;
    err_clear(&e);
    if (pngio_load_label(p, 0, &lab, &e))
        fail_msg("%s", e.msg);
    assert_int_equal(lab->w, W);
    assert_int_equal(lab->h, H);
    return lab;
}

static void assert_same_mask(const uint8_t *got, const uint8_t *want)
{
    for (int i = 0; i < W * H; i++)
        if (got[i] != want[i])
            fail_msg("pixel (%d, %d): saved %d, painted %d", i % W, i / W, got[i], want[i]);
}

static void shot(struct label_app *a, const char *name)
{
    char p[600];
    snprintf(p, sizeof p, "%s/%s.png", shot_dir, name);
    struct err e;
    err_clear(&e);
    if (label_app_draw(a, &e) || label_view_snapshot(a->view, p, &e))
        fail_msg("%s", e.msg);
}

static void test_strokes_erase_fill_undo_redo_save(void **state)
{
    (void)state;
    make_dataset();
    struct err e;
    struct label_app *a = open_app(NULL, &e);
    if (!a)
        fail_msg("%s", e.msg);
    assert_true(a->zoom.scale >= 1);   /* every pixel addressable */
    /* radius 4 by default: 3 then 5 after two ']' */
    run_script(a, "key 2\nkey [\n"
                  "down 10 10\nmove 14 12\nmove 30 20\nmove 31 40\nup 31 40\n"
                  "key ]\nkey ]\nkey ]\n"
                  "down 20 15 right\nmove 26 18\nup 26 18 right\n"
                  "key f\nkey 7\ndown 65 20\nup 65 20\n"
                  "key z ctrl\nkey y ctrl\n"
                  "key b\nkey 1\ndown 50 50\nmove 60 52\nup 60 52\n"
                  "key z ctrl\n");
    /* the same edits by the test's own rules */
    uint8_t want[W * H];
    memset(want, 255, sizeof want);
    const int s1[][2] = {{10, 10}, {14, 12}, {30, 20}, {31, 40}, {31, 40}};
    stroke(want, s1, 5, 3, 2);
    const int s2[][2] = {{20, 15}, {26, 18}, {26, 18}};
    stroke(want, s2, 3, 6, 255);
    for (int y = RY0; y < RY1; y++)
        for (int x = RX0; x < RX1; x++)
            want[y * W + x] = 7;
    assert_true(label_doc_dirty(a->doc));
    assert_int_equal(label_app_mark(a, 0), LABEL_MARK_UNSAVED);
    shot(a, "label-strokes");
    run_script(a, "key s\n");
    assert_false(label_doc_dirty(a->doc));
    assert_int_equal(label_app_mark(a, 0), LABEL_MARK_SAVED);
    assert_int_equal(label_app_mark(a, 1), LABEL_MARK_NONE);
    struct image *lab = load_saved("a");
    assert_same_mask(lab->px, want);
    image_free(lab);
    /* the undone stroke is redoable until a new edit, which drops it */
    assert_true(label_doc_can_redo(a->doc));
    run_script(a, "key 3\ndown 5 55\nup 5 55\n");
    assert_false(label_doc_can_redo(a->doc));
    disc(want, 5, 55, 6, 3);
    /* stepping to the next image saves the changed mask */
    run_script(a, "key n\n");
    assert_int_equal(a->cur, 1);
    lab = load_saved("a");
    assert_same_mask(lab->px, want);
    image_free(lab);
    char tmp[128];
    snprintf(tmp, sizeof tmp, "%s/labels/a.png.tmp", dir);
    assert_int_not_equal(access(tmp, F_OK), 0);   /* renamed, not left behind */
    assert_int_equal(label_app_free(a, &e), ST_OK);
    /* reopened, the saved mask is what shows */
    a = open_app(NULL, &e);
    assert_non_null(a);
    assert_same_mask(label_doc_mask(a->doc), want);
    assert_false(label_doc_dirty(a->doc));
    label_app_free(a, &e);
}

static void test_panel_click_and_unsavable_quit(void **state)
{
    (void)state;
    make_dataset();
    /* a file where the labels folder should be: no mask can be saved */
    char p[128];
    snprintf(p, sizeof p, "%s/labels", dir);
    FILE *f = fopen(p, "w");
    assert_non_null(f);
    fclose(f);
    struct err e;
    struct label_app *a = open_app(NULL, &e);
    if (!a)
        fail_msg("%s", e.msg);
    /* zoomed in, image pixels lie under the panel too: a click there paints none */
    double before = a->zoom.scale;
    run_script(a, "move 90 30\nwheel 90 30 5\n");
    int px, py;
    label_zoom_to_image(&a->zoom, a->mouse_x, a->mouse_y, &px, &py);
    assert_int_equal(px, 90);   /* zoomed around the pointer: the same pixel under it */
    assert_int_equal(py, 30);
    assert_true(fabs(a->zoom.scale / before - pow(LABEL_ZOOM_STEP, 5)) < 1e-9);
    SDL_Event ev;
    memset(&ev, 0, sizeof ev);
    ev.type = SDL_MOUSEBUTTONDOWN;
    ev.button.button = SDL_BUTTON_LEFT;
    ev.button.x = a->zoom.area.x + a->zoom.area.w + 20;
    ev.button.y = a->zoom.area.y + a->zoom.area.h / 2;
    int ix, iy;
    label_zoom_to_image(&a->zoom, ev.button.x, ev.button.y, &ix, &iy);
    assert_true(ix >= 0 && ix < W && iy >= 0 && iy < H);   /* an image pixel is under it */
    assert_int_equal(label_app_event(a, &ev, &e), ST_OK);
    ev.type = SDL_MOUSEBUTTONUP;
    assert_int_equal(label_app_event(a, &ev, &e), ST_OK);
    assert_int_equal(label_doc_labelled(a->doc), 0);
    /* a stroke that cannot be saved keeps the window open once */
    run_script(a, "key z\ndown 10 10\nup 10 10\n");
    assert_true(label_doc_dirty(a->doc));
    memset(&ev, 0, sizeof ev);
    ev.type = SDL_KEYDOWN;
    ev.key.keysym.sym = SDLK_q;
    assert_int_not_equal(label_app_event(a, &ev, &e), ST_OK);
    assert_false(a->quit);
    assert_non_null(strstr(a->status, "quit again to leave without saving"));
    assert_non_null(strstr(e.msg, "/labels/a.png"));
    assert_int_equal(label_app_event(a, &ev, &e), ST_OK);
    assert_true(a->quit);
    assert_int_not_equal(label_app_free(a, &e), ST_OK);   /* and says why at the end */
    unlink(p);
}

static void test_undo_history_is_bounded(void **state)
{
    (void)state;
    struct err e;
    /* room for three one-tile steps (2 tiles' bytes each: before and after) */
    struct label_doc *d = label_doc_new(200, 100, 3 * 2 * LABEL_TILE * LABEL_TILE, &e);
    assert_non_null(d);
    for (int i = 0; i < 6; i++) {
        label_doc_begin(d);
        label_doc_dab(d, 5 + 33 * i, 5, 1, (uint8_t)i);
        assert_int_equal(label_doc_end(d, &e), ST_OK);
        assert_true(label_doc_history_bytes(d) <= 3 * 2 * LABEL_TILE * LABEL_TILE);
    }
    int undone = 0;
    assert_true(label_doc_can_undo(d));
    while (label_doc_undo(d))
        undone++;
    assert_int_equal(undone, 3);
    /* the history held three steps: none is left to undo */
    assert_false(label_doc_can_undo(d));
    /* the three oldest dabs stay: their undo was forgotten */
    const uint8_t *m = label_doc_mask(d);
    assert_int_equal(m[5 * 200 + 5], 0);
    assert_int_equal(m[5 * 200 + 71], 2);
    assert_int_equal(m[5 * 200 + 104], 255);
    /* a step that paints and paints back leaves nothing to undo */
    label_doc_begin(d);
    label_doc_dab(d, 150, 50, 2, 9);
    label_doc_dab(d, 150, 50, 2, 255);
    assert_int_equal(label_doc_end(d, &e), ST_OK);
    assert_true(label_doc_can_redo(d));
    label_doc_free(d);
}

static void write_label(const char *stem, int w, int h, uint8_t v)
{
    char p[128];
    snprintf(p, sizeof p, "%s/labels", dir);
    mkdir(p, 0777);
    snprintf(p, sizeof p, "%s/labels/%s.png", dir, stem);
    struct err e;
    struct image *m = image_new(w, h, 1, &e);
    assert_non_null(m);
    memset(m->px, 255, (size_t)w * h);
    m->px[3] = v;
    write_png(p, m);
    image_free(m);
}

static void test_bad_label_files_are_refused(void **state)
{
    (void)state;
    struct err e;
    make_dataset();
    write_label("b", W - 1, H, 1);
    assert_null(open_app(NULL, &e));
    assert_non_null(strstr(e.msg, "/labels/b.png: label mask is 96x61 but its image is 97x61"));
    assert_null(strchr(e.msg, '\n'));
    make_dataset();
    write_label("a", W, H, 5);   /* the recipe below has 5 classes: 0..4 */
    assert_null(open_app("recipes/ostrel-cap38.ini", &e));
    assert_non_null(strstr(e.msg, "/labels/a.png: label value 5 at (3,0) is not a class (0..4)"));
    /* without a recipe classes 0..9 are allowed */
    struct label_app *a = open_app(NULL, &e);
    assert_non_null(a);
    label_app_free(a, &e);
}

static void test_offscreen_needs_the_flag(void **state)
{
    (void)state;
    make_dataset();
    struct label_app_options o = {0};
    label_view_options_init(&o.view);
    o.dir = dir;
    struct label_app *a = NULL;
    struct err e;
    err_clear(&e);
    assert_int_equal(label_app_new(&o, &a, &e), ST_ELIB);
    assert_null(a);
    assert_non_null(strstr(e.msg, "'offscreen' video driver shows nothing"));
}

static int deep(const struct image *t, int c, int r, int x, int y)
{
    for (int dy = -r; dy <= r; dy++)
        for (int dx = -r; dx <= r; dx++)
            if (dx * dx + dy * dy <= r * r && t->px[(y + dy) * t->w + x + dx] != c)
                return 0;
    return 1;
}

/* Up to `most` pixels of class c whose whole disc of radius r is of class
 * c, spread evenly over all such pixels in row order. */
static int deep_pixels(const struct image *t, int c, int r, int *xs, int *ys, int most)
{
    int total = 0, n = 0, k = 0;
    for (int y = r; y < t->h - r; y++)
        for (int x = r; x < t->w - r; x++)
            total += deep(t, c, r, x, y);
    for (int y = r; y < t->h - r && n < most; y++)
        for (int x = r; x < t->w - r && n < most; x++) {
            if (!deep(t, c, r, x, y))
                continue;
            if (k++ == (int)(((long)n * total + total / 2) / most)) {
                xs[n] = x;
                ys[n++] = y;
            }
        }
    return n;
}

static void paint_from_truth(struct label_app *a, const struct image *truth)
{
    char script[16384];
    size_t len = 0;
    for (int c = 0; c < SIM_NCLASSES; c++) {
        int xs[12], ys[12];
        /* radius 2 on the large classes, 1 on the thin defects */
        int r = c <= SIM_SURFACE ? 2 : 1;
        int n = deep_pixels(truth, c, r, xs, ys, c <= SIM_SURFACE ? 12 : 4);
        len += (size_t)snprintf(script + len, sizeof script - len, "key %d\n", c);
        for (int k = 0; k < LABEL_APP_MAX_RADIUS; k++)
            len += (size_t)snprintf(script + len, sizeof script - len, "key [\n");
        for (int k = 0; k < r; k++)
            len += (size_t)snprintf(script + len, sizeof script - len, "key ]\n");
        /* a stroke along the row while the disc stays inside the class, at
         * most 40 px, as an engineer drags the brush along a region */
        for (int i = 0; i < n; i++) {
            int x1 = xs[i];
            while (x1 + 1 < truth->w - r && x1 - xs[i] < 40 && deep(truth, c, r, x1 + 1, ys[i]))
                x1++;
            len += (size_t)snprintf(script + len, sizeof script - len,
                                    "down %d %d\nmove %d %d\nup %d %d\n", xs[i], ys[i], x1,
                                    ys[i], x1, ys[i]);
        }
    }
    run_script(a, script);
}

static double mean_iou(const struct image *truth, const uint8_t *pred)
{
    struct confusion cm;
    metrics_init(&cm, SIM_NCLASSES);
    struct err e;
    assert_int_equal(metrics_add(&cm, truth->px, pred, (size_t)truth->w * truth->h, &e), ST_OK);
    return metrics_mean_iou(&cm, NULL);
}

static void test_quick_retrain_improves_the_overlay(void **state)
{
    (void)state;
    rm_tree(dir);
    char p[128];
    snprintf(p, sizeof p, "%s/images", dir);
    assert_int_equal(mkdir(dir, 0777), 0);
    assert_int_equal(mkdir(p, 0777), 0);
    struct simbench_conditions cond;
    simbench_conditions_nominal(&cond);
    struct image *truth[3] = {0};
    struct err e;
    for (int i = 0; i < 3; i++) {
        struct image *img;
        /* seed 5: part 0 has scratches and a pit, part 1 a stain, part 2 a stain and a pit */
        assert_int_equal(simbench_render(5, i, &cond, 320, 240, &img, &truth[i], NULL, &e), ST_OK);
        snprintf(p, sizeof p, "%s/images/part_%d.png", dir, i);
        write_png(p, img);
        image_free(img);
    }
    struct label_app *a = open_app("recipes/ostrel-cap38.ini", &e);
    if (!a)
        fail_msg("%s", e.msg);
    struct stat before;
    int there = stat(a->r.model_path, &before) == 0;
    paint_from_truth(a, truth[0]);
    run_script(a, "key n\n");
    paint_from_truth(a, truth[1]);
    run_script(a, "key p\n");
    assert_int_equal(a->cur, 0);
    assert_int_equal(label_app_mark(a, 1), LABEL_MARK_SAVED);
    /* untrained: no prediction, which is read as the best a constant class
     * can do (background, the majority class) */
    uint8_t *flat = malloc((size_t)320 * 240);
    assert_non_null(flat);
    double best_const = 0;
    for (int c = 0; c < SIM_NCLASSES; c++) {
        memset(flat, c, (size_t)320 * 240);
        double m = mean_iou(truth[0], flat);
        best_const = m > best_const ? m : best_const;
    }
    free(flat);
    /* the pointer over the part with a brush of radius 6, for the picture */
    run_script(a, "key 1\nkey ]\nkey ]\nkey ]\nkey ]\nkey ]\nmove 140 150\n");
    shot(a, "label-painted");
    /* what the window shows while the quick model trains */
    char tp[600];
    snprintf(tp, sizeof tp, "%s/label-training.png", shot_dir);
    if (label_view_draw(a->view, a, "training the quick model on the painted pixels…", &e) ||
        label_view_snapshot(a->view, tp, &e))
        fail_msg("%s", e.msg);
    if (label_app_retrain(a, &e))
        fail_msg("%s", e.msg);
    assert_non_null(a->model);
    assert_non_null(a->pred);
    assert_true(a->show_pred);
    shot(a, "label-prediction");
    double trained = mean_iou(truth[0], a->pred->px);
    print_message("mean IoU on part 0: quick model %.3f, best constant class %.3f (%s)\n",
                  trained, best_const, a->status);
    /* floor 0.4: below what this run measures (0.51: background and surface
     * near 1, scratch 0.46, pit 0.13, a few stain pixels where there is
     * none) and twice the best constant (0.19) */
    assert_true(trained > best_const);
    assert_true(trained > 0.4);
    /* the recipe's model file is as it was (there or not) */
    struct stat after;
    int there_after = stat(a->r.model_path, &after) == 0;
    assert_int_equal(there_after, there);
    if (there)
        assert_true(after.st_mtime == before.st_mtime && after.st_size == before.st_size);
    label_app_free(a, &e);
    for (int i = 0; i < 3; i++)
        image_free(truth[i]);
}

static int group_setup(void **state)
{
    (void)state;
    setenv("SDL_VIDEODRIVER", "offscreen", 1);
    SDL_SetHint(SDL_HINT_RENDER_DRIVER, "software");
    snprintf(dir, sizeof dir, "/tmp/label_test.%d", (int)getpid());
    return 0;
}

static int group_teardown(void **state)
{
    (void)state;
    rm_tree(dir);
    return 0;
}

int main(int argc, char **argv)
{
    (void)argc;
    char self[512];
    snprintf(self, sizeof self, "%s", argv[0]);
    snprintf(shot_dir, sizeof shot_dir, "%s/label-shots", dirname(self));
    mkdir(shot_dir, 0777);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_offscreen_needs_the_flag),
        cmocka_unit_test(test_strokes_erase_fill_undo_redo_save),
        cmocka_unit_test(test_panel_click_and_unsavable_quit),
        cmocka_unit_test(test_undo_history_is_bounded),
        cmocka_unit_test(test_bad_label_files_are_refused),
        cmocka_unit_test(test_quick_retrain_improves_the_overlay),
    };
    return cmocka_run_group_tests(tests, group_setup, group_teardown);
}
