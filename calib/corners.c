#include "corners.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define SIGMA 1.5
#define RING 5.0
#define RING_N 32
#define SUB_HALF 5
#define PI 3.14159265358979323846

struct cand {
    double x, y, resp;
    int used;
};

struct grid {
    int n, cap;          /* nodes */
    int *ci, *cj, *cand; /* grid index and candidate of each node */
};

static float *grey_of(const struct image *img)
{
    size_t n = (size_t)img->w * img->h;
    float *g = malloc(n * sizeof *g);
    if (!g)
        return NULL;
    for (size_t i = 0; i < n; i++) {
        const uint8_t *p = img->px + i * img->channels;
        g[i] = img->channels >= 3 ? 0.299f * p[0] + 0.587f * p[1] + 0.114f * p[2] : p[0];
    }
    return g;
}

/* separable Gaussian, edges clamped */
static void blur(const float *in, float *out, float *tmp, int w, int h, double sigma)
{
    int r = (int)ceil(3 * sigma);
    float k[32];
    double s = 0;
    for (int i = -r; i <= r; i++)
        s += k[i + r] = (float)exp(-0.5 * i * i / (sigma * sigma));
    for (int i = 0; i <= 2 * r; i++)
        k[i] = (float)(k[i] / s);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float a = 0;
            for (int i = -r; i <= r; i++) {
                int xx = x + i < 0 ? 0 : x + i >= w ? w - 1 : x + i;
                a += k[i + r] * in[(size_t)y * w + xx];
            }
            tmp[(size_t)y * w + x] = a;
        }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            float a = 0;
            for (int i = -r; i <= r; i++) {
                int yy = y + i < 0 ? 0 : y + i >= h ? h - 1 : y + i;
                a += k[i + r] * tmp[(size_t)yy * w + x];
            }
            out[(size_t)y * w + x] = a;
        }
}

static float bilinear(const float *g, int w, int h, double x, double y)
{
    if (x < 0) x = 0;
    if (y < 0) y = 0;
    if (x > w - 1.001) x = w - 1.001;
    if (y > h - 1.001) y = h - 1.001;
    int x0 = (int)x, y0 = (int)y;
    double fx = x - x0, fy = y - y0;
    const float *p = g + (size_t)y0 * w + x0;
    return (float)((1 - fy) * ((1 - fx) * p[0] + fx * p[1]) + fy * ((1 - fx) * p[w] + fx * p[w + 1]));
}

/* four alternations of darker and brighter around the ring */
static int is_x_junction(const float *s, int w, int h, double x, double y)
{
    float v[RING_N], lo = 1e30f, hi = -1e30f;
    double mean = 0;
    for (int i = 0; i < RING_N; i++) {
        double a = 2 * PI * i / RING_N;
        v[i] = bilinear(s, w, h, x + RING * cos(a), y + RING * sin(a));
        mean += v[i];
        if (v[i] < lo) lo = v[i];
        if (v[i] > hi) hi = v[i];
    }
    mean /= RING_N;
    if (hi - lo < 20)
        return 0;
    int changes = 0;
    double asym = 0;
    for (int i = 0; i < RING_N; i++) {
        changes += (v[i] > mean) != (v[(i + 1) % RING_N] > mean);
        asym += fabs(v[i] - v[(i + RING_N / 2) % RING_N]);
    }
    /* an X junction is point-symmetric; a T where a square meets the
     * board's edge is not */
    return changes == 4 && asym / RING_N < 0.25 * (hi - lo);
}

