#include "features.h"

#include <math.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "filters.h"

#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#include <immintrin.h>
#define FEAT_WIDE 1
#endif

#define SIGMA_FAMILIES (FEAT_GAUSS | FEAT_GRADIENT | FEAT_LAPLACE | FEAT_HESSIAN | FEAT_STRUCTURE | FEAT_LOCALSTD)
#define ALL_FAMILIES (FEAT_COLOUR | SIGMA_FAMILIES | FEAT_GABOR)
/* Grey in integer form, 299 R + 587 G + 114 B = 1000 * 255 * grey, so the
 * brightness statistics are exact and the median comes from a histogram. */
#define GREY_KEY_MAX 255000
#define FEAT_MAX_GABORS (FEAT_MAX_GABOR_FREQS * FEAT_MAX_ORIENT)
#define NROWS 8 /* row buffers per worker, enough for the busiest phase */
/* The last phase runs pass by pass over strips of this many rows, so one
 * pass's source windows and the strip's planar features stay in L2; row by
 * row, every pass's window would be live at once and spill. */
#define STRIP 8
/* The row phases run TGROUP rows at a time: their passes of radius
 * TRANSPOSE_MIN_R and more run on the group transposed (see pass_group);
 * below that radius the two transposes cost more than the taps save. */
#define TGROUP 16
#define TRANSPOSE_MIN_R 8
/* row passes of one source: per sigma two, the Sobel pair, the Gabors */
#define MAX_ROW_PASSES (2 * FEAT_MAX_SIGMAS + 1 + FEAT_MAX_GABOR_FREQS * FEAT_MAX_ORIENT)
/* the largest of the three plans: worker rows, planes, kernels */
#define PLAN_MAX (FEAT_MAX_THREADS * (NROWS + 2))
_Static_assert(PLAN_MAX >= 3 + FEAT_MAX_SIGMAS * 8 + FEAT_MAX_GABORS * 2 &&
                   PLAN_MAX >= FEAT_MAX_SIGMAS * 3 + FEAT_MAX_GABORS * 4,
               "plan too small");

enum slot {
    SLOT_GAUSS,
    SLOT_GRADIENT,
    SLOT_LAPLACE,
    SLOT_HESS_HI,
    SLOT_HESS_LO,
    SLOT_STRUCT_HI,
    SLOT_STRUCT_LO,
    SLOT_LOCALSTD,
    NSLOTS
};
/* the most features a bank spec yields */
#define FEAT_MAX_BANK (3 + FEAT_MAX_SIGMAS * NSLOTS + FEAT_MAX_GABORS)

static const struct {
    unsigned family;
    const char *name;
} feat_slots[NSLOTS] = {
    {FEAT_GAUSS, "gauss"},          {FEAT_GRADIENT, "gradient"},   {FEAT_LAPLACE, "laplace"},
    {FEAT_HESSIAN, "hessian_hi"},   {FEAT_HESSIAN, "hessian_lo"},  {FEAT_STRUCTURE, "structure_hi"},
    {FEAT_STRUCTURE, "structure_lo"}, {FEAT_LOCALSTD, "localstd"},
};

/* scipy.ndimage.sobel's passes as half kernels: [-1 0 1] and [1 2 1]. */
static const float sobel_diff[2] = {0.0f, 1.0f};
static const float sobel_smooth[2] = {2.0f, 1.0f};

struct feat_sigma {
    int r;
    float *k0, *k1, *k2;      /* half kernels of radius r */
    float *r0, *r1, *r2, *q0; /* row passes: grey by k0, k1, k2; J^2 by k0 */
    float *gs;                /* G_s * I, kept whole for the Hessian's differences */
    float *pr[3];             /* row passes (k0) of the Sobel products xx, xy, yy */
    int idx[NSLOTS];          /* feature index per slot, -1 when not selected */
};

struct feat_gabor {
    int r;
    float *xre, *xim, *yre, *yim;
    float *re, *im; /* row pass of grey by kx; im is NULL when kx is real */
    int idx;
    int y_real;     /* ky has no imaginary part (theta = 0) */
    int mirror;     /* index of orientation pi - theta, answered from these passes, or -1 */
    int shared;     /* this orientation is another one's mirror: no kernels, no planes */
};

/* One row pass: radius r, a symmetric kernel ks into plane ps and / or an
 * antisymmetric one ka into pa, output columns [x0, x0 + n). */
struct row_pass {
    int r;
    const float *ks, *ka;
    float *ps, *pa;
    int x0, n;
};

struct feat_worker {
    float *pad;
    float *pads;       /* TGROUP padded rows, pw = w + 2 rmax apart */
    float *tp;         /* the same transposed: padded column c of the group at tp + 16 c */
    float *to_s, *to_a; /* a transposed pass's outputs, column i at + 16 i */
    const float **tsrc; /* its sources, pw + 16 */
    float **tos, **toa; /* its outputs, w + 16 each */
    float *fb;      /* the strip being finished: per row, its n features as planar rows */
    float *orow;    /* one row of the box's output, pixel-major, before it is streamed out */
    int strip_y0;   /* first row of that strip */
    const float **src;
    float *row[NROWS];
};

struct feat_ctx;
typedef void (*feat_phase)(struct feat_ctx *ctx, struct feat_worker *wk, int y0, int y1);

/* A phase's rows are handed out a few at a time from one counter, so a
 * worker whose core is busy elsewhere (the screen, the camera, another
 * guest on the host) takes fewer strips instead of holding the frame: with
 * halves fixed in advance, one slowed core set the whole phase's time. */
struct feat_job {
    struct feat_ctx *ctx;
    feat_phase fn;
    struct feat_worker *wk;
    int y1, step;
    atomic_int *next; /* the phase's next unclaimed row */
};

struct feat_ctx {
    struct feat_spec spec;
    int w, h, n;
    int nthreads;
    int rmax; /* largest radius of any pass, at least Sobel's 1 */
    int idx_colour;
    int nsig, ngab;
    struct feat_sigma sig[FEAT_MAX_SIGMAS];
    struct feat_gabor gab[FEAT_MAX_GABORS];
    float *grey, *sob_d, *sob_s;
    float *planes, *kernels, *rows;
    float *zero; /* a row of zeros standing in for column passes that vanish */
    const float **srcs;
    const float **tsrcs;
    float **touts;
    int pw; /* a padded row's length */
    /* the row passes per source, set per frame (their columns follow the
     * box): the grey, J^2 and each Sobel product */
    struct row_pass grey_pass[MAX_ROW_PASSES], sq_pass[FEAT_MAX_SIGMAS], prod_pass[3][FEAT_MAX_SIGMAS];
    int ngrey_pass, nsq_pass, nprod_pass;
    uint32_t *hist;
    struct feat_worker *wk;
    struct feat_job *jobs;
    pthread_t *tids;
    /* set per frame, read by the workers */
    struct feat_box box;  /* the features asked for */
    int gx0, gx1;         /* columns of the grey's row passes: box +-2 (the Hessian's differences) */
    int wx0, wx1;         /* columns of the Sobel row passes and products: box +- (rmax + 2) */
    int ry0, ry1;         /* rows of the row passes: box +- (rmax + 2) */
    int my0, my1;         /* rows of the middle phase: box +- rmax (Sobel column passes) */
    /* The row-pass planes hold rows [ry0, ry1) and columns [wx0, wx1) only,
     * packed with this stride, so a frame's pages touched (and the memory
     * resident) follow the box's area, not the frame's.  grey and gs keep
     * the frame's stride (grey is padded whole, gs read by whole rows). */
    size_t ps;
    const struct image *img;
    struct fstack *out;
    float scale_rgb, scale_grey, mean_grey;
    /* the network's features (NULL without one), after the bank's: the bank
     * then fills its own stack and is copied in */
    struct cnnfeat_ctx *cnn;
    struct fstack *bank;
};

void feat_spec_default(struct feat_spec *spec)
{
    memset(spec, 0, sizeof *spec);
    spec->families = ALL_FAMILIES;
    spec->nsigmas = 3;
    spec->sigmas[0] = 1.0;
    spec->sigmas[1] = 2.0;
    spec->sigmas[2] = 4.0;
    spec->gabor_orientations = 4;
    spec->ngabor_freqs = 2;
    spec->gabor_freqs[0] = 0.1;
    spec->gabor_freqs[1] = 0.25;
    spec->normalise = 1;
    spec->threads = 2;
}

/* Values in [lo, hi] (NaN fails), pairwise distinct since equal ones would
 * give equal feature names. */
