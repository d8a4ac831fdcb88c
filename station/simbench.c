#include "station/simbench.h"

#include "core/rng.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Only +, -, *, /, sqrt, floor, fabs, ldexp and conversions are used on
 * floating point below, in a fixed order on one thread: they are exactly
 * rounded by IEEE 754, so (with SSE2 arithmetic and no FMA contraction,
 * which -std=c11 implies on x86-64; never -ffast-math) the bytes of a render
 * depend neither on the machine nor on the C library.  libm's sin, cos, exp
 * and pow carry no such promise, hence det_exp, det_sincos and pow_frac. */

#define PI 3.14159265358979323846
#define TAU (2.0 * PI)

#define MIN_SIDE 64
#define MAX_BLUR 8.0
#define KERNEL_MAX_RADIUS 32 /* ceil(4 * MAX_BLUR) */
#define SCRATCH_SEGS 24
#define PART_DEFECTS_MAX 4
_Static_assert(PART_DEFECTS_MAX <= SIMBENCH_MAX_DEFECTS && PART_DEFECTS_MAX < 255,
               "defects must fit the truth list and the 8-bit owner map");
#define NPLANES 9 /* R, G, B, add, smooth, sd, grain A, grain S, work */

/* Frame size the defect sizes of the brief are given for; other sizes scale
 * stain radii and scratch lengths by min(w, h) / REF_SIDE. */
#define REF_SIDE 360.0

enum stream { STREAM_PART = 1, STREAM_GRAIN = 2, STREAM_SENSOR = 3 };


/* splitmix64: one state word, and every (seed, index, stream) its own sequence. */
struct rng {
    uint64_t s;
};

static struct rng rng_make(uint64_t seed, int index, enum stream stream)
{
    uint64_t k = (uint64_t)(int64_t)index * 0x9e3779b97f4a7c15ULL + (uint64_t)stream;
    struct rng r = {rng_mix64(seed ^ rng_mix64(k))};
    return r;
}

static uint64_t rng_next(struct rng *r)
{
    return rng_splitmix64(&r->s);
}

static double sim_uniform(struct rng *r)
{
    return rng_uniform(&r->s);
}

static double rng_range(struct rng *r, double lo, double hi)
{
    return lo + (hi - lo) * sim_uniform(r);
}

/* ratio^u for u in [0, 1), by bisection in the log domain: the geometric
 * mean sqrt(a * b) is the midpoint, and sqrt is exactly rounded (pow is not). */
static double pow_frac(double ratio, double u)
{
    double lo = 1.0, hi = ratio, a = 0.0, b = 1.0;
    for (int i = 0; i < 40; i++) {
        double m = 0.5 * (a + b), v = sqrt(lo * hi);
        if (u < m) {
            hi = v;
            b = m;
        } else {
            lo = v;
            a = m;
        }
    }
    return sqrt(lo * hi);
}

/* Log-uniform: small and large sizes equally likely per octave. */
static double rng_logrange(struct rng *r, double lo, double hi)
{
    return lo * pow_frac(hi / lo, sim_uniform(r));
}

static int rng_int(struct rng *r, int lo, int hi)
{
    return lo + (int)(sim_uniform(r) * (double)(hi - lo + 1));
}

/* Sum of four 16-bit uniforms, scaled to unit variance: one draw per sample,
 * close enough to Gaussian for sensor noise, and no log or sin needed. */
static double rng_gauss(struct rng *r)
{
    uint64_t v = rng_next(r);
    uint64_t s = (v & 0xffff) + ((v >> 16) & 0xffff) + ((v >> 32) & 0xffff) + (v >> 48);
    return ((double)s - 131070.0) * (1.0 / 37837.2268);
}

static double det_exp(double x)
{
    if (x < -700.0)
        return 0.0;
    double k = floor(x * 1.4426950408889634 + 0.5);
    double r = x - k * 0.6931471805599453;
    double t = 1.0, p = 1.0;
    for (int i = 1; i <= 14; i++) {
        t *= r / i;
        p += t;
    }
    return ldexp(p, (int)k);
}

static void det_sincos(double x, double *s, double *c)
{
    double k = floor(x * (2.0 / PI) + 0.5);
    double r = x - k * (PI / 2.0);
    double r2 = r * r;
    double sn = r * (1.0 + r2 * (-1.0 / 6 + r2 * (1.0 / 120 + r2 * (-1.0 / 5040 +
                r2 * (1.0 / 362880 + r2 * (-1.0 / 39916800))))));
    double cs = 1.0 + r2 * (-0.5 + r2 * (1.0 / 24 + r2 * (-1.0 / 720 + r2 * (1.0 / 40320 +
                r2 * (-1.0 / 3628800 + r2 * (1.0 / 479001600))))));
    switch ((int)(k - 4.0 * floor(k / 4.0))) {
    case 0: *s = sn; *c = cs; break;
    case 1: *s = cs; *c = -sn; break;
    case 2: *s = -sn; *c = -cs; break;
    default: *s = -cs; *c = sn; break;
    }
}