static int find_candidates(const float *s, int w, int h, struct cand **out, int *nout)
{
    size_t n = (size_t)w * h;
    float *r = calloc(n, sizeof *r);
    if (!r)
        return ST_ENOMEM;
    float top = 0;
    for (int y = 1; y < h - 1; y++)
        for (int x = 1; x < w - 1; x++) {
            const float *p = s + (size_t)y * w + x;
            float dxx = p[1] - 2 * p[0] + p[-1], dyy = p[w] - 2 * p[0] + p[-w];
            float dxy = 0.25f * (p[w + 1] - p[w - 1] - p[-w + 1] + p[-w - 1]);
            float v = dxy * dxy - dxx * dyy;
            r[(size_t)y * w + x] = v > 0 ? v : 0;
            if (v > top) top = v;
        }
    int cap = 256, nc = 0;
    struct cand *c = malloc(cap * sizeof *c);
    if (!c) {
        free(r);
        return ST_ENOMEM;
    }
    const int m = (int)ceil(RING) + 2;
    for (int y = m; y < h - m; y++)
        for (int x = m; x < w - m; x++) {
            float v = r[(size_t)y * w + x];
            if (!(v > 0.02f * top))
                continue;
            int peak = 1;
            for (int dy = -3; dy <= 3 && peak; dy++)
                for (int dx = -3; dx <= 3; dx++) {
                    float o = r[(size_t)(y + dy) * w + x + dx];
                    if (o > v || (o == v && (dy < 0 || (dy == 0 && dx < 0)))) {
                        peak = 0;
                        break;
                    }
                }
            if (!peak || !is_x_junction(s, w, h, x, y))
                continue;
            if (nc == cap) {
                struct cand *t = realloc(c, 2 * cap * sizeof *c);
                if (!t) {
                    free(c);
                    free(r);
                    return ST_ENOMEM;
                }
                c = t;
                cap *= 2;
            }
            c[nc++] = (struct cand){x, y, v, 0};
        }
    free(r);
    *out = c;
    *nout = nc;
    return ST_OK;
}

/* Sum over the window of g g^T (q - p) = 0 for the corner q, iterated. */
static void refine(const float *g, int w, int h, double *px, double *py)
{
    double x = *px, y = *py;
    for (int it = 0; it < 30; it++) {
        double a = 0, b = 0, c = 0, bx = 0, by = 0;
        for (int dy = -SUB_HALF; dy <= SUB_HALF; dy++)
            for (int dx = -SUB_HALF; dx <= SUB_HALF; dx++) {
                double qx = x + dx, qy = y + dy;
                double gx = 0.5 * (bilinear(g, w, h, qx + 1, qy) - bilinear(g, w, h, qx - 1, qy));
                double gy = 0.5 * (bilinear(g, w, h, qx, qy + 1) - bilinear(g, w, h, qx, qy - 1));
                double wt = exp(-(dx * dx + dy * dy) / (2.0 * SUB_HALF * SUB_HALF / 4.0));
                double gxx = wt * gx * gx, gxy = wt * gx * gy, gyy = wt * gy * gy;
                a += gxx;
                b += gxy;
                c += gyy;
                bx += gxx * qx + gxy * qy;
                by += gxy * qx + gyy * qy;
            }
        double det = a * c - b * b;
        if (!(fabs(det) > 1e-12))
            break;
        double nx = (c * bx - b * by) / det, ny = (a * by - b * bx) / det;
        double step = hypot(nx - x, ny - y);
        if (step > SUB_HALF)
            break; /* ran away: keep the last good position */
        x = nx;
        y = ny;
        if (step < 0.005)
            break;
    }
    *px = x;
    *py = y;
}

/* Candidates that refined onto the same corner: the strongest stays. */
static int drop_duplicates(struct cand *c, int nc)
{
    int m = 0;
    for (int i = 0; i < nc; i++) {
        int dup = 0;
        for (int k = 0; k < nc && !dup; k++)
            dup = k != i && hypot(c[k].x - c[i].x, c[k].y - c[i].y) < 2.5 &&
                  (c[k].resp > c[i].resp || (c[k].resp == c[i].resp && k < i));
        if (!dup)
            c[m++] = c[i];
    }
    return m;
}

static int nearest(const struct cand *c, int nc, double x, double y, double maxd, int skip)
{
    int best = -1;
    double bd = maxd * maxd;
    for (int i = 0; i < nc; i++) {
        if (c[i].used || i == skip)
            continue;
        double d = (c[i].x - x) * (c[i].x - x) + (c[i].y - y) * (c[i].y - y);
        if (d < bd) {
            bd = d;
            best = i;
        }
    }
    return best;
}

static int node_at(const struct grid *gr, int i, int j)
{
    for (int k = 0; k < gr->n; k++)
        if (gr->ci[k] == i && gr->cj[k] == j)
            return gr->cand[k];
    return -1;
}

static void add_node(struct grid *gr, struct cand *c, int i, int j, int k)
{
    gr->ci[gr->n] = i;
    gr->cj[gr->n] = j;
    gr->cand[gr->n] = k;
    gr->n++;
    c[k].used = 1;
}

