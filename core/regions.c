#include "regions.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "hull.h"

#define NO_ZONE 255
#define PI 3.14159265358979323846

/* Raw sums of one region (exact integers, so merging fragments adds them
 * without rounding); the centroid and second moments come from them. */
struct moments {
    int64_t x, y, xx, yy, xy;
    double conf;
};

/* What the labelling pass gathers per provisional label; folded into the
 * label's region afterwards, so one pass over the pixels measures all but
 * the final labels. */
struct acc {
    int32_t pixels, x0, x1, y0, y1;
    int32_t head, tail;           /* its row entries, in row order */
    float min_conf;
    uint8_t cls, zone;
    struct moments m;
};

/* A provisional label's leftmost and rightmost pixel in row y. */
struct rowent {
    int32_t y, xl, xr, next;
};

struct bpix {
    int32_t x, y;
};

/* Scratch owned by a region_set: sized to the largest frame and region count
 * seen, reused frame after frame. */
struct regions_work {
    struct acc *acc;              /* per provisional label */
    struct rowent *ent;
    struct moments *mom;          /* per region */
    int32_t *row_off;             /* per region: first entry in rows */
    struct hull_row *rows;        /* per region, per row y0..y1: extreme pixels */
    struct bpix *bnd;             /* merging: boundary pixels, region after region */
    int32_t *bnd_start, *bnd_len; /* per region: its list in bnd (-1: not listed yet) */
    size_t bnd_used;
    int32_t *mparent, *mnext;     /* merging: union-find and member lists */
    int32_t *remap;               /* merging: region to its defect's final index */
    struct hull_row *urows;       /* rows of one merged defect */
    struct hull_buf hb;           /* for hull_measure_feret */
    size_t hb_caps[4];
    size_t acc_cap, ent_cap, mom_cap, off_cap, rows_cap, bnd_cap, bs_cap, bl_cap, mp_cap, mn_cap,
        remap_cap, urows_cap;
};

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
    /* never NULL afterwards, even for nothing (memset and memcpy want it) */
    if (need <= *cap && *buf)
        return ST_OK;
    /* a little headroom so slowly growing counts do not realloc every frame */
    size_t n = need + need / 4 + 16;
    void *p = realloc(*buf, n * elem);
    if (!p)
        return ST_ENOMEM;
    *buf = p;
    *cap = n;
    return ST_OK;
}

#define GROW(buf, cap, need) grow((void **)&(buf), &(cap), (need), sizeof *(buf))

void regions_init(struct region_set *rs)
{
    memset(rs, 0, sizeof *rs);
}

void regions_clear(struct region_set *rs)
{
    struct regions_work *wk = rs->work;
    if (wk) {
        free(wk->acc);
        free(wk->ent);
        free(wk->mom);
        free(wk->row_off);
        free(wk->rows);
        free(wk->bnd_start);
        free(wk->bnd_len);
        free(wk->bnd);
        free(wk->mparent);
        free(wk->mnext);
        free(wk->remap);
        free(wk->urows);
        free(wk->hb.pts);
        free(wk->hb.left);
        free(wk->hb.right);
        free(wk->hb.rows);
        free(wk);
    }
    free(rs->r);
    free(rs->labels);
    free(rs->parent);
    regions_init(rs);
}

/* Adds pixel (x, y) to provisional label l. */
static int add_pixel(struct regions_work *wk, int32_t l, int x, int y, float cf, int zone,
                     size_t *nent)
{
    struct acc *a = &wk->acc[l];
    struct moments *m = &a->m;
    a->pixels++;
    if (x < a->x0) a->x0 = x;
    if (x > a->x1) a->x1 = x;
    a->y1 = y;
    if (cf < a->min_conf) a->min_conf = cf;
    if (zone < a->zone) a->zone = (uint8_t)zone;
    m->x += x;
    m->y += y;
    m->xx += (int64_t)x * x;
    m->yy += (int64_t)y * y;
    m->xy += (int64_t)x * y;
    m->conf += cf;
    /* raster order: the first pixel met in a row is the leftmost */
    if (a->tail >= 0 && wk->ent[a->tail].y == y) {
        wk->ent[a->tail].xr = x;
        return ST_OK;
    }
    if (GROW(wk->ent, wk->ent_cap, *nent + 1))
        return ST_ENOMEM;
    wk->ent[*nent] = (struct rowent){y, x, x, -1};
    if (a->tail >= 0)
        wk->ent[a->tail].next = (int32_t)*nent;
    else
        a->head = (int32_t)*nent;
    a->tail = (int32_t)(*nent)++;
    return ST_OK;
}

