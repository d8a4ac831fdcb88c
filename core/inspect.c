#include "inspect.h"

#include "flatfield.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* The locating pass: every ROI_STEP-th pixel in x and y is classified
 * first; only cells within ROI_MARGIN cells of a sample that is not
 * background are then classified pixel by pixel, the rest is background
 * with its sample's confidence.  The part covers a fifth of a typical frame,
 * so this halves the classifier's work or better; what it can miss is part
 * of the part narrower than the margin (ROI_STEP * ROI_MARGIN = 8 px) lying
 * entirely between background samples, which no real part of a recipe has.
 * Both passes share grid rows between the inspector's threads (the coarse
 * option's passes frame rows) and hand the forest the pixels by their
 * index in the feature stack (at most IMAGE_MAX_PIXELS, so 32 bits),
 * without copying. */
#define ROI_STEP 8
#define ROI_MARGIN 1
#define MAX_WORKERS 64
/* Before that, the box the features are computed in: the cells of the grid
 * whose mean grey is above the frame's mean (the part is what is brighter
 * than the mean, as the brightness level of core/features.h takes it),
 * grown by BOX_GROW cells.  A sample that is not background in the box's
 * outermost ring of cells means the box cut the part: the frame is then
 * done again over the whole frame, so the box can cost time but never a
 * pixel the locating pass alone would have found inside the part's reach. */
#define BOX_GROW 2

struct inspector {
    struct recipe r;
    struct model_meta meta;
    struct forest *forest;
    int threads;
    /* per-frame buffers for w x h */
    int w, h;
    struct feat_ctx *feat;
    struct fstack *fs;
    struct image *classes;
    float *conf;
    int roi;                /* locating pass on (default) */
    int gw, gh;             /* grid of the locating pass */
    uint8_t *cell_cls, *need;
    float *cell_conf;
    uint64_t *cell_sum;     /* per cell: sum of its integer grey */
    int cx0, cy0, cx1, cy1; /* the cells features were computed for */
    int coarse;             /* [classifier] coarse: see coarse_pass */
    uint32_t *list_pix;     /* per worker, ROI_STEP frame rows' worth: picked pixels */
    uint8_t *list_cls;      /* per worker: their classes */
    float *list_conf;       /* per worker: their confidences */
    struct region_set rs;
    struct quality q;
    struct part_pose pose;
    struct zone_map *zones;  /* NULL when the recipe has no zones */
    struct judge_refs refs;
    uint8_t *grey, *last;   /* this frame's grey and the one before */
    int has_last;
    struct flat_field *flat; /* NULL when the recipe has no [lighting] flat_field */
    struct image *evened;   /* the frame after the flat field, reused */
    const struct image *frame; /* what the features saw on the last call */
};

static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

int inspector_new(const struct recipe *r, struct inspector **out, struct err *e)
{
    *out = NULL;
    struct inspector *in = calloc(1, sizeof *in);
    if (!in)
        return err_set(e, ST_ENOMEM, "out of memory for the inspector");
    in->r = *r;
    in->threads = r->train.threads;
    in->roi = 1;
    in->coarse = r->coarse_classify;
    regions_init(&in->rs);
    int rc = model_check(r, &in->meta, e);
    if (rc)
        goto fail;
    in->refs.sharpness =
        r->gates.sharpness_reference > 0 ? r->gates.sharpness_reference : in->meta.ref_sharpness;
    in->refs.part_area_mm2 = r->part.area_mm2 > 0 ? r->part.area_mm2 : in->meta.ref_part_area_mm2;
    in->refs.since_verified_h = -1;
    if (r->nzones && (rc = zone_map_new(r->zones, r->nzones, &in->zones, e)))
        goto fail;
    if ((rc = forest_load(r->model_path, &in->forest, e)))
        goto fail;
    if (r->flat_field[0] && (rc = flatfield_load(r->flat_field, &in->flat, e)))
        goto fail;
    if (forest_nclasses(in->forest) != r->nclasses) {
        rc = err_set(e, ST_EFORMAT, "%s: model predicts %d classes, recipe %s has %d",
                     r->model_path, forest_nclasses(in->forest), r->path, r->nclasses);
        goto fail;
    }
    if (forest_nfeatures(in->forest) > feat_count(&r->feat)) {
        rc = err_set(e, ST_EFORMAT, "%s: model uses %d features, recipe %s gives %d",
                     r->model_path, forest_nfeatures(in->forest), r->path, feat_count(&r->feat));
        goto fail;
    }
    *out = in;
    return ST_OK;
fail:
    inspector_free(in);
    return rc;
}

