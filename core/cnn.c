#include "cnn.h"

#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cblas.h>

#include "convk.h"

struct shape {
    int c, h, w;
};

/* Padding an op ends up with, once auto_pad is applied. */
struct pads {
    int t, l, b, r;
};

/* An RGB stem: convolutions with fewer input channels than this run on
 * their patches, of at most STEM_PATCH values. */
#define STEM_CH 16
#define STEM_PATCH 64

/* OpenBLAS's sgemm may round a row differently with the number of rows it
 * is given (its small-matrix and edge kernels), so GEMM runs over chunks of
 * a row's pixels that start at multiples of this in the frame, whatever the
 * box: a pixel then always lies in the same chunk and gets the same bits. */
#define GEMM_CHUNK 64

/* A value read by a bfloat16 convolution keeps its rows converted too. */
enum { SHADOW_AMX = 1, SHADOW_ROUNDED = 2 };

/* How a convolution runs: see conv_path. */
enum path { PATH_IM2COL, PATH_GEMM, PATH_DIRECT, PATH_STEM, PATH_AMX, PATH_STEM_AMX };

struct worker {
    struct cnn_net *net;
    float **ring;       /* per value: cap rows of pitch floats */
    uint16_t **rbf;     /* per value: the same rows in bfloat16 where an AMX convolution reads them */
    float **rrn;        /* per value: the same rows rounded to bfloat16 where a rounded convolution reads them */
    float *scratch;     /* one row of patches (an RGB stem, im2col) */
    uint16_t *sbf;      /* one row of stem patches in bfloat16 */
    const void **rowp;  /* a convolution's input rows, one per kernel row */
    int *made;          /* per value: rows below this are made, in this band */
    int *need;          /* per value: [lo, hi) rows the current destination row needs */
};

