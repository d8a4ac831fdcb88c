#include "evaluate.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "core/dataset.h"
#include "core/overlay.h"
#include "core/pngio.h"

static int load_pair(const struct dataset *ds, int i, int nclasses, struct image **img,
                     struct image **lab, struct err *e)
{
    char ip[PATH_MAX], lp[PATH_MAX];
    int rc;
    *img = *lab = NULL;
    if ((rc = dataset_image_path(ds, i, ip, sizeof ip, e)) ||
        (rc = dataset_label_path(ds, i, lp, sizeof lp, e)) ||
        (rc = pngio_load_rgb(ip, img, e)) || (rc = pngio_load_label(lp, nclasses, lab, e)))
        goto fail;
    if ((*lab)->w != (*img)->w || (*lab)->h != (*img)->h) {
        rc = err_set(e, ST_EFORMAT, "%s: label mask is %dx%d but its image is %dx%d", lp,
                     (*lab)->w, (*lab)->h, (*img)->w, (*img)->h);
        goto fail;
    }
    return ST_OK;
fail:
    image_free(*img);
    image_free(*lab);
    *img = *lab = NULL;
    return rc;
}

static int write_sheet(struct inspector *in, const struct image *img, const struct image *lab,
                       const char *path, struct err *e)
{
    const struct recipe *r = inspector_recipe(in);
    struct image *t = overlay_colourise(lab, r, e);
    struct image *p = t ? overlay_colourise(inspector_classes(in), r, e) : NULL;
    int rc = e->code;
    if (p) {
        const struct image *parts[3] = {img, t, p};
        struct image *s = overlay_side_by_side(parts, 3, 4, 255, e);
        rc = s ? pngio_save(path, s, 3, e) : e->code;
        image_free(s);
    }
    image_free(t);
    image_free(p);
    return rc;
}

static int cmp_rows(const void *a, const void *b)
{
    const struct eval_row *x = *(const struct eval_row *const *)a;
    const struct eval_row *y = *(const struct eval_row *const *)b;
    return (x->accuracy > y->accuracy) - (x->accuracy < y->accuracy);
}

static double image_defect_iou(const struct recipe *r, const struct confusion *cm)
{
    int def[RECIPE_MAX_CLASSES];
    for (int c = 0; c < r->nclasses; c++)
        def[c] = r->cls[c].is_defect;
    return metrics_mean_iou(cm, def);
}

/* The worst images are known only once all are scored; they are read and
 * classified again rather than keeping every class map of the dataset. */
static int write_worst(struct inspector *in, const struct dataset *ds, struct eval_result *res,
                       const char *sheet_dir, int nworst, struct err *e)
{
    if (mkdir(sheet_dir, 0777) != 0 && errno != EEXIST)
        return err_set(e, ST_EIO, "%s: cannot create folder: %s", sheet_dir, strerror(errno));
    struct eval_row **order = malloc((size_t)res->n * sizeof *order);
    if (!order)
        return err_set(e, ST_ENOMEM, "out of memory");
    for (int i = 0; i < res->n; i++)
        order[i] = &res->rows[i];
    qsort(order, (size_t)res->n, sizeof *order, cmp_rows);
    int rc = ST_OK;
    for (int k = 0; k < nworst && k < res->n && rc == ST_OK; k++) {
        int i = order[k]->index;
        struct image *img, *lab;
        if ((rc = load_pair(ds, i, inspector_recipe(in)->nclasses, &img, &lab, e)))
            break;
        char path[PATH_MAX];
        snprintf(path, sizeof path, "%s/worst-%d-%s.png", sheet_dir, k + 1, ds->stems[i]);
        if ((rc = inspector_classify(in, img, NULL, e)) == ST_OK)
            rc = write_sheet(in, img, lab, path, e);
        image_free(img);
        image_free(lab);
    }
    free(order);
    return rc;
}

int evaluate_dataset(struct inspector *in, const char *data_dir, double split,
                     const char *sheet_dir, int nworst, struct eval_result *res, struct err *e)
{
    const struct recipe *r = inspector_recipe(in);
    memset(res, 0, sizeof *res);
    metrics_init(&res->cm, r->nclasses);
    struct dataset ds;
    int rc = dataset_open(data_dir, &ds, e);
    if (rc)
        return rc;
    res->rows = calloc((size_t)ds.n, sizeof *res->rows);
    if (!res->rows) {
        dataset_close(&ds);
        return err_set(e, ST_ENOMEM, "out of memory");
    }
    for (int i = 0; i < ds.n && rc == ST_OK; i++) {
        if (!ds.labelled[i] || (split > 0 && !dataset_held_out(&ds, i, split)))
            continue;
        struct image *img, *lab;
        if ((rc = load_pair(&ds, i, r->nclasses, &img, &lab, e)))
            break;
        struct confusion one;
        metrics_init(&one, r->nclasses);
        size_t npix = (size_t)img->w * img->h;
        if ((rc = inspector_classify(in, img, NULL, e)) == ST_OK &&
            (rc = metrics_add(&one, lab->px, inspector_classes(in)->px, npix, e)) == ST_OK) {
            struct eval_row *row = &res->rows[res->n++];
            snprintf(row->stem, sizeof row->stem, "%s", ds.stems[i]);
            row->index = i;
            for (int a = 0; a < one.n; a++)
                for (int b = 0; b < one.n; b++) {
                    res->cm.c[a][b] += one.c[a][b];
                    row->labelled += one.c[a][b];
                }
            row->accuracy = metrics_accuracy(&one);
            row->defect_iou = image_defect_iou(r, &one);
        }
        image_free(img);
        image_free(lab);
    }
    if (rc == ST_OK && res->n == 0)
        rc = err_set(e, ST_EFORMAT, "%s/labels: no label masks for the images%s", data_dir,
                     split > 0 ? " held out at that share" : "");
    if (rc == ST_OK && sheet_dir && nworst > 0)
        rc = write_worst(in, &ds, res, sheet_dir, nworst, e);
    dataset_close(&ds);
    return rc;
}