/* Everything sized for one frame size. */
static void free_frame_buffers(struct inspector *in)
{
    feat_ctx_free(in->feat);
    fstack_free(in->fs);
    image_free(in->classes);
    free(in->conf);
    free(in->cell_cls);
    free(in->need);
    free(in->cell_conf);
    free(in->cell_sum);
    in->cell_sum = NULL;
    free(in->list_pix);
    free(in->list_cls);
    free(in->list_conf);
    in->list_conf = NULL;
    in->list_pix = NULL;
    in->list_cls = NULL;
    free(in->grey);
    free(in->last);
    image_free(in->evened);
    in->evened = NULL;
    in->frame = NULL;
    in->grey = in->last = NULL;
    in->has_last = 0;
    in->feat = NULL;
    in->fs = NULL;
    in->classes = NULL;
    in->conf = NULL;
    in->cell_cls = in->need = NULL;
    in->cell_conf = NULL;
    in->w = in->h = 0;
}

void inspector_free(struct inspector *in)
{
    if (!in)
        return;
    forest_free(in->forest);
    flatfield_free(in->flat);
    zone_map_free(in->zones);
    free_frame_buffers(in);
    regions_clear(&in->rs);
    free(in);
}

static int workers(const struct inspector *in)
{
    return in->threads < MAX_WORKERS ? in->threads : MAX_WORKERS;
}

static int ensure_size(struct inspector *in, int w, int h, struct err *e)
{
    if (in->feat && in->w == w && in->h == h)
        return ST_OK;
    free_frame_buffers(in);
    if (!(in->feat = feat_ctx_new(&in->r.feat, w, h, e)) ||
        !(in->fs = fstack_new(w, h, feat_count(&in->r.feat), e)) ||
        !(in->classes = image_new(w, h, 1, e)) ||
        (in->flat && !(in->evened = image_new(w, h, 3, e))))
        return e ? e->code : ST_ENOMEM;
    in->grey = malloc((size_t)w * h);
    in->last = malloc((size_t)w * h);
    in->gw = (w + ROI_STEP - 1) / ROI_STEP;
    in->gh = (h + ROI_STEP - 1) / ROI_STEP;
    size_t cells = (size_t)in->gw * in->gh;
    in->conf = malloc((size_t)w * h * sizeof *in->conf);
    in->cell_cls = malloc(cells);
    in->need = malloc(cells);
    in->cell_conf = malloc(cells * sizeof *in->cell_conf);
    in->cell_sum = malloc(cells * sizeof *in->cell_sum);
    size_t nw = (size_t)workers(in) * ROI_STEP * w;
    in->list_pix = malloc(nw * sizeof *in->list_pix);
    in->list_cls = malloc(nw);
    in->list_conf = malloc(nw * sizeof *in->list_conf);
    if (!in->list_pix || !in->list_cls || !in->list_conf)
        return err_set(e, ST_ENOMEM, "out of memory for a %dx%d frame", w, h);
    if (!in->conf || !in->cell_cls || !in->need || !in->cell_conf || !in->cell_sum ||
        !in->grey || !in->last)
        return err_set(e, ST_ENOMEM, "out of memory for a %dx%d frame", w, h);
    in->w = w;
    in->h = h;
    return ST_OK;
}

struct worker {
    struct inspector *in;
    int index; /* which worker: its share of the per-worker buffers */
    /* Rows below y1 (grid rows, or frame rows for the coarse option's
     * passes) are claimed one at a time from *next, shared by the pass's
     * workers: the part, and so the work, sits in some rows only, and a
     * worker whose core is busy elsewhere takes fewer of them instead of
     * holding the frame. */
    atomic_int *next;
    int y1;
    int rc;
    struct err e;
};

/* The worker's next row, or y1 when the pass is done or has failed. */
static int worker_claim_row(struct worker *wk)
{
    if (wk->rc != ST_OK)
        return wk->y1;
    int y = atomic_fetch_add(wk->next, 1);
    return y < wk->y1 ? y : wk->y1;
}