struct cnn_net {
    const struct onnx_graph *g;
    int nv;
    struct shape *v;
    struct pads *pd;
    enum path *path;    /* per op, for convolutions */
    int dw, dh, stride, nch;
    int *ch;
    int resample;
    int *rx0, *rx1, *ry0, *ry1;
    float *fx, *fy;
    int *ml, *mr;       /* per value: zero pixels left and right of each ring row */
    int *cap;           /* per value: rows in its ring */
    size_t *pitch;      /* per value: floats per ring row */
    int *shadow;        /* per value: SHADOW_AMX, SHADOW_ROUNDED (a ring of the same rows beside), or 0 */
    size_t scap, sbfcap;
    int maxkh;
    float *zero;        /* a zero row as wide as the widest ring row: rows above and below the frame */
    int direct_dst;     /* the last op's kernel may write into the destination itself */
    int threads;
    int avx512;         /* the direct kernel may run: AVX-512F present */
    int identity;       /* channels 0..nch-1 in order */
    uint16_t **wamx;    /* per op: weights in AMX tile order, or NULL */
    struct onnx_op *rop; /* per op, bf16 without AMX: the op with its weights rounded (w NULL: not rounded) */
    struct worker *wk;
    /* the run in progress */
    const float *in;
    float *dst;
    int *win;           /* per value: [x0, x1), the columns made */
    struct cnn_box box;
    int to_dst;         /* it does: its columns are the box's */
    int nbands;
    atomic_int next;    /* the next band a worker takes */
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

static void widen(int *r, int lo, int hi, int len)
{
    if (lo < 0)
        lo = 0;
    if (hi > len)
        hi = len;
    if (lo >= hi)
        return;
    if (lo < r[0])
        r[0] = lo;
    if (hi > r[1])
        r[1] = hi;
}

/* Rows (axis 0) or columns (axis 1) [lo, hi) of every value that [lo, hi)
 * of the last value needs, into r[2 v], r[2 v + 1].  An AMX convolution's
 * columns are widened to its 32-pixel block, a GEMM's to its chunks. */
static void need_back(const struct cnn_net *n, int axis, int lo, int hi, int *r)
{
    const struct onnx_graph *g = n->g;
    for (int v = 0; v < n->nv; v++) {
        r[2 * v] = INT_MAX;
        r[2 * v + 1] = INT_MIN;
    }
    int f = n->nv - 1;
    widen(r + 2 * f, lo, hi, axis ? n->v[f].w : n->v[f].h);
    for (int i = g->nops - 1; i >= 0; i--) {
        const struct onnx_op *op = &g->ops[i];
        int *o = r + 2 * (i + 1);
        if (o[0] >= o[1])
            continue;
        int len = axis ? n->v[i + 1].w : n->v[i + 1].h;
        if (axis && op->kind == ONNX_CONV && n->path[i] >= PATH_AMX && o[1] - o[0] < 32) {
            o[1] = o[0] + 32 < len ? o[0] + 32 : len;
            o[0] = o[1] - 32;
        }
        if (axis && op->kind == ONNX_CONV && n->path[i] <= PATH_GEMM) {
            o[0] -= o[0] % GEMM_CHUNK;
            o[1] = o[1] + GEMM_CHUNK - 1 - (o[1] + GEMM_CHUNK - 1) % GEMM_CHUNK;
            if (o[1] > len)
                o[1] = len;
        }
        int a = o[0], b = o[1];
        if (op->kind == ONNX_CONV || op->kind == ONNX_MAXPOOL || op->kind == ONNX_AVGPOOL) {
            int k = axis ? op->kw : op->kh, s = axis ? op->sw : op->sh, d = axis ? op->dw : op->dh;
            int p = axis ? n->pd[i].l : n->pd[i].t;
            a = o[0] * s - p;
            b = (o[1] - 1) * s - p + d * (k - 1) + 1;
        }
        for (int k = 0; k < op->nin; k++)
            if (op->in[k] >= 0)
                widen(r + 2 * op->in[k], a, b, axis ? n->v[op->in[k]].w : n->v[op->in[k]].h);
    }
}

/* Destination rows (axis 0) or columns [lo, hi) as the last value's. */
static void need_dest(const struct cnn_net *n, int axis, int lo, int hi, int *r)
{
    if (n->resample) {
        const int *i0 = axis ? n->rx0 : n->ry0, *i1 = axis ? n->rx1 : n->ry1;
        need_back(n, axis, i0[lo], i1[hi - 1] + 1, r);
    } else {
        need_back(n, axis, lo, hi, r);
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

/* The kernel a convolution runs on: the direct AVX-512 kernel where output
 * channels come in 64s (an RGB stem's few input channels as patches of up
 * to 64 values, a 1x1 convolution over them), the AMX tiles where the
 * weights were packed for them, one GEMM per tap through OpenBLAS for the
 * other stride-1 single-group convolutions, im2col and GEMM for the rest. */
static enum path conv_path(const struct cnn_net *n, int i)
{
    const struct onnx_op *op = &n->g->ops[i];
    int cin = n->v[op->in[0]].c, kk = op->kh * op->kw * cin;
    int amx = n->wamx && n->wamx[i];
    if (op->sh != 1 || op->sw != 1 || op->group != 1)
        return PATH_IM2COL;
    if (n->avx512 && op->cout % 64 == 0 && cin < STEM_CH && kk <= STEM_PATCH && op->dw == 1)
        return amx ? PATH_STEM_AMX : PATH_STEM;
    if (amx)
        return PATH_AMX;
    return n->avx512 && op->cout % 64 == 0 ? PATH_DIRECT : PATH_GEMM;
}

/* Margins, ring sizes, scratch: what a worker allocates once. */
static int plan(struct cnn_net *n, struct err *e)
{
    const struct onnx_graph *g = n->g;
    int nv = n->nv;
    n->path = calloc((size_t)(g->nops + 1), sizeof *n->path);
    n->ml = calloc((size_t)nv, sizeof *n->ml);
    n->mr = calloc((size_t)nv, sizeof *n->mr);
    n->cap = calloc((size_t)nv, sizeof *n->cap);
    n->pitch = calloc((size_t)nv, sizeof *n->pitch);
    n->shadow = calloc((size_t)nv, sizeof *n->shadow);
    n->win = calloc((size_t)nv * 2, sizeof *n->win);
    int *r = malloc((size_t)nv * 2 * sizeof *r);
    if (!n->path || !n->ml || !n->mr || !n->cap || !n->pitch || !n->shadow || !n->win || !r) {
        free(r);
        return err_set(e, ST_ENOMEM, "%s: out of memory planning a %dx%d run", g->path, n->dw, n->dh);
    }
    n->maxkh = 1;
    for (int i = 0; i < g->nops; i++) {
        const struct onnx_op *op = &g->ops[i];
        if (op->kind != ONNX_CONV)
            continue;
        int u = op->in[0], kk = op->kh * op->kw * n->v[u].c / op->group;
        size_t w = (size_t)n->v[i + 1].w;
        n->path[i] = conv_path(n, i);
        if (n->pd[i].l > n->ml[u])
            n->ml[u] = n->pd[i].l;
        if (n->pd[i].r > n->mr[u])
            n->mr[u] = n->pd[i].r;
        if (op->kh > n->maxkh)
            n->maxkh = op->kh;
        if (n->path[i] == PATH_AMX)
            n->shadow[u] = SHADOW_AMX;
        else if (n->rop && n->rop[i].w && n->path[i] != PATH_STEM) /* a stem rounds its patches */
            n->shadow[u] = SHADOW_ROUNDED;
        if ((n->path[i] == PATH_STEM || n->path[i] == PATH_STEM_AMX || n->path[i] == PATH_IM2COL) &&
            w * kk > n->scap)
            n->scap = w * kk;
        if (n->path[i] == PATH_STEM_AMX && w * 32 > n->sbfcap)
            n->sbfcap = w * 32;
    }
    size_t widest = 1;
    for (int v = 0; v < nv; v++) {
        n->pitch[v] = (size_t)(n->ml[v] + n->v[v].w + n->mr[v]) * n->v[v].c;
        if (n->pitch[v] > widest)
            widest = n->pitch[v];
    }
    /* a ring holds the most rows one destination row needs at once */
    for (int y = 0; y < n->dh; y++) {
        need_dest(n, 0, y, y + 1, r);
        for (int v = 0; v < nv; v++)
            if (r[2 * v + 1] - r[2 * v] > n->cap[v])
                n->cap[v] = r[2 * v + 1] - r[2 * v];
    }
    free(r);
    const struct onnx_op *last = g->nops ? &g->ops[g->nops - 1] : NULL;
    n->direct_dst = last && last->kind == ONNX_CONV && n->path[g->nops - 1] >= PATH_DIRECT && !n->resample &&
                    n->identity && n->nch == n->v[nv - 1].c;
    if (!(n->zero = calloc(widest, sizeof *n->zero)))
        return err_set(e, ST_ENOMEM, "%s: out of memory planning a %dx%d run", g->path, n->dw, n->dh);
    return ST_OK;
}

/* ---- running ----------------------------------------------------------
 * A worker takes a band of destination rows and makes them one at a time,
 * top to bottom: for each, every value makes the rows of the window it
 * needs that it has not made yet, into its ring of rows, so each row of an
 * intermediate is made once per band and the rings stay in cache.  A ring
 * row is the window's columns between zero margins as wide as the padding
 * of the convolutions reading it, so a convolution reads its input rows
 * where they lie, without a bordered copy; rows above and below the frame
 * are the zero row. */

/* Element of pixel (x, y) of value v in its ring (and bfloat16 ring). */
static size_t at(const struct worker *wk, int v, int y, int x)
{
    const struct cnn_net *n = wk->net;
    return (size_t)(y % n->cap[v]) * n->pitch[v] + (size_t)(n->ml[v] + x - n->win[2 * v]) * n->v[v].c;
}

static void clamp_row(float *o, size_t pixels, int c, int os, float lo, float hi)
{
    if (lo == -INFINITY && hi == INFINITY)
        return;
    for (size_t p = 0; p < pixels; p++)
        for (int k = 0; k < c; k++) {
            float *x = o + p * os + k;
            *x = *x < lo ? lo : (*x > hi ? hi : *x);
        }
}

static void bias_row(float *o, size_t pixels, const float *b, int c, int os)
{
    for (size_t p = 0; p < pixels; p++)
        memcpy(o + p * os, b, (size_t)c * sizeof *o);
}

/* Row y of op i's output, pixels win[0].. of it at out, os floats apart. */
static void conv_row(struct worker *wk, int i, int y, float *out, int os)
{
    const struct cnn_net *n = wk->net;
    int rounded = n->rop && n->rop[i].w;
    const struct onnx_op *op = rounded ? &n->rop[i] : &n->g->ops[i];
    int u = op->in[0];
    const struct shape *x = &n->v[u];
    const struct pads *pd = &n->pd[i];
    int a = n->win[2 * (i + 1)], w = n->win[2 * (i + 1) + 1] - a, cin = x->c, cout = op->cout;
    enum path path = n->path[i];
    if (path == PATH_IM2COL) {
        int cing = cin / op->group, coutg = cout / op->group, kk = op->kh * op->kw * cing;
        float *p = wk->scratch;
        bias_row(out, (size_t)w, op->b, cout, os);
        for (int gi = 0; gi < op->group; gi++) {
            for (int xo = 0; xo < w; xo++) {
                float *col = p + (size_t)xo * kk;
                for (int ky = 0; ky < op->kh; ky++) {
                    int yi = y * op->sh - pd->t + ky * op->dh;
                    for (int kx = 0; kx < op->kw; kx++, col += cing) {
                        int xi = (a + xo) * op->sw - pd->l + kx * op->dw;
                        if (yi >= 0 && yi < x->h && xi >= 0 && xi < x->w)
                            memcpy(col, wk->ring[u] + at(wk, u, yi, xi) + (size_t)gi * cing,
                                   (size_t)cing * sizeof *col);
                        else
                            memset(col, 0, (size_t)cing * sizeof *col);
                    }
                }
            }
            for (int c0 = 0; c0 < w; c0 += GEMM_CHUNK) /* the window starts at a chunk's start */
                cblas_sgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, w - c0 < GEMM_CHUNK ? w - c0 : GEMM_CHUNK,
                            coutg, kk, 1.0f, p + (size_t)c0 * kk, kk, op->w + (size_t)gi * kk * coutg, coutg, 1.0f,
                            out + (size_t)c0 * os + (size_t)gi * coutg, os);
        }
        clamp_row(out, (size_t)w, cout, os, op->lo, op->hi);
        return;
    }
    /* stride 1: kernel row ky reads input row y - top + ky dh from the
     * pixel under output pixel a's first tap */
    for (int ky = 0; ky < op->kh; ky++) {
        int yi = y - pd->t + ky * op->dh;
        if (yi < 0 || yi >= x->h)
            wk->rowp[ky] = n->zero;
        else if (path == PATH_AMX)
            wk->rowp[ky] = wk->rbf[u] + at(wk, u, yi, a - pd->l);
        else if (rounded && path != PATH_STEM)
            wk->rowp[ky] = wk->rrn[u] + at(wk, u, yi, a - pd->l);
        else
            wk->rowp[ky] = wk->ring[u] + at(wk, u, yi, a - pd->l);
    }
    if (path == PATH_DIRECT) {
        convk_run_direct((const float *const *)wk->rowp, cin, cout, op, w, out, os);
    } else if (path == PATH_AMX) {
        convk_run_amx((const uint16_t *const *)wk->rowp, n->wamx[i], cin, cout, op, w, out, os);
    } else if (path == PATH_STEM || path == PATH_STEM_AMX) {
        /* few input channels (an RGB stem): each pixel's patch gathered, the
         * kernel run as a 1x1 convolution over kk channels, whose weights
         * are the same rows */
        int kk = op->kh * op->kw * cin, run = op->kw * cin; /* a patch row: kw pixels side by side (dw is 1) */
        struct onnx_op one = *op;
        one.kh = one.kw = one.dh = one.dw = 1;
        float *q = wk->scratch;
        for (int xo = 0; xo < w; xo++)
            for (int ky = 0; ky < op->kh; ky++) {
                const float *src = (const float *)wk->rowp[ky] + (size_t)xo * cin;
                float *d = q + (size_t)xo * kk + (size_t)ky * run;
                for (int t = 0; t < run; t++) /* a few floats: a loop beats a memcpy call */
                    d[t] = src[t];
            }
        if (path == PATH_STEM_AMX) { /* patches of kk padded to 32 channels, on the tiles */
            for (int xo = 0; xo < w; xo++)
                for (int t = 0; t < 32; t++)
                    wk->sbf[(size_t)xo * 32 + t] = t < kk ? convk_bf16(q[(size_t)xo * kk + t]) : 0;
            const uint16_t *rb = wk->sbf;
            convk_run_amx(&rb, n->wamx[i], 32, cout, &one, w, out, os);
        } else {
            if (rounded)
                convk_round_bf16(q, q, (size_t)w * kk);
            const float *rq = q;
            convk_run_direct(&rq, kk, cout, &one, w, out, os);
        }
    } else {
        bias_row(out, (size_t)w, op->b, cout, os);
        for (int c0 = 0; c0 < w; c0 += GEMM_CHUNK)
            for (int ky = 0; ky < op->kh; ky++)
                for (int kx = 0; kx < op->kw; kx++)
                    cblas_sgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, w - c0 < GEMM_CHUNK ? w - c0 : GEMM_CHUNK,
                                cout, cin, 1.0f, (const float *)wk->rowp[ky] + ((size_t)c0 + (size_t)kx * op->dw) * cin,
                                cin, op->w + (size_t)(ky * op->kw + kx) * cin * cout, cout, 1.0f,
                                out + (size_t)c0 * os, os);
        clamp_row(out, (size_t)w, cout, os, op->lo, op->hi);
    }
}

static void pool_row(struct worker *wk, int i, int y, float *out)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    int u = op->in[0];
    const struct shape *x = &n->v[u];
    const struct pads *pd = &n->pd[i];
    int c = x->c, maxp = op->kind == ONNX_MAXPOOL;
    for (int xo = n->win[2 * (i + 1)]; xo < n->win[2 * (i + 1) + 1]; xo++, out += c) {
        for (int k = 0; k < c; k++)
            out[k] = maxp ? -INFINITY : 0.0f;
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
                const float *src = wk->ring[u] + at(wk, u, yi, xi);
                if (maxp)
                    for (int k = 0; k < c; k++)
                        out[k] = src[k] > out[k] ? src[k] : out[k];
                else
                    for (int k = 0; k < c; k++)
                        out[k] += src[k];
            }
        }
        if (!maxp) {
            float inv = 1.0f / (float)(op->count_include_pad ? padded : (count ? count : 1));
            for (int k = 0; k < c; k++)
                out[k] *= inv;
        }
    }
}

