#include "cnn.h"

#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cblas.h>

#include "convk.h"

/* Per-thread stripe buffers aim at this many bytes for the widest value, so
 * a stripe's intermediates stay in the 2 MB L2 of the machines we target. */
#define STRIPE_BYTES (1024u * 1024u)

struct shape {
    int c, h, w;
};

/* Padding an op ends up with, once auto_pad is applied. */
struct pads {
    int t, l, b, r;
};

struct worker {
    struct cnn_net *net;
    int id;
    float **buf;   /* per value: the stripe's rows (value 0 is the input) */
    float *scratch;
    uint16_t *sbf;  /* the scratch rows in bfloat16 (AMX runs) */
    int rc;
};

struct cnn_net {
    const struct onnx_graph *g;
    int nv;
    struct shape *v;
    struct pads *pd;
    int dw, dh, stride, nch;
    int *ch;
    int resample;
    int *rx0, *rx1, *ry0, *ry1;
    float *fx, *fy;
    int nstripes, srows;
    int *range;    /* [stripe][value][lo, hi) */
    size_t *cap;   /* floats per value buffer */
    size_t scap;
    int threads;
    int avx512;    /* the direct kernel may run: AVX-512F present */
    int identity;  /* channels 0..nch-1 in order */
    uint16_t **wamx; /* per op: weights in AMX tile order (see pack_amx), or NULL */
    struct worker *wk;
    const float *in;
    float *dst;
};

/* ---- shapes ----------------------------------------------------------- */

/* Output length along one axis of a windowed op; *b, *e are the explicit
 * pads in and the ones used out.  -1 when the window does not fit. */
static int out_len(int in, int k, int s, int d, enum onnx_pad ap, int ceil_mode, int *b, int *e)
{
    long ke = (long)d * (k - 1) + 1;
    if (ap == ONNX_PAD_VALID) {
        *b = *e = 0;
        return in < ke ? -1 : (int)((in - ke) / s + 1);
    }
    if (ap == ONNX_PAD_SAME_UPPER || ap == ONNX_PAD_SAME_LOWER) {
        long out = ((long)in + s - 1) / s;
        long total = (out - 1) * s + ke - in;
        if (total < 0)
            total = 0;
        long small = total / 2;
        *b = (int)(ap == ONNX_PAD_SAME_UPPER ? small : total - small);
        *e = (int)(ap == ONNX_PAD_SAME_UPPER ? total - small : small);
        return (int)out;
    }
    long num = (long)in + *b + *e - ke;
    if (num < 0)
        return -1;
    long out = ceil_mode ? (num + s - 1) / s + 1 : num / s + 1;
    if (ceil_mode && (out - 1) * s >= (long)in + *b)
        out--;
    return out > INT_MAX ? -1 : (int)out;
}