/* First pass: provisional labels, their equivalences, and what each label
 * covers.  *nlab receives the number of provisional labels. */
static int label_pass(struct region_set *rs, const struct image *cm, const float *conf,
                      const struct regions_opts *o, int32_t *nlab)
{
    const int w = cm->w, h = cm->h;
    struct regions_work *wk = rs->work;
    int32_t next = 0;
    size_t nent = 0;
    for (int y = 0; y < h; y++) {
        const uint8_t *row = cm->px + (size_t)y * w;
        const uint8_t *up = y ? row - w : NULL;
        const uint8_t *zrow = o->zones ? o->zones->px + (size_t)y * w : NULL;
        const float *crow = conf ? conf + (size_t)y * w : NULL;
        int32_t *lab = rs->labels + (size_t)y * w;
        int32_t *labup = y ? lab - w : NULL;
        for (int x = 0; x < w; x++) {
            int c = row[x];
            lab[x] = -1;
            if (c >= o->nclasses || !o->is_defect[c])
                continue;
            /* Of the neighbours already visited (W, NW, N, NE), those
             * adjacent to each other were united when the later of them
             * was labelled, so only non-adjacent pairs need a union: in 8,
             * N touches all others, and W, NW never touch NE; in 4, W and
             * N do not touch. */
            int w_ = x && row[x - 1] == c, n_ = up && up[x] == c;
            int32_t l = -1;
            if (o->connectivity == 8) {
                int nw = up && x && up[x - 1] == c, ne = up && x + 1 < w && up[x + 1] == c;
                if (n_) {
                    l = labup[x];
                } else if (ne) {
                    l = labup[x + 1];
                    if (w_ || nw)
                        unite(rs->parent, l, w_ ? lab[x - 1] : labup[x - 1]);
                } else if (w_ || nw) {
                    l = w_ ? lab[x - 1] : labup[x - 1];
                }
            } else if (w_) {
                l = lab[x - 1];
                if (n_ && labup[x] != l)
                    unite(rs->parent, l, labup[x]);
            } else if (n_) {
                l = labup[x];
            }
            if (l < 0) {
                if (GROW(wk->acc, wk->acc_cap, (size_t)next + 1))
                    return ST_ENOMEM;
                l = next++;
                rs->parent[l] = l;
                wk->acc[l] = (struct acc){.x0 = x, .x1 = x, .y0 = y, .head = -1, .tail = -1,
                                          .min_conf = INFINITY, .cls = (uint8_t)c,
                                          .zone = NO_ZONE};
            }
            lab[x] = l;
            if (add_pixel(wk, l, x, y, crow ? crow[x] : 1.0f, zrow ? zrow[x] : NO_ZONE, &nent))
                return ST_ENOMEM;
        }
    }
    *nlab = next;
    return ST_OK;
}

/* Dense region numbers ordered by class, then raster order of first pixel:
 * afterwards parent[l] = -(number + 1) for every provisional label.  A root
 * is never larger than its members (unite keeps the smaller), so one
 * ascending pass numbers each root before its members.  Returns the count. */
static int number_regions(struct region_set *rs, int32_t nlab, int nclasses)
{
    int32_t *parent = rs->parent;
    const struct acc *acc = rs->work->acc;
    int next[REGIONS_MAX_CLASSES] = {0};
    for (int32_t l = 0; l < nlab; l++) {
        parent[l] = find_root(parent, l);
        if (parent[l] == l)
            next[acc[l].cls]++;
    }
    int nreg = 0;
    for (int c = 0; c < nclasses; c++) {
        int k = next[c];
        next[c] = nreg;
        nreg += k;
    }
    for (int32_t l = 0; l < nlab; l++)
        parent[l] = parent[l] == l ? -(++next[acc[l].cls]) : parent[parent[l]];
    return nreg;
}

/* Widens a row (xl < 0: empty) to cover xl..xr. */
static void row_add(struct hull_row *r, int32_t xl, int32_t xr)
{
    if (r->xl < 0) {
        r->xl = xl;
        r->xr = xr;
        return;
    }
    if (xl < r->xl)
        r->xl = xl;
    if (xr > r->xr)
        r->xr = xr;
}

