/* Unit tests of core/features: spec checks, the feature list, and properties
 * that follow from the definitions in core/features.h.  The comparison with
 * scipy / skimage themselves is tests/ref/test_features.py. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/features.h"

static struct image *frame_new(int w, int h, int channels)
{
    struct err e = {0};
    struct image *img = image_new(w, h, channels, &e);
    assert_non_null(img);
    return img;
}

/* Seeded LCG so the frames are the same on every run. */
static void frame_fill_random(struct image *img, int maxval, uint32_t seed)
{
    size_t n = (size_t)img->w * img->h * img->channels;
    for (size_t i = 0; i < n; i++) {
        seed = seed * 1664525u + 1013904223u;
        img->px[i] = (uint8_t)((seed >> 16) % (uint32_t)(maxval + 1));
    }
}

static struct fstack *features_of(const struct feat_spec *spec, const struct image *img)
{
    struct err e = {0};
    struct feat_ctx *ctx = feat_ctx_new(spec, img->w, img->h, &e);
    assert_non_null(ctx);
    struct fstack *fs = fstack_new(img->w, img->h, feat_count(spec), &e);
    assert_non_null(fs);
    assert_int_equal(feat_compute(ctx, img, fs, &e), ST_OK);
    feat_ctx_free(ctx);
    return fs;
}

static int feature_index(const struct feat_spec *spec, const char *name)
{
    char buf[64];
    for (int k = 0; k < feat_count(spec); k++)
        if (feat_name(spec, k, buf, sizeof buf) == ST_OK && strcmp(buf, name) == 0)
            return k;
    fail_msg("no feature %s", name);
    return -1;
}

static void assert_name(const struct feat_spec *spec, int k, const char *want)
{
    char buf[64];
    assert_int_equal(feat_name(spec, k, buf, sizeof buf), ST_OK);
    assert_string_equal(buf, want);
}

/* reference: the feature order and names documented in core/features.h */
static void test_count_and_names(void **state)
{
    (void)state;
    struct feat_spec spec;
    feat_spec_default(&spec);
    assert_int_equal(feat_count(&spec), 35);
    assert_name(&spec, 0, "colour_r");
    assert_name(&spec, 2, "colour_b");
    assert_name(&spec, 3, "gauss_s1");
    assert_name(&spec, 10, "localstd_s1");
    assert_name(&spec, 21, "laplace_s4");
    assert_name(&spec, 22, "hessian_hi_s4");
    assert_name(&spec, 25, "structure_lo_s4");
    assert_name(&spec, 27, "gabor_f0.1_t0");
    assert_name(&spec, 34, "gabor_f0.25_t135");

    char buf[64];
    assert_int_equal(feat_name(&spec, -1, buf, sizeof buf), ST_ERANGE);
    assert_int_equal(feat_name(&spec, 35, buf, sizeof buf), ST_ERANGE);
    assert_int_equal(feat_name(&spec, 34, buf, 8), ST_ERANGE);

    struct feat_spec sub = {.families = FEAT_GAUSS | FEAT_HESSIAN, .nsigmas = 2, .sigmas = {1.5, 0.5},
                            .threads = 1};
    assert_int_equal(feat_count(&sub), 6);
    assert_name(&sub, 0, "gauss_s1.5");
    assert_name(&sub, 2, "hessian_lo_s1.5");
    assert_name(&sub, 3, "gauss_s0.5");

    struct feat_spec gab = {.families = FEAT_GABOR | FEAT_COLOUR, .gabor_orientations = 8,
                            .ngabor_freqs = 1, .gabor_freqs = {0.5}, .threads = 1};
    assert_int_equal(feat_count(&gab), 11);
    assert_name(&gab, 4, "gabor_f0.5_t22.5");
    assert_name(&gab, 10, "gabor_f0.5_t157.5");
}

static void expect_rejected(const struct feat_spec *spec)
{
    struct err e = {0};
    assert_int_not_equal(feat_spec_check(spec, &e), ST_OK);
    assert_true(strlen(e.msg) > 0);
    assert_int_equal(feat_count(spec), -1);
    assert_null(feat_ctx_new(spec, 9, 7, &e));
}

