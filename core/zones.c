#include "zones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "pngio.h"

struct zone_map {
    int n;
    struct zone z[ZONE_MAX];
    struct image *mask[ZONE_MAX];
    struct image *map;
};

/* A zone's own frame: origin at its centre, turned by its angle (rect and
 * mask); circles and rings need no turn, polygons are written in part mm. */
static void zone_frame(const struct zone *z, double *ox, double *oy, double *c, double *s)
{
    int centred = z->shape != ZONE_POLYGON;
    int turned = z->shape == ZONE_RECT || z->shape == ZONE_MASK;
    double a = turned ? z->angle_deg * acos(-1.0) / 180 : 0;
    *ox = centred ? z->cx : 0;
    *oy = centred ? z->cy : 0;
    *c = cos(a);
    *s = sin(a);
}

static void to_local(const struct zone *z, double u, double v, double *p, double *q)
{
    double ox, oy, c, s;
    zone_frame(z, &ox, &oy, &c, &s);
    double a = u - ox, b = v - oy;
    *p = a * c + b * s;
    *q = -a * s + b * c;
}

/* Even-odd rule, so a self-intersecting outline alternates inside and
 * outside at each crossing; points on a left or bottom edge count as inside
 * (the half-open crossing test). */
static int in_polygon(const struct zone *z, double p, double q)
{
    int in = 0;
    for (int i = 0, j = z->npoints - 1; i < z->npoints; j = i++) {
        double xi = z->pts[i][0], yi = z->pts[i][1], xj = z->pts[j][0], yj = z->pts[j][1];
        if ((yi > q) != (yj > q) && p < xj + (q - yj) * (xi - xj) / (yi - yj))
            in = !in;
    }
    return in;
}

/* The mask's centre pixel corner sits at the zone centre: mask pixel (i, j)
 * covers p in [(i - w/2) s, (i + 1 - w/2) s), rows growing along +v. */
static int in_mask(const struct image *mk, double s, double p, double q)
{
    double fx = floor(p / s + 0.5 * mk->w), fy = floor(q / s + 0.5 * mk->h);
    if (!(fx >= 0 && fy >= 0 && fx < mk->w && fy < mk->h))
        return 0;
    return mk->px[(size_t)fy * mk->w + (size_t)fx] != 0;
}

static inline int inside_local(const struct zone_map *m, int k, double p, double q)
{
    const struct zone *z = &m->z[k];
    double d2 = p * p + q * q;
    switch (z->shape) {
    case ZONE_RECT: return fabs(p) <= 0.5 * z->w && fabs(q) <= 0.5 * z->h;
    case ZONE_CIRCLE: return d2 <= z->r_out * z->r_out;
    case ZONE_RING: return d2 >= z->r_in * z->r_in && d2 <= z->r_out * z->r_out;
    case ZONE_POLYGON: return in_polygon(z, p, q);
    case ZONE_MASK: return in_mask(m->mask[k], z->mask_mm_per_px, p, q);
    }
    return 0;
}

int zone_map_contains(const struct zone_map *m, int z, double u, double v)
{
    if (z < 0 || z >= m->n)
        return 0;
    double p, q;
    to_local(&m->z[z], u, v, &p, &q);
    return inside_local(m, z, p, q);
}

static int polygon_flat(const struct zone *z)
{
    double x0 = z->pts[0][0], y0 = z->pts[0][1], span = 0, cross = 0;
    for (int i = 1; i < z->npoints; i++) {
        double ax = z->pts[i][0] - x0, ay = z->pts[i][1] - y0;
        span = fmax(span, fabs(ax) + fabs(ay));
        for (int j = i + 1; j < z->npoints; j++)
            cross = fmax(cross, fabs(ax * (z->pts[j][1] - y0) - ay * (z->pts[j][0] - x0)));
    }
    return !(cross > 1e-9 * span * span);
}

