#include "label_quick.h"

#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "core/features.h"
#include "core/flatfield.h"
#include "core/pngio.h"
#include "core/trainset.h"
#include "label_file.h"

/* The recipe's features of img, as inspection computes them. */
static int features_of(const struct recipe *r, const struct image *img, struct fstack **out,
                       struct err *e)
{
    struct flat_field *flat = NULL;
    struct image *evened = NULL;
    struct feat_ctx *ctx = NULL;
    int rc = ST_OK;
    *out = NULL;
    if (r->flat_field[0]) {
        if ((rc = flatfield_load(r->flat_field, &flat, e)))
            return rc;
        if (!(evened = image_new(img->w, img->h, 3, e)) ||
            (rc = flatfield_apply(flat, img, evened, e))) {
            rc = rc ? rc : e->code;
            goto done;
        }
    }
    if (!(ctx = feat_ctx_new(&r->feat, img->w, img->h, e)) ||
        !(*out = fstack_new(img->w, img->h, feat_count(&r->feat), e))) {
        rc = e->code;
        goto done;
    }
    if ((rc = feat_compute(ctx, evened ? evened : img, *out, e))) {
        fstack_free(*out);
        *out = NULL;
    }
done:
    feat_ctx_free(ctx);
    image_free(evened);
    flatfield_free(flat);
    return rc;
}

/* Adds image i's painted pixels to the sample. */
static int sample_image(const struct recipe *r, const struct dataset *ds, int i, int cur,
                        const struct image *cur_mask, struct trainset *ts, uint64_t *rng,
                        int *used, struct err *e)
{
    char ip[PATH_MAX], lp[PATH_MAX];
    struct image *img = NULL, *mask = NULL;
    struct fstack *fs = NULL;
    int rc;
    if ((rc = dataset_image_path(ds, i, ip, sizeof ip, e)) ||
        (rc = dataset_label_path(ds, i, lp, sizeof lp, e)) || (rc = pngio_load_rgb(ip, &img, e)))
        return rc;
    const struct image *m = cur_mask;
    if (i != cur) {
        if ((rc = label_file_load(lp, img->w, img->h, r->nclasses, &mask, e)))
            goto done;
        m = mask;
    } else if (m->w != img->w || m->h != img->h) {
        rc = err_set(e, ST_EINVAL, "%s: the mask being edited is not the picture's size", ip);
        goto done;
    }
    size_t before = ts->n;
    if ((rc = features_of(r, img, &fs, e)) ||
        (rc = trainset_add_image(ts, fs, m, LABEL_QUICK_CAP, rng, e)))
        goto done;
    *used += ts->n > before;
done:
    fstack_free(fs);
    image_free(img);
    image_free(mask);
    return rc;
}

int label_quick_train(const struct recipe *r, const struct dataset *ds, int cur,
                      const struct image *cur_mask, struct booster **out,
                      struct label_quick_report *rep, struct err *e)
{
    double t0 = cli_now_ms();
    memset(rep, 0, sizeof *rep);
    *out = NULL;
    struct trainset all, tr, va;
    trainset_init(&all, feat_count(&r->feat), r->nclasses);
    trainset_init(&tr, all.nfeat, all.nclasses);
    trainset_init(&va, all.nfeat, all.nclasses);
    uint64_t rng = (uint64_t)r->train.seed * 0x9e3779b97f4a7c15ull + 1;
    int rc = ST_OK, painted = 0;
    for (int i = 0; i < ds->n && !rc; i++)
        if (i == cur || ds->labelled[i])
            rc = sample_image(r, ds, i, cur, cur_mask, &all, &rng, &rep->images, e);
    if (rc)
        goto done;
    for (int c = 0; c < r->nclasses; c++) {
        rep->per_class[c] = all.per_class[c];
        painted += all.per_class[c] > 0;
    }
    rep->rows = all.n;
    if (painted < 2) {
        rc = err_set(e, ST_EFORMAT, "%s: paint at least two classes before training", ds->dir);
        goto done;
    }
    if ((rc = trainset_split(&all, 0.1, (uint64_t)r->train.seed, &tr, &va, e)))
        goto done;
    struct booster_params p = r->train;
    p.rounds = p.rounds < LABEL_QUICK_ROUNDS ? p.rounds : LABEL_QUICK_ROUNDS;
    p.depth = p.depth < LABEL_QUICK_DEPTH ? p.depth : LABEL_QUICK_DEPTH;
    p.early_stop = 0;
    /* one thread: the sample is small, and on a busy machine XGBoost's
     * OpenMP threads spin waiting for each other (10 s against 0.9 s
     * measured for 6000 pixels at a load average of 11 on 2 cores) */
    p.threads = 1;
    rc = booster_train(&p, r->nclasses, tr.x, tr.y, tr.n, va.x, va.y, va.n, tr.nfeat, NULL, NULL,
                       out, &rep->rounds, NULL, e);
done:
    rep->seconds = (cli_now_ms() - t0) / 1e3;
    trainset_clear(&all);
    trainset_clear(&tr);
    trainset_clear(&va);
    return rc;
}

int label_quick_predict(const struct recipe *r, struct booster *b, const struct image *img,
                        struct image **pred, struct err *e)
{
    struct fstack *fs = NULL;
    float *prob = NULL;
    *pred = NULL;
    size_t n = (size_t)img->w * img->h;
    int rc = features_of(r, img, &fs, e);
    if (rc)
        return rc;
    if (!(prob = malloc(n * (size_t)r->nclasses * sizeof *prob))) {
        rc = err_set(e, ST_ENOMEM, "label: out of memory for the prediction");
        goto done;
    }
    if ((rc = booster_predict(b, fs->v, n, fs->n, r->nclasses, prob, e)))
        goto done;
    if (!(*pred = image_new(img->w, img->h, 1, e))) {
        rc = e->code;
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        const float *p = &prob[i * r->nclasses];
        int best = 0;
        for (int k = 1; k < r->nclasses; k++)
            if (p[k] > p[best])
                best = k;
        (*pred)->px[i] = (uint8_t)best;
    }
done:
    free(prob);
    fstack_free(fs);
    return rc;
}