static void test_spec_check(void **state)
{
    (void)state;
    struct feat_spec good, s;
    struct err e = {0};
    feat_spec_default(&good);
    assert_int_equal(feat_spec_check(&good, &e), ST_OK);

    s = good, s.families = 0, expect_rejected(&s);
    s = good, s.families |= 1u << 8, expect_rejected(&s);
    s = good, s.nsigmas = 0, expect_rejected(&s);
    s = good, s.nsigmas = FEAT_MAX_SIGMAS + 1, expect_rejected(&s);
    s = good, s.sigmas[1] = 0.4, expect_rejected(&s);
    s = good, s.sigmas[1] = 16.5, expect_rejected(&s);
    s = good, s.sigmas[1] = NAN, expect_rejected(&s);
    s = good, s.sigmas[2] = s.sigmas[0], expect_rejected(&s);
    s = good, s.gabor_orientations = 0, expect_rejected(&s);
    s = good, s.gabor_orientations = FEAT_MAX_ORIENT + 1, expect_rejected(&s);
    s = good, s.ngabor_freqs = 0, expect_rejected(&s);
    s = good, s.gabor_freqs[0] = 0.0, expect_rejected(&s);
    s = good, s.gabor_freqs[0] = 0.6, expect_rejected(&s);
    s = good, s.gabor_freqs[1] = s.gabor_freqs[0], expect_rejected(&s);
    s = good, s.normalise = 2, expect_rejected(&s);
    s = good, s.threads = 0, expect_rejected(&s);
    s = good, s.threads = FEAT_MAX_THREADS + 1, expect_rejected(&s);

    /* fields of families that are off are not looked at */
    s = good, s.families = FEAT_COLOUR, s.nsigmas = 0, s.gabor_orientations = 0;
    assert_int_equal(feat_spec_check(&s, &e), ST_OK);
    assert_int_equal(feat_count(&s), 3);
}

static void test_compute_rejects_mismatch(void **state)
{
    (void)state;
    struct feat_spec spec;
    struct err e = {0};
    feat_spec_default(&spec);
    struct feat_ctx *ctx = feat_ctx_new(&spec, 13, 11, &e);
    assert_non_null(ctx);
    struct image *img = frame_new(13, 12, 3);
    struct image *ok = frame_new(13, 11, 3);
    struct fstack *fs = fstack_new(13, 11, feat_count(&spec), &e);
    struct fstack *few = fstack_new(13, 11, feat_count(&spec) - 1, &e);
    assert_int_equal(feat_compute(ctx, img, fs, &e), ST_EINVAL);
    assert_int_equal(feat_compute(ctx, ok, few, &e), ST_EINVAL);
    assert_int_equal(feat_compute(ctx, ok, fs, &e), ST_OK);
    assert_null(feat_ctx_new(&spec, 0, 11, &e));
    feat_ctx_free(NULL);
    fstack_free(few);
    fstack_free(fs);
    image_free(ok);
    image_free(img);
    feat_ctx_free(ctx);
}

/* Sum of scipy's second-derivative Gaussian kernel
 * (scipy.ndimage._filters._gaussian_kernel1d(s, 2, r)), computed here
 * independently of core/filters.c. */
static double laplace_kernel_sum(double s)
{
    int r = (int)(4.0 * s + 0.5);
    double norm = 0.0, sum = 0.0;
    for (int x = -r; x <= r; x++)
        norm += exp(-0.5 * x * x / (s * s));
    for (int x = -r; x <= r; x++)
        sum += (x * x / (s * s * s * s) - 1.0 / (s * s)) * exp(-0.5 * x * x / (s * s)) / norm;
    return sum;
}

/* A uniform frame: every window of a normalised kernel sees the same value
 * under reflection, so gauss = c; antisymmetric kernels and differences of
 * equal samples cancel exactly, so gradient, Hessian, structure tensor and
 * local std are exactly 0; the Laplacian is 2 c sum(k2), which is not 0 for
 * a truncated kernel (scipy.ndimage.gaussian_laplace gives the same). */