static int check_list(const double *v, int n, double lo, double hi, const char *what, struct err *e)
{
    for (int i = 0; i < n; i++) {
        if (!(v[i] >= lo && v[i] <= hi))
            return err_set(e, ST_ERANGE, "feature spec: %s %g outside %g..%g", what, v[i], lo, hi);
        for (int j = 0; j < i; j++)
            if (v[j] == v[i])
                return err_set(e, ST_EINVAL, "feature spec: %s %g given twice", what, v[i]);
    }
    return ST_OK;
}

int feat_spec_check(const struct feat_spec *spec, struct err *e)
{
    if ((spec->families == 0 && !spec->cnn.on) || (spec->families & ~(unsigned)ALL_FAMILIES))
        return err_set(e, ST_EINVAL, "feature spec: family set 0x%x is empty or has unknown bits",
                       spec->families);
    if (spec->families & SIGMA_FAMILIES) {
        if (spec->nsigmas < 1 || spec->nsigmas > FEAT_MAX_SIGMAS)
            return err_set(e, ST_ERANGE, "feature spec: %d sigmas, 1..%d allowed", spec->nsigmas,
                           FEAT_MAX_SIGMAS);
        int rc = check_list(spec->sigmas, spec->nsigmas, 0.5, 16.0, "sigma", e);
        if (rc)
            return rc;
    }
    if (spec->families & FEAT_GABOR) {
        if (spec->gabor_orientations < 1 || spec->gabor_orientations > FEAT_MAX_ORIENT)
            return err_set(e, ST_ERANGE, "feature spec: %d Gabor orientations, 1..%d allowed",
                           spec->gabor_orientations, FEAT_MAX_ORIENT);
        if (spec->ngabor_freqs < 1 || spec->ngabor_freqs > FEAT_MAX_GABOR_FREQS)
            return err_set(e, ST_ERANGE, "feature spec: %d Gabor frequencies, 1..%d allowed",
                           spec->ngabor_freqs, FEAT_MAX_GABOR_FREQS);
        int rc = check_list(spec->gabor_freqs, spec->ngabor_freqs, 0.01, 0.5, "Gabor frequency", e);
        if (rc)
            return rc;
    }
    if (spec->normalise != 0 && spec->normalise != 1)
        return err_set(e, ST_EINVAL, "feature spec: normalise %d is not 0 or 1", spec->normalise);
    if (spec->threads < 1 || spec->threads > FEAT_MAX_THREADS)
        return err_set(e, ST_ERANGE, "feature spec: %d threads, 1..%d allowed", spec->threads,
                       FEAT_MAX_THREADS);
    return ST_OK;
}

/* Feature index of every output in the documented order; returns the count.
 * The spec must have passed feat_spec_check. */
static int feat_layout(const struct feat_spec *spec, int *colour, int idx[FEAT_MAX_SIGMAS][NSLOTS],
                       int *gabor)
{
    int k = 0;
    *colour = -1;
    if (spec->families & FEAT_COLOUR) {
        *colour = k;
        k += 3;
    }
    for (int i = 0; i < FEAT_MAX_SIGMAS; i++)
        for (int s = 0; s < NSLOTS; s++)
            idx[i][s] = (i < spec->nsigmas && (spec->families & feat_slots[s].family)) ? k++ : -1;
    *gabor = -1;
    if (spec->families & FEAT_GABOR) {
        *gabor = k;
        k += spec->ngabor_freqs * spec->gabor_orientations;
    }
    return k;
}

int feat_count(const struct feat_spec *spec)
{
    int colour, gabor, idx[FEAT_MAX_SIGMAS][NSLOTS];
    if (feat_spec_check(spec, NULL))
        return -1;
    return feat_layout(spec, &colour, idx, &gabor) + (spec->cnn.on ? spec->cnn.nch : 0);
}

int feat_name(const struct feat_spec *spec, int k, char *buf, size_t len)
{
    int colour, gabor, idx[FEAT_MAX_SIGMAS][NSLOTS];
    if (feat_spec_check(spec, NULL))
        return ST_EINVAL;
    int n = feat_layout(spec, &colour, idx, &gabor);
    if (spec->cnn.on && k >= n)
        return cnnfeat_name(&spec->cnn, k - n, buf, len);
    if (k < 0 || k >= n)
        return ST_ERANGE;
    int got = -1;
    if (colour >= 0 && k < colour + 3) {
        got = snprintf(buf, len, "colour_%c", "rgb"[k - colour]);
    } else if (gabor >= 0 && k >= gabor) {
        int no = spec->gabor_orientations;
        int f = (k - gabor) / no, t = (k - gabor) % no;
        got = snprintf(buf, len, "gabor_f%g_t%g", spec->gabor_freqs[f], t * 180.0 / no);
    } else {
        for (int i = 0; i < spec->nsigmas; i++)
            for (int s = 0; s < NSLOTS; s++)
                if (idx[i][s] == k)
                    got = snprintf(buf, len, "%s_s%g", feat_slots[s].name, spec->sigmas[i]);
    }
    return got >= 0 && (size_t)got < len ? ST_OK : ST_ERANGE;
}

static int all_zero(const float *k, int r)
{
    for (int j = 0; j <= r; j++)
        if (k[j] != 0.0f)
            return 0;
    return 1;
}

/* A list of float buffers carved out of one allocation. */
struct block_plan {
    int n;
    float **dst[PLAN_MAX];
    size_t len[PLAN_MAX];
};

static void plan_add(struct block_plan *p, float **dst, size_t len)
{
    p->dst[p->n] = dst;
    p->len[p->n] = len;
    p->n++;
}

/* Buffers start on 64-byte boundaries: with a width that is a multiple of
 * 16 every row of a plane is then aligned, and the column passes' vector
 * loads never straddle two cache lines (a split load costs about twice). */
#define PLAN_ALIGN 16 /* floats */

static size_t plan_padded(size_t len)
{
    return len + (PLAN_ALIGN - len % PLAN_ALIGN) % PLAN_ALIGN;
}

/* Allocates the sum of the (padded) lengths and points every dst into it. */
static float *plan_alloc(const struct block_plan *p)
{
    size_t total = 0;
    for (int i = 0; i < p->n; i++) {
        size_t room = SIZE_MAX / sizeof(float) - PLAN_ALIGN;
        if (total > room || p->len[i] > room - total)
            return NULL;
        total += plan_padded(p->len[i]);
    }
    float *base = aligned_alloc(PLAN_ALIGN * sizeof *base, (total ? total : PLAN_ALIGN) * sizeof *base);
    if (!base)
        return NULL;
    size_t at = 0;
    for (int i = 0; i < p->n; i++) {
        *p->dst[i] = base + at;
        at += plan_padded(p->len[i]);
    }
    return base;
}

static int ctx_plan_planes(struct feat_ctx *ctx, struct block_plan *p)
{
    unsigned fam = ctx->spec.families;
    size_t plane = (size_t)ctx->w * (size_t)ctx->h;
    p->n = 0;
    if (fam & (SIGMA_FAMILIES | FEAT_GABOR))
        plan_add(p, &ctx->grey, plane);
    if (fam & FEAT_STRUCTURE) {
        plan_add(p, &ctx->sob_d, plane);
        plan_add(p, &ctx->sob_s, plane);
    }
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        if (fam & (SIGMA_FAMILIES & ~(unsigned)FEAT_STRUCTURE))
            plan_add(p, &s->r0, plane);
        if (fam & FEAT_GRADIENT)
            plan_add(p, &s->r1, plane);
        if (fam & FEAT_LAPLACE)
            plan_add(p, &s->r2, plane);
        if (fam & FEAT_LOCALSTD)
            plan_add(p, &s->q0, plane);
        if (fam & FEAT_HESSIAN)
            plan_add(p, &s->gs, plane);
        for (int c = 0; c < 3 && (fam & FEAT_STRUCTURE); c++)
            plan_add(p, &s->pr[c], plane);
    }
    for (int i = 0; i < ctx->ngab; i++) {
        struct feat_gabor *g = &ctx->gab[i];
        if (g->shared)
            continue;
        plan_add(p, &g->re, plane);
        if (!all_zero(g->xim, g->r))
            plan_add(p, &g->im, plane);
    }
    ctx->planes = plan_alloc(p);
    return ctx->planes ? ST_OK : ST_ENOMEM;
}

static const double feat_pi = 3.14159265358979323846;

