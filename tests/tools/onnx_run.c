/* onnx_run: runs one ONNX backend test case (a folder with model.onnx and
 * test_data_set_N/input_K.pb, output_0.pb) through core/onnx + core/cnn and
 * compares with the stored output the way ONNX's own backend runner does:
 * numpy.testing.assert_allclose(actual, stored, rtol, atol), i.e.
 * |actual - stored| <= atol + rtol * |stored| elementwise, with rtol 1e-3 and
 * atol 1e-7 unless the case's data.json says otherwise
 * (onnx/backend/test/loader/__init__.py, ONNX 1.12).
 *
 * input_0 is the image; input_1.. are bound to the graph's other inputs (the
 * node tests feed weights that way).  A batch of N is run image by image.
 * Prints one line per data set; exit 0 when all are within tolerance, 1 when
 * any is not, 3 when the case cannot be run (the message says why).
 *
 * TENSOR cuts the graph there instead of at its first output ("" keeps it);
 * "full" brings the output back to the input's size (core/cnn.h's bilinear
 * resampling) before comparing; "bf16" runs the bfloat16 convolutions.
 *
 *   onnx_run CASE_DIR [THREADS [TENSOR [full|bf16]]] */
#include <dirent.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/cnn.h"
#include "core/onnx.h"
#include "toolarg.h"

/* (N, C, H, W) of a rank-3 or rank-4 tensor. */
static int nchw(const struct onnx_tensor *t, int *n, int *c, int *h, int *w)
{
    if (t->rank == 4) {
        *n = (int)t->dims[0];
        *c = (int)t->dims[1];
        *h = (int)t->dims[2];
        *w = (int)t->dims[3];
    } else if (t->rank == 3) {
        *n = 1;
        *c = (int)t->dims[0];
        *h = (int)t->dims[1];
        *w = (int)t->dims[2];
    } else {
        return -1;
    }
    return 0;
}

/* dir/set/name into path; -1 when it does not fit. */
static int join(char *path, size_t len, const char *dir, const char *set, const char *name)
{
    int n = snprintf(path, len, "%s/%s%s%s", dir, set, *set ? "/" : "", name);
    return n < 0 || (size_t)n >= len ? -1 : 0;
}

static void tolerances(const char *dir, double *rtol, double *atol)
{
    char path[4096];
    *rtol = 1e-3;
    *atol = 1e-7;
    json_t *j = join(path, sizeof path, dir, "", "data.json") ? NULL : json_load_file(path, 0, NULL);
    if (!j)
        return;
    if (json_is_number(json_object_get(j, "rtol")))
        *rtol = json_number_value(json_object_get(j, "rtol"));
    if (json_is_number(json_object_get(j, "atol")))
        *atol = json_number_value(json_object_get(j, "atol"));
    json_decref(j);
}