/* Each label's counts into its region; then each region's rows (a
 * connected region has pixels in every row from y0 to y1) from the labels'
 * row entries. */
static int fold_labels(struct region_set *rs, int32_t nlab, int nreg)
{
    struct regions_work *wk = rs->work;
    for (int32_t l = 0; l < nlab; l++) {
        const struct acc *a = &wk->acc[l];
        int k = -rs->parent[l] - 1;
        struct region *g = &rs->r[k];
        struct moments *m = &wk->mom[k];
        g->cls = a->cls;
        g->pixels += a->pixels;
        if (a->x0 < g->x0) g->x0 = a->x0;
        if (a->x1 > g->x1) g->x1 = a->x1;
        if (a->y0 < g->y0) g->y0 = a->y0;
        if (a->y1 > g->y1) g->y1 = a->y1;
        if (a->min_conf < g->min_conf) g->min_conf = a->min_conf;
        if (a->zone < g->zone) g->zone = a->zone;
        m->x += a->m.x;
        m->y += a->m.y;
        m->xx += a->m.xx;
        m->yy += a->m.yy;
        m->xy += a->m.xy;
        m->conf += a->m.conf;
    }
    if (GROW(wk->row_off, wk->off_cap, (size_t)nreg + 1))
        return ST_ENOMEM;
    size_t total = 0;
    for (int k = 0; k < nreg; k++) {
        wk->row_off[k] = (int32_t)total;
        total += (size_t)(rs->r[k].y1 - rs->r[k].y0 + 1);
    }
    if (GROW(wk->rows, wk->rows_cap, total))
        return ST_ENOMEM;
    for (size_t t = 0; t < total; t++)
        wk->rows[t].xl = -1;
    for (int32_t l = 0; l < nlab; l++) {
        int k = -rs->parent[l] - 1;
        size_t first = (size_t)wk->row_off[k];
        for (int32_t i = wk->acc[l].head; i >= 0; i = wk->ent[i].next) {
            const struct rowent *t = &wk->ent[i];
            row_add(&wk->rows[first + (size_t)(t->y - rs->r[k].y0)], t->xl, t->xr);
        }
    }
    return ST_OK;
}

/* Final labels: each pixel's region number. */
static void relabel(struct region_set *rs, size_t npix)
{
    for (size_t p = 0; p < npix; p++)
        if (rs->labels[p] >= 0)
            rs->labels[p] = -rs->parent[rs->labels[p]] - 1;
}

/* Region k's pixels with a 4-neighbour inside the frame outside the region,
 * listed on first use (only regions with a neighbour within the gap need
 * them): the only pixels that can be closest to another region (from any
 * pixel a step towards the other region never increases the gap, and the
 * walk leaves the region through a boundary pixel).  Cost: the pixels
 * between its leftmost and rightmost in each row. */
static int region_boundary(struct region_set *rs, int k, int w, int h)
{
    struct regions_work *wk = rs->work;
    if (wk->bnd_start[k] >= 0)
        return ST_OK;
    const struct region *g = &rs->r[k];
    const struct hull_row *rows = wk->rows + wk->row_off[k];
    size_t n = wk->bnd_used;
    for (int y = g->y0; y <= g->y1; y++) {
        const struct hull_row *r = &rows[y - g->y0];
        const int32_t *lab = rs->labels + (size_t)y * w;
        if (GROW(wk->bnd, wk->bnd_cap, n + (size_t)(r->xr - r->xl + 1)))
            return ST_ENOMEM;
        for (int x = r->xl; x <= r->xr; x++) {
            if (lab[x] != k)
                continue;
            if ((!x || lab[x - 1] == k) && (x + 1 == w || lab[x + 1] == k) &&
                (!y || lab[x - w] == k) && (y + 1 == h || lab[x + w] == k))
                continue;
            wk->bnd[n++] = (struct bpix){x, y};
        }
    }
    wk->bnd_start[k] = (int32_t)wk->bnd_used;
    wk->bnd_len[k] = (int32_t)(n - wk->bnd_used);
    wk->bnd_used = n;
    return ST_OK;
}

