#include "cnnfeat.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cnn.h"
#include "onnx.h"

struct cnnfeat_ctx {
    struct cnnfeat_spec spec;
    int w, h;
    struct onnx_model *model;
    struct onnx_graph *graph;
    struct cnn_net *net;   /* made at the first frame: it needs the stack's stride */
    int stride, threads;
    int ch[CNNFEAT_MAX_CH];
    float *in;             /* prepared frame, pixel-major */
};

void cnnfeat_spec_default(struct cnnfeat_spec *s)
{
    memset(s, 0, sizeof *s);
    s->scale = 1.0 / 255.0;
    s->std[0] = s->std[1] = s->std[2] = 1.0;
}

/* Three numbers; std ones must be > 0. */
static int three(const char *text, double v[3], int positive, const char *key, const char *where, struct err *e)
{
    if (!*text)
        return ST_OK;
    const char *p = text;
    for (int i = 0; i < 3; i++) {
        char *end;
        errno = 0;
        v[i] = strtod(p, &end);
        if (end == p || errno || !(v[i] == v[i]) || (positive && !(v[i] > 0)))
            return err_set(e, ST_EFORMAT, "%s: [features] %s '%s' must be three numbers%s", where, key, text,
                           positive ? " above 0" : "");
        p = end;
    }
    while (*p == ' ' || *p == '\t')
        p++;
    if (*p)
        return err_set(e, ST_EFORMAT, "%s: [features] %s '%s' has more than three numbers", where, key, text);
    return ST_OK;
}

/* "0-63", "1 5 9", "0-3 8": each channel once, all below out_channels. */
static int parse_channels(struct cnnfeat_spec *s, const char *where, struct err *e)
{
    s->nch = 0;
    if (!*s->channels) {
        if (s->out_channels > CNNFEAT_MAX_CH)
            return err_set(e, ST_ERANGE, "%s: tensor %s has %d channels, more than %d: choose some with cnn_channels",
                           where, s->output, s->out_channels, CNNFEAT_MAX_CH);
        for (int c = 0; c < s->out_channels; c++)
            s->ch[s->nch++] = (short)c;
        return ST_OK;
    }
    const char *p = s->channels;
    while (*p) {
        while (*p == ' ' || *p == '\t' || *p == ',')
            p++;
        if (!*p)
            break;
        char *end;
        long a = strtol(p, &end, 10), b;
        if (end == p)
            goto bad;
        b = a;
        if (*end == '-') {
            const char *q = end + 1;
            b = strtol(q, &end, 10);
            if (end == q)
                goto bad;
        }
        if (a < 0 || b < a || b >= s->out_channels)
            return err_set(e, ST_ERANGE, "%s: [features] cnn_channels %ld-%ld outside tensor %s's 0-%d", where, a, b,
                           s->output, s->out_channels - 1);
        for (long c = a; c <= b; c++) {
            for (int k = 0; k < s->nch; k++)
                if (s->ch[k] == c)
                    return err_set(e, ST_EFORMAT, "%s: [features] cnn_channels lists channel %ld twice", where, c);
            if (s->nch == CNNFEAT_MAX_CH)
                return err_set(e, ST_ERANGE, "%s: [features] cnn_channels: more than %d", where, CNNFEAT_MAX_CH);
            s->ch[s->nch++] = (short)c;
        }
        p = end;
    }
    return s->nch ? ST_OK : err_set(e, ST_EFORMAT, "%s: [features] cnn_channels lists none", where);
bad:
    return err_set(e, ST_EFORMAT, "%s: [features] cnn_channels '%s': expected numbers and ranges A-B", where,
                   s->channels);
}

/* Model and cut, with the file's digest taken from the same bytes' path. */
static int open_cut(const struct cnnfeat_spec *s, struct onnx_model **m, struct onnx_graph **g, struct err *e)
{
    *g = NULL;
    if (!(*m = onnx_model_load(s->model, e)))
        return e ? e->code : ST_EFORMAT;
    if (!(*g = onnx_graph_cut(*m, s->output, e))) {
        onnx_model_free(*m);
        *m = NULL;
        return e ? e->code : ST_EFORMAT;
    }
    return ST_OK;
}

int cnnfeat_resolve(struct cnnfeat_spec *s, const char *where, struct err *e)
{
    if (!s->on)
        return ST_OK;
    int rc = three(s->mean_text, s->mean, 0, "cnn_mean", where, e);
    if (rc || (rc = three(s->std_text, s->std, 1, "cnn_std", where, e)))
        return rc;
    if (!(s->scale > 0))
        return err_set(e, ST_ERANGE, "%s: [features] cnn_scale must be above 0", where);
    struct onnx_model *m;
    struct onnx_graph *g;
    if ((rc = open_cut(s, &m, &g, e)))
        return rc;
    if (!*s->output)
        snprintf(s->output, sizeof s->output, "%s", g->output);
    s->params = g->params;
    s->in_channels = g->in_channels > 0 ? g->in_channels : 3;
    int oh, ow;
    if (s->in_channels != 1 && s->in_channels != 3)
        rc = err_set(e, ST_EFORMAT, "%s: input %s has %d channels; 1 or 3 are supported", s->model, g->input,
                     s->in_channels);
    /* the channel count does not depend on the frame: any size that fits will do */
    else if (!(rc = cnn_shape(g, s->in_channels, 224, 224, &s->out_channels, &oh, &ow, e)))
        rc = parse_channels(s, where, e);
    if (!rc)
        rc = sha256_hex_file(s->model, s->sha256, e);
    onnx_graph_free(g);
    onnx_model_free(m);
    return rc;
}