static int check_zone(const struct zone *z, struct err *e)
{
    const char *n = z->name;
    switch (z->shape) {
    case ZONE_RECT:
        if (!(z->w > 0 && z->h > 0 && isfinite(z->w) && isfinite(z->h)))
            return err_set(e, ST_ERANGE, "zone '%s': rectangle %g x %g mm has no area", n, z->w,
                           z->h);
        break;
    case ZONE_CIRCLE:
        if (!(z->r_out > 0 && isfinite(z->r_out)))
            return err_set(e, ST_ERANGE, "zone '%s': circle radius %g mm is not positive", n,
                           z->r_out);
        break;
    case ZONE_RING:
        if (!(z->r_in >= 0 && z->r_in < z->r_out && isfinite(z->r_out)))
            return err_set(e, ST_ERANGE,
                           "zone '%s': ring needs 0 <= inner radius < outer radius (%g, %g mm)",
                           n, z->r_in, z->r_out);
        break;
    case ZONE_POLYGON:
        if (z->npoints < 3 || z->npoints > ZONE_MAX_POINTS)
            return err_set(e, ST_ERANGE, "zone '%s': polygon has %d points (3..%d)", n,
                           z->npoints, ZONE_MAX_POINTS);
        for (int i = 0; i < z->npoints; i++)
            if (!isfinite(z->pts[i][0]) || !isfinite(z->pts[i][1]))
                return err_set(e, ST_ERANGE, "zone '%s': polygon point %d is not finite", n, i + 1);
        if (polygon_flat(z))
            return err_set(e, ST_ERANGE, "zone '%s': polygon points lie on one line", n);
        break;
    case ZONE_MASK:
        if (!(z->mask_mm_per_px > 0 && isfinite(z->mask_mm_per_px)))
            return err_set(e, ST_ERANGE, "zone '%s': mask pixel size %g mm is not positive", n,
                           z->mask_mm_per_px);
        break;
    default:
        return err_set(e, ST_EINVAL, "zone '%s': unknown shape %d", n, (int)z->shape);
    }
    if (!isfinite(z->cx) || !isfinite(z->cy) || !isfinite(z->angle_deg))
        return err_set(e, ST_ERANGE, "zone '%s': centre or angle is not finite", n);
    return ST_OK;
}

static int load_mask(const struct zone *z, struct image **out, struct err *e)
{
    int rc = pngio_load_label(z->mask_path, 0, out, e);
    if (rc)
        return rc;
    const struct image *mk = *out;
    size_t n = (size_t)mk->w * mk->h;
    for (size_t i = 0; i < n; i++)
        if (mk->px[i])
            return ST_OK;
    image_free(*out);
    *out = NULL;
    return err_set(e, ST_EFORMAT, "%s: mask of zone '%s' has no pixel inside (all zero)",
                   z->mask_path, z->name);
}

int zone_map_new(const struct zone *zones, int n, struct zone_map **out, struct err *e)
{
    *out = NULL;
    if (n < 0 || n > ZONE_MAX)
        return err_set(e, ST_ERANGE, "%d zones (at most %d)", n, ZONE_MAX);
    struct zone_map *m = calloc(1, sizeof *m);
    if (!m)
        return err_set(e, ST_ENOMEM, "out of memory for the zone map");
    int rc = ST_OK;
    for (int k = 0; k < n && !rc; k++) {
        m->z[k] = zones[k];
        m->n = k + 1;
        rc = check_zone(&m->z[k], e);
        if (!rc && m->z[k].shape == ZONE_MASK)
            rc = load_mask(&m->z[k], &m->mask[k], e);
    }
    if (rc) {
        zone_map_free(m);
        return rc;
    }
    *out = m;
    return ST_OK;
}

void zone_map_free(struct zone_map *m)
{
    if (!m)
        return;
    for (int k = 0; k < m->n; k++)
        image_free(m->mask[k]);
    image_free(m->map);
    free(m);
}

const struct image *zone_map_image(const struct zone_map *m)
{
    return m->map;
}