/* Where the worker's share of the picked-pixel lists starts. */
static size_t worker_share(const struct worker *wk)
{
    return (size_t)wk->index * ROI_STEP * (size_t)wk->in->w;
}

static uint32_t *worker_pix(const struct worker *wk)
{
    return wk->in->list_pix + worker_share(wk);
}

/* Pass 1 for grid rows: each row's samples go to the forest in one call,
 * picked where they lie in the stack, and their results land directly in
 * the cell maps. */
static void *grid_pass(void *arg)
{
    struct worker *wk = arg;
    struct inspector *in = wk->in;
    const int gw = in->gw, cx0 = in->cx0, cn = in->cx1 - in->cx0;
    uint32_t *pix = worker_pix(wk);
    for (int gy; (gy = worker_claim_row(wk)) < wk->y1;) {
        for (int i = 0; i < cn; i++)
            pix[i] = (uint32_t)((size_t)gy * ROI_STEP * in->w + (size_t)(cx0 + i) * ROI_STEP);
        wk->rc = forest_classify_at(in->forest, in->fs->v, in->fs->n, pix, (size_t)cn,
                                    in->cell_cls + (size_t)gy * gw + cx0,
                                    in->cell_conf + (size_t)gy * gw + cx0, &wk->e);
    }
    return NULL;
}

/* Classifies the worker's n picked pixels and writes their classes and
 * confidences into the frame's maps. */
static int classify_list(struct worker *wk, int n)
{
    struct inspector *in = wk->in;
    const size_t base = worker_share(wk);
    const uint32_t *pix = in->list_pix + base;
    int rc = forest_classify_at(in->forest, in->fs->v, in->fs->n, pix, (size_t)n,
                                in->list_cls + base, in->list_conf + base, &wk->e);
    for (int i = 0; i < n && rc == ST_OK; i++) {
        in->classes->px[pix[i]] = in->list_cls[base + i];
        in->conf[pix[i]] = in->list_conf[base + i];
    }
    return rc;
}

/* Pass 2 for grid rows: the needed pixels of a grid row's ROI_STEP frame
 * rows go to the forest in one call, so its blocks are full however short
 * the part's runs of cells are; the other pixels are background with
 * their sample's confidence. */
static void *full_pass(void *arg)
{
    struct worker *wk = arg;
    struct inspector *in = wk->in;
    const int w = in->w, gw = in->gw;
    uint32_t *pix = worker_pix(wk);
    for (int gy; (gy = worker_claim_row(wk)) < wk->y1;) {
        const uint8_t *need = in->need + (size_t)gy * gw;
        const float *cc = in->cell_conf + (size_t)gy * gw;
        int n = 0;
        for (int y = gy * ROI_STEP; y < (gy + 1) * ROI_STEP && y < in->h; y++) {
            size_t row = (size_t)y * w;
            for (int gx = 0; gx < gw; gx++) {
                int x0 = gx * ROI_STEP, x1 = x0 + ROI_STEP < w ? x0 + ROI_STEP : w;
                if (need[gx]) {
                    for (int x = x0; x < x1; x++)
                        pix[n++] = (uint32_t)(row + (size_t)x);
                    continue;
                }
                memset(in->classes->px + row + x0, 0, (size_t)(x1 - x0));
                for (int x = x0; x < x1; x++)
                    in->conf[row + x] = cc[gx];
            }
        }
        wk->rc = classify_list(wk, n);
    }
    return NULL;
}

/* The coarse option ([classifier] coarse, off by default; an approximation
 * whose effect on IoU and verdicts `make bench` measures on the demo's test
 * set): in the cells pass 2 would classify pixel by pixel, only the pixels
 * with even x and even y are classified first (pass C1); every other pixel
 * of those cells then takes the class of its classified neighbours (left
 * and right, above and below, or the four diagonal ones) when they all
 * agree, with the lowest of their confidences, and is classified itself
 * where they do not (pass C2), so region edges keep full resolution.  A
 * neighbour outside the needed cells counts with what pass 2 gives it:
 * background, its sample's confidence. */

static int needed(const struct inspector *in, int x, int y)
{
    return in->need[(size_t)(y / ROI_STEP) * in->gw + x / ROI_STEP];
}