static double det_sin(double x)
{
    double s, c;
    det_sincos(x, &s, &c);
    return s;
}

static double clampd(double v, double lo, double hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

static double smoothstep(double e0, double e1, double x)
{
    double t = clampd((x - e0) / (e1 - e0), 0.0, 1.0);
    return t * t * (3.0 - 2.0 * t);
}

/* Value noise in [-1, 1): hashed lattice, smoothstep interpolation. */
static double lattice(int64_t x, int64_t y, uint64_t key)
{
    uint64_t h = rng_mix64(key + (uint64_t)x * 0x9e3779b97f4a7c15ULL + (uint64_t)y * 0xd1b54a32d192ed03ULL);
    return (double)(h >> 11) * 0x1.0p-52 - 1.0;
}

static double fade(double t)
{
    return t * t * (3.0 - 2.0 * t);
}

static double vnoise(double x, double y, uint64_t key)
{
    double fx = floor(x), fy = floor(y);
    double tx = fade(x - fx), ty = fade(y - fy);
    int64_t ix = (int64_t)fx, iy = (int64_t)fy;
    double a = lattice(ix, iy, key), b = lattice(ix + 1, iy, key);
    double c = lattice(ix, iy + 1, key), d = lattice(ix + 1, iy + 1, key);
    return a + (b - a) * tx + (c - a) * ty + (a - b - c + d) * tx * ty;
}

static double vnoise1(double x, uint64_t key)
{
    double fx = floor(x);
    int64_t ix = (int64_t)fx;
    double a = lattice(ix, 0, key), b = lattice(ix + 1, 0, key);
    return a + (b - a) * fade(x - fx);
}

/* Adds amp * (value noise at (x * f, y * f)) to dst[x] for x0 <= x <= x1,
 * fetching each lattice column once per row instead of four times a pixel. */
static void vnoise_row(float *dst, int x0, int x1, int y, double f, uint64_t key, double amp)
{
    double fy = floor(y * f);
    double ty = fade(y * f - fy);
    int64_t iy = (int64_t)fy, cur = INT64_MIN;
    double a = 0.0, b = 0.0, c = 0.0, d = 0.0;
    for (int x = x0; x <= x1; x++) {
        double fx = floor(x * f);
        int64_t ix = (int64_t)fx;
        if (ix != cur) {
            if (ix == cur + 1) {
                a = b;
                c = d;
            } else {
                a = lattice(ix, iy, key);
                c = lattice(ix, iy + 1, key);
            }
            b = lattice(ix + 1, iy, key);
            d = lattice(ix + 1, iy + 1, key);
            cur = ix;
        }
        double tx = fade(x * f - fx);
        dst[x] += (float)(amp * (a + (b - a) * tx + (c - a) * ty + (a - b - c + d) * tx * ty));
    }
}

struct kernel {
    int rad;
    double w[KERNEL_MAX_RADIUS + 1];
};

/* Gaussian truncated at 4 sigma, like scipy.ndimage's default. */
static void kernel_make(double sigma, struct kernel *k)
{
    int rad = (int)ceil(4.0 * sigma);
    k->rad = rad < 1 ? 1 : rad > KERNEL_MAX_RADIUS ? KERNEL_MAX_RADIUS : rad;
    double sum = 0.0;
    for (int i = 0; i <= k->rad; i++) {
        k->w[i] = det_exp(-(double)(i * i) / (2.0 * sigma * sigma));
        sum += i ? 2.0 * k->w[i] : k->w[i];
    }
    for (int i = 0; i <= k->rad; i++)
        k->w[i] /= sum;
}

/* Separable blur of a w x h plane; tmp is another plane and line holds
 * w + 2 * KERNEL_MAX_RADIUS floats.  Borders reflect (d c b a | a b c d);
 * w, h >= MIN_SIDE > rad, so one reflection suffices.  Both passes run
 * along rows with the tap loop outside, so the compiler can vectorise them;
 * float sums in a fixed order keep the result deterministic. */
static int reflect(int i, int n)
{
    return i < 0 ? -i - 1 : i >= n ? 2 * n - i - 1 : i;
}

static void blur_plane(float *p, int w, int h, double sigma, float *tmp, float *line)
{
    struct kernel k;
    kernel_make(sigma, &k);
    float kw[KERNEL_MAX_RADIUS + 1];
    for (int j = 0; j <= k.rad; j++)
        kw[j] = (float)k.w[j];
    float *l = line + k.rad;
    for (int y = 0; y < h; y++) {
        const float *row = p + (size_t)y * w;
        float *o = tmp + (size_t)y * w;
        for (int x = -k.rad; x < w + k.rad; x++)
            l[x] = row[reflect(x, w)];
        for (int x = 0; x < w; x++)
            o[x] = kw[0] * l[x];
        for (int j = 1; j <= k.rad; j++)
            for (int x = 0; x < w; x++)
                o[x] += kw[j] * (l[x - j] + l[x + j]);
    }
    for (int y = 0; y < h; y++) {
        float *o = p + (size_t)y * w;
        const float *c = tmp + (size_t)y * w;
        for (int x = 0; x < w; x++)
            o[x] = kw[0] * c[x];
        for (int j = 1; j <= k.rad; j++) {
            const float *up = tmp + (size_t)reflect(y - j, h) * w;
            const float *dn = tmp + (size_t)reflect(y + j, h) * w;
            for (int x = 0; x < w; x++)
                o[x] += kw[j] * (up[x] + dn[x]);
        }
    }
}

/* Rescales a plane to zero mean, unit standard deviation. */
static void normalise_plane(float *p, size_t n)
{
    double s = 0.0, s2 = 0.0;
    for (size_t i = 0; i < n; i++) {
        s += p[i];
        s2 += (double)p[i] * p[i];
    }
    double mean = s / n, var = s2 / n - mean * mean;
    double inv = var > 0.0 ? 1.0 / sqrt(var) : 0.0;
    for (size_t i = 0; i < n; i++)
        p[i] = (float)((p[i] - mean) * inv);
}

/* The part as drawn: pose, lighting and surface finish. */
struct part {
    double cx, cy, R, rb;       /* centre, outer and bore radius */
    double angle, ca, sa;       /* rotation: notch direction */
    double notch_d, notch_h;    /* notch half depth and half width */
    double lx, ly, grad;        /* ring-light falloff direction and strength */
    double level, tint[3];      /* surface grey level and colour */
    double grain_std;           /* bead-blast grain, grey levels */
    double ring_period, ring_phase, ring_amp, lay_amp;
    double bevel_w, bevel_gain, bevel_dir;
    double mat[3];
    uint64_t key_mottle, key_lay, key_ring;
};

struct defect {
    int cls;
    double x, y, size;          /* anchor; scratch length, pit or stain radius */
    double width, depth, edge;  /* scratch and pit */
    double dark, warm_r, warm_b;/* stain */
    uint64_t key;
    double pts[SCRATCH_SEGS + 1][2];
};

/* Signed distance to the part outline (negative on the surface): the disc
 * minus the bore minus the rectangular orientation notch on the rim. */
static double part_sd(const struct part *p, double x, double y)
{
    double dx = x - p->cx, dy = y - p->cy;
    double r = sqrt(dx * dx + dy * dy);
    double u = dx * p->ca + dy * p->sa, v = -dx * p->sa + dy * p->ca;
    double qx = fabs(u - p->R) - p->notch_d, qy = fabs(v) - p->notch_h;
    double ox = qx > 0.0 ? qx : 0.0, oy = qy > 0.0 ? qy : 0.0;
    double in = qx > qy ? qx : qy;
    double box = sqrt(ox * ox + oy * oy) + (in < 0.0 ? in : 0.0);
    double sd = r - p->R;
    if (p->rb - r > sd)
        sd = p->rb - r;
    if (-box > sd)
        sd = -box;
    return sd;
}

static void part_make(struct part *p, struct rng *r, int w, int h)
{
    double side = w < h ? w : h;
    p->R = 0.31 * side * rng_range(r, 0.96, 1.04);
    p->rb = 0.22 * p->R;
    double margin = 0.04 * side + 2.0;
    p->cx = rng_range(r, p->R + margin, w - 1 - p->R - margin);
    p->cy = rng_range(r, p->R + margin, h - 1 - p->R - margin);
    p->angle = rng_range(r, 0.0, TAU);
    det_sincos(p->angle, &p->sa, &p->ca);
    p->notch_d = 0.09 * p->R;
    p->notch_h = 0.065 * p->R;
    det_sincos(rng_range(r, 0.0, TAU), &p->ly, &p->lx);
    p->grad = rng_range(r, 0.06, 0.125);
    p->level = 172.0 * rng_range(r, 0.9, 1.1);
    p->tint[0] = 1.0 + rng_range(r, -0.05, 0.03);
    p->tint[1] = 1.0;
    p->tint[2] = 1.0 + rng_range(r, -0.02, 0.06);
    p->grain_std = rng_range(r, 8.0, 12.0);
    p->ring_period = rng_range(r, 3.5, 6.0);
    p->ring_phase = rng_range(r, 0.0, TAU);
    p->ring_amp = rng_range(r, 1.0, 2.5);
    p->lay_amp = rng_range(r, 1.5, 3.0);
    p->bevel_w = 0.07 * p->R;
    p->bevel_gain = rng_range(r, -0.08, 0.12);
    p->bevel_dir = rng_range(r, 0.2, 0.35);
    double mv = rng_range(r, 0.9, 1.1);
    p->mat[0] = 34.0 * mv;
    p->mat[1] = 40.0 * mv;
    p->mat[2] = 52.0 * mv;
    p->key_mottle = rng_next(r);
    p->key_lay = rng_next(r);
    p->key_ring = rng_next(r);
}

/* A random point on the surface at least `inset` inside its outline, far
 * from earlier defects where possible. */
static void defect_place(struct defect *d, const struct part *p, const struct defect *prev,
                         int nprev, double inset, struct rng *r)
{
    for (int attempt = 0; attempt < 24; attempt++) {
        double rin = p->rb + inset, rout = p->R - inset;
        double rho = sqrt(rng_range(r, rin * rin, rout * rout));
        double s, c;
        det_sincos(rng_range(r, 0.0, TAU), &s, &c);
        d->x = p->cx + rho * c;
        d->y = p->cy + rho * s;
        if (part_sd(p, d->x, d->y) > -inset)
            continue;
        int clear = 1;
        for (int j = 0; j < nprev; j++) {
            double dx = d->x - prev[j].x, dy = d->y - prev[j].y;
            double need = 0.5 * (d->size + prev[j].size) + 4.0;
            if (dx * dx + dy * dy < need * need)
                clear = 0;
        }
        if (clear)
            return;
    }
}

static void defect_make(struct defect *d, const struct part *p, const struct defect *prev,
                        int nprev, double scale, struct rng *r)
{
    memset(d, 0, sizeof *d);
    d->cls = rng_int(r, SIM_SCRATCH, SIM_STAIN);
    if (d->cls == SIM_SCRATCH) {
        d->size = scale * rng_logrange(r, 15.0, 120.0);
        d->width = rng_range(r, 2.0, 5.0);
        d->depth = p->grain_std * rng_range(r, 3.5, 6.0);
        d->edge = rng_range(r, 0.15, 0.35);
        d->key = rng_next(r);
        double bend = rng_range(r, -0.18, 0.18);
        double s, c;
        det_sincos(rng_range(r, 0.0, TAU), &s, &c);
        defect_place(d, p, prev, nprev, 3.0, r);
        double hx = 0.5 * d->size * c, hy = 0.5 * d->size * s;
        double bx = -bend * d->size * s, by = bend * d->size * c;
        for (int i = 0; i <= SCRATCH_SEGS; i++) {
            double t = (double)i / SCRATCH_SEGS;
            /* quadratic Bezier from centre - h to centre + h through a control
             * point pushed sideways by b: a gentle arc */
            double a0 = (1 - t) * (1 - t), a1 = 2 * t * (1 - t), a2 = t * t;
            d->pts[i][0] = a0 * (d->x - hx) + a1 * (d->x + bx) + a2 * (d->x + hx);
            d->pts[i][1] = a0 * (d->y - hy) + a1 * (d->y + by) + a2 * (d->y + hy);
        }
    } else if (d->cls == SIM_PIT) {
        d->size = rng_logrange(r, 1.5, 9.0);
        d->depth = rng_range(r, 35.0, 70.0);
        d->edge = rng_range(r, 25.0, 50.0);
        defect_place(d, p, prev, nprev, d->size + 1.0, r);
    } else {
        d->size = scale * rng_logrange(r, 12.0, 45.0);
        d->dark = rng_range(r, 0.10, 0.18);
        d->warm_r = rng_range(r, 0.0, 0.03);
        d->warm_b = rng_range(r, 0.01, 0.05);
        d->key = rng_next(r);
        defect_place(d, p, prev, nprev, 0.0, r);
    }
}

/* The layers defects paint before the surface is shaded. */
struct layers {
    int w, h;
    float *mul[3];  /* per-channel colour factor (stains) */
    float *add;     /* grey offset at the part's level (scratches, pits) */
    float *smooth;  /* grain amplitude factor */
    const float *sd;
    uint8_t *truth, *owner;
    float *row;     /* w floats of scratch */
};

static void bbox(const struct layers *L, double x0, double y0, double x1, double y1, int b[4])
{
    b[0] = (int)floor(x0) < 0 ? 0 : (int)floor(x0);
    b[1] = (int)floor(y0) < 0 ? 0 : (int)floor(y0);
    b[2] = (int)ceil(x1) > L->w - 1 ? L->w - 1 : (int)ceil(x1);
    b[3] = (int)ceil(y1) > L->h - 1 ? L->h - 1 : (int)ceil(y1);
}

static void mark(struct layers *L, size_t i, int cls, int id)
{
    if (L->sd[i] < 0.0f) {
        L->truth[i] = (uint8_t)cls;
        L->owner[i] = (uint8_t)(id + 1);
    }
}

static void scratch_draw(struct layers *L, const struct defect *d, int id)
{
    double lo[2] = {d->pts[0][0], d->pts[0][1]}, hi[2] = {lo[0], lo[1]};
    for (int i = 1; i <= SCRATCH_SEGS; i++)
        for (int k = 0; k < 2; k++) {
            lo[k] = d->pts[i][k] < lo[k] ? d->pts[i][k] : lo[k];
            hi[k] = d->pts[i][k] > hi[k] ? d->pts[i][k] : hi[k];
        }
    double m = 0.5 * d->width + 3.0;
    int b[4];
    bbox(L, lo[0] - m, lo[1] - m, hi[0] + m, hi[1] + m, b);
    for (int y = b[1]; y <= b[3]; y++)
        for (int x = b[0]; x <= b[2]; x++) {
            double best = 1e30, bt = 0.0;
            for (int s = 0; s < SCRATCH_SEGS; s++) {
                double ax = d->pts[s][0], ay = d->pts[s][1];
                double ex = d->pts[s + 1][0] - ax, ey = d->pts[s + 1][1] - ay;
                double len2 = ex * ex + ey * ey;
                double t = len2 > 0.0 ? ((x - ax) * ex + (y - ay) * ey) / len2 : 0.0;
                t = clampd(t, 0.0, 1.0);
                double qx = x - ax - t * ex, qy = y - ay - t * ey;
                double dd = qx * qx + qy * qy;
                if (dd < best) {
                    best = dd;
                    bt = (s + t) / SCRATCH_SEGS;
                }
            }
            double dist = sqrt(best);
            /* narrower and shallower towards the ends, as a dragged grain leaves it */
            double taper = clampd(6.0 * (bt < 0.5 ? bt : 1.0 - bt), 0.0, 1.0);
            double hw = 0.5 * d->width * (0.5 + 0.5 * taper);
            if (hw < 0.5)
                hw = 0.5;
            double core = clampd(hw + 0.5 - dist, 0.0, 1.0);
            double e = clampd(1.0 - fabs(dist - hw - 0.9) / 0.9, 0.0, 1.0);
            if (core <= 0.0 && e <= 0.0)
                continue;
            double depth = d->depth * (0.75 + 0.25 * vnoise1(bt * 5.0, d->key)) *
                           (0.6 + 0.4 * taper);
            size_t i = (size_t)y * L->w + x;
            L->add[i] += (float)(-depth * core + depth * d->edge * e);
            L->smooth[i] *= (float)(1.0 - 0.7 * core);
            if (core >= 0.5)
                mark(L, i, SIM_SCRATCH, id);
        }
}

static void pit_draw(struct layers *L, const struct defect *d, const struct part *p, int id)
{
    double m = d->size + 2.5;
    int b[4];
    bbox(L, d->x - m, d->y - m, d->x + m, d->y + m, b);
    for (int y = b[1]; y <= b[3]; y++)
        for (int x = b[0]; x <= b[2]; x++) {
            double dx = x - d->x, dy = y - d->y;
            double dist = sqrt(dx * dx + dy * dy);
            double cover = clampd(d->size + 0.5 - dist, 0.0, 1.0);
            double bowl = 1.0 - (dist / d->size) * (dist / d->size);
            double dark = d->depth * cover * (0.45 + 0.55 * clampd(bowl, 0.0, 1.0));
            /* the crater wall on the lit side catches the ring light */
            double facing = dist > 0.0 ? (dx * p->lx + dy * p->ly) / dist : 0.0;
            double rim = clampd(1.0 - fabs(dist - d->size - 0.2) / 1.2, 0.0, 1.0);
            double lit = d->edge * rim * (facing > 0.0 ? facing : 0.0);
            /* and the wall facing away from it lies in shadow */
            dark *= 1.0 - 0.35 * facing;
            if (cover <= 0.0 && lit <= 0.0)
                continue;
            size_t i = (size_t)y * L->w + x;
            L->add[i] += (float)(lit - dark);
            L->smooth[i] *= (float)(1.0 - 0.8 * cover);
            if (cover >= 0.5)
                mark(L, i, SIM_PIT, id);
        }
}

static void stain_draw(struct layers *L, const struct defect *d, int id)
{
    /* boundary wobble of up to 0.45 radii: the blob extends to 1.7 radii */
    double m = 1.7 * d->size + 1.0;
    int b[4];
    bbox(L, d->x - m, d->y - m, d->x + m, d->y + m, b);
    double fac[3] = {(1.0 - d->dark) * (1.0 + d->warm_r), 1.0 - d->dark,
                     (1.0 - d->dark) * (1.0 - d->warm_b)};
    for (int y = b[1]; y <= b[3]; y++) {
        float *wobble = L->row;
        for (int x = b[0]; x <= b[2]; x++)
            wobble[x] = 0.0f;
        vnoise_row(wobble, b[0], b[2], y, 1.0 / (0.55 * d->size), d->key, 0.32);
        vnoise_row(wobble, b[0], b[2], y, 1.0 / (0.22 * d->size), d->key + 1, 0.13);
        for (int x = b[0]; x <= b[2]; x++) {
            double dx = x - d->x, dy = y - d->y;
            double f = sqrt(dx * dx + dy * dy) / d->size + wobble[x];
            double op = 1.0 - smoothstep(0.72, 1.28, f);
            if (op <= 0.0)
                continue;
            size_t i = (size_t)y * L->w + x;
            for (int c = 0; c < 3; c++)
                L->mul[c][i] *= (float)(1.0 + op * (fac[c] - 1.0));
            L->smooth[i] *= (float)(1.0 - 0.85 * op);
            if (op > 0.5)
                mark(L, i, SIM_STAIN, id);
        }
    }
}

/* Mat, shadow and bore seen through it, then the shaded surface on top. */
static void shade(float *plane[3], const struct layers *L, const struct part *p,
                  const float *grainA, const float *grainS, float *mottle, int lifted)
{
    int w = L->w, h = L->h;
    double hw = 0.5 * w, hh = 0.5 * h, corner2 = hw * hw + hh * hh;
    double shx = p->cx - 0.04 * p->R * p->lx, shy = p->cy - 0.04 * p->R * p->ly;
    double bevel_in = 0.45 * p->bevel_w;
    for (int y = 0; y < h; y++) {
        float *mot = mottle + (size_t)y * w;
        for (int x = 0; x < w; x++)
            mot[x] = 1.0f;
        vnoise_row(mot, 0, w - 1, y, 1.0 / 70.0, p->key_mottle, 0.07);
        vnoise_row(mot, 0, w - 1, y, 1.0 / 19.0, p->key_mottle + 1, 0.05);
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            double vx = x - hw, vy = y - hh;
            double vign = 1.0 - 0.14 * (vx * vx + vy * vy) / corner2;
            double dx = x - p->cx, dy = y - p->cy;
            double r = sqrt(dx * dx + dy * dy);

            double sx = x - shx, sy = y - shy;
            double rs = sqrt(sx * sx + sy * sy);
            double t = clampd((rs - p->R) / (0.16 * p->R), 0.0, 1.0);
            double shadow = lifted                      ? 1.0
                            : r < 0.5 * (p->R + p->rb) ? 0.45
                                                       : 1.0 - 0.4 * (1.0 - t) * (1.0 - t);
            double bg[3];
            for (int c = 0; c < 3; c++)
                bg[c] = p->mat[c] * mot[x] * shadow + 2.6 * grainA[i];

            double cov = clampd(0.5 - L->sd[i], 0.0, 1.0);
            if (cov <= 0.0) {
                for (int c = 0; c < 3; c++)
                    plane[c][i] = (float)(vign * bg[c]);
                continue;
            }
            double nx = r > 0.0 ? dx / r : 0.0, ny = r > 0.0 ? dy / r : 0.0;
            double facing = nx * p->lx + ny * p->ly;
            double rn2 = (r / p->R) * (r / p->R);
            double light = (1.0 + p->grad * (dx * p->lx + dy * p->ly) / p->R) *
                           (1.0 + 0.05 * (1.0 - rn2));
            double to = (p->R - r) / p->bevel_w;
            if (to >= 0.0 && to < 1.0)
                light *= 1.0 + 4.0 * to * (1.0 - to) * (p->bevel_gain + p->bevel_dir * facing);
            if (p->R - r < 1.5)
                light *= 0.8 + 0.2 * clampd((p->R - r) / 1.5, 0.0, 1.0);
            double ti = (r - p->rb) / bevel_in;
            if (ti >= 0.0 && ti < 1.0)
                light *= 1.0 + 4.0 * ti * (1.0 - ti) * (-0.12 - 0.2 * facing);
            double base = p->level * light;

            double u = dx * p->ca + dy * p->sa, v = -dx * p->sa + dy * p->ca;
            double rings = p->ring_amp * det_sin(TAU * r / p->ring_period + p->ring_phase) *
                           (0.6 + 0.4 * vnoise1(r / 25.0, p->key_ring));
            double lay = p->lay_amp * vnoise(u / 16.0, v / 1.3, p->key_lay);
            double grain = (p->grain_std * grainS[i] + rings + lay) * L->smooth[i];
            double g = base + (grain + L->add[i]) * (base / p->level);
            for (int c = 0; c < 3; c++) {
                double s = g * p->tint[c] * L->mul[c][i];
                plane[c][i] = (float)(vign * (cov * s + (1.0 - cov) * bg[c]));
            }
        }
    }
}