/* 0 within tolerance, 1 not, 3 cannot run. */
static int run_set(const char *dir, const char *set, int threads, const char *cut, const char *mode, double rtol,
                   double atol)
{
    char path[4096];
    struct err e = {0};
    struct onnx_model *m = NULL;
    struct onnx_graph *g = NULL;
    struct cnn_net *net = NULL;
    struct onnx_tensor in = {0}, want = {0}, extra = {0};
    float *hwc = NULL, *out = NULL;
    int rc = 3;
    char name[32];
    if (join(path, sizeof path, dir, "", "model.onnx") || !(m = onnx_model_load(path, &e)) ||
        join(path, sizeof path, dir, set, "input_0.pb") || onnx_tensor_load(path, &in, &e))
        goto done;
    for (int k = 1; k < onnx_model_ninputs(m); k++) {
        snprintf(name, sizeof name, "input_%d.pb", k);
        if (join(path, sizeof path, dir, set, name) || onnx_tensor_load(path, &extra, &e) ||
            onnx_model_bind(m, onnx_model_input(m, k), &extra, &e))
            goto done;
        onnx_tensor_clear(&extra);
    }
    if (join(path, sizeof path, dir, set, "output_0.pb") || onnx_tensor_load(path, &want, &e) ||
        !(g = onnx_graph_cut(m, cut, &e)))
        goto done;
    int n, c, h, w, on, oc, oh, ow;
    if (nchw(&in, &n, &c, &h, &w) || nchw(&want, &on, &oc, &oh, &ow) || on != n) {
        err_set(&e, ST_EFORMAT, "%s: input or output is not 3-D or 4-D with one batch size", dir);
        goto done;
    }
    int gc, gh, gw;
    if (cnn_shape(g, c, h, w, &gc, &gh, &gw, &e))
        goto done;
    struct cnn_dest dest = {.bf16 = strcmp(mode, "bf16") == 0};
    if (strcmp(mode, "full") == 0) {
        dest.w = gw = w;
        dest.h = gh = h;
    }
    if (gc != oc || gh != oh || gw != ow) {
        printf("FAIL %s %s: shape %dx%dx%d, stored %dx%dx%d\n", dir, set, gc, gh, gw, oc, oh, ow);
        rc = 1;
        goto done;
    }
    hwc = malloc((size_t)c * h * w * sizeof *hwc);
    out = malloc((size_t)oc * oh * ow * sizeof *out);
    if (!hwc || !out || !(net = cnn_net_new(g, c, h, w, &dest, threads, &e)))
        goto done;
    double worst = 0, max_abs = 0;
    long bad = 0;
    for (int b = 0; b < n; b++) {
        const float *src = in.v + (size_t)b * c * h * w;
        for (int k = 0; k < c; k++)
            for (size_t p = 0; p < (size_t)h * w; p++)
                hwc[p * c + k] = src[(size_t)k * h * w + p];
        if (cnn_net_run(net, hwc, out, &e))
            goto done;
        const float *ref = want.v + (size_t)b * oc * oh * ow;
        for (int k = 0; k < oc; k++)
            for (size_t p = 0; p < (size_t)oh * ow; p++) {
                double a = out[p * oc + k], r = ref[(size_t)k * oh * ow + p], d = fabs(a - r);
                double excess = d - (atol + rtol * fabs(r));
                if (!(excess <= 0))
                    bad++;
                if (excess > worst || isnan(a))
                    worst = isnan(a) ? INFINITY : excess;
                if (d > max_abs)
                    max_abs = d;
            }
    }
    printf("%s %s %s: %dx%dx%dx%d, max |diff| %.3g, %ld outside rtol %g atol %g\n", bad ? "FAIL" : "ok  ", dir,
           set, n, oc, oh, ow, max_abs, bad, rtol, atol);
    rc = bad ? 1 : 0;
done:
    if (rc == 3)
        printf("ERROR %s %s: %s\n", dir, set, e.msg);
    cnn_net_free(net);
    onnx_graph_free(g);
    onnx_model_free(m);
    onnx_tensor_clear(&in);
    onnx_tensor_clear(&want);
    onnx_tensor_clear(&extra);
    free(hwc);
    free(out);
    return rc;
}

int main(int argc, char **argv)
{
    int threads = 1;
    if (argc < 2 || argc > 5 || (argc >= 3 && parse_int(argv[2], &threads)) ||
        (argc == 5 && strcmp(argv[4], "full") != 0 && strcmp(argv[4], "bf16") != 0)) {
        fprintf(stderr, "usage: onnx_run CASE_DIR [THREADS [TENSOR [full|bf16]]]\n");
        return 4;
    }
    double rtol, atol;
    tolerances(argv[1], &rtol, &atol);
    DIR *d = opendir(argv[1]);
    if (!d) {
        printf("ERROR %s: cannot open the folder\n", argv[1]);
        return 3;
    }
    char sets[64][64];
    int nsets = 0;
    struct dirent *de;
    while ((de = readdir(d)) && nsets < 64)
        if (strncmp(de->d_name, "test_data_set_", 14) == 0 && strlen(de->d_name) < 64)
            strcpy(sets[nsets++], de->d_name);
    closedir(d);
    int worst = nsets ? 0 : 3;
    if (!nsets)
        printf("ERROR %s: no test_data_set_* folder\n", argv[1]);
    for (int i = 0; i < nsets; i++) {
        int rc = run_set(argv[1], sets[i], threads, argc >= 4 ? argv[3] : "", argc == 5 ? argv[4] : "", rtol,
                         atol);
        if (rc > worst)
            worst = rc;
    }
    return worst;
}
