#include "dataset.h"

#include <nettle/sha2.h>

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static int is_png_name(const char *name, size_t *stem_len)
{
    size_t n = strlen(name);
    if (n <= 4 || strcmp(name + n - 4, ".png") != 0 || name[0] == '.')
        return 0;
    *stem_len = n - 4;
    return 1;
}

static int path_join(char *buf, size_t len, const char *a, const char *b, const char *c,
                     struct err *e)
{
    int n = snprintf(buf, len, "%s/%s/%s.png", a, b, c);
    if (n < 0 || (size_t)n >= len)
        return err_set(e, ST_ERANGE, "%s/%s/%s.png: path too long", a, b, c);
    return ST_OK;
}

int dataset_image_path(const struct dataset *ds, int i, char *buf, size_t len, struct err *e)
{
    return path_join(buf, len, ds->dir, "images", ds->stems[i], e);
}

int dataset_label_path(const struct dataset *ds, int i, char *buf, size_t len, struct err *e)
{
    return path_join(buf, len, ds->dir, "labels", ds->stems[i], e);
}

int dataset_open(const char *dir, struct dataset *ds, struct err *e)
{
    memset(ds, 0, sizeof *ds);
    if (snprintf(ds->dir, sizeof ds->dir, "%s", dir) >= (int)sizeof ds->dir)
        return err_set(e, ST_ERANGE, "%s: path too long", dir);
    char images[PATH_MAX];
    snprintf(images, sizeof images, "%s/images", dir);
    DIR *d = opendir(images);
    if (!d)
        return err_set(e, ST_EIO, "%s: cannot open dataset folder: %s", images, strerror(errno));
    int cap = 0, rc = ST_OK;
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        size_t sl;
        if (!is_png_name(de->d_name, &sl))
            continue;
        if (ds->n == cap) {
            int ncap = cap ? 2 * cap : 64;
            char **p = realloc(ds->stems, (size_t)ncap * sizeof *p);
            if (!p) {
                rc = err_set(e, ST_ENOMEM, "%s: out of memory listing images", images);
                goto fail;
            }
            ds->stems = p;
            cap = ncap;
        }
        char *s = strndup(de->d_name, sl);
        if (!s) {
            rc = err_set(e, ST_ENOMEM, "%s: out of memory listing images", images);
            goto fail;
        }
        ds->stems[ds->n++] = s;
    }
    closedir(d);
    d = NULL;
    if (ds->n == 0) {
        rc = err_set(e, ST_EFORMAT, "%s: no .png images in the dataset", images);
        goto fail;
    }
    qsort(ds->stems, (size_t)ds->n, sizeof *ds->stems, cmp_str);
    ds->labelled = calloc((size_t)ds->n, sizeof *ds->labelled);
    if (!ds->labelled) {
        rc = err_set(e, ST_ENOMEM, "%s: out of memory", dir);
        goto fail;
    }
    for (int i = 0; i < ds->n; i++) {
        char p[PATH_MAX];
        struct stat st;
        rc = dataset_label_path(ds, i, p, sizeof p, e);
        if (rc)
            goto fail;
        ds->labelled[i] = stat(p, &st) == 0 && S_ISREG(st.st_mode);
    }
    return ST_OK;
fail:
    if (d)
        closedir(d);
    dataset_close(ds);
    return rc;
}

void dataset_close(struct dataset *ds)
{
    for (int i = 0; i < ds->n; i++)
        free(ds->stems[i]);
    free(ds->stems);
    free(ds->labelled);
    ds->stems = NULL;
    ds->labelled = NULL;
    ds->n = 0;
}

int dataset_held_out(const struct dataset *ds, int i, double fraction)
{
    if (fraction <= 0)
        return 0;
    struct sha256_ctx c;
    uint8_t d[SHA256_DIGEST_SIZE];
    sha256_init(&c);
    sha256_update(&c, strlen(ds->stems[i]), (const uint8_t *)ds->stems[i]);
    sha256_digest(&c, sizeof d, d);
    uint64_t v = 0;
    for (int k = 0; k < 8; k++)
        v = v << 8 | d[k];
    return (double)v / 18446744073709551616.0 < fraction;
}