static int infer(const struct onnx_graph *g, int c, int h, int w, struct shape *v, struct pads *pd, struct err *e)
{
    v[0] = (struct shape){c, h, w};
    if (g->in_channels > 0 && g->in_channels != c)
        return err_set(e, ST_EINVAL, "%s: input %s has %d channels, %d given", g->path, g->input, g->in_channels, c);
    for (int i = 0; i < g->nops; i++) {
        const struct onnx_op *op = &g->ops[i];
        const struct shape *x = op->in[0] >= 0 ? &v[op->in[0]] : &v[op->in[1]];
        struct shape *o = &v[i + 1];
        *o = *x;
        pd[i] = (struct pads){0, 0, 0, 0};
        switch (op->kind) {
        case ONNX_CONV:
        case ONNX_MAXPOOL:
        case ONNX_AVGPOOL: {
            if (op->kind == ONNX_CONV && x->c != op->cin)
                return err_set(e, ST_EFORMAT, "%s: node %s: input has %d channels, the weights expect %d", g->path,
                               op->name, x->c, op->cin);
            pd[i] = (struct pads){op->pads[0], op->pads[1], op->pads[2], op->pads[3]};
            int cm = op->kind == ONNX_CONV ? 0 : op->ceil_mode;
            o->h = out_len(x->h, op->kh, op->sh, op->dh, op->auto_pad, cm, &pd[i].t, &pd[i].b);
            o->w = out_len(x->w, op->kw, op->sw, op->dw, op->auto_pad, cm, &pd[i].l, &pd[i].r);
            if (o->h < 1 || o->w < 1)
                return err_set(e, ST_ERANGE, "%s: node %s: a %dx%d input is too small for its %dx%d window", g->path,
                               op->name, x->w, x->h, op->kw, op->kh);
            if (op->kind == ONNX_CONV)
                o->c = op->cout;
            break;
        }
        case ONNX_AFFINE:
            if (x->c != op->cin)
                return err_set(e, ST_EFORMAT, "%s: node %s: input has %d channels, the normalisation %d", g->path,
                               op->name, x->c, op->cin);
            break;
        case ONNX_ADD:
            if (op->in[0] >= 0 && op->in[1] >= 0) {
                const struct shape *y = &v[op->in[1]];
                if (y->c != x->c || y->h != x->h || y->w != x->w)
                    return err_set(e, ST_EFORMAT, "%s: node %s: Add of %dx%dx%d and %dx%dx%d (only equal shapes or "
                                   "a constant broadcast)", g->path, op->name, x->c, x->h, x->w, y->c, y->h, y->w);
            } else {
                int full[3] = {x->c, x->h, x->w};
                for (int k = 0; k < 3; k++)
                    if (op->kdims[k] != 1 && op->kdims[k] != full[k])
                        return err_set(e, ST_EFORMAT, "%s: node %s: constant does not broadcast to %dx%dx%d", g->path,
                                       op->name, x->c, x->h, x->w);
            }
            break;
        case ONNX_CONCAT:
            o->c = 0;
            for (int k = 0; k < op->nin; k++) {
                const struct shape *y = &v[op->in[k]];
                if (y->h != x->h || y->w != x->w)
                    return err_set(e, ST_EFORMAT, "%s: node %s: Concat of %dx%d and %dx%d maps", g->path, op->name,
                                   x->w, x->h, y->w, y->h);
                o->c += y->c;
            }
            break;
        case ONNX_CLAMP:
            break;
        }
    }
    return ST_OK;
}

int cnn_shape(const struct onnx_graph *g, int c, int h, int w, int *oc, int *oh, int *ow, struct err *e)
{
    struct shape *v = malloc((size_t)(g->nops + 1) * sizeof *v);
    struct pads *pd = malloc((size_t)(g->nops + 1) * sizeof *pd);
    int rc = v && pd ? infer(g, c, h, w, v, pd, e) : err_set(e, ST_ENOMEM, "%s: out of memory", g->path);
    if (!rc) {
        *oc = v[g->nops].c;
        *oh = v[g->nops].h;
        *ow = v[g->nops].w;
    }
    free(v);
    free(pd);
    return rc;
}

double cnn_macs(const struct onnx_graph *g, int c, int h, int w)
{
    struct shape *v = malloc((size_t)(g->nops + 1) * sizeof *v);
    struct pads *pd = malloc((size_t)(g->nops + 1) * sizeof *pd);
    double macs = 0;
    if (v && pd && !infer(g, c, h, w, v, pd, NULL))
        for (int i = 0; i < g->nops; i++)
            if (g->ops[i].kind == ONNX_CONV) {
                const struct onnx_op *op = &g->ops[i];
                macs += (double)v[i + 1].h * v[i + 1].w * op->cout * op->kh * op->kw * (op->cin / op->group);
            }
    free(v);
    free(pd);
    return macs;
}

/* ---- planning --------------------------------------------------------- */

static int *range_of(const struct cnn_net *n, int s, int v)
{
    return n->range + ((size_t)s * n->nv + v) * 2;
}

static void widen(int *r, int lo, int hi, int h)
{
    if (lo < 0)
        lo = 0;
    if (hi > h)
        hi = h;
    if (lo >= hi)
        return;
    if (lo < r[0])
        r[0] = lo;
    if (hi > r[1])
        r[1] = hi;
}

