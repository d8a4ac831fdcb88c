#include "part.h"

#include <math.h>
#include <string.h>

/* Below this ratio of the smaller to the larger eigenvalue of the second
 * moments the axis is trusted.  0.9 is an axis ratio of about 0.95: a round
 * part whose outline the classifier frays by a pixel or two, or which
 * carries a defect at its rim, stays well above it, while a part elongated
 * by 5% or more has an axis that a few pixels cannot swing (our choice, no
 * source). */
#define PART_ISOTROPIC_RATIO 0.9

/* Central moments in mm, accumulated over the bounding box. */
struct moments {
    double m20, m02, m11, m30, m21, m12, m03;
};

/* The next run [*a, *b) of part pixels at or after x in row[0..end); 0 when
 * none.  Background is skipped a word at a time: most of a frame is bench. */
static int next_run(const uint8_t *row, int x, int end, int *a, int *b)
{
    while (x + 8 <= end) {
        uint64_t word;
        memcpy(&word, row + x, sizeof word);
        if (word)
            break;
        x += 8;
    }
    while (x < end && !row[x])
        x++;
    if (x >= end)
        return 0;
    *a = x;
    while (x < end && row[x])
        x++;
    *b = x;
    return 1;
}

/* Per row, sums of a, a^2, a^3 over its part pixels; the row's b is
 * constant, so the cross terms follow from them. */
static void central_moments(const struct image *c, const struct part_pose *p, double sx,
                            double sy, struct moments *m)
{
    memset(m, 0, sizeof *m);
    for (int y = p->y0; y <= p->y1; y++) {
        const uint8_t *row = c->px + (size_t)y * c->w;
        const double b = (y - p->cy) * sy;
        double n = 0, s1 = 0, s2 = 0, s3 = 0;
        int x = p->x0, ra, rb;
        while (next_run(row, x, p->x1 + 1, &ra, &rb)) {
            for (int k = ra; k < rb; k++) {
                double a = (k - p->cx) * sx;
                s1 += a;
                s2 += a * a;
                s3 += a * a * a;
            }
            n += rb - ra;
            x = rb;
        }
        m->m20 += s2;
        m->m11 += b * s1;
        m->m02 += n * b * b;
        m->m30 += s3;
        m->m21 += b * s2;
        m->m12 += b * b * s1;
        m->m03 += n * b * b * b;
    }
    double n = (double)p->pixels;
    m->m20 /= n;
    m->m02 /= n;
    m->m11 /= n;
}

int part_locate(const struct image *classes, double mm_per_px_x, double mm_per_px_y,
                enum part_orient orient, struct part_pose *p, struct err *e)
{
    memset(p, 0, sizeof *p);
    if (classes->channels != 1)
        return err_set(e, ST_EINVAL, "class map must have one channel");
    if (!(mm_per_px_x > 0) || !(mm_per_px_y > 0))
        return err_set(e, ST_EINVAL, "pixel scale %g x %g mm is not positive", mm_per_px_x,
                       mm_per_px_y);
    const int w = classes->w, h = classes->h;
    double sum_x = 0, sum_y = 0;
    p->x0 = w;
    p->y0 = h;
    p->x1 = p->y1 = -1;
    for (int y = 0; y < h; y++) {
        const uint8_t *row = classes->px + (size_t)y * w;
        long n = 0, rx = 0;
        int x = 0, a, b;
        while (next_run(row, x, w, &a, &b)) {
            if (!n && a < p->x0)
                p->x0 = a;
            n += b - a;
            rx += ((long)a + b - 1) * (b - a) / 2;
            x = b;
        }
        if (!n)
            continue;
        if (x - 1 > p->x1)
            p->x1 = x - 1;
        if (y < p->y0) p->y0 = y;
        p->y1 = y;
        p->pixels += n;
        sum_x += (double)rx;
        sum_y += (double)n * y;
    }
    if (!p->pixels) {
        memset(p, 0, sizeof *p);
        return ST_OK;
    }
    p->found = 1;
    p->area_mm2 = p->pixels * mm_per_px_x * mm_per_px_y;
    p->cx = sum_x / p->pixels;
    p->cy = sum_y / p->pixels;
    int gx = p->x0 < w - 1 - p->x1 ? p->x0 : w - 1 - p->x1;
    int gy = p->y0 < h - 1 - p->y1 ? p->y0 : h - 1 - p->y1;
    p->border_gap = gx < gy ? gx : gy;

    struct moments m;
    central_moments(classes, p, mm_per_px_x, mm_per_px_y, &m);
    double mean = 0.5 * (m.m20 + m.m02);
    double dev = sqrt(0.25 * (m.m20 - m.m02) * (m.m20 - m.m02) + m.m11 * m.m11);
    double l1 = mean + dev, l2 = mean - dev > 0 ? mean - dev : 0;
    p->major_mm = 4 * sqrt(l1);
    p->minor_mm = 4 * sqrt(l2);
    p->isotropic = !(l2 < PART_ISOTROPIC_RATIO * l1);
    if (orient == PART_ORIENT_FIXED || p->isotropic)
        return ST_OK;
    double t = 0.5 * atan2(2 * m.m11, m.m20 - m.m02);
    double c = cos(t), s = sin(t);
    /* third moment of the projections a*c + b*s onto the axis */
    double m3 = c * c * c * m.m30 + 3 * c * c * s * m.m21 + 3 * c * s * s * m.m12 + s * s * s * m.m03;
    if (m3 < 0)
        t = t > 0 ? t - acos(-1.0) : t + acos(-1.0);
    p->angle = t;
    return ST_OK;
}

void part_to_part_mm(const struct part_pose *p, double mm_per_px_x, double mm_per_px_y,
                     double x, double y, double *u, double *v)
{
    double a = (x - p->cx) * mm_per_px_x, b = (y - p->cy) * mm_per_px_y;
    double c = cos(p->angle), s = sin(p->angle);
    *u = a * c + b * s;
    *v = -a * s + b * c;
}

void part_to_image_px(const struct part_pose *p, double mm_per_px_x, double mm_per_px_y,
                      double u, double v, double *x, double *y)
{
    double c = cos(p->angle), s = sin(p->angle);
    *x = p->cx + (u * c - v * s) / mm_per_px_x;
    *y = p->cy + (u * s + v * c) / mm_per_px_y;
}