int cnnfeat_shape(const struct cnnfeat_spec *s, int w, int h, int *c, int *oh, int *ow, struct err *e)
{
    struct onnx_model *m;
    struct onnx_graph *g;
    int rc = open_cut(s, &m, &g, e);
    if (rc)
        return rc;
    rc = cnn_shape(g, s->in_channels, h, w, c, oh, ow, e);
    onnx_graph_free(g);
    onnx_model_free(m);
    return rc;
}

int cnnfeat_name(const struct cnnfeat_spec *s, int k, char *buf, size_t len)
{
    if (k < 0 || k >= s->nch)
        return ST_ERANGE;
    int n = snprintf(buf, len, "cnn_%s_c%d", s->output, s->ch[k]);
    return n >= 0 && (size_t)n < len ? ST_OK : ST_ERANGE;
}

struct cnnfeat_ctx *cnnfeat_ctx_new(const struct cnnfeat_spec *s, int w, int h, int threads, struct err *e)
{
    char hex[SHA256_HEX_LEN];
    struct cnnfeat_ctx *ctx = calloc(1, sizeof *ctx);
    if (!ctx) {
        err_set(e, ST_ENOMEM, "%s: out of memory", s->model);
        return NULL;
    }
    ctx->spec = *s;
    ctx->w = w;
    ctx->h = h;
    ctx->threads = threads;
    for (int k = 0; k < s->nch; k++)
        ctx->ch[k] = s->ch[k];
    if (sha256_hex_file(s->model, hex, e))
        goto fail;
    if (strcmp(hex, s->sha256) != 0) {
        err_set(e, ST_EFORMAT, "%s: SHA-256 %.12s... differs from %.12s... read with the recipe; the network "
                "file changed", s->model, hex, s->sha256);
        goto fail;
    }
    if (open_cut(s, &ctx->model, &ctx->graph, e))
        goto fail;
    ctx->in = malloc((size_t)w * h * s->in_channels * sizeof *ctx->in);
    if (!ctx->in) {
        err_set(e, ST_ENOMEM, "%s: out of memory for a %dx%d frame", s->model, w, h);
        goto fail;
    }
    return ctx;
fail:
    cnnfeat_ctx_free(ctx);
    return NULL;
}

void cnnfeat_ctx_free(struct cnnfeat_ctx *ctx)
{
    if (!ctx)
        return;
    cnn_net_free(ctx->net);
    onnx_graph_free(ctx->graph);
    onnx_model_free(ctx->model);
    free(ctx->in);
    free(ctx);
}

/* The pixels of box (the ones the network reads) into ctx->in. */
static void prepare(struct cnnfeat_ctx *ctx, const struct image *img, const struct cnn_box *box)
{
    const struct cnnfeat_spec *s = &ctx->spec;
    float mul[3], add[3];
    for (int c = 0; c < 3; c++) {
        mul[c] = (float)(s->scale / s->std[c]);
        add[c] = (float)(-s->mean[c] / s->std[c]);
    }
    for (int y = box->y0; y < box->y1; y++)
        for (int x = box->x0; x < box->x1; x++) {
            size_t p = (size_t)y * img->w + x;
            const uint8_t *px = img->px + p * img->channels;
            float r = px[0], g = img->channels == 3 ? px[1] : px[0], b = img->channels == 3 ? px[2] : px[0];
            if (s->in_channels == 1) {
                ctx->in[p] = (0.299f * r + 0.587f * g + 0.114f * b) * mul[0] + add[0];
                continue;
            }
            float v[3] = {r, g, b};
            float *o = ctx->in + p * 3;
            for (int c = 0; c < 3; c++)
                o[c] = v[s->bgr ? 2 - c : c] * mul[c] + add[c];
        }
}

int cnnfeat_compute_box(struct cnnfeat_ctx *ctx, const struct image *img, const struct cnn_box *box,
                        struct fstack *out, int offset, struct err *e)
{
    const struct cnnfeat_spec *s = &ctx->spec;
    if (img->w != ctx->w || img->h != ctx->h || out->w != ctx->w || out->h != ctx->h || offset < 0 ||
        offset + s->nch > out->n)
        return err_set(e, ST_EINVAL, "%s: frame %dx%d or stack %dx%dx%d (offset %d) does not fit a %dx%d context",
                       s->model, img->w, img->h, out->w, out->h, out->n, offset, ctx->w, ctx->h);
    if (ctx->net && ctx->stride != out->n) {
        cnn_net_free(ctx->net);
        ctx->net = NULL;
    }
    if (!ctx->net) {
        struct cnn_dest d = {.w = ctx->w, .h = ctx->h, .stride = out->n, .nch = s->nch, .ch = ctx->ch,
                             .bf16 = s->bf16};
        if (!(ctx->net = cnn_net_new(ctx->graph, s->in_channels, ctx->h, ctx->w, &d, ctx->threads, e)))
            return e ? e->code : ST_ENOMEM;
        ctx->stride = out->n;
    }
    struct cnn_box in;
    if (cnn_net_input_box(ctx->net, box, &in, e))
        return e ? e->code : ST_EINVAL;
    prepare(ctx, img, &in);
    return cnn_net_run_box(ctx->net, ctx->in, out->v + offset, box, e);
}