/* Pass C1 for the claimed frame rows: the pixels pass 2 leaves out, as pass 2
 * does them; in the needed cells the even pixels of even rows. */
static void *coarse_pass(void *arg)
{
    struct worker *wk = arg;
    struct inspector *in = wk->in;
    const int w = in->w, gw = in->gw;
    uint32_t *pix = worker_pix(wk);
    for (int y; (y = worker_claim_row(wk)) < wk->y1;) {
        const float *cc = in->cell_conf + (size_t)(y / ROI_STEP) * gw;
        size_t row = (size_t)y * w;
        int n = 0;
        for (int x = 0; x < w; x++) {
            if (!needed(in, x, y)) {
                in->classes->px[row + x] = 0;
                in->conf[row + x] = cc[x / ROI_STEP];
            } else if (!(x & 1) && !(y & 1)) {
                pix[n++] = (uint32_t)(row + (size_t)x);
            }
        }
        wk->rc = classify_list(wk, n);
    }
    return NULL;
}

/* Whether the classified neighbours of (x, y) named by the offsets agree;
 * their class and lowest confidence then. */
static int neighbours_agree(const struct inspector *in, int x, int y, const int (*d)[2], int nd, uint8_t *cls,
                            float *conf)
{
    int seen = 0;
    for (int k = 0; k < nd; k++) {
        int nx = x + d[k][0], ny = y + d[k][1];
        if (nx < 0 || ny < 0 || nx >= in->w || ny >= in->h)
            continue;
        size_t at = (size_t)ny * in->w + nx;
        if (seen && in->classes->px[at] != *cls)
            return 0;
        if (!seen || in->conf[at] < *conf)
            *conf = in->conf[at];
        *cls = in->classes->px[at];
        seen = 1;
    }
    return seen;
}

/* Pass C2 for the claimed frame rows: the needed pixels pass C1 left. */
static void *coarse_fill(void *arg)
{
    static const int across[2][2] = {{-1, 0}, {1, 0}}, down[2][2] = {{0, -1}, {0, 1}};
    static const int diag[4][2] = {{-1, -1}, {1, -1}, {-1, 1}, {1, 1}};
    struct worker *wk = arg;
    struct inspector *in = wk->in;
    const int w = in->w;
    uint32_t *pix = worker_pix(wk);
    for (int y; (y = worker_claim_row(wk)) < wk->y1;) {
        size_t row = (size_t)y * w;
        int n = 0;
        for (int x = 0; x < w; x++) {
            if (!needed(in, x, y) || (!(x & 1) && !(y & 1)))
                continue;
            uint8_t c = 0;
            float f = 0;
            int ok = !(y & 1) ? neighbours_agree(in, x, y, across, 2, &c, &f)
                     : !(x & 1) ? neighbours_agree(in, x, y, down, 2, &c, &f)
                                : neighbours_agree(in, x, y, diag, 4, &c, &f);
            if (ok) {
                in->classes->px[row + x] = c;
                in->conf[row + x] = f;
            } else {
                pix[n++] = (uint32_t)(row + (size_t)x);
            }
        }
        wk->rc = classify_list(wk, n);
    }
    return NULL;
}

/* Runs fn over rows [y0, y1) shared between the inspector's threads. */
static int run_workers(struct inspector *in, int y0, int y1, void *(*fn)(void *), struct err *e)
{
    int nt = workers(in) < y1 - y0 ? workers(in) : y1 - y0;
    if (nt < 1)
        return ST_OK;
    struct worker wk[MAX_WORKERS];
    pthread_t tid[MAX_WORKERS];
    int started[MAX_WORKERS] = {0};
    atomic_int next = y0;
    for (int t = 0; t < nt; t++) {
        wk[t] = (struct worker){in, t, &next, y1, ST_OK, {0}};
        err_clear(&wk[t].e);
    }
    /* a thread that cannot start leaves its rows to the other workers */
    for (int t = 1; t < nt; t++)
        started[t] = pthread_create(&tid[t], NULL, fn, &wk[t]) == 0;
    fn(&wk[0]);
    for (int t = 1; t < nt; t++) {
        if (started[t])
            pthread_join(tid[t], NULL);
        else
            fn(&wk[t]);
    }
    for (int t = 0; t < nt; t++)
        if (wk[t].rc) {
            *e = wk[t].e;
            return wk[t].rc;
        }
    return ST_OK;
}

