#include "hull.h"

#include <math.h>

static void emit(struct hull_pt *p, size_t *n, int32_t l, int32_t r, int32_t y)
{
    p[(*n)++] = (struct hull_pt){l, y};
    if (r != l)
        p[(*n)++] = (struct hull_pt){r, y};
}

/* The edge midpoints that can be on the hull, sorted by (y, x): per
 * half-row level only the leftmost and rightmost.  Level 2y holds the side
 * midpoints of row y, level 2y - 1 the top midpoints of row y and the bottom
 * ones of row y - 1. */
static size_t level_points(struct hull_pt *p, const struct hull_row *rows, int y0, int nrows)
{
    size_t n = 0;
    for (int t = 0; t <= nrows; t++) {
        const struct hull_row *a = t ? &rows[t - 1] : NULL, *b = t < nrows ? &rows[t] : NULL;
        if (a && a->xl < 0)
            a = NULL;
        if (b && b->xl < 0)
            b = NULL;
        int32_t y = 2 * (y0 + t);
        if (a && b)
            emit(p, &n, 2 * (a->xl < b->xl ? a->xl : b->xl), 2 * (a->xr > b->xr ? a->xr : b->xr),
                 y - 1);
        else if (a || b)
            emit(p, &n, 2 * (a ? a : b)->xl, 2 * (a ? a : b)->xr, y - 1);
        if (b)
            emit(p, &n, 2 * b->xl - 1, 2 * b->xr + 1, y);
    }
    return n;
}

/* z of (a - o) x (b - o) in the (y, x) plane the points are sorted in */
static int64_t turn(struct hull_pt o, struct hull_pt a, struct hull_pt b)
{
    return (int64_t)(a.y - o.y) * (b.x - o.x) - (int64_t)(a.x - o.x) * (b.y - o.y);
}

/* Andrew's monotone chain over points sorted by (y, x): the left chain
 * (smallest x side) and the right chain, both from the first point to the
 * last, collinear points dropped. */
static void chains(const struct hull_pt *p, size_t n, struct hull_pt *l, size_t *nl,
                   struct hull_pt *r, size_t *nr)
{
    size_t a = 0, b = 0;
    for (size_t i = 0; i < n; i++) {
        while (a >= 2 && turn(l[a - 2], l[a - 1], p[i]) <= 0)
            a--;
        l[a++] = p[i];
        while (b >= 2 && turn(r[b - 2], r[b - 1], p[i]) >= 0)
            b--;
        r[b++] = p[i];
    }
    *nl = a;
    *nr = b;
}

static int64_t floor_div(int64_t a, int64_t b)
{
    int64_t q = a / b;
    return q - (a % b != 0 && (a < 0) != (b < 0));
}

static int64_t ceil_div(int64_t a, int64_t b)
{
    return -floor_div(-a, b);
}

/* x on the chain at level y (strictly between its ends) as num / den, den > 0;
 * *i walks forward as y increases. */
static void chain_x(const struct hull_pt *c, size_t *i, int32_t y, int64_t *num, int64_t *den)
{
    while (c[*i + 1].y < y)
        (*i)++;
    struct hull_pt p = c[*i], q = c[*i + 1];
    *den = q.y - p.y;
    *num = (int64_t)p.x * *den + (int64_t)(y - p.y) * (q.x - p.x);
}

static void hull_of_rows(const struct hull_buf *b, const struct hull_row *rows, int y0,
                         int nrows, size_t *nl, size_t *nr)
{
    size_t n = level_points(b->pts, rows, y0, nrows);
    chains(b->pts, n, b->left, nl, b->right, nr);
}

void hull_measure_feret(const struct hull_row *rows, int y0, int nrows, double sx, double sy,
                        const struct hull_buf *b, double *length, double *width)
{
    size_t nl, nr;
    hull_of_rows(b, rows, y0, nrows, &nl, &nr);
    /* step 2: the hull image, row by row (its rows are those of the set:
     * K spans levels 2 y0 - 1 to 2 y1 + 1, pixel centres lie on even levels) */
    size_t il = 0, ir = 0;
    for (int t = 0; t < nrows; t++) {
        int64_t num, den;
        int32_t y = 2 * (y0 + t);
        chain_x(b->left, &il, y, &num, &den);
        b->rows[t].xl = (int32_t)ceil_div(num, 2 * den);
        chain_x(b->right, &ir, y, &num, &den);
        b->rows[t].xr = (int32_t)floor_div(num, 2 * den);
    }
    /* step 3: the hull image's own hull, as one polygon in mm */
    hull_of_rows(b, b->rows, y0, nrows, &nl, &nr);
    struct hull_pt *poly = b->pts;
    size_t h = 0;
    for (size_t i = 0; i < nl; i++)
        poly[h++] = b->left[i];
    for (size_t i = nr - 1; i-- > 1;)
        poly[h++] = b->right[i];
    double best = 0, narrow = INFINITY;
    for (size_t i = 0; i < h; i++) {
        double px = poly[i].x * 0.5 * sx, py = poly[i].y * 0.5 * sy;
        size_t i1 = (i + 1) % h;
        double ex = poly[i1].x * 0.5 * sx - px, ey = poly[i1].y * 0.5 * sy - py;
        double elen = hypot(ex, ey), far = 0;
        for (size_t j = 0; j < h; j++) {
            double dx = poly[j].x * 0.5 * sx - px, dy = poly[j].y * 0.5 * sy - py;
            double d2 = dx * dx + dy * dy;
            if (d2 > best)
                best = d2;
            double off = fabs(ex * dy - ey * dx);
            if (off > far)
                far = off;
        }
        if (elen > 0 && far / elen < narrow)
            narrow = far / elen;
    }
    *length = sqrt(best);
    *width = h >= 3 ? narrow : 0;
}