static double gabor_theta(const struct feat_spec *spec, int t)
{
    return t * feat_pi / spec->gabor_orientations;
}

static int ctx_plan_kernels(struct feat_ctx *ctx, struct block_plan *p)
{
    p->n = 0;
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        plan_add(p, &s->k0, (size_t)s->r + 1);
        plan_add(p, &s->k1, (size_t)s->r + 1);
        plan_add(p, &s->k2, (size_t)s->r + 1);
    }
    for (int i = 0; i < ctx->ngab; i++) {
        struct feat_gabor *g = &ctx->gab[i];
        if (g->shared)
            continue;
        plan_add(p, &g->xre, (size_t)g->r + 1);
        plan_add(p, &g->xim, (size_t)g->r + 1);
        plan_add(p, &g->yre, (size_t)g->r + 1);
        plan_add(p, &g->yim, (size_t)g->r + 1);
    }
    ctx->kernels = plan_alloc(p);
    if (!ctx->kernels)
        return ST_ENOMEM;
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        filt_gauss_kernels(ctx->spec.sigmas[i], s->r, s->k0, s->k1, s->k2);
    }
    for (int i = 0; i < ctx->ngab; i++) {
        struct feat_gabor *g = &ctx->gab[i];
        int no = ctx->spec.gabor_orientations;
        if (g->shared)
            continue;
        filt_gabor_kernels(ctx->spec.gabor_freqs[i / no], gabor_theta(&ctx->spec, i % no), g->r, g->xre,
                           g->xim, g->yre, g->yim);
        g->y_real = all_zero(g->yim, g->r);
    }
    return ST_OK;
}

static int ctx_alloc_workers(struct feat_ctx *ctx, struct block_plan *p)
{
    int nt = ctx->nthreads;
    size_t nsrc = 2 * (size_t)ctx->rmax + STRIP;
    ctx->wk = calloc((size_t)nt, sizeof *ctx->wk);
    ctx->jobs = calloc((size_t)nt, sizeof *ctx->jobs);
    ctx->tids = calloc((size_t)nt, sizeof *ctx->tids);
    ctx->srcs = calloc((size_t)nt * nsrc, sizeof *ctx->srcs);
    size_t pw = (size_t)ctx->w + 2 * (size_t)ctx->rmax, nout = (size_t)ctx->w + 16;
    ctx->pw = (int)pw;
    ctx->tsrcs = calloc((size_t)nt * (pw + 16), sizeof *ctx->tsrcs);
    ctx->touts = calloc((size_t)nt * 2 * nout, sizeof *ctx->touts);
    if (!ctx->wk || !ctx->jobs || !ctx->tids || !ctx->srcs || !ctx->tsrcs || !ctx->touts)
        return ST_ENOMEM;
    p->n = 0;
    for (int t = 0; t < nt; t++) {
        struct feat_worker *wk = &ctx->wk[t];
        wk->src = ctx->srcs + (size_t)t * nsrc;
        wk->tsrc = ctx->tsrcs + (size_t)t * (pw + 16);
        wk->tos = ctx->touts + (size_t)t * 2 * nout;
        wk->toa = wk->tos + nout;
        plan_add(p, &wk->pad, pw);
        plan_add(p, &wk->pads, TGROUP * pw);
        plan_add(p, &wk->tp, (pw + 15) / 16 * 16 * 16);
        plan_add(p, &wk->to_s, nout * 16);
        plan_add(p, &wk->to_a, nout * 16);
        plan_add(p, &wk->fb, (size_t)ctx->w * (size_t)ctx->n * STRIP);
        plan_add(p, &wk->orow, (size_t)ctx->w * (size_t)ctx->n);
        for (int b = 0; b < NROWS; b++)
            plan_add(p, &wk->row[b], (size_t)ctx->w * STRIP);
    }
    ctx->rows = plan_alloc(p);
    return ctx->rows ? ST_OK : ST_ENOMEM;
}

struct feat_ctx *feat_ctx_new(const struct feat_spec *spec, int w, int h, struct err *e)
{
    struct feat_ctx *ctx = NULL;
    struct block_plan *plan = NULL;
    if (feat_spec_check(spec, e) || image_check_size(w, h, 1, NULL, e))
        return NULL;
    ctx = calloc(1, sizeof *ctx);
    plan = malloc(sizeof *plan);
    if (!ctx || !plan)
        goto fail;
    ctx->spec = *spec;
    ctx->w = w;
    ctx->h = h;
    ctx->nthreads = spec->threads < h ? spec->threads : h;
    int colour, gabor, idx[FEAT_MAX_SIGMAS][NSLOTS];
    ctx->n = feat_layout(spec, &colour, idx, &gabor);
    ctx->idx_colour = colour;
    ctx->rmax = 1;
    if (spec->families & SIGMA_FAMILIES)
        ctx->nsig = spec->nsigmas;
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        s->r = filt_gauss_radius(spec->sigmas[i]);
        memcpy(s->idx, idx[i], sizeof s->idx);
        if (s->r > ctx->rmax)
            ctx->rmax = s->r;
    }
    if (spec->families & FEAT_GABOR)
        ctx->ngab = spec->ngabor_freqs * spec->gabor_orientations;
    /* Orientation pi - theta has kx conjugated and the same ky, so for a
     * real image its row pass is the conjugate of theta's and its response
     * comes from theta's column passes with two signs flipped (gabor_row):
     * pairing them halves the Gabor work for all orientations but 0 and
     * pi/2.  skimage's kernel for pi - theta differs from the conjugate by
     * rounding of cos and sin only. */
    for (int i = 0; i < ctx->ngab; i++) {
        struct feat_gabor *g = &ctx->gab[i];
        int no = spec->gabor_orientations, t = i % no;
        g->idx = gabor + i;
        g->mirror = -1;
        g->shared = 2 * t > no;
        if (g->shared) {
            ctx->gab[i - t + (no - t)].mirror = i;
            continue;
        }
        g->r = filt_gabor_radius(spec->gabor_freqs[i / no], gabor_theta(spec, t));
        if (g->r > ctx->rmax)
            ctx->rmax = g->r;
    }
    /* kernels first: whether a Gabor kx is real decides its planes */
    if (ctx_plan_kernels(ctx, plan) || ctx_plan_planes(ctx, plan) || ctx_alloc_workers(ctx, plan))
        goto fail;
    ctx->zero = calloc((size_t)w, sizeof *ctx->zero);
    if (!ctx->zero)
        goto fail;
    if (spec->normalise) {
        ctx->hist = malloc((GREY_KEY_MAX + 1) * sizeof *ctx->hist);
        if (!ctx->hist)
            goto fail;
    }
    free(plan);
    if (spec->cnn.on && (!(ctx->cnn = cnnfeat_ctx_new(&spec->cnn, w, h, spec->threads, e)) ||
                         (ctx->n && !(ctx->bank = fstack_new(w, h, ctx->n, e))))) {
        feat_ctx_free(ctx);
        return NULL;
    }
    return ctx;
fail:
    err_set(e, ST_ENOMEM, "features: out of memory for the scratch planes of a %dx%d frame", w, h);
    free(plan);
    feat_ctx_free(ctx);
    return NULL;
}

void feat_ctx_free(struct feat_ctx *ctx)
{
    if (!ctx)
        return;
    free(ctx->planes);
    free(ctx->kernels);
    free(ctx->rows);
    free(ctx->zero);
    free(ctx->srcs);
    free(ctx->tsrcs);
    free(ctx->touts);
    free(ctx->hist);
    free(ctx->wk);
    free(ctx->jobs);
    free(ctx->tids);
    cnnfeat_ctx_free(ctx->cnn);
    fstack_free(ctx->bank);
    free(ctx);
}

static uint32_t grey_key(const uint8_t *p, int channels)
{
    return channels == 3 ? 299u * p[0] + 587u * p[1] + 114u * p[2] : 1000u * p[0];
}

