/* cnn_box: checks core/cnn's runs over a box of the destination against a
 * run over the whole of it, on a model cut at TENSOR and a W x H input of
 * fixed pseudo-random values.
 *
 *   cnn_box MODEL.onnx TENSOR W H THREADS [full] [bf16]
 *
 * "full" brings a strided cut back to W x H (the bilinear resampling).  For
 * boxes inside, at each border, at the corners, one pixel and one column,
 * and for two destinations (every channel packed, the destination the last
 * convolution writes itself; every other channel in reverse at a wider
 * pixel stride, as in a feature stack): the box's values must equal the
 * whole run's bit for bit, nothing outside the box may be written, and an
 * input that is NaN outside the pixels cnn_net_input_box names must give
 * the same values (so nothing else is read).  Prints one line per box;
 * exit 0 when all hold, 1 when one does not, 3 when the model cannot run. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/cnn.h"
#include "core/onnx.h"
#include "toolarg.h"

#define SENTINEL -12345.0f

struct frame {
    int iw, ih, c;   /* input */
    int dw, dh;      /* destination */
};

static int check_box(struct cnn_net *net, const struct frame *f, const float *in, const float *whole, float *out,
                     int stride, int nch, const struct cnn_box *b, const char *what)
{
    struct err e = {0};
    struct cnn_box ib;
    int c = f->c;
    size_t ipx = (size_t)f->iw * f->ih, npx = (size_t)f->dw * f->dh, total = npx * stride;
    float *nan_in = malloc(ipx * c * sizeof *nan_in);
    if (!nan_in || cnn_net_input_box(net, b, &ib, &e)) {
        printf("ERROR %s box [%d, %d) x [%d, %d): %s\n", what, b->x0, b->x1, b->y0, b->y1,
               nan_in ? e.msg : "out of memory");
        free(nan_in);
        return 3;
    }
    for (size_t p = 0; p < ipx; p++) {
        int x = (int)(p % f->iw), y = (int)(p / f->iw), inside = x >= ib.x0 && x < ib.x1 && y >= ib.y0 && y < ib.y1;
        for (int k = 0; k < c; k++)
            nan_in[p * c + k] = inside ? in[p * c + k] : NAN;
    }
    for (size_t i = 0; i < total; i++)
        out[i] = SENTINEL;
    int rc = cnn_net_run_box(net, nan_in, out, b, &e);
    free(nan_in);
    if (rc) {
        printf("ERROR %s box [%d, %d) x [%d, %d): %s\n", what, b->x0, b->x1, b->y0, b->y1, e.msg);
        return 3;
    }
    long differ = 0, written = 0;
    for (size_t p = 0; p < npx; p++) {
        int x = (int)(p % f->dw), y = (int)(p / f->dw);
        int inside = x >= b->x0 && x < b->x1 && y >= b->y0 && y < b->y1;
        for (int k = 0; k < stride; k++) {
            const float *a = &out[p * stride + k], *r = &whole[p * stride + k];
            if (inside && k < nch)
                differ += memcmp(a, r, sizeof *a) != 0;
            else
                written += *a != SENTINEL;
        }
    }
    int bad = differ || written;
    printf("%s %s box [%d, %d) x [%d, %d) (input read [%d, %d) x [%d, %d)): %ld values differ from the whole run, "
           "%ld written outside\n", bad ? "FAIL" : "ok  ", what, b->x0, b->x1, b->y0, b->y1, ib.x0, ib.x1, ib.y0,
           ib.y1, differ, written);
    return bad;
}

int main(int argc, char **argv)
{
    int w, h, threads, full = 0, bf16 = 0;
    for (int i = 6; i < argc; i++) {
        full |= strcmp(argv[i], "full") == 0;
        bf16 |= strcmp(argv[i], "bf16") == 0;
    }
    if (argc < 6 || argc > 8 || full + bf16 != argc - 6 || parse_int(argv[3], &w) || parse_int(argv[4], &h) ||
        parse_int(argv[5], &threads) || w < 1 || h < 1) {
        fprintf(stderr, "usage: cnn_box MODEL.onnx TENSOR W H THREADS [full] [bf16]\n");
        return 3;
    }
    struct err e = {0};
    struct onnx_model *m = onnx_model_load(argv[1], &e);
    struct onnx_graph *g = m ? onnx_graph_cut(m, argv[2], &e) : NULL;
    int c = g && g->in_channels > 0 ? g->in_channels : 3, oc, oh, ow;
    if (!g || cnn_shape(g, c, h, w, &oc, &oh, &ow, &e)) {
        printf("ERROR %s: %s\n", argv[1], e.msg);
        return 3;
    }
    int dw = full ? w : ow, dh = full ? h : oh, worst = 0;
    struct frame fr = {w, h, c, dw, dh};
    size_t npx = (size_t)dw * dh;
    float *in = malloc((size_t)w * h * c * sizeof *in);
    int *ch = malloc((size_t)oc * sizeof *ch);
    if (!in || !ch) {
        printf("ERROR out of memory\n");
        return 3;
    }
    srand(5);
    for (size_t i = 0; i < (size_t)w * h * c; i++)
        in[i] = (float)rand() / RAND_MAX * 4.0f - 2.0f;
    int nsub = 0;
    for (int k = oc - 1; k >= 0; k -= 2)
        ch[nsub++] = k;
    const struct cnn_box boxes[] = {
        {dw / 4, dh / 3, dw / 4 + dw / 3, dh / 3 + dh / 4}, {0, 0, dw / 5 + 1, dh}, {dw - dw / 6 - 1, 0, dw, dh},
        {0, 0, dw, 2},  {0, dh - 3, dw, dh}, {dw - 5, dh - 4, dw, dh}, {dw / 2, dh / 2, dw / 2 + 1, dh / 2 + 1},
        {dw / 3, 0, dw / 3 + 1, dh}};
    for (int d = 0; d < 2; d++) {
        struct cnn_dest dest = {.w = full ? w : 0, .h = full ? h : 0, .bf16 = bf16};
        if (d == 1) {
            dest.nch = nsub;
            dest.ch = ch;
            dest.stride = nsub + 3;
        }
        int stride = d ? nsub + 3 : oc, nch = d ? nsub : oc;
        const char *what = d ? "every other channel, reversed, wider stride:" : "every channel:";
        struct cnn_net *net = cnn_net_new(g, c, h, w, &dest, threads, &e);
        float *whole = malloc(npx * stride * sizeof *whole), *out = malloc(npx * stride * sizeof *out);
        if (!net || !whole || !out || cnn_net_run(net, in, whole, &e)) {
            printf("ERROR %s: %s\n", argv[1], net ? "out of memory" : e.msg);
            return 3;
        }
        for (size_t b = 0; b < sizeof boxes / sizeof boxes[0]; b++) {
            int rc = check_box(net, &fr, in, whole, out, stride, nch, &boxes[b], what);
            worst = rc > worst ? rc : worst;
        }
        cnn_net_free(net);
        free(whole);
        free(out);
    }
    free(in);
    free(ch);
    onnx_graph_free(g);
    onnx_model_free(m);
    return worst;
}
