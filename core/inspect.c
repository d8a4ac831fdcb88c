#include "inspect.h"

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
 * Rows are classified in chunks so the scratch copy stays in cache. */
#define ROI_STEP 4
#define ROI_MARGIN 2
#define CHUNK 8192

struct inspector {
    struct recipe r;
    struct model_meta meta;
    struct forest *forest;
    int is_defect[RECIPE_MAX_CLASSES];
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
    float *chunk;           /* CHUNK feature rows */
    uint8_t chunk_cls[CHUNK];
    float chunk_conf[CHUNK];
    size_t chunk_idx[CHUNK];
    struct region_set rs;
    struct quality q;
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
    regions_init(&in->rs);
    for (int c = 0; c < r->nclasses; c++)
        in->is_defect[c] = r->cls[c].is_defect;
    int rc = model_check(r, &in->meta, e);
    if (rc)
        goto fail;
    if ((rc = forest_load(r->model_path, &in->forest, e)))
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

void inspector_free(struct inspector *in)
{
    if (!in)
        return;
    forest_free(in->forest);
    feat_ctx_free(in->feat);
    fstack_free(in->fs);
    image_free(in->classes);
    free(in->conf);
    free(in->cell_cls);
    free(in->need);
    free(in->cell_conf);
    free(in->chunk);
    regions_clear(&in->rs);
    free(in);
}

static int ensure_size(struct inspector *in, int w, int h, struct err *e)
{
    if (in->feat && in->w == w && in->h == h)
        return ST_OK;
    feat_ctx_free(in->feat);
    fstack_free(in->fs);
    image_free(in->classes);
    free(in->conf);
    free(in->cell_cls);
    free(in->need);
    free(in->cell_conf);
    free(in->chunk);
    in->feat = NULL;
    in->fs = NULL;
    in->classes = NULL;
    in->conf = NULL;
    in->cell_cls = in->need = NULL;
    in->cell_conf = in->chunk = NULL;
    in->w = in->h = 0;
    if (!(in->feat = feat_ctx_new(&in->r.feat, w, h, e)) ||
        !(in->fs = fstack_new(w, h, feat_count(&in->r.feat), e)) ||
        !(in->classes = image_new(w, h, 1, e)))
        return e ? e->code : ST_ENOMEM;
    in->gw = (w + ROI_STEP - 1) / ROI_STEP;
    in->gh = (h + ROI_STEP - 1) / ROI_STEP;
    size_t cells = (size_t)in->gw * in->gh;
    in->conf = malloc((size_t)w * h * sizeof *in->conf);
    in->cell_cls = malloc(cells);
    in->need = malloc(cells);
    in->cell_conf = malloc(cells * sizeof *in->cell_conf);
    in->chunk = malloc((size_t)CHUNK * in->fs->n * sizeof *in->chunk);
    if (!in->conf || !in->cell_cls || !in->need || !in->cell_conf || !in->chunk)
        return err_set(e, ST_ENOMEM, "out of memory for a %dx%d frame", w, h);
    in->w = w;
    in->h = h;
    return ST_OK;
}

/* Classifies the pixels listed in chunk_idx[0..n) and scatters the result. */
static int flush_chunk(struct inspector *in, size_t n, uint8_t *cls, float *conf, struct err *e)
{
    const int nf = in->fs->n;
    for (size_t k = 0; k < n; k++)
        memcpy(in->chunk + k * nf, in->fs->v + in->chunk_idx[k] * nf, (size_t)nf * sizeof(float));
    int rc = forest_classify(in->forest, in->chunk, n, nf, in->threads, in->chunk_cls,
                             in->chunk_conf, e);
    for (size_t k = 0; k < n && rc == ST_OK; k++) {
        cls[in->chunk_idx[k]] = in->chunk_cls[k];
        conf[in->chunk_idx[k]] = in->chunk_conf[k];
    }
    return rc;
}

static int classify_located(struct inspector *in, struct err *e)
{
    const int w = in->w, h = in->h, gw = in->gw, gh = in->gh;
    size_t n = 0;
    int rc = ST_OK;
    /* pass 1: the grid samples, results stored per cell */
    for (int gy = 0; gy < gh && rc == ST_OK; gy++)
        for (int gx = 0; gx < gw && rc == ST_OK; gx++) {
            in->chunk_idx[n++] = (size_t)gy * ROI_STEP * w + (size_t)gx * ROI_STEP;
            if (n == CHUNK || (gy == gh - 1 && gx == gw - 1)) {
                size_t first = (size_t)gy * gw + gx + 1 - n;
                rc = flush_chunk(in, n, in->classes->px, in->conf, e);
                for (size_t k = 0; k < n && rc == ST_OK; k++) {
                    in->cell_cls[first + k] = in->classes->px[in->chunk_idx[k]];
                    in->cell_conf[first + k] = in->conf[in->chunk_idx[k]];
                }
                n = 0;
            }
        }
    if (rc)
        return rc;
    /* cells near a part sample are classified in full */
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
    /* pass 2 */
    for (int y = 0; y < h && rc == ST_OK; y++) {
        const uint8_t *need = in->need + (size_t)(y / ROI_STEP) * gw;
        const float *cc = in->cell_conf + (size_t)(y / ROI_STEP) * gw;
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            if (!need[x / ROI_STEP]) {
                in->classes->px[i] = 0;
                in->conf[i] = cc[x / ROI_STEP];
                continue;
            }
            in->chunk_idx[n++] = i;
            if (n == CHUNK) {
                if ((rc = flush_chunk(in, n, in->classes->px, in->conf, e)))
                    break;
                n = 0;
            }
        }
    }
    if (rc == ST_OK && n)
        rc = flush_chunk(in, n, in->classes->px, in->conf, e);
    return rc;
}

