/* core/cnnfeat + the feat_compute hook + the recipe's cnn_* keys, on a
 * network built here with the generated protobuf-c code: one 1x1 Conv from
 * 3 channels to 3 with weights chosen so each output is known by hand
 * (out0 = R' + 0.5, out1 = G' - B', out2 = -R', primes being the prepared
 * inputs (byte * scale - mean) / std), followed by a Relu.  Expected values
 * are that arithmetic (by construction), and the filter bank's colour
 * features are byte / 255 (core/features.h) when normalise is off. */
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

#include "core/features.h"
#include "core/recipe.h"
#include "onnx/onnx.pb-c.h"
#include "tests/testkit.h"

static const char *model_path, *recipe_path;

#define RECIPE_HEAD                                                                                                \
    "[product]\nformat = 1\nid = t-1\nversion = 1\n"                                                               \
    "[class background]\ndefect = no\ncolour = #000000\n[class surface]\ndefect = no\ncolour = #00ff00\n"            \
    "[class scratch]\ndefect = yes\ncolour = #ff0000\n"                                                            \
    "[classifier]\nmodel = m.ubj\nrounds = 5\ndepth = 3\nlearning_rate = 0.5\nseed = 0\nthreads = 1\n"             \
    "early_stop = 0\nsamples_per_class = 10\nvalidation_fraction = 0.5\n"                                          \
    "[scale]\nmm_per_px_x = 0.05\nmm_per_px_y = 0.05\n"                                                            \
    "[tolerance scratch]\nmin_area_mm2 = none\nmax_area_mm2 = 1\nmax_total_mm2 = none\nmax_count = 0\n"

static void write_model(const char *path)
{
    static float w[9] = {1, 0, 0, /* out0 = R */ 0, 1, -1, /* out1 = G - B */ -1, 0, 0 /* out2 = -R */};
    static float b[3] = {0.5f, 0, 0};
    static int64_t wdims[4] = {3, 3, 1, 1}, bdims[1] = {3};
    Onnx__TensorProto tw = ONNX__TENSOR_PROTO__INIT, tb = ONNX__TENSOR_PROTO__INIT;
    tw.name = "w";
    tw.has_data_type = tb.has_data_type = 1;
    tw.data_type = tb.data_type = ONNX__TENSOR_PROTO__DATA_TYPE__FLOAT;
    tw.n_dims = 4;
    tw.dims = wdims;
    tw.n_float_data = 9;
    tw.float_data = w;
    tb.name = "b";
    tb.n_dims = 1;
    tb.dims = bdims;
    tb.n_float_data = 3;
    tb.float_data = b;
    Onnx__TensorProto *inits[2] = {&tw, &tb};
    char *cin[3] = {"x", "w", "b"}, *cout[1] = {"c"}, *rin[1] = {"c"}, *rout[1] = {"r"};
    Onnx__NodeProto conv = ONNX__NODE_PROTO__INIT, relu = ONNX__NODE_PROTO__INIT;
    conv.name = "mix";
    conv.op_type = "Conv";
    conv.n_input = 3;
    conv.input = cin;
    conv.n_output = 1;
    conv.output = cout;
    relu.name = "clip";
    relu.op_type = "Relu";
    relu.n_input = 1;
    relu.input = rin;
    relu.n_output = 1;
    relu.output = rout;
    Onnx__NodeProto *nodes[2] = {&conv, &relu};
    Onnx__ValueInfoProto in = ONNX__VALUE_INFO_PROTO__INIT, out = ONNX__VALUE_INFO_PROTO__INIT;
    in.name = "x";
    out.name = "r";
    Onnx__ValueInfoProto *ins[1] = {&in}, *outs[1] = {&out};
    Onnx__GraphProto g = ONNX__GRAPH_PROTO__INIT;
    g.name = "mix";
    g.n_node = 2;
    g.node = nodes;
    g.n_initializer = 2;
    g.initializer = inits;
    g.n_input = 1;
    g.input = ins;
    g.n_output = 1;
    g.output = outs;
    Onnx__OperatorSetIdProto op = ONNX__OPERATOR_SET_ID_PROTO__INIT;
    op.domain = "";
    op.has_version = 1;
    op.version = 13;
    Onnx__OperatorSetIdProto *ops[1] = {&op};
    Onnx__ModelProto m = ONNX__MODEL_PROTO__INIT;
    m.has_ir_version = 1;
    m.ir_version = 8;
    m.n_opset_import = 1;
    m.opset_import = ops;
    m.graph = &g;
    size_t len = onnx__model_proto__get_packed_size(&m);
    uint8_t *buf = malloc(len);
    assert_non_null(buf);
    onnx__model_proto__pack(&m, buf);
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(buf, 1, len, f), len);
    assert_int_equal(fclose(f), 0);
    free(buf);
}