static void elementwise_row(struct worker *wk, int i, int y, float *dst)
{
    const struct cnn_net *n = wk->net;
    const struct onnx_op *op = &n->g->ops[i];
    const struct shape *o = &n->v[i + 1];
    int a = n->win[2 * (i + 1)], w = n->win[2 * (i + 1) + 1] - a;
    size_t len = (size_t)w * o->c;
    if (op->kind == ONNX_CONCAT) {
        for (int k = 0, off = 0; k < op->nin; off += n->v[op->in[k]].c, k++) {
            int ck = n->v[op->in[k]].c;
            const float *src = wk->ring[op->in[k]] + at(wk, op->in[k], y, a);
            for (int xo = 0; xo < w; xo++)
                memcpy(dst + (size_t)xo * o->c + off, src + (size_t)xo * ck, (size_t)ck * sizeof *dst);
        }
        return;
    }
    int u = op->in[0] >= 0 ? op->in[0] : op->in[1];
    const float *src = wk->ring[u] + at(wk, u, y, a);
    if (op->kind == ONNX_CLAMP) {
        memcpy(dst, src, len * sizeof *dst);
        clamp_row(dst, (size_t)w, o->c, o->c, op->lo, op->hi);
    } else if (op->kind == ONNX_AFFINE) {
        for (size_t p = 0; p < len; p++)
            dst[p] = src[p] * op->scale[p % o->c] + op->b[p % o->c];
    } else if (op->in[0] >= 0 && op->in[1] >= 0) {
        const float *src2 = wk->ring[op->in[1]] + at(wk, op->in[1], y, a);
        for (size_t p = 0; p < len; p++)
            dst[p] = src[p] + src2[p];
    } else {
        const int *kd = op->kdims;
        for (int xo = 0; xo < w; xo++)
            for (int k = 0; k < o->c; k++) {
                size_t ki = ((size_t)(kd[0] == 1 ? 0 : k) * kd[1] + (kd[1] == 1 ? 0 : y)) * kd[2] +
                            (kd[2] == 1 ? 0 : a + xo);
                dst[(size_t)xo * o->c + k] = src[(size_t)xo * o->c + k] + op->konst[ki];
            }
    }
}