int inspector_classify(struct inspector *in, const struct image *img, struct inspect_times *t,
                       struct err *e)
{
    int rc = ensure_size(in, img->w, img->h, e);
    if (rc)
        return rc;
    double t0 = now_ms();
    if ((rc = feat_compute(in->feat, img, in->fs, e)))
        return rc;
    double t1 = now_ms();
    rc = in->roi ? classify_located(in, e)
                 : forest_classify(in->forest, in->fs->v, (size_t)img->w * img->h, in->fs->n,
                                   in->threads, in->classes->px, in->conf, e);
    double t2 = now_ms();
    if (t) {
        t->features_ms = t1 - t0;
        t->classify_ms = t2 - t1;
    }
    return rc;
}

int inspector_run(struct inspector *in, const struct image *img, struct judgement *j,
                  struct inspect_times *t, struct err *e)
{
    int rc = inspector_classify(in, img, t, e);
    if (rc)
        return rc;
    double t0 = now_ms();
    rc = regions_find(&in->rs, in->classes, in->conf, in->is_defect, in->r.nclasses, 8,
                      in->r.mm_per_px_x, in->r.mm_per_px_y, e);
    if (rc)
        return rc;
    double t1 = now_ms();
    if ((rc = judge_measure_quality(img, in->classes, &in->q, e)))
        return rc;
    judge_part(&in->r, &in->q, &in->rs, j);
    double t2 = now_ms();
    if (t) {
        t->regions_ms = t1 - t0;
        t->verdict_ms = t2 - t1;
    }
    return ST_OK;
}

const struct image *inspector_classes(const struct inspector *in) { return in->classes; }
const struct fstack *inspector_features(const struct inspector *in) { return in->fs; }
const struct forest *inspector_forest(const struct inspector *in) { return in->forest; }
const float *inspector_confidence(const struct inspector *in) { return in->conf; }
const struct region_set *inspector_regions(const struct inspector *in) { return &in->rs; }
const struct quality *inspector_quality(const struct inspector *in) { return &in->q; }
const struct recipe *inspector_recipe(const struct inspector *in) { return &in->r; }
const struct model_meta *inspector_model(const struct inspector *in) { return &in->meta; }
int inspector_threads(const struct inspector *in) { return in->threads; }

void inspector_set_locating(struct inspector *in, int on)
{
    in->roi = on != 0;
}

void inspector_set_threads(struct inspector *in, int threads)
{
    in->threads = threads < 1 ? 1 : threads;
    in->r.feat.threads = in->threads;
    /* the feature context was made with the old thread count */
    feat_ctx_free(in->feat);
    in->feat = NULL;
}
