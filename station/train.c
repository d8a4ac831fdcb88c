#include "train.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "cli.h"
#include "core/booster.h"
#include "core/dataset.h"
#include "core/features.h"
#include "core/flatfield.h"
#include "core/inspect.h"
#include "core/model.h"
#include "core/pngio.h"
#include "core/trainset.h"

static void on_round(void *user, int round, int rounds, double elapsed_s, double val_loss)
{
    struct progress *p = user;
    double left = round > 0 ? elapsed_s / round * (rounds - round) : 0;
    progress_update(p, round == rounds, "training: round %d/%d  %.1f s elapsed  ~%.0f s left"
                                            "  validation mlogloss %.4f",
                    round, rounds, elapsed_s, left, val_loss);
}

/* Features of every labelled image into the sample. */
static int sample_dataset(const struct recipe *r, const struct dataset *ds, double holdout,
                          struct trainset *all, int *used, int *held, struct err *e)
{
    struct feat_ctx *ctx = NULL;
    struct fstack *fs = NULL;
    struct image *img = NULL, *lab = NULL, *evened = NULL;
    struct flat_field *flat = NULL;
    int rc = ST_OK, cw = 0, ch = 0;
    /* trained on frames as inspection will see them: lighting evened out */
    if (r->flat_field[0] && (rc = flatfield_load(r->flat_field, &flat, e)))
        return rc;
    uint64_t rng = (uint64_t)r->train.seed * 0x9e3779b97f4a7c15ull + 1;
    struct progress p;
    progress_init(&p);
    *used = *held = 0;
    for (int i = 0; i < ds->n; i++) {
        if (!ds->labelled[i])
            continue;
        if (dataset_held_out(ds, i, holdout)) {
            (*held)++;
            continue;
        }
        char ip[PATH_MAX], lp[PATH_MAX];
        if ((rc = dataset_image_path(ds, i, ip, sizeof ip, e)) ||
            (rc = dataset_label_path(ds, i, lp, sizeof lp, e)) ||
            (rc = pngio_load_rgb(ip, &img, e)) ||
            (rc = pngio_load_label(lp, r->nclasses, &lab, e)))
            goto fail;
        if (lab->w != img->w || lab->h != img->h) {
            rc = err_set(e, ST_EFORMAT, "%s: label mask is %dx%d but its image is %dx%d", lp,
                         lab->w, lab->h, img->w, img->h);
            goto fail;
        }
        if (!ctx || img->w != cw || img->h != ch) {
            feat_ctx_free(ctx);
            fstack_free(fs);
            image_free(evened);
            fs = NULL;
            evened = NULL;
            if (!(ctx = feat_ctx_new(&r->feat, img->w, img->h, e)) ||
                !(fs = fstack_new(img->w, img->h, feat_count(&r->feat), e)) ||
                (flat && !(evened = image_new(img->w, img->h, 3, e)))) {
                rc = e->code;
                goto fail;
            }
            cw = img->w;
            ch = img->h;
        }
        struct err fe;
        if (flat && (rc = flatfield_apply(flat, img, evened, &fe))) {
            err_set(e, rc, "%s: %s (%s)", ip, fe.msg, r->flat_field);
            goto fail;
        }
        if ((rc = feat_compute(ctx, flat ? evened : img, fs, e)) ||
            (rc = trainset_add_image(all, fs, lab, r->samples_per_class, &rng, e))) {
            if (rc != ST_OK && strncmp(e->msg, ip, strlen(ip)) != 0) {
                char m[sizeof e->msg];
                snprintf(m, sizeof m, "%s", e->msg);
                err_set(e, rc, "%s: %s", ip, m);
            }
            goto fail;
        }
        (*used)++;
        progress_update(&p, 0, "features: image %d of %d (%s)", i + 1, ds->n, ds->stems[i]);
        image_free(img);
        image_free(lab);
        img = lab = NULL;
    }
    progress_update(&p, 1, "features: %d labelled images sampled, %zu pixels", *used, all->n);
    progress_done(&p);
fail:
    image_free(img);
    image_free(lab);
    image_free(evened);
    flatfield_free(flat);
    feat_ctx_free(ctx);
    fstack_free(fs);
    return rc;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* The gates compare each frame with a good frame of the product: the
 * median sharpness and part area the new model sees on the training
 * frames (medians, so the few frames with a large defect do not move them).
 * Runs the freshly saved model through an inspector, so the references are
 * measured exactly as inspection will measure. */
static int measure_references(const struct recipe *r, const struct dataset *ds, double holdout,
                              struct model_meta *m, struct err *e)
{
    enum { MOST = 24 };
    double sharp[MOST], area[MOST];
    int n = 0, rc;
    struct inspector *in = NULL;
    if ((rc = inspector_new(r, &in, e)))
        return rc;
    for (int i = 0; i < ds->n && n < MOST && !rc; i++) {
        char ip[PATH_MAX];
        struct image *img = NULL;
        if (!ds->labelled[i] || dataset_held_out(ds, i, holdout))
            continue;
        /* training frames are separate parts: none is a frozen repeat */
        inspector_forget_last_frame(in);
        if (!(rc = dataset_image_path(ds, i, ip, sizeof ip, e)) &&
            !(rc = pngio_load_rgb(ip, &img, e)) && !(rc = inspector_measure(in, img, NULL, e)) &&
            inspector_pose(in)->found) {
            sharp[n] = inspector_quality(in)->sharpness;
            area[n++] = inspector_pose(in)->area_mm2;
        }
        image_free(img);
    }
    inspector_free(in);
    if (rc)
        return rc;
    if (n == 0)
        return err_set(e, ST_EFORMAT, "%s: no training frame shows a part; cannot set the "
                                      "image references", ds->dir);
    qsort(sharp, (size_t)n, sizeof sharp[0], cmp_double);
    qsort(area, (size_t)n, sizeof area[0], cmp_double);
    m->ref_sharpness = n % 2 ? sharp[n / 2] : 0.5 * (sharp[n / 2 - 1] + sharp[n / 2]);
    m->ref_part_area_mm2 = n % 2 ? area[n / 2] : 0.5 * (area[n / 2 - 1] + area[n / 2]);
    m->ref_frames = n;
    return ST_OK;
}

int train_recipe(const struct recipe *r, const char *data_dir, double holdout,
                 struct train_report *rep, struct err *e)
{
    memset(rep, 0, sizeof *rep);
    rep->holdout = holdout;
    double t0 = cli_now_ms();
    struct dataset ds;
    int rc = dataset_open(data_dir, &ds, e);
    if (rc)
        return rc;
    struct trainset all, tr, va;
    trainset_init(&all, feat_count(&r->feat), r->nclasses);
    trainset_init(&tr, all.nfeat, all.nclasses);
    trainset_init(&va, all.nfeat, all.nclasses);
    struct booster *b = NULL;
    if ((rc = sample_dataset(r, &ds, holdout, &all, &rep->images, &rep->held_out, e)))
        goto done;
    if (rep->images == 0) {
        rc = err_set(e, ST_EFORMAT, "%s/labels: no label masks for the images%s", data_dir,
                     rep->held_out ? " outside the held-out share" : "");
        goto done;
    }
    for (int c = 0; c < r->nclasses; c++) {
        rep->per_class[c] = all.per_class[c];
        rep->images_with[c] = all.images_with[c];
        rep->labelled[c] = all.labelled[c];
        if (all.per_class[c] == 0) {
            rc = err_set(e, ST_EFORMAT, "%s: no labelled pixel of class '%s'; cannot train",
                         data_dir, r->cls[c].name);
            goto done;
        }
    }
    if ((rc = trainset_split(&all, r->validation_fraction, (uint64_t)r->train.seed, &tr, &va, e)))
        goto done;
    trainset_clear(&all);
    rep->rows_train = tr.n;
    rep->rows_val = va.n;
    fprintf(stderr, "training: %zu pixels for training, %zu held out for early stopping\n", tr.n,
            va.n);
    struct progress ps;
    progress_init(&ps);
    if ((rc = booster_train(&r->train, r->nclasses, tr.x, tr.y, tr.n, va.x, va.y, va.n, tr.nfeat,
                            on_round, &ps, &b, &rep->best_round, &rep->best_loss, e)))
        goto done;
    progress_done(&ps);
    /* the new model replaces the old one whole: written beside it, then renamed */
    char tmp[PATH_MAX + 8];
    const char *ext = strrchr(r->model_path, '.');
    snprintf(tmp, sizeof tmp, "%.*s.new%s", (int)(ext - r->model_path), r->model_path, ext);
    struct model_meta m;
    if ((rc = booster_save(b, tmp, e)) || (rc = model_meta_from_recipe(r, &m, e)) ||
        (rc = sha256_hex_file(tmp, m.model_sha256, e)))
        goto done;
    if (rename(tmp, r->model_path) != 0) {
        rc = err_set(e, ST_EIO, "%s: cannot replace the model: %s", r->model_path,
                     strerror(errno));
        goto done;
    }
    for (int c = 0; c < r->nclasses; c++) {
        m.samples[c] = rep->per_class[c];
        m.images[c] = rep->images_with[c];
        m.labelled[c] = rep->labelled[c];
    }
    m.holdout = holdout;
    m.best_round = rep->best_round;
    m.val_mlogloss = rep->best_loss;
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(m.trained_utc, sizeof m.trained_utc, "%Y-%m-%dT%H:%M:%SZ", &tm);
    if ((rc = model_meta_save(r->model_path, &m, e)) ||
        (rc = measure_references(r, &ds, holdout, &m, e)))
        goto done;
    rep->ref_sharpness = m.ref_sharpness;
    rep->ref_part_area_mm2 = m.ref_part_area_mm2;
    rep->ref_frames = m.ref_frames;
    rc = model_meta_save(r->model_path, &m, e);
done:
    rep->seconds = (cli_now_ms() - t0) / 1e3;
    booster_free(b);
    trainset_clear(&all);
    trainset_clear(&tr);
    trainset_clear(&va);
    dataset_close(&ds);
    return rc;
}

void train_print_report(const struct recipe *r, const struct train_report *rep)
{
    if (rep->holdout > 0)
        fprintf(stderr, "held out of training: %d of %d labelled images (share %g by name; "
                        "station evaluate --split %g measures on them)\n",
                rep->held_out, rep->held_out + rep->images, rep->holdout, rep->holdout);
    fprintf(stderr, "training data per class (labelled pixels; sampled, at most %d per class "
                    "per image; images with the class):\n",
            r->samples_per_class);
    for (int c = 0; c < r->nclasses; c++) {
        fprintf(stderr, "  %-12s %9zu labelled %8zu sampled from %3d images%s\n", r->cls[c].name,
                rep->labelled[c], rep->per_class[c], rep->images_with[c],
                r->cls[c].is_defect ? "  (defect)" : "");
        if (r->cls[c].is_defect &&
            (rep->labelled[c] < TRAIN_THIN_PIXELS || rep->images_with[c] < TRAIN_THIN_IMAGES))
            fprintf(stderr, "  warning: defect class '%s' has only %zu labelled pixels in %d "
                            "images (wanted at least %d pixels in %d images); label more parts "
                            "with it\n",
                    r->cls[c].name, rep->labelled[c], rep->images_with[c], TRAIN_THIN_PIXELS,
                    TRAIN_THIN_IMAGES);
    }
    fprintf(stderr, "model: %s, best round %d of %d (depth %d), validation mlogloss %.4f, "
                    "%.1f s\n",
            r->model_path, rep->best_round, r->train.rounds, r->train.depth, rep->best_loss,
            rep->seconds);
    fprintf(stderr, "image references over %d training frames (used by the gates unless the "
                    "recipe sets them): sharpness %.1f, part area %.1f mm²\n",
            rep->ref_frames, rep->ref_sharpness, rep->ref_part_area_mm2);
}