/* Row y of value v into its ring (or, for the last conv with direct_dst,
 * into the destination). */
static void make_row(struct worker *wk, int v, int y)
{
    const struct cnn_net *n = wk->net;
    int c = n->v[v].c, a = n->win[2 * v], w = n->win[2 * v + 1] - a;
    float *row = wk->ring[v] + (size_t)(y % n->cap[v]) * n->pitch[v], *out = row + (size_t)n->ml[v] * c;
    if (v == 0) {
        memcpy(out, n->in + ((size_t)y * n->v[0].w + a) * c, (size_t)w * c * sizeof *out);
    } else {
        const struct onnx_op *op = &n->g->ops[v - 1];
        if (op->kind == ONNX_CONV && n->to_dst && v == n->nv - 1)
            conv_row(wk, v - 1, y, n->dst + ((size_t)y * n->dw + a) * n->stride, n->stride);
        else if (op->kind == ONNX_CONV)
            conv_row(wk, v - 1, y, out, c);
        else if (op->kind == ONNX_MAXPOOL || op->kind == ONNX_AVGPOOL)
            pool_row(wk, v - 1, y, out);
        else
            elementwise_row(wk, v - 1, y, out);
    }
    /* the right margin moves with the window: zero it again */
    memset(out + (size_t)w * c, 0, (size_t)n->mr[v] * c * sizeof *out);
    size_t len = (size_t)(n->ml[v] + w + n->mr[v]) * c, slot = (size_t)(y % n->cap[v]) * n->pitch[v];
    if (n->shadow[v] == SHADOW_AMX)
        convk_convert_bf16(row, wk->rbf[v] + slot, len);
    else if (n->shadow[v] == SHADOW_ROUNDED)
        convk_round_bf16(row, wk->rrn[v] + slot, len);
}