void simbench_conditions_nominal(struct simbench_conditions *c)
{
    c->light = 1.0;
    c->noise = 2.5;
    c->blur = 0.7;
    c->defect_rate = 0.7;
}

void simbench_conditions_shifted(struct simbench_conditions *c)
{
    c->light = 0.8;
    c->noise = 4.0;
    c->blur = 1.0;
    c->defect_rate = 0.7;
}

static int in_range(double v, double lo, double hi)
{
    return v >= lo && v <= hi; /* false for NaN */
}

static int check_args(const struct simbench_conditions *cond, int w, int h, struct image **img,
                      struct image **truth, struct err *e)
{
    if (!cond || !img || !truth)
        return err_set(e, ST_EINVAL, "simbench: conditions, image and truth pointers are required");
    if (w < MIN_SIDE || h < MIN_SIDE)
        return err_set(e, ST_ERANGE, "simbench: frame %dx%d is below the %dx%d minimum", w, h,
                       MIN_SIDE, MIN_SIDE);
    if (!in_range(cond->light, 0.01, 4.0))
        return err_set(e, ST_ERANGE, "simbench: light factor %g outside 0.01..4", cond->light);
    if (!in_range(cond->noise, 0.0, 64.0))
        return err_set(e, ST_ERANGE, "simbench: noise %g outside 0..64 grey levels", cond->noise);
    if (!in_range(cond->blur, 0.0, MAX_BLUR))
        return err_set(e, ST_ERANGE, "simbench: blur sigma %g outside 0..%g px", cond->blur,
                       MAX_BLUR);
    if (!in_range(cond->defect_rate, 0.0, 1.0))
        return err_set(e, ST_ERANGE, "simbench: defect rate %g outside 0..1", cond->defect_rate);
    return ST_OK;
}