/* Sets the per-frame scales and the mean grey from the brightness level. */
static void frame_level(struct feat_ctx *ctx, const struct image *img)
{
    size_t npx = (size_t)ctx->w * (size_t)ctx->h;
    int ch = img->channels;
    uint64_t sum = 0;
    if (ctx->hist)
        memset(ctx->hist, 0, (GREY_KEY_MAX + 1) * sizeof *ctx->hist);
    for (size_t i = 0; i < npx; i++) {
        uint32_t key = grey_key(img->px + i * ch, ch);
        sum += key;
        if (ctx->hist)
            ctx->hist[key]++;
    }
    double mean_key = (double)sum / (double)npx;
    double scale = 1.0;
    if (ctx->hist) {
        /* integer keys above the exact mean sum / npx */
        uint32_t first = (uint32_t)(sum / npx) + 1;
        uint64_t count = 0;
        for (uint32_t k = first; k <= GREY_KEY_MAX; k++)
            count += ctx->hist[k];
        double level_key = mean_key;
        if (count) {
            uint64_t lo = (count - 1) / 2, hi = count / 2, acc = 0;
            uint32_t klo = first;
            for (uint32_t k = first; k <= GREY_KEY_MAX; k++) {
                if (acc <= lo && acc + ctx->hist[k] > lo)
                    klo = k;
                if (acc + ctx->hist[k] > hi) {
                    level_key = 0.5 * ((double)klo + (double)k);
                    break;
                }
                acc += ctx->hist[k];
            }
        }
        double level = fmax(level_key / GREY_KEY_MAX, 1.0 / 255.0);
        scale = 0.5 / level;
    }
    ctx->scale_rgb = (float)(scale / 255.0);
    ctx->scale_grey = (float)(scale / GREY_KEY_MAX);
    /* the same float expression as a pixel's grey, so a uniform frame has J = 0 exactly */
    ctx->mean_grey = (float)mean_key * ctx->scale_grey;
}

/* Feature k of row y (in the current strip) in the worker's planar buffer. */
static float *frow(const struct feat_ctx *ctx, const struct feat_worker *wk, int k, int y)
{
    return wk->fb + ((size_t)(y - wk->strip_y0) * (size_t)ctx->n + (size_t)k) * (size_t)ctx->w;
}

/* Pixel (x, y) of a packed row-pass plane. */
static float *at(const struct feat_ctx *ctx, float *plane, int y, int x)
{
    return plane + (size_t)(y - ctx->ry0) * ctx->ps + (size_t)(x - ctx->wx0);
}

/* Column-pass sources for the nr output rows from ys: 2r + nr rows.  Inside
 * the frame no row reflects, and the division in filt_reflect would cost
 * more than a narrow tile's taps. */
static void sources_strip(const struct feat_ctx *ctx, float *plane, int ys, int nr, int x0, int r, const float **src)
{
    if (ys - r >= 0 && ys + nr - 1 + r < ctx->h) {
        const float *p = at(ctx, plane, ys - r, x0);
        for (int t = 0; t < 2 * r + nr; t++)
            src[t] = p + (size_t)t * ctx->ps;
        return;
    }
    for (int t = 0; t < 2 * r + nr; t++)
        src[t] = at(ctx, plane, filt_reflect(ys - r + t, ctx->h), x0);
}

/* Column-pass sources of a packed plane for output columns from x0 on. */
static void sources_col(const struct feat_ctx *ctx, float *plane, int y, int x0, int r, const float **src)
{
    sources_strip(ctx, plane, y, 1, x0, r, src);
}

/* Writes the n planar feature rows as one pixel-major output row, so the
 * stores run contiguously instead of one cache line per value; blocks of 16
 * pixels keep the n source lines in L1. */
FILT_HOT static void interleave_block(const float *restrict fb, size_t w, size_t n, size_t x0, size_t nx,
                                      float *restrict o)
{
    for (size_t x = 0; x < nx; x++)
        for (size_t k = 0; k < n; k++)
            o[x * n + k] = fb[k * w + x0 + x];
}

#ifdef FEAT_WIDE
/* 16 vectors transposed in registers: row i of the result holds element i
 * of every input, in input order (unpacks within 128-bit lanes, then the
 * lanes themselves). */
__attribute__((target("avx512f"), always_inline)) static inline void transpose16(__m512 v[16])
{
    __m512 t[16];
#pragma GCC unroll 16
    for (int i = 0; i < 16; i += 2) {
        t[i] = _mm512_unpacklo_ps(v[i], v[i + 1]);
        t[i + 1] = _mm512_unpackhi_ps(v[i], v[i + 1]);
    }
#pragma GCC unroll 16
    for (int i = 0; i < 16; i += 4)
#pragma GCC unroll 2
        for (int j = 0; j < 2; j++) {
            __m512d a = _mm512_castps_pd(t[i + j]), b = _mm512_castps_pd(t[i + j + 2]);
            v[i + 2 * j] = _mm512_castpd_ps(_mm512_unpacklo_pd(a, b));
            v[i + 2 * j + 1] = _mm512_castpd_ps(_mm512_unpackhi_pd(a, b));
        }
    /* v[4q + m] now holds, in lane quarter l, element 4l + m of inputs 4q..4q+3 */
#pragma GCC unroll 2
    for (int q = 0; q < 16; q += 8)
#pragma GCC unroll 4
        for (int m = 0; m < 4; m++) {
            t[q + m] = _mm512_shuffle_f32x4(v[q + m], v[q + 4 + m], 0x88);
            t[q + 4 + m] = _mm512_shuffle_f32x4(v[q + m], v[q + 4 + m], 0xdd);
        }
#pragma GCC unroll 4
    for (int m = 0; m < 4; m++)
#pragma GCC unroll 2
        for (int half = 0; half < 2; half++) {
            __m512 a = t[4 * half + m], b = t[8 + 4 * half + m];
            v[m + 4 * half] = _mm512_shuffle_f32x4(a, b, 0x88);
            v[m + 4 * half + 8] = _mm512_shuffle_f32x4(a, b, 0xdd);
        }
}

/* The first n of 16 lanes (all of them for n >= 16). */
static inline __mmask16 lanes_first(size_t n)
{
    return (__mmask16)(n >= 16 ? 0xffff : (1u << n) - 1);
}

/* A block of nr <= 16 rows of nc <= 16 values (row i at src + i ss)
 * transposed into nc rows of nr values (row c at dst + c ds): the three
 * layout changes of the bank (pixel-major copy, group in, group out) are
 * each this with their own strides. */
__attribute__((target("avx512f"), always_inline)) static inline void transpose_block(const float *src, size_t ss,
                                                                                    size_t nr, size_t nc, float *dst,
                                                                                    size_t ds)
{
    __mmask16 mc = lanes_first(nc), mr = lanes_first(nr);
    __m512 v[16];
#pragma GCC unroll 16
    for (size_t i = 0; i < 16; i++)
        v[i] = i < nr ? _mm512_maskz_loadu_ps(mc, src + i * ss) : _mm512_setzero_ps();
    transpose16(v);
#pragma GCC unroll 16
    for (size_t c = 0; c < 16; c++)
        if (c < nc)
            _mm512_mask_storeu_ps(dst + c * ds, mr, v[c]);
}

/* The same copy on AVX-512, 16 features of 16 pixels at a time; a gather
 * per 16 values (the form before) cost a sixth of the bank's time. */
__attribute__((target("avx512f"))) static void interleave_wide(const float *fb, size_t w, size_t n, size_t x0,
                                                               size_t nx, float *o)
{
    for (size_t k0 = 0; k0 < n; k0 += 16)
        transpose_block(fb + k0 * w + x0, w, n - k0 < 16 ? n - k0 : 16, nx, o + k0, n);
}

/* dst[0 .. len) = src[0 .. len) with streaming stores for the whole
 * 64-byte lines: the stack is far larger than the caches and is read back
 * only by the classifier, so fetching each line before overwriting it (what
 * a plain store does) only doubled the traffic. */
__attribute__((target("avx512f"))) static void stream_copy(float *dst, const float *src, size_t len)
{
    size_t head = (size_t)((64 - (uintptr_t)dst % 64) % 64) / sizeof *dst;
    if (dst != NULL && (uintptr_t)dst % sizeof *dst)
        head = len; /* not float-aligned: no streaming */
    if (head > len)
        head = len;
    memcpy(dst, src, head * sizeof *dst);
    size_t i = head;
    for (; i + 16 <= len; i += 16)
        _mm512_stream_ps(dst + i, _mm512_loadu_ps(src + i));
    memcpy(dst + i, src + i, (len - i) * sizeof *dst);
    _mm_sfence();
}
#endif