static void write_dest(struct worker *wk, int y)
{
    const struct cnn_net *n = wk->net;
    int f = n->nv - 1, c = n->v[f].c, x0 = n->box.x0, x1 = n->box.x1;
    const float *rf = wk->ring[f];
    float *d = n->dst + ((size_t)y * n->dw + x0) * n->stride;
    if (!n->resample && n->identity && n->stride == c) {
        memcpy(d, rf + at(wk, f, y, x0), (size_t)(x1 - x0) * c * sizeof *d);
        return;
    }
    if (!n->resample) {
        const float *src = rf + at(wk, f, y, x0);
        for (int x = x0; x < x1; x++, d += n->stride, src += c)
            if (n->identity)
                memcpy(d, src, (size_t)n->nch * sizeof *d);
            else
                for (int k = 0; k < n->nch; k++)
                    d[k] = src[n->ch[k]];
        return;
    }
    float fy = n->fy[y];
    for (int x = x0; x < x1; x++, d += n->stride) {
        const float *a0 = rf + at(wk, f, n->ry0[y], n->rx0[x]), *b0 = rf + at(wk, f, n->ry0[y], n->rx1[x]);
        const float *a1 = rf + at(wk, f, n->ry1[y], n->rx0[x]), *b1 = rf + at(wk, f, n->ry1[y], n->rx1[x]);
        float fx = n->fx[x];
        for (int k = 0; k < n->nch; k++) {
            int ch = n->ch[k];
            float top = a0[ch] + fx * (b0[ch] - a0[ch]);
            float bot = a1[ch] + fx * (b1[ch] - a1[ch]);
            d[k] = top + fy * (bot - top);
        }
    }
}

