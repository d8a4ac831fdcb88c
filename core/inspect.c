#include "inspect.h"

#include <stdlib.h>
#include <string.h>
#include <time.h>

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
    in->feat = NULL;
    in->fs = NULL;
    in->classes = NULL;
    in->conf = NULL;
    in->w = in->h = 0;
    if (!(in->feat = feat_ctx_new(&in->r.feat, w, h, e)) ||
        !(in->fs = fstack_new(w, h, feat_count(&in->r.feat), e)) ||
        !(in->classes = image_new(w, h, 1, e)))
        return e ? e->code : ST_ENOMEM;
    in->conf = malloc((size_t)w * h * sizeof *in->conf);
    if (!in->conf)
        return err_set(e, ST_ENOMEM, "out of memory for a %dx%d confidence map", w, h);
    in->w = w;
    in->h = h;
    return ST_OK;
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
    rc = forest_classify(in->forest, in->fs->v, (size_t)img->w * img->h, in->fs->n, in->threads,
                         in->classes->px, in->conf, e);
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

void inspector_set_threads(struct inspector *in, int threads)
{
    in->threads = threads < 1 ? 1 : threads;
    in->r.feat.threads = in->threads;
    /* the feature context was made with the old thread count */
    feat_ctx_free(in->feat);
    in->feat = NULL;
}