/* Rows of every value that destination rows [y0, y1) need. */
static void plan_stripe(struct cnn_net *n, int s, int y0, int y1)
{
    const struct onnx_graph *g = n->g;
    for (int v = 0; v < n->nv; v++) {
        range_of(n, s, v)[0] = INT_MAX;
        range_of(n, s, v)[1] = INT_MIN;
    }
    int f = n->nv - 1;
    if (n->resample)
        widen(range_of(n, s, f), n->ry0[y0], n->ry1[y1 - 1] + 1, n->v[f].h);
    else
        widen(range_of(n, s, f), y0, y1, n->v[f].h);
    for (int i = g->nops - 1; i >= 0; i--) {
        const struct onnx_op *op = &g->ops[i];
        const int *r = range_of(n, s, i + 1);
        if (r[0] >= r[1])
            continue;
        int lo = r[0], hi = r[1];
        if (op->kind == ONNX_CONV || op->kind == ONNX_MAXPOOL || op->kind == ONNX_AVGPOOL) {
            lo = r[0] * op->sh - n->pd[i].t;
            hi = (r[1] - 1) * op->sh - n->pd[i].t + op->dh * (op->kh - 1) + 1;
        }
        for (int k = 0; k < op->nin; k++)
            if (op->in[k] >= 0)
                widen(range_of(n, s, op->in[k]), lo, hi, n->v[op->in[k]].h);
    }
}

/* Bilinear taps with half-pixel centres, clamped to the edge. */
static void taps(int in, int out, int *i0, int *i1, float *f)
{
    for (int o = 0; o < out; o++) {
        double src = (o + 0.5) * in / out - 0.5;
        if (src < 0)
            src = 0;
        int a = (int)src;
        if (a > in - 1)
            a = in - 1;
        i0[o] = a;
        i1[o] = a + 1 < in ? a + 1 : in - 1;
        f[o] = (float)(src - a);
    }
}

static size_t conv_scratch(const struct onnx_op *op, const struct shape *x, const struct shape *o, int rows)
{
    if (op->sh == 1 && op->sw == 1 && op->group == 1) /* the copy, and one row of patches */
        return (size_t)(rows + op->dh * (op->kh - 1)) * (o->w + op->dw * (op->kw - 1)) * x->c +
               (size_t)o->w * op->kh * op->kw * x->c;
    return (size_t)o->w * op->kh * op->kw * (x->c / op->group);
}

static int plan(struct cnn_net *n, int threads, struct err *e)
{
    const struct onnx_graph *g = n->g;
    size_t widest = 1;
    for (int v = 1; v < n->nv; v++) {
        size_t row = (size_t)n->v[v].w * n->v[v].c * sizeof(float);
        /* rows of a strided value per destination row are fewer */
        double per = (double)n->v[v].h / n->dh;
        if (row * per > widest)
            widest = (size_t)(row * per);
    }
    int rows = (int)(STRIPE_BYTES / widest);
    if (rows < 1)
        rows = 1;
    if (rows > n->dh)
        rows = n->dh;
    /* enough stripes to balance the threads */
    while (rows > 1 && (n->dh + rows - 1) / rows < 4 * threads)
        rows /= 2;
    n->srows = rows;
    n->nstripes = (n->dh + rows - 1) / rows;
    n->range = malloc((size_t)n->nstripes * n->nv * 2 * sizeof *n->range);
    n->cap = calloc((size_t)n->nv, sizeof *n->cap);
    if (!n->range || !n->cap)
        return err_set(e, ST_ENOMEM, "%s: out of memory planning %d stripes", g->path, n->nstripes);
    for (int s = 0; s < n->nstripes; s++) {
        int y0 = s * rows, y1 = y0 + rows < n->dh ? y0 + rows : n->dh;
        plan_stripe(n, s, y0, y1);
        for (int v = 1; v < n->nv; v++) {
            const int *r = range_of(n, s, v);
            if (r[0] >= r[1])
                continue;
            size_t need = (size_t)(r[1] - r[0]) * n->v[v].w * n->v[v].c;
            if (need > n->cap[v])
                n->cap[v] = need;
            const struct onnx_op *op = &g->ops[v - 1];
            if (op->kind == ONNX_CONV) {
                size_t sc = conv_scratch(op, &n->v[op->in[0]], &n->v[v], r[1] - r[0]);
                if (sc > n->scap)
                    n->scap = sc;
            }
        }
    }
    return ST_OK;
}

/* ---- running ---------------------------------------------------------- */