/* The zone's extent as corners in its own frame, then in part mm. */
static int zone_corners(const struct zone_map *m, int k, double pts[][2])
{
    const struct zone *z = &m->z[k];
    double hw, hh;
    switch (z->shape) {
    case ZONE_RECT: hw = 0.5 * z->w; hh = 0.5 * z->h; break;
    case ZONE_MASK:
        hw = 0.5 * m->mask[k]->w * z->mask_mm_per_px;
        hh = 0.5 * m->mask[k]->h * z->mask_mm_per_px;
        break;
    case ZONE_POLYGON:
        memcpy(pts, z->pts, (size_t)z->npoints * sizeof pts[0]);
        return z->npoints;
    default: hw = hh = z->r_out; break;
    }
    double ox, oy, c, s;
    zone_frame(z, &ox, &oy, &c, &s);
    for (int i = 0; i < 4; i++) {
        double p = i & 1 ? hw : -hw, q = i & 2 ? hh : -hh;
        pts[i][0] = ox + p * c - q * s;
        pts[i][1] = oy + p * s + q * c;
    }
    return 4;
}

/* Pixels whose centre may lie in zone k, clamped to the frame; 0 if none. */
static int zone_box(const struct zone_map *m, int k, const struct part_pose *p, int w, int h,
                    double sx, double sy, int box[4])
{
    double pts[ZONE_MAX_POINTS][2];
    int n = zone_corners(m, k, pts);
    double lo_x = INFINITY, lo_y = INFINITY, hi_x = -INFINITY, hi_y = -INFINITY;
    for (int i = 0; i < n; i++) {
        double x, y;
        part_to_image_px(p, sx, sy, pts[i][0], pts[i][1], &x, &y);
        lo_x = fmin(lo_x, x);
        lo_y = fmin(lo_y, y);
        hi_x = fmax(hi_x, x);
        hi_y = fmax(hi_y, y);
    }
    /* clamped while still double: a zone far off the frame must not
     * overflow the conversion to int */
    box[0] = (int)fmin(fmax(0, floor(lo_x) - 1), w);
    box[1] = (int)fmin(fmax(0, floor(lo_y) - 1), h);
    box[2] = (int)fmax(fmin(w - 1, ceil(hi_x) + 1), -1);
    box[3] = (int)fmax(fmin(h - 1, ceil(hi_y) + 1), -1);
    return box[0] <= box[2] && box[1] <= box[3];
}

/* Zone k into the pixels still outside every earlier zone.  The zone frame
 * is an affine function of the pixel position, so a row steps by constants. */
static void paint_zone(struct zone_map *m, int k, const struct part_pose *p, double sx,
                       double sy, const int box[4])
{
    const struct zone *z = &m->z[k];
    double u, v, p0, q0, p1, q1, p2, q2;
    part_to_part_mm(p, sx, sy, 0, 0, &u, &v);
    to_local(z, u, v, &p0, &q0);
    part_to_part_mm(p, sx, sy, 1, 0, &u, &v);
    to_local(z, u, v, &p1, &q1);
    part_to_part_mm(p, sx, sy, 0, 1, &u, &v);
    to_local(z, u, v, &p2, &q2);
    const double px = p1 - p0, qx = q1 - q0, py = p2 - p0, qy = q2 - q0;
    struct image *map = m->map;
    for (int y = box[1]; y <= box[3]; y++) {
        uint8_t *row = map->px + (size_t)y * map->w;
        const double pr = p0 + py * y, qr = q0 + qy * y;
        for (int x = box[0]; x <= box[2]; x++)
            if (row[x] == ZONE_NONE && inside_local(m, k, pr + px * x, qr + qx * x))
                row[x] = (uint8_t)k;
    }
}

int zone_map_paint(struct zone_map *m, const struct part_pose *p, int w, int h,
                   double mm_per_px_x, double mm_per_px_y, struct err *e)
{
    if (!(mm_per_px_x > 0) || !(mm_per_px_y > 0))
        return err_set(e, ST_EINVAL, "pixel scale %g x %g mm is not positive", mm_per_px_x,
                       mm_per_px_y);
    if (!m->map || m->map->w != w || m->map->h != h) {
        struct image *map = image_new(w, h, 1, e);
        if (!map)
            return e ? e->code : ST_ENOMEM;
        image_free(m->map);
        m->map = map;
    }
    memset(m->map->px, ZONE_NONE, (size_t)w * h);
    if (!p->found)
        return ST_OK;
    for (int k = 0; k < m->n; k++) {
        int box[4];
        if (zone_box(m, k, p, w, h, mm_per_px_x, mm_per_px_y, box))
            paint_zone(m, k, p, mm_per_px_x, mm_per_px_y, box);
    }
    return ST_OK;
}