/* The gap between pixel squares dx, dy pixels apart (centre to centre),
 * compared with the limit squared.  The small relative slack makes a gap
 * equal to the limit merge despite rounding of sx, sy. */
static int within_gap(int dx, int dy, double sx, double sy, double gap2)
{
    dx = abs(dx) - 1;
    dy = abs(dy) - 1;
    double gx = dx > 0 ? dx * sx : 0, gy = dy > 0 ? dy * sy : 0;
    return gx * gx + gy * gy <= gap2 * (1 + 1e-9);
}

/* Whether two regions of one class lie within the gap, edge to edge (-1:
 * out of memory).  The boxes are checked first (their gap is never larger
 * than the regions').  Cost: at worst boundary(a) x boundary(b) pixel pairs,
 * only for pairs whose boxes are within the gap; pixels of a outside b's box
 * grown by the gap are skipped, and the search stops at the first close
 * pair. */
static int regions_close(struct region_set *rs, int a, int b, int w, int h, double sx, double sy,
                         double gap2, int gx, int gy)
{
    const struct region *A = &rs->r[a], *B = &rs->r[b];
    int dx = A->x0 > B->x1 ? A->x0 - B->x1 : B->x0 > A->x1 ? B->x0 - A->x1 : 0;
    int dy = A->y0 > B->y1 ? A->y0 - B->y1 : B->y0 > A->y1 ? B->y0 - A->y1 : 0;
    if (!within_gap(dx, dy, sx, sy, gap2))
        return 0;
    if (region_boundary(rs, a, w, h) || region_boundary(rs, b, w, h))
        return -1;
    const struct regions_work *wk = rs->work;
    const struct bpix *pa = wk->bnd + wk->bnd_start[a], *pb = wk->bnd + wk->bnd_start[b];
    for (int32_t i = 0; i < wk->bnd_len[a]; i++) {
        int ax = pa[i].x, ay = pa[i].y;
        if (ax < B->x0 - gx || ax > B->x1 + gx || ay < B->y0 - gy || ay > B->y1 + gy)
            continue;
        for (int32_t j = 0; j < wk->bnd_len[b]; j++)
            if (within_gap(pb[j].x - ax, pb[j].y - ay, sx, sy, gap2))
                return 1;
    }
    return 0;
}

/* Unites fragments of a class within the class's gap.  Regions of a class
 * are sorted by first pixel, so by y0: the sweep stops at the first region
 * starting further below than the gap reaches.  *merged tells whether any
 * two were united. */
static int merge_pass(struct region_set *rs, const struct regions_opts *o, int w, int h,
                      int nreg, int *merged)
{
    struct regions_work *wk = rs->work;
    *merged = 0;
    if (GROW(wk->mparent, wk->mp_cap, (size_t)nreg))
        return ST_ENOMEM;
    if (GROW(wk->bnd_start, wk->bs_cap, (size_t)nreg) || GROW(wk->bnd_len, wk->bl_cap, (size_t)nreg))
        return ST_ENOMEM;
    for (int i = 0; i < nreg; i++) {
        wk->mparent[i] = i;
        wk->bnd_start[i] = -1;
    }
    wk->bnd_used = 0;
    for (int i = 0; i < nreg; i++) {
        const struct region *A = &rs->r[i];
        double gap = o->merge_gap_mm[A->cls];
        if (!(gap > 0))
            continue;
        double gap2 = gap * gap;
        /* reach of the gap in pixels, generous by one against rounding */
        int gx = (int)fmin(gap / o->mm_per_px_x + 2, w), gy = (int)fmin(gap / o->mm_per_px_y + 2, h);
        for (int j = i + 1; j < nreg && rs->r[j].cls == A->cls && rs->r[j].y0 <= A->y1 + gy; j++) {
            if (find_root(wk->mparent, i) == find_root(wk->mparent, j))
                continue;
            int close = regions_close(rs, i, j, w, h, o->mm_per_px_x, o->mm_per_px_y, gap2, gx, gy);
            if (close < 0)
                return ST_ENOMEM;
            if (close) {
                unite(wk->mparent, i, j);
                *merged = 1;
            }
        }
    }
    return ST_OK;
}