static void run_band(struct worker *wk, int y0, int y1)
{
    const struct cnn_net *n = wk->net;
    for (int v = 0; v < n->nv; v++)
        wk->made[v] = INT_MIN;
    for (int y = y0; y < y1; y++) {
        need_dest(n, 0, y, y + 1, wk->need);
        for (int v = 0; v < n->nv; v++) {
            int lo = wk->need[2 * v], hi = wk->need[2 * v + 1];
            if (lo >= hi || n->win[2 * v] >= n->win[2 * v + 1])
                continue;
            for (int r = wk->made[v] > lo ? wk->made[v] : lo; r < hi; r++)
                make_row(wk, v, r);
            if (hi > wk->made[v])
                wk->made[v] = hi;
        }
        if (!n->to_dst)
            write_dest(wk, y);
    }
}

static void *worker_run(void *arg)
{
    struct worker *wk = arg;
    struct cnn_net *n = wk->net;
    int y0 = n->box.y0, rows = n->box.y1 - y0;
    if (n->wamx) /* tile configuration is per thread */
        convk_begin_amx();
    for (int b; (b = atomic_fetch_add(&n->next, 1)) < n->nbands;)
        run_band(wk, y0 + (int)((long)rows * b / n->nbands), y0 + (int)((long)rows * (b + 1) / n->nbands));
    if (n->wamx)
        convk_end_amx();
    return NULL;
}