/* lifted: the same bench with the part taken off (no part, no shadow, no
 * defects), drawn from the same random draws so mat, grain and light match. */
static int render(uint64_t seed, int index, const struct simbench_conditions *cond, int w, int h,
                  int lifted, struct image **img, struct image **truth,
                  struct simbench_truth *info, struct err *e)
{
    if (img)
        *img = NULL;
    if (truth)
        *truth = NULL;
    int rc = check_args(cond, w, h, img, truth, e);
    if (rc)
        return rc;
    struct image *out = NULL, *tr = NULL;
    float *buf = NULL;
    uint8_t *owner = NULL;
    size_t n;
    rc = image_check_size(w, h, 3, &n, e);
    if (rc)
        return rc;
    n /= 3;
    if (n > SIZE_MAX / sizeof(float) / (NPLANES + 1)) {
        rc = err_set(e, ST_ENOMEM, "simbench: %dx%d frame buffers overflow size_t", w, h);
        goto fail;
    }
    out = image_new(w, h, 3, e);
    tr = image_new(w, h, 1, e);
    if (!out || !tr) {
        rc = ST_ENOMEM; /* the size was checked above; image_new filled e */
        goto fail;
    }
    /* one more plane than named for the row scratch: h >= MIN_SIDE makes it
     * hold w + 2 * KERNEL_MAX_RADIUS floats */
    buf = malloc((NPLANES + 1) * n * sizeof *buf);
    owner = calloc(n, 1);
    if (!buf || !owner) {
        rc = err_set(e, ST_ENOMEM, "simbench: out of memory for a %dx%d frame", w, h);
        goto fail;
    }
    float *plane[3] = {buf, buf + n, buf + 2 * n};
    float *add = buf + 3 * n, *smooth = buf + 4 * n, *sd = buf + 5 * n;
    float *grainA = buf + 6 * n, *grainS = buf + 7 * n, *work = buf + 8 * n;
    float *row = buf + NPLANES * n;