/* Grows a grid from seed s; returns the node count. */
static int grow(struct cand *c, int nc, int s, struct grid *gr)
{
    for (int i = 0; i < nc; i++)
        c[i].used = 0;
    gr->n = 0;
    int a = nearest(c, nc, c[s].x, c[s].y, 1e9, s);
    if (a < 0)
        return 0;
    double ux = c[a].x - c[s].x, uy = c[a].y - c[s].y, ul = hypot(ux, uy);
    int b = -1;
    double bd = 1e30;
    for (int i = 0; i < nc; i++) {
        if (i == s || i == a)
            continue;
        double vx = c[i].x - c[s].x, vy = c[i].y - c[s].y, vl = hypot(vx, vy);
        if (fabs(ux * vy - uy * vx) > 0.7 * ul * vl && vl < bd && vl < 2.5 * ul) {
            bd = vl;
            b = i;
        }
    }
    if (b < 0)
        return 0;
    add_node(gr, c, 0, 0, s);
    add_node(gr, c, 1, 0, a);
    add_node(gr, c, 0, 1, b);
    static const int dir[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
    for (int q = 0; q < gr->n && gr->n < gr->cap; q++) {
        int i = gr->ci[q], j = gr->cj[q];
        const struct cand *p = &c[gr->cand[q]];
        for (int d = 0; d < 4 && gr->n < gr->cap; d++) {
            int di = dir[d][0], dj = dir[d][1];
            if (node_at(gr, i + di, j + dj) >= 0)
                continue;
            double sx, sy;
            int back = node_at(gr, i - di, j - dj);
            if (back >= 0) {
                sx = p->x - c[back].x;
                sy = p->y - c[back].y;
            } else {
                /* a neighbour across the step's direction knows it */
                int k0 = -1, k1 = -1;
                for (int side = -1; side <= 1 && k1 < 0; side += 2) {
                    k0 = node_at(gr, i + dj * side, j + di * side);
                    k1 = k0 >= 0 ? node_at(gr, i + dj * side + di, j + di * side + dj) : -1;
                }
                if (k1 < 0)
                    continue;
                sx = c[k1].x - c[k0].x;
                sy = c[k1].y - c[k0].y;
            }
            int k = nearest(c, nc, p->x + sx, p->y + sy, hypot(sx, sy) / 3, -1);
            if (k >= 0)
                add_node(gr, c, i + di, j + dj, k);
        }
    }
    return gr->n;
}

/* Whether the grid holds nodes for every (i, j) in the window. */
static int window_full(const struct grid *gr, int i0, int j0, int ni, int nj)
{
    int got = 0;
    for (int k = 0; k < gr->n; k++)
        got += gr->ci[k] >= i0 && gr->ci[k] < i0 + ni && gr->cj[k] >= j0 && gr->cj[k] < j0 + nj;
    return got == ni * nj;
}

/* Writes the board's corners from the one full cols x rows window of the
 * grid (stray points off the board may have joined it at the sides); 0 when
 * there is none, or more than one to choose from. */
static int order(const struct grid *gr, const struct cand *c, int cols, int rows, double *xy)
{
    int i0 = gr->ci[0], i1 = i0, j0 = gr->cj[0], j1 = j0;
    for (int k = 0; k < gr->n; k++) {
        if (gr->ci[k] < i0) i0 = gr->ci[k];
        if (gr->ci[k] > i1) i1 = gr->ci[k];
        if (gr->cj[k] < j0) j0 = gr->cj[k];
        if (gr->cj[k] > j1) j1 = gr->cj[k];
    }
    int found = 0, wi = 0, wj = 0, swap = 0;
    for (int sw = 0; sw < (cols == rows ? 1 : 2); sw++) {
        int ni = sw ? rows : cols, nj = sw ? cols : rows;
        for (int i = i0; i + ni - 1 <= i1; i++)
            for (int j = j0; j + nj - 1 <= j1; j++)
                if (window_full(gr, i, j, ni, nj)) {
                    found++;
                    wi = i;
                    wj = j;
                    swap = sw;
                }
    }
    if (found != 1)
        return 0;
    for (int k = 0; k < gr->n; k++) {
        int col = swap ? gr->cj[k] - wj : gr->ci[k] - wi;
        int row = swap ? gr->ci[k] - wi : gr->cj[k] - wj;
        if (col < 0 || col >= cols || row < 0 || row >= rows)
            continue;
        xy[2 * (row * cols + col)] = c[gr->cand[k]].x;
        xy[2 * (row * cols + col) + 1] = c[gr->cand[k]].y;
    }
    /* right-handed: flip the rows when column and row axes turn the wrong way */
    double ux = xy[2] - xy[0], uy = xy[3] - xy[1];
    double vx = xy[2 * cols] - xy[0], vy = xy[2 * cols + 1] - xy[1];
    int n = cols * rows;
    if (ux * vy - uy * vx < 0)
        for (int r = 0; r < rows / 2; r++)
            for (int q = 0; q < cols; q++)
                for (int t = 0; t < 2; t++) {
                    double tmp = xy[2 * (r * cols + q) + t];
                    xy[2 * (r * cols + q) + t] = xy[2 * ((rows - 1 - r) * cols + q) + t];
                    xy[2 * ((rows - 1 - r) * cols + q) + t] = tmp;
                }
    /* of the board and its half-turn, the one starting nearer the top-left */
    if (xy[0] + xy[1] > xy[2 * (n - 1)] + xy[2 * (n - 1) + 1])
        for (int k = 0; k < n / 2; k++)
            for (int t = 0; t < 2; t++) {
                double tmp = xy[2 * k + t];
                xy[2 * k + t] = xy[2 * (n - 1 - k) + t];
                xy[2 * (n - 1 - k) + t] = tmp;
            }
    return 1;
}

int corners_find(const struct image *img, int cols, int rows, double *xy, struct err *e)
{
    if (cols < 2 || rows < 2 || cols * rows > CORNERS_MAX)
        return err_set(e, ST_EINVAL, "board %dx%d: need at least 2x2 and at most %d corners", cols,
                       rows, CORNERS_MAX);
    int w = img->w, h = img->h, rc = ST_OK, nc = 0;
    size_t n = (size_t)w * h;
    float *g = grey_of(img), *s = malloc(n * sizeof *s), *t = malloc(n * sizeof *t);
    struct cand *c = NULL;
    struct grid gr = {0, 4 * cols * rows, NULL, NULL, NULL};
    gr.ci = malloc(gr.cap * sizeof(int));
    gr.cj = malloc(gr.cap * sizeof(int));
    gr.cand = malloc(gr.cap * sizeof(int));
    if (!g || !s || !t || !gr.ci || !gr.cj || !gr.cand) {
        rc = err_set(e, ST_ENOMEM, "out of memory finding corners");
        goto fail;
    }
    blur(g, s, t, w, h, SIGMA);
    if ((rc = find_candidates(s, w, h, &c, &nc))) {
        rc = err_set(e, rc, "out of memory finding corners");
        goto fail;
    }
    if (nc < 4) {
        rc = err_set(e, ST_EFORMAT, "no checkerboard found (%d corner-like points)", nc);
        goto fail;
    }
    for (int i = 0; i < nc; i++)
        refine(g, w, h, &c[i].x, &c[i].y);
    nc = drop_duplicates(c, nc);
    /* seeds in order of strength; the largest grid says what was seen */
    int best = 0;
    for (int tries = 0; tries < nc && tries < 40; tries++) {
        int s0 = -1;
        for (int i = 0; i < nc; i++)
            if (c[i].resp >= 0 && (s0 < 0 || c[i].resp > c[s0].resp))
                s0 = i;
        c[s0].resp = -1 - c[s0].resp; /* tried */
        int got = grow(c, nc, s0, &gr);
        if (got > best)
            best = got;
        if (order(&gr, c, cols, rows, xy))
            goto found;
    }
    rc = err_set(e, ST_EFORMAT,
                 "checkerboard %dx%d not found whole: the largest grid of corners has %d points "
                 "(board partly out of view or covered, squares too small, or another size)",
                 cols, rows, best);
    goto fail;
found:
    for (int k = 0; k < cols * rows; k++) {
        double x = xy[2 * k], y = xy[2 * k + 1];
        double d = fmin(fmin(x, y), fmin(w - 1 - x, h - 1 - y));
        if (d < CORNERS_EDGE_PX) {
            rc = err_set(e, ST_EFORMAT,
                         "checkerboard corner at (%.0f, %.0f) is %.0f px from the frame edge "
                         "(at least %d needed): move the board into view",
                         x, y, d, CORNERS_EDGE_PX);
            goto fail;
        }
    }
fail:
    free(g);
    free(s);
    free(t);
    free(c);
    free(gr.ci);
    free(gr.cj);
    free(gr.cand);
    return rc;
}