static int box_check(const struct cnn_net *n, const struct cnn_box *b, struct err *e)
{
    if (b->x0 < 0 || b->y0 < 0 || b->x1 > n->dw || b->y1 > n->dh || b->x0 >= b->x1 || b->y0 >= b->y1)
        return err_set(e, ST_EINVAL, "%s: box [%d, %d) x [%d, %d) is empty or outside the %dx%d destination",
                       n->g->path, b->x0, b->x1, b->y0, b->y1, n->dw, n->dh);
    return ST_OK;
}

int cnn_net_input_box(const struct cnn_net *n, const struct cnn_box *box, struct cnn_box *in, struct err *e)
{
    int rc = box_check(n, box, e);
    int *r = rc ? NULL : malloc((size_t)n->nv * 2 * sizeof *r);
    if (!rc && !r)
        rc = err_set(e, ST_ENOMEM, "%s: out of memory", n->g->path);
    if (rc)
        return rc;
    need_dest(n, 1, box->x0, box->x1, r);
    in->x0 = r[0];
    in->x1 = r[1];
    need_dest(n, 0, box->y0, box->y1, r);
    in->y0 = r[0];
    in->y1 = r[1];
    free(r);
    return ST_OK;
}

int cnn_net_run_box(struct cnn_net *net, const float *in, float *dst, const struct cnn_box *box, struct err *e)
{
    if (box_check(net, box, e))
        return e ? e->code : ST_EINVAL;
    pthread_t tids[CNN_MAX_THREADS];
    int started[CNN_MAX_THREADS] = {0};
    int rows = box->y1 - box->y0;
    net->in = in;
    net->dst = dst;
    net->box = *box;
    need_dest(net, 1, box->x0, box->x1, net->win);
    int f = net->nv - 1;
    net->to_dst = net->direct_dst && net->win[2 * f] == box->x0 && net->win[2 * f + 1] == box->x1;
    /* bands over the threads: four each, so a thread the shared machine
     * holds back leaves its share to the others, but of 8 rows at least
     * where the box has them, since each band remakes the few rows above it
     * that its first row needs */
    int nb = 4 * net->threads;
    if (nb > rows / 8)
        nb = rows / 8;
    if (nb < net->threads)
        nb = net->threads < rows ? net->threads : rows;
    net->nbands = net->threads == 1 ? 1 : nb;
    atomic_store(&net->next, 0);
    for (int t = 1; t < net->threads; t++)
        started[t] = pthread_create(&tids[t], NULL, worker_run, &net->wk[t]) == 0;
    worker_run(&net->wk[0]);
    for (int t = 1; t < net->threads; t++)
        if (started[t])
            pthread_join(tids[t], NULL);
    /* a thread that could not start left its bands to the others */
    net->in = NULL;
    net->dst = NULL;
    return ST_OK;
}

int cnn_net_run(struct cnn_net *net, const float *in, float *dst, struct err *e)
{
    struct cnn_box all = {0, 0, net->dw, net->dh};
    return cnn_net_run_box(net, in, dst, &all, e);
}

/* ---- building --------------------------------------------------------- */

static int worker_alloc(struct cnn_net *n, struct worker *wk)
{
    wk->net = n;
    wk->ring = calloc((size_t)n->nv, sizeof *wk->ring);
    wk->rbf = calloc((size_t)n->nv, sizeof *wk->rbf);
    wk->rrn = calloc((size_t)n->nv, sizeof *wk->rrn);
    wk->made = malloc((size_t)n->nv * sizeof *wk->made);
    wk->need = malloc((size_t)n->nv * 2 * sizeof *wk->need);
    wk->rowp = malloc((size_t)n->maxkh * sizeof *wk->rowp);
    wk->scratch = malloc((n->scap ? n->scap : 1) * sizeof *wk->scratch);
    wk->sbf = malloc((n->sbfcap ? n->sbfcap : 1) * sizeof *wk->sbf);
    if (!wk->ring || !wk->rbf || !wk->rrn || !wk->made || !wk->need || !wk->rowp || !wk->scratch || !wk->sbf)
        return ST_ENOMEM;
    /* zeroed once: the left margins are never written */
    for (int v = 0; v < n->nv; v++) {
        size_t len = (size_t)(n->cap[v] ? n->cap[v] : 1) * n->pitch[v];
        if (!(wk->ring[v] = calloc(len, sizeof(float))) ||
            (n->shadow[v] == SHADOW_AMX && !(wk->rbf[v] = calloc(len, sizeof(uint16_t)))) ||
            (n->shadow[v] == SHADOW_ROUNDED && !(wk->rrn[v] = calloc(len, sizeof(float)))))
            return ST_ENOMEM;
    }
    return ST_OK;
}