static int setup(void **state)
{
    (void)state;
    if (testkit_scratch_setup("test_cnnfeat"))
        return -1;
    model_path = testkit_path("mix.onnx");
    recipe_path = testkit_path("r.ini");
    write_model(model_path);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}

static int load(const char *features, struct recipe *r, struct err *e)
{
    char text[4096];
    const char *path = recipe_path;
    /* the model beside the recipe, named relative to it (recipes/README.md, "Paths") */
    snprintf(text, sizeof text, RECIPE_HEAD "[features]\nnormalise = no\nthreads = 2\ncnn_model = %s\n%s",
             strrchr(model_path, '/') + 1, features);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    assert_int_equal(fclose(f), 0);
    err_clear(e);
    return recipe_load(path, r, e);
}

static struct image *frame(int w, int h)
{
    struct err e;
    struct image *img = image_new(w, h, 3, &e);
    assert_non_null(img);
    for (int i = 0; i < w * h * 3; i++)
        img->px[i] = (uint8_t)((i * 37 + 11) % 256);
    return img;
}

static void test_network_only(void **state)
{
    (void)state;
    struct recipe r;
    struct err e;
    if (load("families = none\ncnn_mean = 0.1 0.2 0.3\ncnn_std = 0.5 0.25 2\n", &r, &e))
        fail_msg("%s", e.msg);
    assert_int_equal(r.feat.cnn.params, 12);
    assert_int_equal(feat_count(&r.feat), 3);
    char name[64];
    assert_int_equal(feat_name(&r.feat, 1, name, sizeof name), ST_OK);
    assert_string_equal(name, "cnn_r_c1");
    struct image *img = frame(13, 7);
    struct feat_ctx *ctx = feat_ctx_new(&r.feat, 13, 7, &e);
    assert_non_null(ctx);
    struct fstack *fs = fstack_new(13, 7, 3, &e);
    assert_int_equal(feat_compute(ctx, img, fs, &e), ST_OK);
    for (int p = 0; p < 13 * 7; p++) {
        double rr = (img->px[3 * p] / 255.0 - 0.1) / 0.5, gg = (img->px[3 * p + 1] / 255.0 - 0.2) / 0.25,
               bb = (img->px[3 * p + 2] / 255.0 - 0.3) / 2;
        assert_float_equal(fs->v[3 * p], fmax(0, rr + 0.5), 1e-5);
        assert_float_equal(fs->v[3 * p + 1], fmax(0, gg - bb), 1e-5);
        assert_float_equal(fs->v[3 * p + 2], fmax(0, -rr), 1e-5);
    }
    fstack_free(fs);
    feat_ctx_free(ctx);
    image_free(img);
}

/* colour, then the network's channels 2 and 0 in that order; bgr input */
static void test_bank_then_network(void **state)
{
    (void)state;
    struct recipe r;
    struct err e;
    assert_int_equal(load("families = colour\ncnn_channels = 2 0\ncnn_input = bgr\n", &r, &e), ST_OK);
    assert_int_equal(feat_count(&r.feat), 5);
    char name[64];
    assert_int_equal(feat_name(&r.feat, 3, name, sizeof name), ST_OK);
    assert_string_equal(name, "cnn_r_c2");
    struct image *img = frame(9, 11);
    struct feat_ctx *ctx = feat_ctx_new(&r.feat, 9, 11, &e);
    assert_non_null(ctx);
    struct fstack *fs = fstack_new(9, 11, 5, &e);
    assert_int_equal(feat_compute(ctx, img, fs, &e), ST_OK);
    for (int p = 0; p < 9 * 11; p++) {
        const uint8_t *px = img->px + 3 * p;
        for (int c = 0; c < 3; c++)
            assert_float_equal(fs->v[5 * p + c], px[c] / 255.0, 1e-6);
        double first = px[2] / 255.0; /* bgr: the network's channel 0 is B */
        assert_float_equal(fs->v[5 * p + 3], fmax(0, -first), 1e-6);
        assert_float_equal(fs->v[5 * p + 4], fmax(0, first + 0.5), 1e-6);
    }
    fstack_free(fs);
    feat_ctx_free(ctx);
    image_free(img);
}

/* feat_compute_box with a network beside the bank: the box's features (the
 * bank's and the network's) are the whole frame's bit for bit, and nothing
 * outside the box is written (features.h: feat_compute_box), at the middle,
 * a border and a corner.  The network's receptive field is held to the
 * whole frame by tests/ref/test_cnn.py (tests/tools/cnn_box). */