static const float *row_of(const struct worker *wk, int s, int v, int y)
{
    const struct cnn_net *n = wk->net;
    size_t pitch = (size_t)n->v[v].w * n->v[v].c;
    if (v == 0)
        return n->in + (size_t)y * pitch;
    return wk->buf[v] + (size_t)(y - range_of(n, s, v)[0]) * pitch;
}

static void clamp_rows(float *o, size_t len, float lo, float hi)
{
    if (lo == -INFINITY && hi == INFINITY)
        return;
    for (size_t i = 0; i < len; i++)
        o[i] = o[i] < lo ? lo : (o[i] > hi ? hi : o[i]);
}

static void bias_rows(float *o, size_t pixels, const float *b, int c)
{
    for (size_t p = 0; p < pixels; p++)
        memcpy(o + p * c, b, (size_t)c * sizeof *o);
}

/* Stride 1, one group: a zero-bordered copy of the input rows, then either
 * the direct kernel or, per output row, one GEMM per tap, the tap being a
 * shift of the copy. */
static int conv_shifted(struct worker *wk, int s, int i, int a, int b, float *out)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    const struct shape *x = &n->v[op->in[0]], *o = &n->v[i + 1];
    const struct pads *pd = &n->pd[i];
    int cin = x->c, cout = o->c;
    int wp = o->w + op->dw * (op->kw - 1), rr = (b - a) + op->dh * (op->kh - 1);
    float *p = wk->scratch;
    for (int r = 0; r < rr; r++) {
        int yi = a - pd->t + r;
        float *pr = p + (size_t)r * wp * cin;
        if (yi < 0 || yi >= x->h) {
            memset(pr, 0, (size_t)wp * cin * sizeof *pr);
            continue;
        }
        const float *src = row_of(wk, s, op->in[0], yi);
        int x0 = pd->l < wp ? pd->l : wp;          /* first column with data */
        int x1 = pd->l + x->w < wp ? pd->l + x->w : wp;
        memset(pr, 0, (size_t)x0 * cin * sizeof *pr);
        memcpy(pr + (size_t)x0 * cin, src, (size_t)(x1 - x0) * cin * sizeof *pr);
        memset(pr + (size_t)x1 * cin, 0, (size_t)(wp - x1) * cin * sizeof *pr);
    }
    int kk = op->kh * op->kw * cin;
    if (n->avx512 && cout % 64 == 0 && cin < CONVK_CI_BLOCK && kk <= 4 * CONVK_CI_BLOCK && op->dw == 1) {
        /* few input channels (an RGB stem): gather each pixel's patch and
         * run the kernel as a 1x1 convolution over kk channels, whose
         * weights are the same rows */
        struct onnx_op one = *op;
        one.kh = one.kw = one.dh = one.dw = 1;
        float *q = p + (size_t)rr * wp * cin;
        int run = op->kw * cin; /* a patch row: kw pixels side by side (dw is 1 here) */
        const uint16_t *wq = n->wamx ? n->wamx[i] : NULL;
        for (int y = a; y < b; y++) {
            for (int xo = 0; xo < o->w; xo++)
                for (int ky = 0; ky < op->kh; ky++) {
                    const float *src = p + ((size_t)(y - a + ky * op->dh) * wp + xo) * cin;
                    float *dst = q + (size_t)xo * kk + (size_t)ky * run;
                    for (int t = 0; t < run; t++) /* a few floats: a loop beats a memcpy call */
                        dst[t] = src[t];
                }
            if (wq) { /* patches of kk padded to 32 channels, on the tiles */
                for (int xo = 0; xo < o->w; xo++)
                    for (int t = 0; t < 32; t++)
                        wk->sbf[(size_t)xo * 32 + t] = t < kk ? convk_bf16(q[(size_t)xo * kk + t]) : 0;
                convk_run_amx(wk->sbf, wq, o->w, 32, cout, &one, 0, o->w, out + (size_t)(y - a) * o->w * cout);
                continue;
            }
            convk_run_direct(q, o->w, kk, cout, &one, 0, o->w, out + (size_t)(y - a) * o->w * cout);
        }
        return 1;
    }
    if (n->wamx && n->wamx[i]) {
        convk_convert_bf16(p, wk->sbf, (size_t)rr * wp * cin);
        for (int y = a; y < b; y++)
            convk_run_amx(wk->sbf, n->wamx[i], wp, cin, cout, op, y - a, o->w, out + (size_t)(y - a) * o->w * cout);
        return 1;
    }
    if (n->avx512 && cout % 64 == 0) {
        for (int y = a; y < b; y++)
            convk_run_direct(p, wp, cin, cout, op, y - a, o->w, out + (size_t)(y - a) * o->w * cout);
        return 1;
    }
    bias_rows(out, (size_t)(b - a) * o->w, op->b, cout);
    for (int y = a; y < b; y++) {
        float *orow = out + (size_t)(y - a) * o->w * cout;
        for (int ky = 0; ky < op->kh; ky++)
            for (int kx = 0; kx < op->kw; kx++) {
                const float *arow = p + ((size_t)(y - a + ky * op->dh) * wp + (size_t)kx * op->dw) * cin;
                const float *wt = op->w + (size_t)(ky * op->kw + kx) * cin * cout;
                cblas_sgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, o->w, cout, cin, 1.0f, arow, cin, wt, cout,
                            1.0f, orow, cout);
            }
    }
    return 0;
}