static void interleave_row(const struct feat_ctx *ctx, const struct feat_worker *wk, int y)
{
    size_t n = (size_t)ctx->n, w = (size_t)ctx->w;
    size_t bx0 = (size_t)ctx->box.x0, x1 = (size_t)ctx->box.x1;
    float *o = ctx->out->v + ((size_t)y * w + bx0) * n;
    const float *fb = frow(ctx, wk, 0, y);
#ifdef FEAT_WIDE
    if (__builtin_cpu_supports("avx512f")) {
        for (size_t x0 = bx0; x0 < x1; x0 += 16)
            interleave_wide(fb, w, n, x0, x1 - x0 < 16 ? x1 - x0 : 16, wk->orow + (x0 - bx0) * n);
        stream_copy(o, wk->orow, (x1 - bx0) * n);
        return;
    }
#endif
    for (size_t x0 = bx0; x0 < x1; x0 += 16)
        interleave_block(fb, w, n, x0, x1 - x0 < 16 ? x1 - x0 : 16, o + (x0 - bx0) * n);
}

FILT_HOT static void grey_row(const uint8_t *restrict px, int ch, int w, float scale, float *restrict g)
{
    if (ch == 3)
        for (int x = 0; x < w; x++)
            g[x] = (float)(299 * px[3 * x] + 587 * px[3 * x + 1] + 114 * px[3 * x + 2]) * scale;
    else
        for (int x = 0; x < w; x++)
            g[x] = (float)(1000 * px[x]) * scale;
}

FILT_HOT static void centred_square(const float *restrict g, float m, int w, float *restrict out)
{
    for (int x = 0; x < w; x++)
        out[x] = (g[x] - m) * (g[x] - m);
}

FILT_HOT static void magnitude(const float *restrict a, const float *restrict b, int w, float *restrict out)
{
    for (int x = 0; x < w; x++)
        out[x] = sqrtf(a[x] * a[x] + b[x] * b[x]);
}

FILT_HOT static void sum_rows(const float *restrict a, const float *restrict b, int w, float *restrict out)
{
    for (int x = 0; x < w; x++)
        out[x] = a[x] + b[x];
}

/* sqrt(max(0, G(J^2) - (G J)^2)) with G J = G I - mean */
FILT_HOT static void local_std(const float *restrict q, const float *restrict g, float m, int w,
                               float *restrict out)
{
    for (int x = 0; x < w; x++) {
        float d = g[x] - m, v = q[x] - d * d;
        /* glibc's fmaxf(0, v), which GCC calls out of line per pixel (its
         * NaN rule stops a vector max): v when v > 0, else +0 */
        out[x] = sqrtf(v > 0.0f ? v : 0.0f);
    }
}

/* |(a - s b) + i (c + s d)|, s = +-1: a complex column pass assembled from
 * its four real parts */
FILT_HOT static void complex_magnitude(const float *restrict a, const float *restrict b, const float *restrict c,
                                       const float *restrict d, float s, int w, float *restrict out)
{
    for (int x = 0; x < w; x++) {
        float re = a[x] - s * b[x], im = c[x] + s * d[x];
        out[x] = sqrtf(re * re + im * im);
    }
}

/* products of the Sobel derivatives: 0 = xx, 1 = xy, 2 = yy */
FILT_HOT static void sobel_product(const float *restrict dx, const float *restrict dy, int c, int w,
                                   float *restrict out)
{
    const float *restrict a = c == 2 ? dy : dx;
    const float *restrict b = c == 0 ? dx : dy;
    for (int x = 0; x < w; x++)
        out[x] = a[x] * b[x];
}

/* A symmetric and an antisymmetric pass over the same source; either
 * output may be NULL, and with both they share the loads. */
static void sym_anti(const float *const *src, const float *ks, const float *ka, int r, int w, float *os, float *oa)
{
    if (os && oa)
        filt_pair(src, ks, ka, r, w, os, oa);
    else if (os)
        filt_sym(src, ks, r, w, os);
    else if (oa)
        filt_anti(src, ka, r, w, oa);
}

/* Row-pass sources for output columns from x0 on: filt_sources_row shifted. */
static void sources_row_at(const float *pad, int rpad, int r, int x0, const float **src)
{
    filt_sources_row(pad + x0, rpad, r, src);
}

/* Pass d over the padded row pad of row y. */
static void pass_row(struct feat_ctx *ctx, struct feat_worker *wk, const float *pad, int y, const struct row_pass *d)
{
    sources_row_at(pad, ctx->rmax, d->r, d->x0, wk->src);
    sym_anti(wk->src, d->ks, d->ka, d->r, d->n, d->ps ? at(ctx, d->ps, y, d->x0) : NULL,
             d->pa ? at(ctx, d->pa, y, d->x0) : NULL);
}

#ifdef FEAT_WIDE
/* The group's padded rows into wk->tp, column by column. */
__attribute__((target("avx512f"))) static void group_transpose_in(const struct feat_ctx *ctx, struct feat_worker *wk)
{
    size_t pw = (size_t)ctx->pw;
    for (size_t c0 = 0; c0 < pw; c0 += 16)
        transpose_block(wk->pads + c0, pw, 16, pw - c0 < 16 ? pw - c0 : 16, wk->tp + c0 * 16, 16);
}

/* n transposed output columns back into rows y .. y + 15 of a plane at x0. */
__attribute__((target("avx512f"))) static void group_transpose_out(const struct feat_ctx *ctx, const float *to, int n,
                                                                   float *plane, int y, int x0)
{
    for (int c0 = 0; c0 < n; c0 += 16)
        transpose_block(to + (size_t)c0 * 16, 16, (size_t)(n - c0 < 16 ? n - c0 : 16), 16, at(ctx, plane, y, x0 + c0),
                        (size_t)ctx->ps);
}

/* Pass d over the TGROUP rows from y, transposed: a row pass reads
 * neighbouring columns, which in a row's own layout are loads one float
 * apart (nearly all split across two cache lines) and two per tap; in the
 * transposed group a column is one aligned vector of the group's rows, so
 * the pass is filt_rows' column pass with its rings (two loads per tap of
 * eight outputs).  The same arithmetic per output, so the same bits. */
static void pass_group(struct feat_ctx *ctx, struct feat_worker *wk, int y, const struct row_pass *d)
{
    int span = 2 * d->r + d->n;
    const float *first = wk->tp + (size_t)(d->x0 + ctx->rmax - d->r) * 16;
    for (int t = 0; t < span; t++)
        wk->tsrc[t] = first + (size_t)t * 16;
    for (int i = 0; i < d->n; i++) {
        wk->tos[i] = wk->to_s + (size_t)i * 16;
        wk->toa[i] = wk->to_a + (size_t)i * 16;
    }
    filt_rows(wk->tsrc, d->ks, d->ka, d->r, 16, d->n, d->ps ? wk->tos : NULL, d->pa ? wk->toa : NULL);
    if (d->ps)
        group_transpose_out(ctx, wk->to_s, d->n, d->ps, y, d->x0);
    if (d->pa)
        group_transpose_out(ctx, wk->to_a, d->n, d->pa, y, d->x0);
}
#endif

/* The passes of list over the g padded rows in wk->pads (rows y ..). */
static void run_passes(struct feat_ctx *ctx, struct feat_worker *wk, int y, int g, const struct row_pass *list,
                       int count)
{
#ifdef FEAT_WIDE
    int big = 0;
    for (int k = 0; k < count && g == TGROUP; k++)
        big |= list[k].r >= TRANSPOSE_MIN_R;
    if (big)
        group_transpose_in(ctx, wk);
#endif
    for (int k = 0; k < count; k++) {
#ifdef FEAT_WIDE
        if (big && list[k].r >= TRANSPOSE_MIN_R) {
            pass_group(ctx, wk, y, &list[k]);
            continue;
        }
#endif
        for (int i = 0; i < g; i++)
            pass_row(ctx, wk, wk->pads + (size_t)i * ctx->pw, y + i, &list[k]);
    }
}

/* Rows of a group: TGROUP where the wide path exists and as many rows are
 * left, else one. */
static int group_rows(int left)
{
#ifdef FEAT_WIDE
    if (left >= TGROUP && __builtin_cpu_supports("avx512f"))
        return TGROUP;
#else
    (void)left;
#endif
    return 1;
}

/* Every pass that needs only its own row: grey, the row passes, the Sobel
 * row parts.  Grey and its padded copy are whole rows (the reflection at the
 * frame's border must see the frame's pixels); the passes cover only the
 * columns a later phase reads. */