/* bfloat16 (dest->bf16): the stride-1 single-group convolutions with input
 * and output channels in multiples of 32, and an RGB stem's patches of up
 * to 32 values, take inputs and weights rounded to bfloat16 and sum in
 * float32.  On AMX the tiles do it; elsewhere the float32 kernels run on
 * operands rounded the same way (slower than float32, but the same
 * features, so a model trained with them runs on either machine). */
static int bf16_prepare(struct cnn_net *n)
{
    const struct onnx_graph *g = n->g;
    int amx = n->avx512 && __builtin_cpu_supports("avx512bf16") && convk_has_amx();
    if (amx ? !(n->wamx = calloc((size_t)g->nops, sizeof *n->wamx))
            : !(n->rop = calloc((size_t)g->nops, sizeof *n->rop)))
        return ST_ENOMEM;
    for (int i = 0; i < g->nops; i++) {
        const struct onnx_op *op = &g->ops[i];
        int cin = n->v[op->in[0]].c, kk = op->kh * op->kw * cin;
        if (op->kind != ONNX_CONV || op->sh != 1 || op->sw != 1 || op->group != 1 || n->v[i + 1].w < 32)
            continue;
        int patch = op->cout % 64 == 0 && cin < STEM_CH && kk <= 32 && op->dw == 1;
        if (!patch && (op->cout % 32 || cin % 32))
            continue;
        if (amx) {
            if (!(n->wamx[i] = patch ? convk_pack_amx(op, 1, kk, 32) : convk_pack_amx(op, op->kh * op->kw, cin, cin)))
                return ST_ENOMEM;
            continue;
        }
        size_t nw = (size_t)kk * op->cout;
        n->rop[i] = *op;
        if (!(n->rop[i].w = malloc(nw * sizeof *n->rop[i].w)))
            return ST_ENOMEM;
        convk_round_bf16(op->w, n->rop[i].w, nw);
    }
    return ST_OK;
}

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
    if (dest->bf16 && bf16_prepare(n))
        goto oom;
    if (plan(n, e))
        goto fail;
    n->wk = calloc((size_t)n->threads, sizeof *n->wk);
    if (!n->wk)
        goto oom;
    for (int t = 0; t < n->threads; t++)
        if (worker_alloc(n, &n->wk[t]))
            goto oom;
    /* our bands are the parallelism; OpenBLAS threads inside each small
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
        struct worker *wk = &n->wk[t];
        for (int v = 0; v < n->nv; v++) {
            free(wk->ring ? wk->ring[v] : NULL);
            free(wk->rbf ? wk->rbf[v] : NULL);
            free(wk->rrn ? wk->rrn[v] : NULL);
        }
        free(wk->ring);
        free(wk->rbf);
        free(wk->rrn);
        free(wk->made);
        free(wk->need);
        free(wk->rowp);
        free(wk->scratch);
        free(wk->sbf);
    }
    free(n->wk);
    for (int i = 0; n->wamx && i < n->g->nops; i++)
        free(n->wamx[i]);
    free(n->wamx);
    for (int i = 0; n->rop && i < n->g->nops; i++)
        free(n->rop[i].w);
    free(n->rop);
    free(n->v);
    free(n->pd);
    free(n->path);
    free(n->ch);
    free(n->rx0);
    free(n->rx1);
    free(n->fx);
    free(n->ry0);
    free(n->ry1);
    free(n->fy);
    free(n->ml);
    free(n->mr);
    free(n->cap);
    free(n->pitch);
    free(n->shadow);
    free(n->win);
    free(n->zero);
    free(n);
}