/* Sums each cell's integer grey (299 R + 587 G + 114 B, as the features'
 * brightness statistics) for grid rows claimed one at a time. */
static void *bright_pass(void *arg)
{
    struct worker *wk = arg;
    struct inspector *in = wk->in;
    const struct image *img = in->frame;
    const int w = img->w, ch = img->channels;
    for (int gy; (gy = worker_claim_row(wk)) < wk->y1;) {
        uint64_t *row = in->cell_sum + (size_t)gy * in->gw;
        memset(row, 0, (size_t)in->gw * sizeof *row);
        for (int y = gy * ROI_STEP; y < (gy + 1) * ROI_STEP && y < img->h; y++) {
            const uint8_t *p = img->px + (size_t)y * w * ch;
            for (int x = 0; x < w; x++, p += ch)
                row[x / ROI_STEP] += ch == 3 ? 299u * p[0] + 587u * p[1] + 114u * p[2] : 1000u * p[0];
        }
    }
    return NULL;
}

/* The cells [cx0, cx1) x [cy0, cy1) of the bright box (BOX_GROW): the
 * frame's grey sum is its cells'. */
static int bright_cells(struct inspector *in, struct err *e)
{
    const int w = in->w, h = in->h, gw = in->gw, gh = in->gh;
    int rc = run_workers(in, 0, gh, bright_pass, e);
    if (rc)
        return rc;
    const uint64_t *sum = in->cell_sum;
    uint64_t total = 0;
    for (size_t i = 0; i < (size_t)gw * gh; i++)
        total += sum[i];
    const uint64_t npx = (uint64_t)w * h;
    int cx0 = gw, cx1 = 0, cy0 = gh, cy1 = 0;
    for (int gy = 0; gy < gh; gy++) {
        int ye = (gy + 1) * ROI_STEP < h ? (gy + 1) * ROI_STEP : h;
        for (int gx = 0; gx < gw; gx++) {
            int xe = (gx + 1) * ROI_STEP < w ? (gx + 1) * ROI_STEP : w;
            uint64_t cell = (uint64_t)(xe - gx * ROI_STEP) * (uint64_t)(ye - gy * ROI_STEP);
            /* cell mean above the frame mean, in integers */
            if (sum[(size_t)gy * gw + gx] * npx > total * cell) {
                cx0 = gx < cx0 ? gx : cx0;
                cx1 = gx + 1 > cx1 ? gx + 1 : cx1;
                cy0 = gy < cy0 ? gy : cy0;
                cy1 = gy + 1 > cy1 ? gy + 1 : cy1;
            }
        }
    }
    if (cx1 == 0) {
        /* nothing brighter than the mean: a uniform frame, looked at whole */
        cx0 = cy0 = 0;
        cx1 = gw;
        cy1 = gh;
    }
    in->cx0 = cx0 - BOX_GROW > 0 ? cx0 - BOX_GROW : 0;
    in->cy0 = cy0 - BOX_GROW > 0 ? cy0 - BOX_GROW : 0;
    in->cx1 = cx1 + BOX_GROW < gw ? cx1 + BOX_GROW : gw;
    in->cy1 = cy1 + BOX_GROW < gh ? cy1 + BOX_GROW : gh;
    return ST_OK;
}

/* Features of the cells [cx0, cx1) x [cy0, cy1), then their samples; the
 * cells outside are background (confidence 1, never measured). */
static int sample_box(struct inspector *in, double *features_ms, struct err *e)
{
    double t0 = now_ms();
    const int w = in->w, h = in->h, gw = in->gw;
    struct feat_box box = {in->cx0 * ROI_STEP, in->cy0 * ROI_STEP,
                           in->cx1 * ROI_STEP < w ? in->cx1 * ROI_STEP : w,
                           in->cy1 * ROI_STEP < h ? in->cy1 * ROI_STEP : h};
    int rc = feat_compute_box(in->feat, in->frame, &box, in->fs, e);
    *features_ms += now_ms() - t0;
    if (rc)
        return rc;
    size_t cells = (size_t)gw * in->gh;
    memset(in->cell_cls, 0, cells);
    for (size_t i = 0; i < cells; i++)
        in->cell_conf[i] = 1.0f;
    return run_workers(in, in->cy0, in->cy1, grid_pass, e);
}