static void phase_rows(struct feat_ctx *ctx, struct feat_worker *wk, int y0, int y1)
{
    const struct image *img = ctx->img;
    int w = ctx->w, ch = img->channels, rmax = ctx->rmax;
    for (int y = y0, g; y < y1 && ctx->grey; y += g) {
        g = group_rows(y1 - y);
        for (int i = 0; i < g; i++) {
            float *gr = ctx->grey + (size_t)(y + i) * (size_t)w;
            grey_row(img->px + (size_t)(y + i) * (size_t)w * (size_t)ch, ch, w, ctx->scale_grey, gr);
            filt_pad_row(gr, w, rmax, wk->pads + (size_t)i * ctx->pw);
        }
        run_passes(ctx, wk, y, g, ctx->grey_pass, ctx->ngrey_pass);
        if (!ctx->nsq_pass)
            continue;
        for (int i = 0; i < g; i++) {
            centred_square(ctx->grey + (size_t)(y + i) * (size_t)w, ctx->mean_grey, w, wk->row[0]);
            filt_pad_row(wk->row[0], w, rmax, wk->pads + (size_t)i * ctx->pw);
        }
        run_passes(ctx, wk, y, g, ctx->sq_pass, ctx->nsq_pass);
    }
}

/* What the last phase reads beyond its own row: G_s * I whole (for the
 * Hessian's differences) and the row passes of the Sobel products (which
 * need the Sobel column pass first). */
static void phase_mid(struct feat_ctx *ctx, struct feat_worker *wk, int y0, int y1)
{
    int w = ctx->w, rmax = ctx->rmax;
    const int gx0 = ctx->gx0, gn = ctx->gx1 - ctx->gx0, wx0 = ctx->wx0, wn = ctx->wx1 - ctx->wx0;
    const float **src = wk->src;
    /* the Hessian's differences reach 2 rows beyond the box */
    const int hy0 = y0 > ctx->box.y0 - 2 ? y0 : ctx->box.y0 - 2, hy1 = y1 < ctx->box.y1 + 2 ? y1 : ctx->box.y1 + 2;
    for (int ys = hy0; ys < hy1; ys += STRIP) {
        int nr = hy1 - ys < STRIP ? hy1 - ys : STRIP;
        float *o[STRIP];
        for (int i = 0; i < ctx->nsig; i++) {
            struct feat_sigma *s = &ctx->sig[i];
            if (!s->gs)
                continue;
            for (int k = 0; k < nr; k++)
                o[k] = s->gs + (size_t)(ys + k) * (size_t)w + gx0;
            sources_strip(ctx, s->r0, ys, nr, gx0, s->r, src);
            filt_rows(src, s->k0, NULL, s->r, gn, nr, o, NULL);
        }
    }
    for (int y = y0, g; y < y1 && ctx->sob_d; y += g) {
        g = group_rows(y1 - y);
        /* the products are valid on [wx0, wx1) only; the box's row passes
         * read no further, the frame's border reflecting inside it */
        float *dx = wk->row[0], *dy = wk->row[1], *prod = wk->row[2];
        for (int c = 0; c < 3; c++) {
            for (int i = 0; i < g; i++) {
                sources_col(ctx, ctx->sob_d, y + i, wx0, 1, src);
                filt_sym(src, sobel_smooth, 1, wn, dx + wx0);
                sources_col(ctx, ctx->sob_s, y + i, wx0, 1, src);
                filt_anti(src, sobel_diff, 1, wn, dy + wx0);
                sobel_product(dx + wx0, dy + wx0, c, wn, prod + wx0);
                filt_pad_row(prod, w, rmax, wk->pads + (size_t)i * ctx->pw);
            }
            run_passes(ctx, wk, y, g, ctx->prod_pass[c], ctx->nprod_pass);
        }
    }
}

static void colour_row(const struct feat_ctx *ctx, struct feat_worker *wk, int y)
{
    int ch = ctx->img->channels;
    const uint8_t *px = ctx->img->px + (size_t)y * (size_t)ctx->w * (size_t)ch;
    for (int c = 0; c < 3; c++) {
        const uint8_t *p = px + (ch == 3 ? c : 0);
        float *o = frow(ctx, wk, ctx->idx_colour + c, y);
        for (int x = ctx->box.x0; x < ctx->box.x1; x++)
            o[x] = p[x * ch] * ctx->scale_rgb;
    }
}

/* Row b of the worker's scratch for row i of the strip, at the tile. */
static float *srow(const struct feat_ctx *ctx, const struct feat_worker *wk, int b, int i)
{
    return wk->row[b] + (size_t)i * (size_t)ctx->w + ctx->box.x0;
}

/* Feature k at the tile for each of the strip's nr rows from ys. */
static void frows(const struct feat_ctx *ctx, const struct feat_worker *wk, int k, int ys, int nr, float **o)
{
    for (int i = 0; i < nr; i++)
        o[i] = frow(ctx, wk, k, ys + i) + ctx->box.x0;
}

static void srows(const struct feat_ctx *ctx, const struct feat_worker *wk, int b, int nr, float **o)
{
    for (int i = 0; i < nr; i++)
        o[i] = srow(ctx, wk, b, i);
}

/* gauss, gradient, laplace, localstd of one sigma for the strip's nr rows
 * from ys, each column pass for all the rows at once (filt_rows) */
static void cols_sigma(struct feat_ctx *ctx, struct feat_worker *wk, const struct feat_sigma *s, int ys, int nr)
{
    int w = ctx->w, r = s->r, x0 = ctx->box.x0, n = ctx->box.x1 - ctx->box.x0;
    const float **src = wk->src;
    float *g[STRIP], *gy[STRIP], *lyy[STRIP], *tmp[STRIP], *o[STRIP];
    int kg = s->idx[SLOT_GAUSS];
    if (kg >= 0)
        frows(ctx, wk, kg, ys, nr, g);
    else
        srows(ctx, wk, 0, nr, g);
    srows(ctx, wk, 1, nr, gy);
    srows(ctx, wk, 2, nr, lyy);
    srows(ctx, wk, 3, nr, tmp);
    sources_strip(ctx, s->r0, ys, nr, x0, r, src);
    for (int i = 0; i < nr && s->gs; i++)
        memcpy(g[i], s->gs + (size_t)(ys + i) * (size_t)w + x0, (size_t)n * sizeof *g[i]);
    if (!s->gs || s->r1)
        filt_rows(src, s->k0, s->k1, r, n, nr, s->gs ? NULL : g, s->r1 ? gy : NULL);
    if (s->r2)
        filt_rows(src, s->k2, NULL, r, n, nr, lyy, NULL);
    if (s->r1) {
        sources_strip(ctx, s->r1, ys, nr, x0, r, src);
        filt_rows(src, s->k0, NULL, r, n, nr, tmp, NULL);
        frows(ctx, wk, s->idx[SLOT_GRADIENT], ys, nr, o);
        for (int i = 0; i < nr; i++)
            magnitude(tmp[i], gy[i], n, o[i]);
    }
    if (s->r2) {
        sources_strip(ctx, s->r2, ys, nr, x0, r, src);
        filt_rows(src, s->k0, NULL, r, n, nr, tmp, NULL);
        frows(ctx, wk, s->idx[SLOT_LAPLACE], ys, nr, o);
        for (int i = 0; i < nr; i++)
            sum_rows(tmp[i], lyy[i], n, o[i]);
    }
    if (s->q0) {
        sources_strip(ctx, s->q0, ys, nr, x0, r, src);
        filt_rows(src, s->k0, NULL, r, n, nr, tmp, NULL);
        frows(ctx, wk, s->idx[SLOT_LOCALSTD], ys, nr, o);
        for (int i = 0; i < nr; i++)
            local_std(tmp[i], g[i], ctx->mean_grey, n, o[i]);
    }
}

/* numpy.gradient along x of a row of width w (edge_order 1), at the
 * columns [x0, x1) only; reads g on [x0 - 1, x1 + 1) within the row. */
FILT_HOT static void grad_x(const float *restrict g, int w, int x0, int x1, float *restrict out)
{
    if (w == 1) {
        out[0] = 0.0f;
        return;
    }
    if (x0 == 0)
        out[x0++] = g[1] - g[0];
    if (x1 == w)
        out[--x1] = g[w - 1] - g[w - 2];
    for (int x = x0; x < x1; x++)
        out[x] = (g[x + 1] - g[x - 1]) * 0.5f;
}

/* numpy.gradient along y at one row from its neighbour rows hi and lo:
 * inv is 1/2 inside, 1 at the ends (one-sided) and 0 for a single row. */
FILT_HOT static void grad_y(const float *restrict hi, const float *restrict lo, float inv, int w, float *restrict out)
{
    for (int x = 0; x < w; x++)
        out[x] = (hi[x] - lo[x]) * inv;
}