/* Any stride or group: im2col of one output row per group, then GEMM. */
static void conv_im2col(struct worker *wk, int s, int i, int a, int b, float *out)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    const struct shape *x = &n->v[op->in[0]], *o = &n->v[i + 1];
    const struct pads *pd = &n->pd[i];
    int cing = x->c / op->group, coutg = o->c / op->group, kk = op->kh * op->kw * cing;
    float *p = wk->scratch;
    bias_rows(out, (size_t)(b - a) * o->w, op->b, o->c);
    for (int y = a; y < b; y++) {
        float *orow = out + (size_t)(y - a) * o->w * o->c;
        for (int gi = 0; gi < op->group; gi++) {
            for (int xo = 0; xo < o->w; xo++) {
                float *col = p + (size_t)xo * kk;
                for (int ky = 0; ky < op->kh; ky++) {
                    int yi = y * op->sh - pd->t + ky * op->dh;
                    const float *src = yi >= 0 && yi < x->h ? row_of(wk, s, op->in[0], yi) : NULL;
                    for (int kx = 0; kx < op->kw; kx++, col += cing) {
                        int xi = xo * op->sw - pd->l + kx * op->dw;
                        if (src && xi >= 0 && xi < x->w)
                            memcpy(col, src + (size_t)xi * x->c + (size_t)gi * cing, (size_t)cing * sizeof *col);
                        else
                            memset(col, 0, (size_t)cing * sizeof *col);
                    }
                }
            }
            cblas_sgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, o->w, coutg, kk, 1.0f, p, kk,
                        op->w + (size_t)gi * kk * coutg, coutg, 1.0f, orow + (size_t)gi * coutg, o->c);
        }
    }
}

static void pool(struct worker *wk, int s, int i, int a, int b, float *out)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    const struct shape *x = &n->v[op->in[0]], *o = &n->v[i + 1];
    const struct pads *pd = &n->pd[i];
    int c = x->c, maxp = op->kind == ONNX_MAXPOOL;
    for (int y = a; y < b; y++)
        for (int xo = 0; xo < o->w; xo++) {
            float *dst = out + ((size_t)(y - a) * o->w + xo) * c;
            for (int k = 0; k < c; k++)
                dst[k] = maxp ? -INFINITY : 0.0f;
            int ys = y * op->sh - pd->t, xs = xo * op->sw - pd->l;
            int count = 0, padded = 0;
            for (int ky = 0; ky < op->kh; ky++) {
                int yi = ys + ky * op->dh;
                for (int kx = 0; kx < op->kw; kx++) {
                    int xi = xs + kx * op->dw;
                    /* positions in the explicit padding count for count_include_pad;
                     * those past it (ceil_mode's overhang) never do */
                    padded += yi < x->h + pd->b && xi < x->w + pd->r;
                    if (yi < 0 || yi >= x->h || xi < 0 || xi >= x->w)
                        continue;
                    count++;
                    const float *src = row_of(wk, s, op->in[0], yi) + (size_t)xi * c;
                    if (maxp)
                        for (int k = 0; k < c; k++)
                            dst[k] = src[k] > dst[k] ? src[k] : dst[k];
                    else
                        for (int k = 0; k < c; k++)
                            dst[k] += src[k];
                }
            }
            if (!maxp) {
                float inv = 1.0f / (float)(op->count_include_pad ? padded : (count ? count : 1));
                for (int k = 0; k < c; k++)
                    dst[k] *= inv;
            }
        }
}