void evaluate_clear(struct eval_result *res)
{
    free(res->rows);
    res->rows = NULL;
    res->n = 0;
}

void evaluate_print(const struct recipe *r, const struct eval_result *res, int per_image, FILE *f)
{
    const struct confusion *cm = &res->cm;
    int def[RECIPE_MAX_CLASSES];
    for (int c = 0; c < r->nclasses; c++)
        def[c] = r->cls[c].is_defect;
    fprintf(f, "pixel accuracy %.2f%%   mean IoU %.3f   defect classes' mean IoU %.3f   (%d "
               "images)\n",
            100 * metrics_accuracy(cm), metrics_mean_iou(cm, NULL), metrics_mean_iou(cm, def),
            res->n);
    fprintf(f, "IoU per class:");
    for (int c = 0; c < r->nclasses; c++) {
        double v = metrics_iou(cm, c);
        if (v < 0)
            fprintf(f, "  %s n/a", r->cls[c].name);
        else
            fprintf(f, "  %s %.3f", r->cls[c].name, v);
    }
    fprintf(f, "\nconfusion (rows = truth, columns = prediction; pixel counts | row shares %%):\n");
    fprintf(f, "  %-11s", "");
    for (int c = 0; c < r->nclasses; c++)
        fprintf(f, " %10.10s", r->cls[c].name);
    fprintf(f, "  |");
    for (int c = 0; c < r->nclasses; c++)
        fprintf(f, " %6.6s", r->cls[c].name);
    fputc('\n', f);
    for (int a = 0; a < r->nclasses; a++) {
        fprintf(f, "  %-11s", r->cls[a].name);
        for (int b = 0; b < r->nclasses; b++)
            fprintf(f, " %10llu", (unsigned long long)cm->c[a][b]);
        fprintf(f, "  |");
        for (int b = 0; b < r->nclasses; b++)
            fprintf(f, " %6.1f", 100 * metrics_row_share(cm, a, b));
        fputc('\n', f);
    }
    struct eval_row **order = malloc((size_t)res->n * sizeof *order);
    if (!order)
        return;
    for (int i = 0; i < res->n; i++)
        order[i] = &res->rows[i];
    if (!per_image)
        qsort(order, (size_t)res->n, sizeof *order, cmp_rows);
    int shown = per_image ? res->n : (res->n < 10 ? res->n : 10);
    fprintf(f, "%s:\n  %-24s %10s %9s %11s\n", per_image ? "per image" : "worst images", "image",
            "labelled", "accuracy", "defect IoU");
    for (int i = 0; i < shown; i++) {
        const struct eval_row *row = order[i];
        if (row->defect_iou < 0)
            fprintf(f, "  %-24s %10zu %8.2f%% %11s\n", row->stem, row->labelled,
                    100 * row->accuracy, "-");
        else
            fprintf(f, "  %-24s %10zu %8.2f%% %11.3f\n", row->stem, row->labelled,
                    100 * row->accuracy, row->defect_iou);
    }
    free(order);
}

json_t *evaluate_json(const struct recipe *r, const struct eval_result *res)
{
    const struct confusion *cm = &res->cm;
    int def[RECIPE_MAX_CLASSES];
    json_t *iou = json_object(), *conf = json_array(), *imgs = json_array(),
           *classes = json_array();
    for (int c = 0; c < r->nclasses; c++) {
        def[c] = r->cls[c].is_defect;
        double v = metrics_iou(cm, c);
        json_object_set_new(iou, r->cls[c].name, v < 0 ? json_null() : json_real(v));
        json_array_append_new(classes, json_string(r->cls[c].name));
        json_t *row = json_array();
        for (int b = 0; b < r->nclasses; b++)
            json_array_append_new(row, json_integer((json_int_t)cm->c[c][b]));
        json_array_append_new(conf, row);
    }
    for (int i = 0; i < res->n; i++) {
        const struct eval_row *row = &res->rows[i];
        json_array_append_new(
            imgs, json_pack("{s:s,s:I,s:f,s:o}", "image", row->stem, "labelled",
                            (json_int_t)row->labelled, "pixel_accuracy", row->accuracy,
                            "defect_iou", row->defect_iou < 0 ? json_null()
                                                              : json_real(row->defect_iou)));
    }
    return json_pack("{s:f,s:f,s:f,s:o,s:o,s:o,s:o}", "pixel_accuracy", metrics_accuracy(cm),
                     "mean_iou", metrics_mean_iou(cm, NULL), "defect_mean_iou",
                     metrics_mean_iou(cm, def), "classes", classes, "iou", iou, "confusion",
                     conf, "images", imgs);
}