    /* Bead-blast grain: white noise at ~1 px plus a coarser ~1.5 px share;
     * plane[0] is free scratch until the defects are drawn. */
    struct rng grng = rng_make(seed, index, STREAM_GRAIN);
    for (size_t i = 0; i < n; i++)
        grainA[i] = (float)rng_gauss(&grng);
    blur_plane(grainA, w, h, 0.6, plane[0], row);
    normalise_plane(grainA, n);
    memcpy(work, grainA, n * sizeof *work);
    blur_plane(work, w, h, 1.2, plane[0], row);
    normalise_plane(work, n);
    for (size_t i = 0; i < n; i++)
        grainS[i] = 0.85f * grainA[i] + 0.45f * work[i];
    normalise_plane(grainS, n);

    struct rng prng = rng_make(seed, index, STREAM_PART);
    struct part p;
    part_make(&p, &prng, w, h);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++)
            sd[(size_t)y * w + x] = lifted ? 1.0f : (float)part_sd(&p, x, y);
    for (size_t i = 0; i < n; i++) {
        plane[0][i] = plane[1][i] = plane[2][i] = 1.0f;
        add[i] = 0.0f;
        smooth[i] = 1.0f;
        tr->px[i] = sd[i] < 0.0f ? SIM_SURFACE : SIM_BACKGROUND;
    }

    /* Defects: the draw for "has defects" always happens, so the rate does
     * not change the pose or defects of other parts; large ones go first so
     * small ones stay visible on top. */
    struct defect def[PART_DEFECTS_MAX];
    int nd = 0;
    if (sim_uniform(&prng) < cond->defect_rate && !lifted) {
        int want = rng_int(&prng, 1, PART_DEFECTS_MAX);
        double scale = (w < h ? w : h) / REF_SIDE;
        for (; nd < want; nd++)
            defect_make(&def[nd], &p, def, nd, scale, &prng);
    }
    for (int a = 1; a < nd; a++)
        for (int b = a; b > 0 && def[b].cls > def[b - 1].cls; b--) {
            struct defect t = def[b];
            def[b] = def[b - 1];
            def[b - 1] = t;
        }
    struct layers L = {w, h, {plane[0], plane[1], plane[2]}, add, smooth, sd, tr->px, owner, row};
    for (int k = 0; k < nd; k++) {
        if (def[k].cls == SIM_STAIN)
            stain_draw(&L, &def[k], k);
        else if (def[k].cls == SIM_PIT)
            pit_draw(&L, &def[k], &p, k);
        else
            scratch_draw(&L, &def[k], k);
    }

    /* shade reads the colour factors from plane[] and overwrites them */
    shade(plane, &L, &p, grainA, grainS, work, lifted);

    for (int c = 0; c < 3 && cond->blur > 0.0; c++)
        blur_plane(plane[c], w, h, cond->blur, work, row);
    /* cond->noise is the std at mid-grey; it grows with the signal like
     * shot noise.  Tabulated per 1/4 grey level: a sqrt per sample costs
     * more than all the shading. */
    float sig[4 * 256 + 1];
    for (int k = 0; k <= 4 * 256; k++)
        sig[k] = (float)(cond->noise * sqrt(0.6 + 0.4 * (k / 4.0) / 128.0));
    struct rng srng = rng_make(seed, index, STREAM_SENSOR);
    for (size_t i = 0; i < n; i++)
        for (int c = 0; c < 3; c++) {
            double v = cond->light * plane[c][i];
            double s = sig[(int)(4.0 * clampd(v, 0.0, 256.0))];
            /* clamped first, so truncation rounds to nearest */
            out->px[i * 3 + c] = (uint8_t)clampd(v + s * rng_gauss(&srng) + 0.5, 0.0, 255.5);
        }

    if (info) {
        memset(info, 0, sizeof *info);
        info->cx = p.cx;
        info->cy = p.cy;
        info->radius = p.R;
        info->bore_radius = p.rb;
        info->angle = p.angle;
        int count[PART_DEFECTS_MAX] = {0};
        for (size_t i = 0; i < n; i++)
            if (owner[i])
                count[owner[i] - 1]++;
        for (int k = 0; k < nd; k++) {
            if (!count[k])
                continue;
            struct simbench_defect *o = &info->defects[info->ndefects++];
            o->cls = def[k].cls;
            o->pixels = count[k];
            o->x = def[k].x;
            o->y = def[k].y;
            o->size = def[k].size;
        }
    }
    free(buf);
    free(owner);
    *img = out;
    *truth = tr;
    return ST_OK;

fail:
    free(buf);
    free(owner);
    image_free(out);
    image_free(tr);
    return rc;
}

int simbench_render(uint64_t seed, int index, const struct simbench_conditions *cond, int w,
                    int h, struct image **img, struct image **truth, struct simbench_truth *info,
                    struct err *e)
{
    return render(seed, index, cond, w, h, 0, img, truth, info, e);
}

int simbench_render_empty(uint64_t seed, int index, const struct simbench_conditions *cond, int w,
                          int h, struct image **img, struct err *e)
{
    struct image *truth = NULL;
    int rc = render(seed, index, cond, w, h, 1, img, &truth, NULL, e);
    image_free(truth);
    return rc;
}