static void elementwise(struct worker *wk, int s, int i, int a, int b, float *out)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    const struct shape *o = &n->v[i + 1];
    size_t pitch = (size_t)o->w * o->c;
    for (int y = a; y < b; y++) {
        float *dst = out + (size_t)(y - a) * pitch;
        if (op->kind == ONNX_CONCAT) {
            for (int k = 0, off = 0; k < op->nin; off += n->v[op->in[k]].c, k++) {
                int ck = n->v[op->in[k]].c;
                const float *src = row_of(wk, s, op->in[k], y);
                for (int xo = 0; xo < o->w; xo++)
                    memcpy(dst + (size_t)xo * o->c + off, src + (size_t)xo * ck, (size_t)ck * sizeof *dst);
            }
            continue;
        }
        const float *src = row_of(wk, s, op->in[0] >= 0 ? op->in[0] : op->in[1], y);
        if (op->kind == ONNX_CLAMP) {
            memcpy(dst, src, pitch * sizeof *dst);
            clamp_rows(dst, pitch, op->lo, op->hi);
        } else if (op->kind == ONNX_AFFINE) {
            for (size_t p = 0; p < pitch; p++)
                dst[p] = src[p] * op->scale[p % o->c] + op->b[p % o->c];
        } else if (op->in[0] >= 0 && op->in[1] >= 0) {
            const float *src2 = row_of(wk, s, op->in[1], y);
            for (size_t p = 0; p < pitch; p++)
                dst[p] = src[p] + src2[p];
        } else {
            const int *kd = op->kdims;
            for (int xo = 0; xo < o->w; xo++)
                for (int k = 0; k < o->c; k++) {
                    size_t ki = ((size_t)(kd[0] == 1 ? 0 : k) * kd[1] + (kd[1] == 1 ? 0 : y)) * kd[2] +
                                (kd[2] == 1 ? 0 : xo);
                    dst[(size_t)xo * o->c + k] = src[(size_t)xo * o->c + k] + op->konst[ki];
                }
        }
    }
}

static void write_dest(struct worker *wk, int s, int y0, int y1)
{
    const struct cnn_net *n = wk->net;
    int f = n->nv - 1, c = n->v[f].c;
    for (int y = y0; y < y1; y++) {
        float *d = n->dst + (size_t)y * n->dw * n->stride;
        if (!n->resample && n->identity && n->stride == c) {
            memcpy(d, row_of(wk, s, f, y), (size_t)n->dw * c * sizeof *d);
            continue;
        }
        if (!n->resample && n->identity) {
            const float *src = row_of(wk, s, f, y);
            for (int x = 0; x < n->dw; x++, d += n->stride)
                memcpy(d, src + (size_t)x * c, (size_t)n->nch * sizeof *d);
            continue;
        }
        if (!n->resample) {
            const float *src = row_of(wk, s, f, y);
            for (int x = 0; x < n->dw; x++, d += n->stride)
                for (int k = 0; k < n->nch; k++)
                    d[k] = src[(size_t)x * c + n->ch[k]];
            continue;
        }
        const float *r0 = row_of(wk, s, f, n->ry0[y]), *r1 = row_of(wk, s, f, n->ry1[y]);
        float fy = n->fy[y];
        for (int x = 0; x < n->dw; x++, d += n->stride) {
            size_t a = (size_t)n->rx0[x] * c, b = (size_t)n->rx1[x] * c;
            float fx = n->fx[x];
            for (int k = 0; k < n->nch; k++) {
                int ch = n->ch[k];
                float top = r0[a + ch] + fx * (r0[b + ch] - r0[a + ch]);
                float bot = r1[a + ch] + fx * (r1[b + ch] - r1[a + ch]);
                d[k] = top + fy * (bot - top);
            }
        }
    }
}