/* Adds fragment j's counts into its root r. */
static void absorb(struct region_set *rs, int r, int j)
{
    struct region *R = &rs->r[r];
    const struct region *J = &rs->r[j];
    struct moments *mr = &rs->work->mom[r];
    const struct moments *mj = &rs->work->mom[j];
    R->pixels += J->pixels;
    R->fragments += J->fragments;
    if (J->x0 < R->x0) R->x0 = J->x0;
    if (J->x1 > R->x1) R->x1 = J->x1;
    if (J->y0 < R->y0) R->y0 = J->y0;
    if (J->y1 > R->y1) R->y1 = J->y1;
    if (J->min_conf < R->min_conf) R->min_conf = J->min_conf;
    if (J->zone < R->zone) R->zone = J->zone;
    mr->x += mj->x;
    mr->y += mj->y;
    mr->xx += mj->xx;
    mr->yy += mj->yy;
    mr->xy += mj->xy;
    mr->conf += mj->conf;
}

/* The rows of a merged defect, before its fragments are folded in: per
 * row, the extremes over its fragments (rows between them stay empty). */
static int union_rows(struct region_set *rs, int root)
{
    struct regions_work *wk = rs->work;
    int y0 = rs->r[root].y0, y1 = rs->r[root].y1;
    for (int j = wk->mnext[root]; j >= 0; j = wk->mnext[j]) {
        if (rs->r[j].y0 < y0)
            y0 = rs->r[j].y0;
        if (rs->r[j].y1 > y1)
            y1 = rs->r[j].y1;
    }
    size_t n = (size_t)(y1 - y0 + 1);
    if (GROW(wk->urows, wk->urows_cap, n))
        return ST_ENOMEM;
    for (size_t t = 0; t < n; t++)
        wk->urows[t].xl = -1;
    for (int j = root; j >= 0; j = wk->mnext[j]) {
        const struct region *J = &rs->r[j];
        const struct hull_row *src = wk->rows + wk->row_off[j];
        struct hull_row *dst = wk->urows + (J->y0 - y0);
        for (int t = 0; t <= J->y1 - J->y0; t++)
            row_add(&dst[t], src[t].xl, src[t].xr);
    }
    return ST_OK;
}

/* Orientation of the major axis of the region's pixels as points in mm,
 * from the second central moments: radians from +x turning towards +y, in
 * (-pi/2, pi/2]; 0 when the moments have no major axis. */
static double orientation(const struct moments *m, int n, double sx, double sy)
{
    double cx = (double)m->x / n, cy = (double)m->y / n;
    double mxx = ((double)m->xx - cx * (double)m->x) * sx * sx;
    double myy = ((double)m->yy - cy * (double)m->y) * sy * sy;
    double mxy = ((double)m->xy - cx * (double)m->y) * sx * sy;
    double a = 0.5 * atan2(2 * mxy, mxx - myy);
    /* atan2(-0, x < 0) is -pi: the same axis as +pi/2 */
    return a <= -PI / 2 ? a + PI : a;
}

/* The Jacobian of pixel -> plane mm at pixel (x, y): the homography's
 * (rows (h0 - u h6, h1 - u h7) / w and (h3 - v h6, h4 - v h7) / w) at the
 * lens-corrected pixel, times the correction's own when there is a lens. */
static void plane_jacobian(const struct regions_opts *o, double x, double y, double j[4])
{
    const double *h = o->image_to_plane;
    double l[4] = {1, 0, 0, 1};
    if (o->lens)
        lensmodel_jacobian(o->lens, x, y, l, &x, &y);
    double w = h[6] * x + h[7] * y + h[8];
    double u = (h[0] * x + h[1] * y + h[2]) / w, v = (h[3] * x + h[4] * y + h[5]) / w;
    double a = (h[0] - u * h[6]) / w, b = (h[1] - u * h[7]) / w;
    double c = (h[3] - v * h[6]) / w, d = (h[4] - v * h[7]) / w;
    j[0] = a * l[0] + b * l[2];
    j[1] = a * l[1] + b * l[3];
    j[2] = c * l[0] + d * l[2];
    j[3] = c * l[1] + d * l[3];
}

/* mm per pixel along image x and y at (x, y): the lengths of the columns
 * of the map's Jacobian there. */
static void local_scale(const struct regions_opts *o, double x, double y, double *sx, double *sy)
{
    double j[4];
    plane_jacobian(o, x, y, j);
    *sx = hypot(j[0], j[2]);
    *sy = hypot(j[1], j[3]);
}

