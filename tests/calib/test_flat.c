/* calib/flat and core/flatfield on tiny odd-sized frames: constant frames
 * give gain 1 and the dark level as offset (a Gaussian of a constant is the
 * constant under mode 'reflect', as scipy.ndimage.gaussian_filter), a
 * two-level white frame gives gains that even it out, the file round-trips
 * exactly, and bad files and frames are refused with a message naming the
 * file.  The numpy/scipy comparison of the maps is tests/ref/test_flat.py. */
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

#include "calib/flat.h"

#define W 13
#define H 9

static struct image *constant(int v)
{
    struct image *img = image_new(W, H, 3, NULL);
    assert_non_null(img);
    memset(img->px, v, (size_t)W * H * 3);
    return img;
}

static void test_constant_frames(void **state)
{
    (void)state;
    struct image *w[2] = {constant(120), constant(120)}, *d[1] = {constant(20)};
    const char *names[2] = {"w0.png", "w1.png"};
    struct flat_field *f = NULL;
    struct err e;
    err_clear(&e);
    assert_int_equal(flat_compute(w, names, 2, d, names, 1, 2.0, &f, &e), ST_OK);
    for (size_t i = 0; i < (size_t)W * H * 3; i++) {
        assert_true(fabsf(f->gain[i] - 1.0f) < 1e-5f);
        assert_true(fabsf(f->offset[i] - 20.0f) < 1e-4f);
    }
    assert_true(f->nonuniformity_before < 1e-6 && f->nonuniformity_after < 1e-6);
    struct image *in = constant(70), *out = constant(0);
    in->px[5] = 10; /* below the dark level clamps to 0 */
    assert_int_equal(flatfield_apply(f, in, out, &e), ST_OK);
    assert_int_equal(out->px[0], 50);
    assert_int_equal(out->px[5], 0);
    image_free(in);
    image_free(out);
    flatfield_free(f);
    image_free(w[0]);
    image_free(w[1]);
    image_free(d[0]);
}

static void test_two_levels_even_out(void **state)
{
    (void)state;
    struct image *w = constant(100);
    for (int y = 0; y < H; y++)
        for (int x = W / 2; x < W; x++)
            memset(w->px + ((size_t)y * W + x) * 3, 200, 3);
    const char *name = "w.png";
    struct flat_field *f = NULL;
    struct err e;
    err_clear(&e);
    /* sigma 0.5: radius 2, a step stays mostly a step */
    assert_int_equal(flat_compute(&w, &name, 1, NULL, NULL, 0, 0.5, &f, &e), ST_OK);
    assert_null(f->offset);
    assert_true(f->nonuniformity_before > 0.5);
    struct image *out = constant(0);
    assert_int_equal(flatfield_apply(f, w, out, &e), ST_OK);
    /* far from the step, both halves land on the frame's mean level,
     * (6 x 100 + 7 x 200) / 13 = 153.8 (the smoothing moves it a little) */
    int left = out->px[(4 * W + 0) * 3], right = out->px[(4 * W + W - 1) * 3];
    assert_true(abs(left - right) <= 1);
    assert_true(left > 150 && left < 158);

    char path[] = "/tmp/test_flat_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    assert_int_equal(flatfield_save(path, f, &e), ST_OK);
    struct flat_field *g = NULL;
    assert_int_equal(flatfield_load(path, &g, &e), ST_OK);
    assert_int_equal(g->w, W);
    assert_memory_equal(g->gain, f->gain, (size_t)W * H * 3 * sizeof(float));
    assert_null(g->offset);
    assert_string_equal(g->created, f->created);
    flatfield_free(g);

    /* damaged: one byte of the data changed */
    FILE *fp = fopen(path, "r+b");
    assert_non_null(fp);
    assert_int_equal(fseek(fp, -3, SEEK_END), 0);
    fputc(0x41, fp);
    fclose(fp);
    assert_int_equal(flatfield_load(path, &g, &e), ST_EFORMAT);
    assert_null(g);
    assert_memory_equal(e.msg, path, strlen(path));
    assert_non_null(strstr(e.msg, "data_sha256"));
    /* not a flat field at all */
    fp = fopen(path, "wb");
    fputs("{\"format\": \"something-else\"}\n", fp);
    fclose(fp);
    assert_int_equal(flatfield_load(path, &g, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "not a flat-field file"));
    fp = fopen(path, "wb");
    fclose(fp);
    assert_int_equal(flatfield_load(path, &g, &e), ST_EFORMAT);
    unlink(path);
    assert_int_equal(flatfield_load(path, &g, &e), ST_EIO);

    /* a frame of another size */
    struct image *small = image_new(W - 1, H, 3, NULL);
    assert_int_equal(flatfield_apply(f, small, out, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, "13x9"));
    image_free(small);
    image_free(out);
    image_free(w);
    flatfield_free(f);
}

static void test_refusals(void **state)
{
    (void)state;
    struct image *a = constant(120), *b = image_new(W, H + 2, 3, NULL), *off = constant(3);
    struct image *both[2] = {a, b};
    const char *names[2] = {"a.png", "b.png"};
    struct flat_field *f = NULL;
    struct err e;
    err_clear(&e);
    assert_int_equal(flat_compute(both, names, 2, NULL, NULL, 0, 2.0, &f, &e), ST_EINVAL);
    assert_memory_equal(e.msg, "b.png:", 6);
    assert_int_equal(flat_compute(&off, names, 1, NULL, NULL, 0, 2.0, &f, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "light off"));
    memset(a->px, 255, 9); /* 3 pixels of 117 saturated: over 0.1% */
    assert_int_equal(flat_compute(&a, names, 1, NULL, NULL, 0, 2.0, &f, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "saturated"));
    assert_int_equal(flat_compute(&a, names, 1, NULL, NULL, 0, 0.1, &f, &e), ST_ERANGE);
    assert_null(f);
    image_free(a);
    image_free(b);
    image_free(off);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_constant_frames),
        cmocka_unit_test(test_two_levels_even_out),
        cmocka_unit_test(test_refusals),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