static void run_stripe(struct worker *wk, int s)
{
    const struct cnn_net *n = wk->net;
    for (int i = 0; i < n->g->nops; i++) {
        const int *r = range_of(n, s, i + 1);
        if (r[0] >= r[1])
            continue;
        const struct onnx_op *op = &n->g->ops[i];
        float *out = wk->buf[i + 1];
        if (op->kind == ONNX_CONV) {
            int clamped = 0;
            if (op->sh == 1 && op->sw == 1 && op->group == 1)
                clamped = conv_shifted(wk, s, i, r[0], r[1], out);
            else
                conv_im2col(wk, s, i, r[0], r[1], out);
            if (!clamped) /* the direct kernel clamps as it stores */
                clamp_rows(out, (size_t)(r[1] - r[0]) * n->v[i + 1].w * n->v[i + 1].c, op->lo, op->hi);
        } else if (op->kind == ONNX_MAXPOOL || op->kind == ONNX_AVGPOOL) {
            pool(wk, s, i, r[0], r[1], out);
        } else {
            elementwise(wk, s, i, r[0], r[1], out);
        }
    }
    int y0 = s * n->srows, y1 = y0 + n->srows < n->dh ? y0 + n->srows : n->dh;
    write_dest(wk, s, y0, y1);
}

static void *worker_run(void *arg)
{
    struct worker *wk = arg;
    if (wk->net->wamx) /* tile configuration is per thread */
        convk_begin_amx();
    for (int s = wk->id; s < wk->net->nstripes; s += wk->net->threads)
        run_stripe(wk, s);
    if (wk->net->wamx)
        convk_end_amx();
    return NULL;
}

int cnn_net_run(struct cnn_net *net, const float *in, float *dst, struct err *e)
{
    pthread_t tids[CNN_MAX_THREADS];
    int started[CNN_MAX_THREADS] = {0};
    (void)e;
    net->in = in;
    net->dst = dst;
    for (int t = 1; t < net->threads; t++)
        started[t] = pthread_create(&tids[t], NULL, worker_run, &net->wk[t]) == 0;
    worker_run(&net->wk[0]);
    for (int t = 1; t < net->threads; t++) {
        if (started[t])
            pthread_join(tids[t], NULL);
        else
            worker_run(&net->wk[t]); /* a thread that could not start: its stripes here */
    }
    net->in = NULL;
    net->dst = NULL;
    return ST_OK;
}

/* ---- building --------------------------------------------------------- */