/* Areas through the map: |det J| at each pixel's centre.  Without a lens
 * that is |det H| / |w|^3 (w = h6 x + h7 y + h8), kept in closed form for
 * its speed; with one, the full Jacobian. */
static void plane_areas(struct region_set *rs, const struct regions_opts *o, int w)
{
    const double *h = o->image_to_plane;
    double det = h[0] * (h[4] * h[8] - h[5] * h[7]) - h[1] * (h[3] * h[8] - h[5] * h[6]) +
                 h[2] * (h[3] * h[7] - h[4] * h[6]);
    /* each region's own box, in raster order: the frame's background is
     * never visited and the sums come out as a whole-frame pass would */
    for (int i = 0; i < rs->n; i++) {
        struct region *g = &rs->r[i];
        g->area_mm2 = 0;
        for (int y = g->y0; y <= g->y1; y++) {
            const int32_t *l = rs->labels + (size_t)y * w;
            for (int x = g->x0; x <= g->x1; x++) {
                if (l[x] != i)
                    continue;
                if (o->lens) {
                    double j[4];
                    plane_jacobian(o, x, y, j);
                    g->area_mm2 += fabs(j[0] * j[3] - j[1] * j[2]);
                } else {
                    double q = h[6] * x + h[7] * y + h[8];
                    g->area_mm2 += fabs(det / (q * q * q));
                }
            }
        }
    }
}

/* Everything measured from the (summed) counts and the rows. */
static int measure(struct region_set *rs, int k, const struct hull_row *rows,
                   const struct regions_opts *o)
{
    struct region *g = &rs->r[k];
    const struct moments *m = &rs->work->mom[k];
    double sx = o->mm_per_px_x, sy = o->mm_per_px_y;
    g->cx = (double)m->x / g->pixels;
    g->cy = (double)m->y / g->pixels;
    if (o->image_to_plane)
        local_scale(o, g->cx, g->cy, &sx, &sy);
    g->mean_conf = (float)(m->conf / g->pixels);
    g->area_mm2 = g->pixels * sx * sy;
    g->orientation = orientation(m, g->pixels, sx, sy);
    g->zone = g->zone == NO_ZONE ? -1 : g->zone;
    struct regions_work *wk = rs->work;
    size_t nrows = (size_t)(g->y1 - g->y0 + 1), np = HULL_POINTS(nrows);
    if (GROW(wk->hb.pts, wk->hb_caps[0], np) || GROW(wk->hb.left, wk->hb_caps[1], np) ||
        GROW(wk->hb.right, wk->hb_caps[2], np) || GROW(wk->hb.rows, wk->hb_caps[3], nrows))
        return ST_ENOMEM;
    hull_measure_feret(rows, g->y0, (int)nrows, sx, sy, &wk->hb, &g->length_mm, &g->width_mm);
    return ST_OK;
}

/* Measures every defect, folding merged fragments into the first, and
 * compacts the list; labels are rewritten when anything merged. */
static int finish(struct region_set *rs, const struct regions_opts *o, int w, int h, int nreg,
                  int merged)
{
    struct regions_work *wk = rs->work;
    int rc;
    if (merged) {
        if (GROW(wk->mnext, wk->mn_cap, (size_t)nreg) || GROW(wk->remap, wk->remap_cap, (size_t)nreg))
            return ST_ENOMEM;
        for (int i = 0; i < nreg; i++) {
            wk->mparent[i] = find_root(wk->mparent, i);
            wk->mnext[i] = -1;
        }
        /* each root lists its members in index order */
        for (int i = nreg - 1; i >= 0; i--) {
            int r = wk->mparent[i];
            if (r != i) {
                wk->mnext[i] = wk->mnext[r];
                wk->mnext[r] = i;
            }
        }
    }
    int m = 0;
    for (int i = 0; i < nreg; i++) {
        const struct hull_row *rows = wk->rows + wk->row_off[i];
        if (merged) {
            if (wk->mparent[i] != i)
                continue;
            if (wk->mnext[i] >= 0) {
                if ((rc = union_rows(rs, i)))
                    return rc;
                for (int j = wk->mnext[i]; j >= 0; j = wk->mnext[j])
                    absorb(rs, i, j);
                rows = wk->urows;
            }
            wk->remap[i] = m;
        }
        if ((rc = measure(rs, i, rows, o)))
            return rc;
        /* the measured defect moves down to its final place: every slot
         * below i is already measured or folded into its root */
        if (m != i)
            rs->r[m] = rs->r[i];
        rs->r[m].id = m + 1;
        m++;
    }
    if (merged) {
        size_t npix = (size_t)w * h;
        for (size_t p = 0; p < npix; p++)
            if (rs->labels[p] >= 0)
                rs->labels[p] = wk->remap[wk->mparent[rs->labels[p]]];
    }
    rs->n = m;
    return ST_OK;
}