/* Whether a sample in the box's outermost ring of cells (where the ring is
 * not the frame's edge) is not background: the part may reach past it. */
static int box_cut(const struct inspector *in)
{
    const int gw = in->gw;
    for (int gy = in->cy0; gy < in->cy1; gy++)
        for (int gx = in->cx0; gx < in->cx1; gx++) {
            int ring = (gx == in->cx0 && gx > 0) || (gx == in->cx1 - 1 && gx < gw - 1) ||
                       (gy == in->cy0 && gy > 0) || (gy == in->cy1 - 1 && gy < in->gh - 1);
            if (ring && in->cell_cls[(size_t)gy * gw + gx])
                return 1;
        }
    return 0;
}

/* The locating pass from the frame to classes; t0 is when the frame came
 * in, and the box's search counts as features time. */
static int classify_located(struct inspector *in, double t0, struct inspect_times *t, struct err *e)
{
    const int gw = in->gw, gh = in->gh;
    int rc = bright_cells(in, e);
    double feat_ms = now_ms() - t0; /* the box, then the features inside it */
    double start = now_ms(), box_feat_ms = 0;
    if (!rc)
        rc = sample_box(in, &box_feat_ms, e);
    if (!rc && box_cut(in)) {
        in->cx0 = in->cy0 = 0;
        in->cx1 = gw;
        in->cy1 = gh;
        rc = sample_box(in, &box_feat_ms, e);
    }
    if (rc)
        return rc;
    for (int gy = 0; gy < gh; gy++)
        for (int gx = 0; gx < gw; gx++) {
            int near = 0;
            for (int dy = -ROI_MARGIN; dy <= ROI_MARGIN && !near; dy++)
                for (int dx = -ROI_MARGIN; dx <= ROI_MARGIN && !near; dx++) {
                    int y = gy + dy, x = gx + dx;
                    near = y >= 0 && y < gh && x >= 0 && x < gw && in->cell_cls[y * gw + x];
                }
            in->need[gy * gw + gx] = (uint8_t)near;
        }
    if (in->coarse) {
        rc = run_workers(in, 0, in->h, coarse_pass, e);
        if (!rc)
            rc = run_workers(in, 0, in->h, coarse_fill, e);
    } else {
        rc = run_workers(in, 0, gh, full_pass, e);
    }
    if (t) {
        t->features_ms = feat_ms + box_feat_ms;
        t->classify_ms = now_ms() - start - box_feat_ms;
    }
    return rc;
}

int inspector_classify(struct inspector *in, const struct image *img, struct inspect_times *t,
                       struct err *e)
{
    int rc = ensure_size(in, img->w, img->h, e);
    if (rc)
        return rc;
    double t0 = now_ms();
    /* the lighting is evened out before anything reads the frame */
    struct err fe;
    if (in->flat && (rc = flatfield_apply(in->flat, img, in->evened, &fe)))
        return err_set(e, rc, "%s: %s", in->r.flat_field, fe.msg);
    in->frame = in->flat ? in->evened : img;
    if (in->roi)
        return classify_located(in, t0, t, e);
    if ((rc = feat_compute(in->feat, in->frame, in->fs, e)))
        return rc;
    double t1 = now_ms();
    rc = forest_classify(in->forest, in->fs->v, (size_t)img->w * img->h, in->fs->n, in->threads,
                         in->classes->px, in->conf, e);
    if (t) {
        t->features_ms = t1 - t0;
        t->classify_ms = now_ms() - t1;
    }
    return rc;
}

/* The gates' measures read the frame, the classes and the confidences
 * only, and write the quality and the grey frame, which nothing else
 * touches until the verdict: with a second thread they run beside the
 * part's location, zones and regions. */
struct quality_job {
    struct inspector *in;
    int rc;
    struct err e;
};

static void *quality_run(void *arg)
{
    struct quality_job *qj = arg;
    struct inspector *in = qj->in;
    qj->rc = judge_measure_quality(&in->r, in->frame, in->classes, in->conf, in->grey,
                                   in->has_last ? in->last : NULL, &in->q, &qj->e);
    return NULL;
}