static void check_uniform(int normalise)
{
    const double sigmas[2] = {1.0, 3.0};
    struct feat_spec spec;
    feat_spec_default(&spec);
    spec.nsigmas = 2;
    memcpy(spec.sigmas, sigmas, sizeof sigmas);
    spec.normalise = normalise;
    struct image *img = frame_new(23, 17, 3);
    for (size_t i = 0; i < (size_t)23 * 17; i++) {
        img->px[3 * i] = 90;
        img->px[3 * i + 1] = 140;
        img->px[3 * i + 2] = 200;
    }
    struct fstack *fs = features_of(&spec, img);
    /* normalised: a uniform frame's level is its own grey, so grey becomes 0.5 */
    double c = normalise ? 0.5 : (0.299 * 90 + 0.587 * 140 + 0.114 * 200) / 255.0;
    const char *zero[] = {"gradient", "hessian_hi", "hessian_lo", "structure_hi", "structure_lo", "localstd"};
    for (int si = 0; si < 2; si++) {
        char name[64];
        int kg, kl, kz[6];
        snprintf(name, sizeof name, "gauss_s%g", sigmas[si]);
        kg = feature_index(&spec, name);
        snprintf(name, sizeof name, "laplace_s%g", sigmas[si]);
        kl = feature_index(&spec, name);
        for (int z = 0; z < 6; z++) {
            snprintf(name, sizeof name, "%s_s%g", zero[z], sigmas[si]);
            kz[z] = feature_index(&spec, name);
        }
        double lap = 2.0 * c * laplace_kernel_sum(sigmas[si]);
        for (size_t p = 0; p < (size_t)fs->w * fs->h; p++) {
            const float *v = fs->v + p * fs->n;
            /* float32 accumulation over at most 25 taps: 1e-6 relative */
            assert_true(fabs(v[kg] - c) <= 1e-6 * c);
            assert_true(fabs(v[kl] - lap) <= 1e-6 * c);
            for (int z = 0; z < 6; z++)
                assert_true(v[kz[z]] == 0.0f);
        }
    }
    fstack_free(fs);
    image_free(img);
}

static void test_uniform_frame(void **state)
{
    (void)state;
    check_uniform(0);
    check_uniform(1);
}

static double max_rel_diff(const struct fstack *a, const struct fstack *b)
{
    double worst = 0.0;
    for (size_t i = 0; i < (size_t)a->w * a->h * a->n; i++) {
        double d = fabs((double)a->v[i] - b->v[i]) / fmax(1.0, fabs(a->v[i]));
        worst = fmax(worst, d);
    }
    return worst;
}

/* reference: the normalisation in core/features.h; scaling every byte by m
 * scales the mean, the set of pixels above it and their median by m, so the
 * normalised planes, and every feature, are unchanged (within 1e-5 of
 * max(1, |value|): float32 rounding of the scale factor).  Without
 * normalisation they must differ, which shows the check can fail. */
static void test_brightness_scaled(void **state)
{
    (void)state;
    struct feat_spec spec;
    feat_spec_default(&spec);
    for (int m = 2; m <= 3; m++) {
        struct image *dim = frame_new(31, 19, 3);
        frame_fill_random(dim, 255 / m, 7u + (uint32_t)m);
        struct image *bright = image_clone(dim, NULL);
        assert_non_null(bright);
        for (size_t i = 0; i < (size_t)31 * 19 * 3; i++)
            bright->px[i] = (uint8_t)(dim->px[i] * m);
        spec.normalise = 1;
        struct fstack *a = features_of(&spec, dim), *b = features_of(&spec, bright);
        assert_true(max_rel_diff(a, b) <= 1e-5);
        fstack_free(a);
        fstack_free(b);
        spec.normalise = 0;
        a = features_of(&spec, dim);
        b = features_of(&spec, bright);
        assert_true(max_rel_diff(a, b) > 1e-2);
        fstack_free(a);
        fstack_free(b);
        image_free(bright);
        image_free(dim);
    }
}

/* Splitting rows over threads must not change any value: each output is
 * computed by the same operations whichever worker does it.  A grey frame
 * equals the RGB frame with R = G = B (299 + 587 + 114 = 1000). */