static int check_opts(const struct image *cm, const struct regions_opts *o, struct err *e)
{
    if (o->nclasses < 1 || o->nclasses > REGIONS_MAX_CLASSES)
        return err_set(e, ST_EINVAL, "%d classes (1..%d expected)", o->nclasses,
                       REGIONS_MAX_CLASSES);
    if (cm->channels != 1)
        return err_set(e, ST_EINVAL, "class map must have one channel");
    if (o->connectivity != 4 && o->connectivity != 8)
        return err_set(e, ST_EINVAL, "connectivity %d (4 or 8 expected)", o->connectivity);
    if (!(o->mm_per_px_x > 0 && o->mm_per_px_y > 0 && isfinite(o->mm_per_px_x) &&
          isfinite(o->mm_per_px_y)))
        return err_set(e, ST_EINVAL, "pixel size %g x %g mm (positive expected)", o->mm_per_px_x,
                       o->mm_per_px_y);
    const struct image *z = o->zones;
    if (z && (z->w != cm->w || z->h != cm->h || z->channels != 1))
        return err_set(e, ST_EINVAL, "zone map is %dx%dx%d, class map %dx%dx1", z->w, z->h,
                       z->channels, cm->w, cm->h);
    return ST_OK;
}

int regions_find(struct region_set *rs, const struct image *classes, const float *conf,
                 const struct regions_opts *o, struct err *e)
{
    int rc = check_opts(classes, o, e);
    if (rc)
        return rc;
    const int w = classes->w, h = classes->h;
    const size_t npix = (size_t)w * h;
    if (!rs->work && !(rs->work = calloc(1, sizeof *rs->work)))
        return err_set(e, ST_ENOMEM, "out of memory labelling %zu pixels", npix);
    struct regions_work *wk = rs->work;
    /* at most one provisional label per pixel */
    if (grow((void **)&rs->labels, &rs->label_cap, npix, sizeof *rs->labels) ||
        grow((void **)&rs->parent, &rs->parent_cap, npix, sizeof *rs->parent))
        return err_set(e, ST_ENOMEM, "out of memory labelling %zu pixels", npix);
    rs->n = 0;

    int32_t nlab;
    if (label_pass(rs, classes, conf, o, &nlab))
        return err_set(e, ST_ENOMEM, "out of memory labelling %zu pixels", npix);
    int nreg = number_regions(rs, nlab, o->nclasses);
    if (nreg > rs->cap) {
        struct region *p = realloc(rs->r, (size_t)nreg * sizeof *p);
        if (!p)
            return err_set(e, ST_ENOMEM, "out of memory for %d regions", nreg);
        rs->r = p;
        rs->cap = nreg;
    }
    if (GROW(wk->mom, wk->mom_cap, (size_t)nreg))
        return err_set(e, ST_ENOMEM, "out of memory for %d regions", nreg);
    for (int i = 0; i < nreg; i++) {
        struct region *g = &rs->r[i];
        memset(g, 0, sizeof *g);
        g->x0 = w;
        g->x1 = -1;
        g->y0 = h;
        g->y1 = -1;
        g->min_conf = INFINITY;
        g->zone = NO_ZONE;
        g->fragments = 1;
    }
    if (nreg) /* wk->mom may still be NULL on a frame without defects */
        memset(wk->mom, 0, (size_t)nreg * sizeof *wk->mom);
    relabel(rs, npix);
    int merged = 0;
    if ((rc = fold_labels(rs, nlab, nreg)) || (rc = merge_pass(rs, o, w, h, nreg, &merged)) ||
        (rc = finish(rs, o, w, h, nreg, merged)))
        return err_set(e, rc, "out of memory measuring %d regions", nreg);
    if (o->image_to_plane)
        plane_areas(rs, o, w);
    return ST_OK;
}