static int measure_regions(struct inspector *in, const struct image *img, struct err *e)
{
    const struct recipe *r = &in->r;
    const double sx = r->mm_per_px_x, sy = r->mm_per_px_y;
    int rc = part_locate(in->classes, sx, sy, (enum part_orient)r->part.orient, &in->pose, e);
    if (!rc && in->zones)
        rc = zone_map_paint(in->zones, &in->pose, img->w, img->h, sx, sy, e);
    if (rc)
        return rc;
    struct regions_opts ro;
    judge_regions_opts(r, inspector_zone_map(in), &ro);
    return regions_find(&in->rs, in->classes, in->conf, &ro, e);
}

int inspector_measure(struct inspector *in, const struct image *img, struct inspect_times *t,
                      struct err *e)
{
    const struct recipe *r = &in->r;
    if (r->has_calibration && (img->w != r->cal.width || img->h != r->cal.height))
        return err_set(e, ST_EINVAL, "frame is %dx%d but the calibration %s is for %dx%d",
                       img->w, img->h, r->calibration_path, r->cal.width, r->cal.height);
    in->refs.calibration_age_days = calfile_age_days(&r->cal, time(NULL));
    int rc = inspector_classify(in, img, t, e);
    if (rc)
        return rc;
    double t0 = now_ms();
    struct quality_job qj = {in, ST_OK, {0}};
    err_clear(&qj.e);
    pthread_t qt;
    int beside = workers(in) > 1 && pthread_create(&qt, NULL, quality_run, &qj) == 0;
    rc = measure_regions(in, img, e);
    double t1 = now_ms();
    if (beside)
        pthread_join(qt, NULL);
    else if (!rc)
        quality_run(&qj);
    if (rc)
        return rc;
    if (qj.rc) {
        *e = qj.e;
        return qj.rc;
    }
    uint8_t *swap = in->last;
    in->last = in->grey;
    in->grey = swap;
    in->has_last = 1;
    if (t) {
        t->regions_ms = t1 - t0;
        t->verdict_ms = now_ms() - t1;
    }
    return ST_OK;
}

int inspector_run(struct inspector *in, const struct image *img, struct judgement *j,
                  struct inspect_times *t, struct err *e)
{
    const struct recipe *r = &in->r;
    /* without references the gates cannot tell a good frame from a bad one */
    if (!(in->refs.sharpness > 0))
        return err_set(e, ST_EINVAL,
                       "%s: no sharpness reference: set [gates] sharpness_reference, or train "
                       "again (%s predates references)",
                       r->path, r->model_path);
    if (r->part.area_tolerance >= 0 && !(in->refs.part_area_mm2 > 0))
        return err_set(e, ST_EINVAL,
                       "%s: no expected part area: set [part] area_mm2, or train again (%s "
                       "predates references)",
                       r->path, r->model_path);
    int rc = inspector_measure(in, img, t, e);
    if (rc)
        return rc;
    double t0 = now_ms();
    judge_part(r, &in->refs, &in->q, &in->pose, &in->rs, j);
    if (t)
        t->verdict_ms += now_ms() - t0;
    return ST_OK;
}

void inspector_forget_last_frame(struct inspector *in)
{
    in->has_last = 0;
}

const struct image *inspector_classes(const struct inspector *in) { return in->classes; }
const struct fstack *inspector_features(const struct inspector *in) { return in->fs; }
const struct forest *inspector_forest(const struct inspector *in) { return in->forest; }
const struct region_set *inspector_regions(const struct inspector *in) { return &in->rs; }
const struct quality *inspector_quality(const struct inspector *in) { return &in->q; }
const struct recipe *inspector_recipe(const struct inspector *in) { return &in->r; }
const struct part_pose *inspector_pose(const struct inspector *in) { return &in->pose; }
const struct image *inspector_zone_map(const struct inspector *in)
{
    return in->zones ? zone_map_image(in->zones) : NULL;
}
const struct model_meta *inspector_model(const struct inspector *in) { return &in->meta; }

void inspector_set_verified(struct inspector *in, double hours_ago)
{
    in->refs.since_verified_h =
        hours_ago < 0 ? -1 : hours_ago < JUDGE_NEVER_VERIFIED_H ? hours_ago : JUDGE_NEVER_VERIFIED_H;
}

void inspector_set_locating(struct inspector *in, int on)
{
    in->roi = on != 0;
}

void inspector_set_coarse(struct inspector *in, int on)
{
    in->coarse = on != 0;
}