static void test_box_with_network(void **state)
{
    (void)state;
    struct recipe r;
    struct err e;
    assert_int_equal(load("families = colour\ncnn_channels = 2 0\n", &r, &e), ST_OK);
    struct image *img = frame(23, 17);
    struct feat_ctx *ctx = feat_ctx_new(&r.feat, 23, 17, &e);
    struct fstack *whole = fstack_new(23, 17, 5, &e), *fs = fstack_new(23, 17, 5, &e);
    assert_non_null(ctx);
    assert_int_equal(feat_compute(ctx, img, whole, &e), ST_OK);
    const struct feat_box boxes[] = {{5, 4, 12, 9}, {0, 3, 6, 17}, {20, 15, 23, 17}};
    for (size_t b = 0; b < sizeof boxes / sizeof boxes[0]; b++) {
        const struct feat_box *bx = &boxes[b];
        for (size_t i = 0; i < (size_t)23 * 17 * 5; i++)
            fs->v[i] = -12345.0f;
        assert_int_equal(feat_compute_box(ctx, img, bx, fs, &e), ST_OK);
        for (int y = 0; y < 17; y++)
            for (int x = 0; x < 23; x++)
                for (int k = 0; k < 5; k++) {
                    size_t at = ((size_t)y * 23 + x) * 5 + k;
                    int inside = x >= bx->x0 && x < bx->x1 && y >= bx->y0 && y < bx->y1;
                    if (inside && memcmp(&fs->v[at], &whole->v[at], sizeof(float)) != 0)
                        fail_msg("box %zu: feature %d at (%d, %d) is %.9g, whole frame %.9g", b, k, x, y, fs->v[at],
                                 whole->v[at]);
                    if (!inside && fs->v[at] != -12345.0f)
                        fail_msg("box %zu: feature %d at (%d, %d) outside the box was written", b, k, x, y);
                }
    }
    fstack_free(fs);
    fstack_free(whole);
    feat_ctx_free(ctx);
    image_free(img);
}

static void test_refusals(void **state)
{
    (void)state;
    struct recipe r;
    struct err e;
    static const struct {
        const char *features, *says;
    } bad[] = {
        {"families = colour\ncnn_channels = 0-3\n", "cnn_channels 0-3 outside tensor r's 0-2"},
        {"families = colour\ncnn_channels = 1 1\n", "lists channel 1 twice"},
        {"families = colour\ncnn_channels = one\n", "expected numbers and ranges"},
        {"families = colour\ncnn_std = 1 0 1\n", "cnn_std '1 0 1' must be three numbers above 0"},
        {"families = colour\ncnn_mean = 1 2\n", "must be three numbers"},
        {"families = colour\ncnn_output = nowhere\n", "tensor nowhere is produced by no node and is no input"},
        {"families = colour\ncnn_output = w\n", "tensor w is a constant"},
        {"families = colour\ncnn_input = rbg\n", "cnn_input: 'rbg' is not one of: rgb bgr"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        assert_int_not_equal(load(bad[i].features, &r, &e), ST_OK);
        if (!strstr(e.msg, bad[i].says))
            fail_msg("'%s' gave '%s', expected '%s'", bad[i].features, e.msg, bad[i].says);
    }
    /* without cnn_model: families = none and cnn_* keys are refused */
    char text[2048];
    const char *path = recipe_path;
    snprintf(text, sizeof text, RECIPE_HEAD "[features]\nfamilies = none\n");
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    assert_int_equal(fclose(f), 0);
    assert_int_not_equal(recipe_load(path, &r, &e), ST_OK);
    assert_non_null(strstr(e.msg, "families = none needs cnn_model"));
    f = fopen(path, "w");
    assert_non_null(f);
    fprintf(f, RECIPE_HEAD "[features]\nfamilies = colour\ncnn_output = r\n");
    assert_int_equal(fclose(f), 0);
    assert_int_not_equal(recipe_load(path, &r, &e), ST_OK);
    assert_non_null(strstr(e.msg, "cnn_* keys need cnn_model"));
}

/* a network file that changes after the recipe read it is refused */
static void test_changed_file(void **state)
{
    (void)state;
    struct recipe r;
    struct err e;
    assert_int_equal(load("families = colour\n", &r, &e), ST_OK);
    FILE *f = fopen(model_path, "ab");
    assert_non_null(f);
    fputc(0, f); /* another digest: checked before the file is parsed again */
    assert_int_equal(fclose(f), 0);
    struct feat_ctx *ctx = feat_ctx_new(&r.feat, 8, 8, &e);
    assert_null(ctx);
    assert_non_null(strstr(e.msg, "the network file changed"));
    write_model(model_path);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_network_only),
        cmocka_unit_test(test_bank_then_network),
        cmocka_unit_test(test_box_with_network),
        cmocka_unit_test(test_refusals),
        cmocka_unit_test(test_changed_file),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