struct cnn_net *cnn_net_new(const struct onnx_graph *g, int c, int h, int w, const struct cnn_dest *dest,
                            int threads, struct err *e)
{
    if (threads < 1 || threads > CNN_MAX_THREADS || c < 1 || h < 1 || w < 1) {
        err_set(e, ST_EINVAL, "%s: %d threads (1..%d) for a %dx%dx%d input", g->path, threads, CNN_MAX_THREADS, w,
                h, c);
        return NULL;
    }
    struct cnn_net *n = calloc(1, sizeof *n);
    if (!n)
        goto oom;
    n->g = g;
    n->nv = g->nops + 1;
    n->v = calloc((size_t)n->nv, sizeof *n->v);
    n->pd = calloc((size_t)n->nv, sizeof *n->pd);
    if (!n->v || !n->pd)
        goto oom;
    if (infer(g, c, h, w, n->v, n->pd, e))
        goto fail;
    const struct shape *f = &n->v[n->nv - 1];
    n->dw = dest->w > 0 ? dest->w : f->w;
    n->dh = dest->h > 0 ? dest->h : f->h;
    n->nch = dest->nch > 0 ? dest->nch : f->c;
    n->stride = dest->stride > 0 ? dest->stride : n->nch;
    if (n->stride < n->nch || (size_t)n->dw * n->dh > 1ull << 28) {
        err_set(e, ST_EINVAL, "%s: destination %dx%d with %d channels in %d floats per pixel", g->path, n->dw, n->dh,
                n->nch, n->stride);
        goto fail;
    }
    n->ch = malloc((size_t)n->nch * sizeof *n->ch);
    if (!n->ch)
        goto oom;
    for (int k = 0; k < n->nch; k++) {
        n->ch[k] = dest->ch ? dest->ch[k] : k;
        if (n->ch[k] < 0 || n->ch[k] >= f->c) {
            err_set(e, ST_ERANGE, "%s: channel %d asked of tensor %s, which has %d", g->path, n->ch[k], g->output,
                    f->c);
            goto fail;
        }
    }
    n->identity = 1;
    for (int k = 0; k < n->nch; k++)
        n->identity &= n->ch[k] == k;
    n->resample = n->dw != f->w || n->dh != f->h;
    if (n->resample) {
        n->rx0 = malloc((size_t)n->dw * sizeof *n->rx0);
        n->rx1 = malloc((size_t)n->dw * sizeof *n->rx1);
        n->fx = malloc((size_t)n->dw * sizeof *n->fx);
        n->ry0 = malloc((size_t)n->dh * sizeof *n->ry0);
        n->ry1 = malloc((size_t)n->dh * sizeof *n->ry1);
        n->fy = malloc((size_t)n->dh * sizeof *n->fy);
        if (!n->rx0 || !n->rx1 || !n->fx || !n->ry0 || !n->ry1 || !n->fy)
            goto oom;
        taps(f->w, n->dw, n->rx0, n->rx1, n->fx);
        taps(f->h, n->dh, n->ry0, n->ry1, n->fy);
    }
    n->threads = threads < n->dh ? threads : n->dh;
    n->avx512 = __builtin_cpu_supports("avx512f");
    if (dest->bf16 && n->avx512 && __builtin_cpu_supports("avx512bf16") && convk_has_amx()) {
        if (!(n->wamx = calloc((size_t)g->nops, sizeof *n->wamx)))
            goto oom;
        for (int i = 0; i < g->nops; i++) {
            const struct onnx_op *op = &g->ops[i];
            int cin = n->v[op->in[0]].c, kk = op->kh * op->kw * cin;
            if (op->kind != ONNX_CONV || op->sh != 1 || op->sw != 1 || op->group != 1 || n->v[i + 1].w < 32)
                continue;
            /* the two shapes conv_shifted hands over: an RGB stem's patches, or 32k channels */
            int patch = op->cout % 64 == 0 && cin < CONVK_CI_BLOCK && kk <= 32 && op->dw == 1;
            if (!patch && (op->cout % 32 || cin % 32))
                continue;
            if (!(n->wamx[i] = patch ? convk_pack_amx(op, 1, kk, 32) : convk_pack_amx(op, op->kh * op->kw, cin, cin)))
                goto oom;
        }
    }
    if (plan(n, n->threads, e))
        goto fail;
    n->wk = calloc((size_t)n->threads, sizeof *n->wk);
    if (!n->wk)
        goto oom;
    for (int t = 0; t < n->threads; t++) {
        struct worker *wk = &n->wk[t];
        wk->net = n;
        wk->id = t;
        wk->buf = calloc((size_t)n->nv, sizeof *wk->buf);
        wk->scratch = malloc((n->scap ? n->scap : 1) * sizeof *wk->scratch);
        wk->sbf = n->wamx ? malloc((n->scap ? n->scap : 1) * sizeof *wk->sbf) : NULL;
        if (!wk->buf || !wk->scratch || (n->wamx && !wk->sbf))
            goto oom;
        for (int v = 1; v < n->nv; v++)
            if (!(wk->buf[v] = malloc((n->cap[v] ? n->cap[v] : 1) * sizeof(float))))
                goto oom;
    }
    /* our stripes are the parallelism; OpenBLAS threads inside each small
     * GEMM would only compete with them */
    openblas_set_num_threads(1);
    return n;
oom:
    err_set(e, ST_ENOMEM, "%s: out of memory for the buffers of a %dx%d input", g->path, w, h);
fail:
    cnn_net_free(n);
    return NULL;
}

void cnn_net_free(struct cnn_net *n)
{
    if (!n)
        return;
    for (int t = 0; n->wk && t < n->threads; t++) {
        for (int v = 1; n->wk[t].buf && v < n->nv; v++)
            free(n->wk[t].buf[v]);
        free(n->wk[t].buf);
        free(n->wk[t].scratch);
        free(n->wk[t].sbf);
    }
    free(n->wk);
    for (int i = 0; n->wamx && i < n->g->nops; i++)
        free(n->wamx[i]);
    free(n->wamx);
    free(n->v);
    free(n->pd);
    free(n->ch);
    free(n->rx0);
    free(n->rx1);
    free(n->fx);
    free(n->ry0);
    free(n->ry1);
    free(n->fy);
    free(n->range);
    free(n->cap);
    free(n);
}