static int y_lo(int y)
{
    return y > 0 ? y - 1 : 0;
}

static int y_hi(int y, int h)
{
    return y < h - 1 ? y + 1 : h - 1;
}

static float y_inv(int y, int h)
{
    int span = y_hi(y, h) - y_lo(y);
    return span ? 1.0f / (float)span : 0.0f;
}

/* skimage _image_orthogonal_matrix22_eigvals */
FILT_HOT static void eigen_2x2(const float *restrict a, const float *restrict b, const float *restrict c, int w,
                               float *restrict hi, float *restrict lo)
{
    for (int x = 0; x < w; x++) {
        float mid = (a[x] + c[x]) * 0.5f;
        float d = a[x] - c[x];
        float t = sqrtf(4.0f * b[x] * b[x] + d * d) * 0.5f;
        hi[x] = mid + t;
        lo[x] = mid - t;
    }
}

static void hessian_row(struct feat_ctx *ctx, struct feat_worker *wk, const float *gs, int y)
{
    int w = ctx->w, h = ctx->h;
    const float *row = gs + (size_t)y * (size_t)w;
    const float *lo = gs + (size_t)y_lo(y) * (size_t)w, *hi = gs + (size_t)y_hi(y, h) * (size_t)w;
    float *t1 = wk->row[0], *t2 = wk->row[1], *hxx = wk->row[2], *hxy = wk->row[3], *hyy = wk->row[4];
    float inv = y_inv(y, h);
    const int x0 = ctx->box.x0, x1 = ctx->box.x1, n = x1 - x0;
    /* d/dx twice: the first difference is needed one column beyond the box */
    grad_x(row, w, x0 > 0 ? x0 - 1 : 0, x1 < w ? x1 + 1 : w, t1);
    grad_x(t1, w, x0, x1, hxx);
    grad_x(hi, w, x0, x1, t1);
    grad_x(lo, w, x0, x1, t2);
    grad_y(t1 + x0, t2 + x0, inv, n, hxy + x0);
    int yh = y_hi(y, h), yl = y_lo(y);
    grad_y(gs + (size_t)y_hi(yh, h) * w + x0, gs + (size_t)y_lo(yh) * w + x0, y_inv(yh, h), n, t1 + x0);
    grad_y(gs + (size_t)y_hi(yl, h) * w + x0, gs + (size_t)y_lo(yl) * w + x0, y_inv(yl, h), n, t2 + x0);
    grad_y(t1 + x0, t2 + x0, inv, n, hyy + x0);
}

/* Hessian eigenvalues and the structure tensor of one sigma for the
 * strip's nr rows from ys */
static void final_sigma(struct feat_ctx *ctx, struct feat_worker *wk, const struct feat_sigma *s, int ys, int nr)
{
    int x0 = ctx->box.x0, n = ctx->box.x1 - ctx->box.x0;
    for (int y = ys; y < ys + nr && s->gs; y++) {
        hessian_row(ctx, wk, s->gs, y);
        eigen_2x2(wk->row[2] + x0, wk->row[3] + x0, wk->row[4] + x0, n,
                  frow(ctx, wk, s->idx[SLOT_HESS_HI], y) + x0, frow(ctx, wk, s->idx[SLOT_HESS_LO], y) + x0);
    }
    if (s->pr[0]) {
        float *t[3][STRIP];
        for (int c = 0; c < 3; c++) {
            srows(ctx, wk, 5 + c, nr, t[c]);
            sources_strip(ctx, s->pr[c], ys, nr, x0, s->r, wk->src);
            filt_rows(wk->src, s->k0, NULL, s->r, n, nr, t[c], NULL);
        }
        for (int i = 0; i < nr; i++)
            eigen_2x2(t[0][i], t[1][i], t[2][i], n, frow(ctx, wk, s->idx[SLOT_STRUCT_HI], ys + i) + x0,
                      frow(ctx, wk, s->idx[SLOT_STRUCT_LO], ys + i) + x0);
    }
}

/* (U + iV) correlated with ky = yre + i yim down the columns is
 * (A - B) + i (C + D) with A = U*yre, B = V*yim, C = V*yre, D = U*yim;
 * parts that are 0 (V for a real kx, yim at theta = 0) are skipped.  The
 * mirror orientation has V negated: (A + B) + i (D - C), the same magnitude
 * as (A + B) + i (C - D). */
static void gabor_rows(struct feat_ctx *ctx, struct feat_worker *wk, const struct feat_gabor *gb, int ys, int nr)
{
    int r = gb->r, x0 = ctx->box.x0, n = ctx->box.x1 - ctx->box.x0;
    const float **src = wk->src;
    float *a[STRIP], *b[STRIP], *c[STRIP], *d[STRIP];
    srows(ctx, wk, 0, nr, a);
    srows(ctx, wk, 1, nr, b);
    srows(ctx, wk, 2, nr, c);
    srows(ctx, wk, 3, nr, d);
    sources_strip(ctx, gb->re, ys, nr, x0, r, src);
    filt_rows(src, gb->yre, gb->yim, r, n, nr, a, gb->y_real ? NULL : d);
    if (gb->im) {
        sources_strip(ctx, gb->im, ys, nr, x0, r, src);
        filt_rows(src, gb->yre, gb->yim, r, n, nr, c, gb->y_real ? NULL : b);
    }
    for (int i = 0; i < nr; i++) {
        const float *bi = gb->im && !gb->y_real ? b[i] : ctx->zero, *ci = gb->im ? c[i] : ctx->zero;
        const float *di = gb->y_real ? ctx->zero : d[i];
        int y = ys + i;
        complex_magnitude(a[i], bi, ci, di, 1.0f, n, frow(ctx, wk, gb->idx, y) + x0);
        if (gb->mirror >= 0)
            complex_magnitude(a[i], bi, ci, di, -1.0f, n, frow(ctx, wk, ctx->gab[gb->mirror].idx, y) + x0);
    }
}

/* Every feature of a strip into the planar buffer, one pass at a time over
 * the strip's rows, then out row by row while the buffer is hot.  Each row's
 * values do not depend on the strip bounds, so any split into workers gives
 * the same bits.  (Narrow column tiles, which would keep a strip's sources
 * in L2 for the next strip, measured slower: the row streams of the whole
 * width are what the hardware prefetches well.) */
static void phase_final(struct feat_ctx *ctx, struct feat_worker *wk, int y0, int y1)
{
    for (int ys = y0; ys < y1; ys += STRIP) {
        int ye = y1 - ys < STRIP ? y1 : ys + STRIP;
        wk->strip_y0 = ys;
        for (int y = ys; y < ye && ctx->idx_colour >= 0; y++)
            colour_row(ctx, wk, y);
        for (int i = 0; i < ctx->nsig; i++) {
            if (ctx->sig[i].r0)
                cols_sigma(ctx, wk, &ctx->sig[i], ys, ye - ys);
            final_sigma(ctx, wk, &ctx->sig[i], ys, ye - ys);
        }
        for (int i = 0; i < ctx->ngab; i++)
            if (!ctx->gab[i].shared)
                gabor_rows(ctx, wk, &ctx->gab[i], ys, ye - ys);
        for (int y = ys; y < ye; y++)
            interleave_row(ctx, wk, y);
    }
}

static void *feat_job_run(void *arg)
{
    struct feat_job *job = arg;
    for (int y; (y = atomic_fetch_add(job->next, job->step)) < job->y1;)
        job->fn(job->ctx, job->wk, y, job->y1 - y < job->step ? job->y1 : y + job->step);
    return NULL;
}

/* Shares the rows between the workers, step at a time; joining them is the
 * barrier between phases.  A worker whose thread cannot start leaves its
 * rows to the others, which costs time but not the frame. */
static void feat_run_phase(struct feat_ctx *ctx, feat_phase fn, int y0, int y1, int step)
{
    int strips = (y1 - y0 + step - 1) / step;
    int nt = ctx->nthreads < strips ? ctx->nthreads : strips;
    if (nt < 1)
        return;
    char started[FEAT_MAX_THREADS] = {0};
    atomic_int next = y0;
    for (int t = 0; t < nt; t++)
        ctx->jobs[t] = (struct feat_job){ctx, fn, &ctx->wk[t], y1, step, &next};
    for (int t = 1; t < nt; t++)
        started[t] = pthread_create(&ctx->tids[t], NULL, feat_job_run, &ctx->jobs[t]) == 0;
    feat_job_run(&ctx->jobs[0]);
    for (int t = 1; t < nt; t++) {
        if (started[t])
            pthread_join(ctx->tids[t], NULL);
        else
            feat_job_run(&ctx->jobs[t]);
    }
}

