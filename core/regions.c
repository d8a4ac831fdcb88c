#include "regions.h"

#include <stdlib.h>
#include <string.h>

static int32_t find_root(int32_t *parent, int32_t i)
{
    while (parent[i] != i) {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    return i;
}

static void unite(int32_t *parent, int32_t a, int32_t b)
{
    a = find_root(parent, a);
    b = find_root(parent, b);
    /* the smaller root wins so numbering follows raster order */
    if (a < b)
        parent[b] = a;
    else if (b < a)
        parent[a] = b;
}

static int grow(void **buf, size_t *cap, size_t need, size_t elem)
{
    if (need <= *cap)
        return ST_OK;
    void *p = realloc(*buf, need * elem);
    if (!p)
        return ST_ENOMEM;
    *buf = p;
    *cap = need;
    return ST_OK;
}

void regions_init(struct region_set *rs)
{
    memset(rs, 0, sizeof *rs);
}

void regions_clear(struct region_set *rs)
{
    free(rs->r);
    free(rs->labels);
    free(rs->parent);
    regions_init(rs);
}

/* First pass: provisional labels and their equivalences.  Returns the
 * number of provisional labels. */
static int32_t label_pass(struct region_set *rs, const struct image *cm, const int *is_defect,
                          int nclasses, int connectivity)
{
    const int w = cm->w, h = cm->h;
    int32_t next = 0;
    for (int y = 0; y < h; y++) {
        const uint8_t *row = cm->px + (size_t)y * w;
        const uint8_t *up = y ? row - w : NULL;
        int32_t *lab = rs->labels + (size_t)y * w;
        int32_t *labup = y ? lab - w : NULL;
        for (int x = 0; x < w; x++) {
            int c = row[x];
            lab[x] = -1;
            if (c >= nclasses || !is_defect[c])
                continue;
            int32_t l = -1;
            /* neighbours already visited: W, NW, N, NE (8) or W, N (4) */
            int32_t nb[4];
            int nn = 0;
            if (x && row[x - 1] == c)
                nb[nn++] = lab[x - 1];
            if (up) {
                if (up[x] == c)
                    nb[nn++] = labup[x];
                if (connectivity == 8) {
                    if (x && up[x - 1] == c)
                        nb[nn++] = labup[x - 1];
                    if (x + 1 < w && up[x + 1] == c)
                        nb[nn++] = labup[x + 1];
                }
            }
            for (int i = 0; i < nn; i++) {
                if (l < 0)
                    l = nb[i];
                else
                    unite(rs->parent, l, nb[i]);
            }
            if (l < 0) {
                l = next++;
                rs->parent[l] = l;
            }
            lab[x] = l;
        }
    }
    return next;
}

/* Stable bucket sort by class: inside a class, raster order of first pixel
 * (the region numbering) is kept. */
static int sort_by_class(struct region_set *rs, int nclasses, struct err *e)
{
    if (rs->n < 2)
        return ST_OK;
    struct region *tmp = malloc((size_t)rs->n * sizeof *tmp);
    if (!tmp)
        return err_set(e, ST_ENOMEM, "out of memory sorting %d regions", rs->n);
    int k = 0;
    for (int c = 0; c < nclasses; c++)
        for (int i = 0; i < rs->n; i++)
            if (rs->r[i].cls == c)
                tmp[k++] = rs->r[i];
    memcpy(rs->r, tmp, (size_t)rs->n * sizeof *tmp);
    free(tmp);
    return ST_OK;
}

int regions_find(struct region_set *rs, const struct image *classes, const float *conf,
                 const struct regions_opts *o, struct err *e)
{
    const int *is_defect = o->is_defect, nclasses = o->nclasses, connectivity = o->connectivity;
    if (nclasses < 1 || nclasses > REGIONS_MAX_CLASSES)
        return err_set(e, ST_EINVAL, "%d classes (1..%d expected)", nclasses, REGIONS_MAX_CLASSES);
    const double mm_per_px_x = o->mm_per_px_x, mm_per_px_y = o->mm_per_px_y;
    if (classes->channels != 1)
        return err_set(e, ST_EINVAL, "class map must have one channel");
    if (connectivity != 4 && connectivity != 8)
        return err_set(e, ST_EINVAL, "connectivity %d (4 or 8 expected)", connectivity);
    const size_t npix = (size_t)classes->w * classes->h;
    /* at most one provisional label per pixel */
    if (grow((void **)&rs->labels, &rs->label_cap, npix, sizeof *rs->labels) ||
        grow((void **)&rs->parent, &rs->parent_cap, npix, sizeof *rs->parent))
        return err_set(e, ST_ENOMEM, "out of memory labelling %zu pixels", npix);

    int rc;
    int32_t nlab = label_pass(rs, classes, is_defect, nclasses, connectivity);

    /* Resolve roots to dense region numbers in raster order of first pixel.
     * A root is never larger than its members (unite keeps the smaller), so
     * after flattening, one ascending pass numbers roots before members. */
    for (int32_t l = 0; l < nlab; l++)
        rs->parent[l] = find_root(rs->parent, l);
    int nreg = 0;
    for (int32_t l = 0; l < nlab; l++)
        rs->parent[l] = rs->parent[l] == l ? -(++nreg) : rs->parent[rs->parent[l]];

    if (nreg > rs->cap) {
        struct region *p = realloc(rs->r, (size_t)nreg * sizeof *p);
        if (!p)
            return err_set(e, ST_ENOMEM, "out of memory for %d regions", nreg);
        rs->r = p;
        rs->cap = nreg;
    }
    for (int i = 0; i < nreg; i++) {
        struct region *g = &rs->r[i];
        memset(g, 0, sizeof *g);
        g->x0 = classes->w;
        g->y0 = classes->h;
        g->x1 = g->y1 = -1;
        g->min_conf = 1.0f;
    }
    double *sum = calloc((size_t)(nreg ? nreg : 1) * 3, sizeof *sum);
    if (!sum)
        return err_set(e, ST_ENOMEM, "out of memory for %d regions", nreg);
    for (int y = 0; y < classes->h; y++) {
        for (int x = 0; x < classes->w; x++) {
            size_t i = (size_t)y * classes->w + x;
            int32_t l = rs->labels[i];
            if (l < 0)
                continue;
            int k = -rs->parent[l] - 1;
            struct region *g = &rs->r[k];
            float c = conf ? conf[i] : 1.0f;
            g->cls = classes->px[i];
            g->pixels++;
            if (x < g->x0) g->x0 = x;
            if (x > g->x1) g->x1 = x;
            if (y < g->y0) g->y0 = y;
            if (y > g->y1) g->y1 = y;
            if (c < g->min_conf) g->min_conf = c;
            sum[3 * k] += x;
            sum[3 * k + 1] += y;
            sum[3 * k + 2] += c;
        }
    }
    const double px_area = mm_per_px_x * mm_per_px_y;
    for (int i = 0; i < nreg; i++) {
        struct region *g = &rs->r[i];
        g->cx = sum[3 * i] / g->pixels;
        g->cy = sum[3 * i + 1] / g->pixels;
        g->mean_conf = (float)(sum[3 * i + 2] / g->pixels);
        g->area_mm2 = g->pixels * px_area;
    }
    free(sum);
    rs->n = nreg;
    rc = sort_by_class(rs, nclasses, e);
    for (int i = 0; i < nreg; i++) {
        rs->r[i].id = i + 1;
        rs->r[i].zone = -1;
        rs->r[i].fragments = 1;
    }
    return rc;
}