/* A box's features are the whole frame's features there, bit for bit
 * (features.h: feat_compute_box), and nothing outside the box is written.
 * Boxes inside, at each border and at a corner of an odd-sized frame; the
 * outside comparison is feat_compute itself, the definition checked against
 * scipy and skimage in tests/ref/test_features.py. */
static void test_box_matches_whole_frame(void **state)
{
    (void)state;
    struct err e = {0};
    struct feat_spec spec;
    feat_spec_default(&spec);
    spec.threads = 3;
    struct image *img = frame_new(101, 87, 3);
    frame_fill_random(img, 255, 11);
    struct fstack *whole = features_of(&spec, img);
    struct feat_ctx *ctx = feat_ctx_new(&spec, img->w, img->h, &e);
    struct fstack *fs = fstack_new(img->w, img->h, feat_count(&spec), &e);
    assert_non_null(ctx);
    assert_non_null(fs);
    const struct feat_box boxes[] = {{23, 31, 64, 58}, {0, 0, 17, 87}, {90, 70, 101, 87}, {5, 0, 101, 9}};
    for (size_t b = 0; b < sizeof boxes / sizeof boxes[0]; b++) {
        const struct feat_box *bx = &boxes[b];
        size_t total = (size_t)fs->w * fs->h * fs->n;
        for (size_t i = 0; i < total; i++)
            fs->v[i] = -12345.0f;
        assert_int_equal(feat_compute_box(ctx, img, bx, fs, &e), ST_OK);
        for (int y = 0; y < img->h; y++)
            for (int x = 0; x < img->w; x++) {
                size_t at = ((size_t)y * fs->w + x) * fs->n;
                int inside = x >= bx->x0 && x < bx->x1 && y >= bx->y0 && y < bx->y1;
                for (int k = 0; k < fs->n; k++) {
                    if (inside && memcmp(&fs->v[at + k], &whole->v[at + k], sizeof(float)) != 0)
                        fail_msg("box %zu: feature %d at (%d, %d) is %.9g, whole frame %.9g", b, k, x, y,
                                 fs->v[at + k], whole->v[at + k]);
                    if (!inside && fs->v[at + k] != -12345.0f)
                        fail_msg("box %zu: (%d, %d) outside the box was written", b, x, y);
                }
            }
    }
    const struct feat_box empty = {10, 10, 10, 20}, out = {0, 0, 102, 87};
    assert_int_equal(feat_compute_box(ctx, img, &empty, fs, &e), ST_EINVAL);
    assert_int_equal(feat_compute_box(ctx, img, &out, fs, &e), ST_EINVAL);
    fstack_free(fs);
    fstack_free(whole);
    feat_ctx_free(ctx);
    image_free(img);
}

static void test_threads_and_grey_input(void **state)
{
    (void)state;
    struct feat_spec spec;
    feat_spec_default(&spec);
    struct image *grey = frame_new(27, 21, 1);
    frame_fill_random(grey, 255, 99u);
    struct image *rgb = frame_new(27, 21, 3);
    for (size_t i = 0; i < (size_t)27 * 21; i++)
        memset(rgb->px + 3 * i, grey->px[i], 3);
    spec.threads = 1;
    struct fstack *one = features_of(&spec, grey);
    spec.threads = 5;
    struct fstack *five = features_of(&spec, grey);
    struct fstack *col = features_of(&spec, rgb);
    size_t n = (size_t)27 * 21 * one->n;
    assert_memory_equal(one->v, five->v, n * sizeof(float));
    assert_memory_equal(one->v, col->v, n * sizeof(float));
    fstack_free(one);
    fstack_free(five);
    fstack_free(col);
    image_free(rgb);
    image_free(grey);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_count_and_names),
        cmocka_unit_test(test_spec_check),
        cmocka_unit_test(test_compute_rejects_mismatch),
        cmocka_unit_test(test_uniform_frame),
        cmocka_unit_test(test_brightness_scaled),
        cmocka_unit_test(test_threads_and_grey_input),
        cmocka_unit_test(test_box_matches_whole_frame),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