static int clamp(int v, int lo, int hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

/* The row passes per source for the current box, in the order the row
 * phases ran them before they were listed. */
static void plan_row_passes(struct feat_ctx *ctx)
{
    const int gx0 = ctx->gx0, gn = ctx->gx1 - ctx->gx0, bx0 = ctx->box.x0, bn = ctx->box.x1 - ctx->box.x0;
    int n = 0;
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        if (s->r0 || s->r1)
            ctx->grey_pass[n++] = (struct row_pass){s->r, s->k0, s->k1, s->r0, s->r1, gx0, gn};
        if (s->r2)
            ctx->grey_pass[n++] = (struct row_pass){s->r, s->k2, NULL, s->r2, NULL, gx0, gn};
    }
    if (ctx->sob_d)
        ctx->grey_pass[n++] = (struct row_pass){1, sobel_smooth, sobel_diff, ctx->sob_s, ctx->sob_d, ctx->wx0,
                                                ctx->wx1 - ctx->wx0};
    for (int i = 0; i < ctx->ngab; i++) {
        struct feat_gabor *gb = &ctx->gab[i];
        if (!gb->shared)
            ctx->grey_pass[n++] = (struct row_pass){gb->r, gb->xre, gb->xim, gb->re, gb->im, bx0, bn};
    }
    ctx->ngrey_pass = n;
    ctx->nsq_pass = ctx->nprod_pass = 0;
    for (int i = 0; i < ctx->nsig; i++) {
        struct feat_sigma *s = &ctx->sig[i];
        if (s->q0)
            ctx->sq_pass[ctx->nsq_pass++] = (struct row_pass){s->r, s->k0, NULL, s->q0, NULL, bx0, bn};
        for (int c = 0; c < 3 && s->pr[0]; c++)
            ctx->prod_pass[c][ctx->nprod_pass] = (struct row_pass){s->r, s->k0, NULL, s->pr[c], NULL, bx0, bn};
        ctx->nprod_pass += s->pr[0] != NULL;
    }
}

/* The rows and columns each phase covers for the box.  A pass of radius r
 * at the box's edge reflects at the frame's border into rows within r of
 * the box as long as r is below the frame's size; beyond that (a tiny
 * frame) the whole frame is computed. */
static void set_box(struct feat_ctx *ctx, const struct feat_box *b)
{
    int w = ctx->w, h = ctx->h, m = ctx->rmax + 2;
    struct feat_box box = *b;
    if (m >= w || m >= h)
        box = (struct feat_box){0, 0, w, h};
    ctx->box = box;
    ctx->gx0 = clamp(box.x0 - 2, 0, w);
    ctx->gx1 = clamp(box.x1 + 2, 0, w);
    ctx->wx0 = clamp(box.x0 - m, 0, w);
    ctx->wx1 = clamp(box.x1 + m, 0, w);
    ctx->ry0 = clamp(box.y0 - m, 0, h);
    ctx->ry1 = clamp(box.y1 + m, 0, h);
    ctx->my0 = clamp(box.y0 - ctx->rmax, 0, h);
    ctx->my1 = clamp(box.y1 + ctx->rmax, 0, h);
    ctx->ps = (size_t)(ctx->wx1 - ctx->wx0);
    plan_row_passes(ctx);
}

/* The filter bank's features alone for the box, into a stack of ctx->n. */
static int bank_compute(struct feat_ctx *ctx, const struct image *img, const struct feat_box *box,
                        struct fstack *out)
{
    ctx->img = img;
    ctx->out = out;
    set_box(ctx, box);
    frame_level(ctx, img);
    feat_run_phase(ctx, phase_rows, ctx->ry0, ctx->ry1, TGROUP);
    if (ctx->spec.families & (FEAT_HESSIAN | FEAT_STRUCTURE))
        feat_run_phase(ctx, phase_mid, ctx->my0, ctx->my1, TGROUP);
    feat_run_phase(ctx, phase_final, ctx->box.y0, ctx->box.y1, STRIP);
    ctx->img = NULL;
    ctx->out = NULL;
    return ST_OK;
}

/* Multiply-adds and pre-adds of a half-kernel pass of radius r (the
 * symmetric one has a centre tap too). */
static void pass_ops(int r, int sym, double n, double *ops)
{
    *ops += n * (2.0 * r + (sym ? 1.0 : 0.0));
}

double feat_pass_ops(const struct feat_ctx *ctx)
{
    double ops = 0;
    if (ctx->sob_d) /* Sobel rows and columns: [-1 0 1] and [1 2 1], twice */
        pass_ops(1, 0, 2, &ops), pass_ops(1, 1, 2, &ops);
    for (int i = 0; i < ctx->nsig; i++) {
        const struct feat_sigma *s = &ctx->sig[i];
        int r = s->r;
        /* rows: k0, k1, k2 of grey, k0 of J^2 and of the three products */
        pass_ops(r, 1, (s->r0 != NULL) + (s->r2 != NULL) + (s->q0 != NULL) + 3.0 * (s->pr[0] != NULL), &ops);
        pass_ops(r, 0, s->r1 != NULL, &ops);
        /* columns: k0 of r0 (or gs), k1 and k2 of r0, k0 of r1, r2, q0, products */
        pass_ops(r, 1, (s->r0 != NULL) + 2.0 * (s->r2 != NULL) + (s->r1 != NULL) + (s->q0 != NULL) +
                           3.0 * (s->pr[0] != NULL), &ops);
        pass_ops(r, 0, s->r1 != NULL, &ops);
    }
    for (int i = 0; i < ctx->ngab; i++) {
        const struct feat_gabor *g = &ctx->gab[i];
        if (g->shared)
            continue;
        int parts = 1 + (g->im != NULL); /* row passes, then each gets yre (and yim) */
        pass_ops(g->r, 1, 1, &ops);
        pass_ops(g->r, 0, g->im != NULL, &ops);
        pass_ops(g->r, 1, parts, &ops);
        pass_ops(g->r, 0, g->y_real ? 0 : parts, &ops);
    }
    return ops;
}

int feat_compute(struct feat_ctx *ctx, const struct image *img, struct fstack *out, struct err *e)
{
    struct feat_box all = {0, 0, ctx->w, ctx->h};
    return feat_compute_box(ctx, img, &all, out, e);
}

int feat_compute_box(struct feat_ctx *ctx, const struct image *img, const struct feat_box *box,
                     struct fstack *out, struct err *e)
{
    int n = ctx->n + (ctx->cnn ? ctx->spec.cnn.nch : 0);
    if (img->w != ctx->w || img->h != ctx->h || (img->channels != 1 && img->channels != 3))
        return err_set(e, ST_EINVAL, "features: frame %dx%dx%d does not fit a context for %dx%d (1 or 3 channels)",
                       img->w, img->h, img->channels, ctx->w, ctx->h);
    if (out->w != ctx->w || out->h != ctx->h || out->n != n)
        return err_set(e, ST_EINVAL, "features: stack %dx%dx%d given for %dx%d frames with %d features", out->w,
                       out->h, out->n, ctx->w, ctx->h, n);
    if (box->x0 < 0 || box->y0 < 0 || box->x1 > ctx->w || box->y1 > ctx->h || box->x0 >= box->x1 ||
        box->y0 >= box->y1)
        return err_set(e, ST_EINVAL, "features: box [%d, %d) x [%d, %d) is empty or outside the %dx%d frame",
                       box->x0, box->x1, box->y0, box->y1, ctx->w, ctx->h);
    if (!ctx->cnn)
        return bank_compute(ctx, img, box, out);
    /* the bank fills its own stack for the box, copied in beside the
     * network's, which it writes for the box itself */
    if (ctx->n) {
        bank_compute(ctx, img, box, ctx->bank);
        size_t nb = (size_t)ctx->n;
        for (int y = box->y0; y < box->y1; y++)
            for (int x = box->x0; x < box->x1; x++) {
                size_t p = (size_t)y * ctx->w + x;
                memcpy(out->v + p * (size_t)n, ctx->bank->v + p * nb, nb * sizeof *out->v);
            }
    }
    struct cnn_box cb = {box->x0, box->y0, box->x1, box->y1};
    return cnnfeat_compute_box(ctx->cnn, img, &cb, out, ctx->n, e);
}
