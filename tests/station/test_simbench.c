/* Tests for station/simbench: the simulated bench's contract (determinism,
 * truth classes and geometry, defect bookkeeping, conditions) and the
 * demo-data properties the classifier relies on.  The reference for the
 * geometry is the pose simbench_render reports, re-evaluated here with our
 * own formulas; the reference for the data properties is the product brief
 * (cap 0.62 x min(w, h), bore 0.22 of the diameter, pits of a few px,
 * stains up to ~6000 px, shifted light 0.8, colour alone must not separate
 * stain from surface). */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "station/simbench.h"

struct render {
    struct image *img, *truth;
    struct simbench_truth info;
};

static void render(uint64_t seed, int index, const struct simbench_conditions *c, int w, int h,
                   struct render *r)
{
    struct err e = {0};
    int rc = simbench_render(seed, index, c, w, h, &r->img, &r->truth, &r->info, &e);
    if (rc)
        fail_msg("simbench_render: %s", e.msg);
    assert_int_equal(r->img->w, w);
    assert_int_equal(r->img->h, h);
    assert_int_equal(r->img->channels, 3);
    assert_int_equal(r->truth->channels, 1);
}

static void render_free(struct render *r)
{
    image_free(r->img);
    image_free(r->truth);
}

static size_t npix(const struct image *im)
{
    return (size_t)im->w * im->h;
}

static void test_conditions(void **state)
{
    (void)state;
    struct simbench_conditions c;
    /* reference: the brief's nominal and shifted bench conditions */
    simbench_conditions_nominal(&c);
    assert_true(c.light == 1.0 && c.noise == 2.5 && c.blur == 0.7 && c.defect_rate == 0.7);
    simbench_conditions_shifted(&c);
    assert_true(c.light == 0.8 && c.noise == 4.0 && c.blur == 1.0 && c.defect_rate == 0.7);
}

static void test_rejects_bad_arguments(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    struct image *img = (struct image *)&c, *truth = (struct image *)&c;
    struct err e = {0};
    assert_int_equal(simbench_render(1, 0, &c, 63, 100, &img, &truth, NULL, &e), ST_ERANGE);
    assert_null(img);
    assert_null(truth);
    assert_non_null(strstr(e.msg, "63x100"));
    c.light = NAN;
    assert_int_equal(simbench_render(1, 0, &c, 100, 100, &img, &truth, NULL, &e), ST_ERANGE);
    simbench_conditions_nominal(&c);
    c.defect_rate = 1.5;
    assert_int_equal(simbench_render(1, 0, &c, 100, 100, &img, &truth, NULL, &e), ST_ERANGE);
    simbench_conditions_nominal(&c);
    c.blur = 9.0;
    assert_int_equal(simbench_render(1, 0, &c, 100, 100, &img, &truth, NULL, &e), ST_ERANGE);
    assert_int_equal(simbench_render(1, 0, NULL, 100, 100, &img, &truth, NULL, &e), ST_EINVAL);
}

static uint64_t fnv1a(uint64_t h, const uint8_t *p, size_t n)
{
    for (size_t i = 0; i < n; i++)
        h = (h ^ p[i]) * 0x100000001b3ULL;
    return h;
}

static size_t differing(const struct image *a, const struct image *b)
{
    size_t d = 0;
    for (size_t i = 0; i < npix(a) * a->channels; i++)
        d += a->px[i] != b->px[i];
    return d;
}

static void test_deterministic(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    struct render a, b, other, reseed;
    render(11, 3, &c, 131, 97, &a);
    render(11, 3, &c, 131, 97, &b);
    assert_memory_equal(a.img->px, b.img->px, npix(a.img) * 3);
    assert_memory_equal(a.truth->px, b.truth->px, npix(a.truth));
    assert_memory_equal(&a.info, &b.info, sizeof a.info);
    render(11, 4, &c, 131, 97, &other);
    render(12, 3, &c, 131, 97, &reseed);
    /* another part or series: a new pose and fresh noise, so nearly every
     * sample changes (sensor noise alone moves most of them) */
    assert_true(differing(a.img, other.img) > npix(a.img) * 3 / 2);
    assert_true(differing(a.img, reseed.img) > npix(a.img) * 3 / 2);
    assert_true(differing(a.truth, other.truth) > 0);
    render_free(&a);
    render_free(&b);
    render_free(&other);
    render_free(&reseed);
}

/* The bytes must not depend on the machine, the C library or the build
 * (the -O2 and the -O1 sanitizer builds must agree): pinned by a checksum
 * recorded after the last deliberate change of the rendering (defect sizes
 * and contrast for the demo).  Update it only together with a
 * deliberate change of the rendering. */
static void test_golden_checksum(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_shifted(&c);
    struct render r;
    /* a part with a stain, a pit and a scratch, so every drawing path counts */
    render(2024, 18, &c, 161, 119, &r);
    assert_int_equal(r.info.ndefects, 3);
    uint64_t h = fnv1a(0xcbf29ce484222325ULL, r.img->px, npix(r.img) * 3);
    h = fnv1a(h, r.truth->px, npix(r.truth));
    print_message("checksum %016llx\n", (unsigned long long)h);
    assert_true(h == 0x618dd4663f50129dULL);
    render_free(&r);
}

/* Per part: classes are 0..4, surface and defects lie on the cap's annulus
 * as reported by info (re-evaluated here), the background inside the
 * annulus is only the orientation notch at info.angle, and the defect list
 * accounts for every defect pixel. */
static void check_part(const struct render *r)
{
    const struct simbench_truth *t = &r->info;
    int w = r->truth->w, h = r->truth->h;
    int side = w < h ? w : h;
    /* reference: the brief, diameter 0.62 x min(w, h) +-4%, bore 0.22 of it */
    assert_true(t->radius >= 0.31 * side * 0.96 - 1e-9 && t->radius <= 0.31 * side * 1.04 + 1e-9);
    assert_true(fabs(t->bore_radius - 0.22 * t->radius) < 1e-9);
    assert_true(t->cx - t->radius > 0 && t->cx + t->radius < w - 1);
    assert_true(t->cy - t->radius > 0 && t->cy + t->radius < h - 1);
    assert_true(t->ndefects >= 0 && t->ndefects <= SIMBENCH_MAX_DEFECTS);
    long count[SIM_NCLASSES] = {0};
    long annulus = 0, notch = 0;
    double nx = cos(t->angle), ny = sin(t->angle);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            int v = r->truth->px[(size_t)y * w + x];
            assert_in_range(v, 0, SIM_NCLASSES - 1);
            count[v]++;
            double dx = x - t->cx, dy = y - t->cy, rr = sqrt(dx * dx + dy * dy);
            /* 1e-4 px: the renderer stores the outline distance as float */
            if (v != SIM_BACKGROUND)
                assert_true(rr >= t->bore_radius - 1e-4 && rr < t->radius + 1e-4);
            if (rr >= t->bore_radius + 1e-4 && rr < t->radius - 1e-4) {
                annulus++;
                if (v == SIM_BACKGROUND) {
                    notch++;
                    /* the notch is a slot cut into the rim around the angle
                     * (half width 0.065 R, depth 0.09 R) */
                    assert_true(rr > 0.85 * t->radius);
                    assert_true((dx * nx + dy * ny) / rr > 0.97);
                }
            }
        }
    assert_true(notch > 0);
    assert_true(notch < annulus / 50);
    long listed[SIM_NCLASSES] = {0};
    for (int k = 0; k < t->ndefects; k++) {
        const struct simbench_defect *d = &t->defects[k];
        assert_in_range(d->cls, SIM_SCRATCH, SIM_STAIN);
        assert_true(d->pixels > 0);
        listed[d->cls] += d->pixels;
    }
    for (int cls = SIM_SCRATCH; cls <= SIM_STAIN; cls++)
        assert_int_equal(listed[cls], count[cls]);
}

static void test_geometry_and_bookkeeping(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    int clean = 0, defective = 0;
    for (int i = 0; i < 24; i++) {
        struct render r;
        render(5, i, &c, 201 + 2 * i, 157, &r);
        check_part(&r);
        if (r.info.ndefects == 0)
            clean++;
        else
            defective++;
        render_free(&r);
    }
    /* with defect rate 0.7 both kinds occur among 24 parts (p ~ 2e-4 each) */
    assert_true(clean > 0 && defective > 0);

    c.defect_rate = 0.0;
    for (int i = 0; i < 6; i++) {
        struct render r;
        render(6, i, &c, 97, 89, &r);
        check_part(&r);
        assert_int_equal(r.info.ndefects, 0);
        render_free(&r);
    }
    c.defect_rate = 1.0;
    for (int i = 0; i < 6; i++) {
        struct render r;
        render(6, i, &c, 97, 89, &r);
        check_part(&r);
        assert_true(r.info.ndefects >= 1 && r.info.ndefects <= 4);
        render_free(&r);
    }
}

/* Over 200 parts every defect class appears, and the small end of the size
 * range: a tiny pit (< 20 px; pit sizes do not scale with the frame).  At
 * the demo size 480x360 a large stain (> 1000 px) appears within 12 parts. */
static void test_population(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    int seen[SIM_NCLASSES] = {0}, tiny_pit = 0, large_stain = 0, parts_with = 0;
    for (int i = 0; i < 200; i++) {
        struct render r;
        render(77, i, &c, 241, 181, &r);
        parts_with += r.info.ndefects > 0;
        for (int k = 0; k < r.info.ndefects; k++) {
            const struct simbench_defect *d = &r.info.defects[k];
            seen[d->cls]++;
            tiny_pit |= d->cls == SIM_PIT && d->pixels < 20;
        }
        render_free(&r);
    }
    assert_true(seen[SIM_SCRATCH] > 0 && seen[SIM_PIT] > 0 && seen[SIM_STAIN] > 0);
    assert_true(tiny_pit);
    /* defect rate 0.7: 140 expected, binomial std 6.5; +-4 std */
    assert_in_range(parts_with, 114, 166);
    for (int i = 0; i < 12 && !large_stain; i++) {
        struct render r;
        render(78, i, &c, 480, 360, &r);
        for (int k = 0; k < r.info.ndefects; k++)
            large_stain |= r.info.defects[k].cls == SIM_STAIN && r.info.defects[k].pixels > 1000;
        render_free(&r);
    }
    assert_true(large_stain);
}

static double grey(const struct image *im, size_t i)
{
    const uint8_t *p = im->px + 3 * i;
    return (p[0] + p[1] + p[2]) / 3.0;
}

/* Sensor noise, without the texture: the texture is nearly grey while the
 * noise is independent per channel, so the R - G difference minus its 3x3
 * mean is mostly noise.  Over pixels whose 3x3 neighbourhood is all of class
 * cls. */
static double chroma_noise(const struct render *r, int cls)
{
    int w = r->img->w, h = r->img->h;
    double s2 = 0.0;
    long n = 0;
    for (int y = 1; y < h - 1; y++)
        for (int x = 1; x < w - 1; x++) {
            double m = 0.0;
            int ok = 1;
            for (int dy = -1; dy <= 1; dy++)
                for (int dx = -1; dx <= 1; dx++) {
                    size_t j = (size_t)(y + dy) * w + x + dx;
                    ok &= r->truth->px[j] == cls;
                    m += (double)r->img->px[3 * j] - r->img->px[3 * j + 1];
                }
            if (!ok)
                continue;
            size_t i = (size_t)y * w + x;
            double d = (double)r->img->px[3 * i] - r->img->px[3 * i + 1] - m / 9.0;
            s2 += d * d;
            n++;
        }
    assert_true(n > 100);
    return sqrt(s2 / n);
}

static double class_mean(const struct render *r, int cls)
{
    double s = 0.0;
    long n = 0;
    for (size_t i = 0; i < npix(r->truth); i++)
        if (r->truth->px[i] == cls) {
            s += grey(r->img, i);
            n++;
        }
    assert_true(n > 0);
    return s / n;
}

static void test_shifted_darker_and_noisier(void **state)
{
    (void)state;
    struct simbench_conditions nom, shf;
    simbench_conditions_nominal(&nom);
    simbench_conditions_shifted(&shf);
    double lvl_n = 0.0, lvl_s = 0.0, res_n = 0.0, res_s = 0.0;
    for (int i = 0; i < 8; i++) {
        struct render a, b;
        render(31, i, &nom, 241, 181, &a);
        render(31, i, &shf, 241, 181, &b);
        /* same (seed, index) and defect rate: the same part */
        assert_memory_equal(a.truth->px, b.truth->px, npix(a.truth));
        lvl_n += class_mean(&a, SIM_SURFACE);
        lvl_s += class_mean(&b, SIM_SURFACE);
        res_n += chroma_noise(&a, SIM_SURFACE);
        res_s += chroma_noise(&b, SIM_SURFACE);
        render_free(&a);
        render_free(&b);
    }
    /* reference: light factor 0.8 of the brief: 20% darker, +-3% for
     * rounding and clamping */
    assert_true(lvl_s / lvl_n > 0.77 && lvl_s / lvl_n < 0.83);
    /* noise 4.0 against 2.5 grey levels at mid-grey, the surface being
     * 20% darker: 1.55x expected, at least 1.4x required */
    print_message("surface level ratio %.3f, surface noise %.2f -> %.2f\n", lvl_s / lvl_n,
                  res_n / 8, res_s / 8);
    assert_true(res_s > 1.4 * res_n);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

struct sample {
    double *v;
    size_t n, cap;
};

static void sample_push(struct sample *s, double v)
{
    if (s->n == s->cap) {
        s->cap = s->cap ? 2 * s->cap : 4096;
        s->v = realloc(s->v, s->cap * sizeof *s->v);
        assert_non_null(s->v);
    }
    s->v[s->n++] = v;
}

/* On sorted samples. */
static double quantile(const struct sample *s, double q)
{
    return s->v[(size_t)(q * (s->n - 1))];
}

/* Best balanced accuracy (mean of the two class recalls) of any single
 * threshold, either way round, on sorted samples a and b. */
static double best_threshold(const struct sample *a, const struct sample *b)
{
    double best = 0.5;
    size_t i = 0, j = 0;
    while (i < a->n || j < b->n) {
        double t = i < a->n && (j >= b->n || a->v[i] <= b->v[j]) ? a->v[i] : b->v[j];
        while (i < a->n && a->v[i] <= t)
            i++;
        while (j < b->n && b->v[j] <= t)
            j++;
        /* a at or below t, b above it; or the other way round */
        double acc = 0.5 * ((double)i / a->n + 1.0 - (double)j / b->n);
        best = fmax(best, fmax(acc, 1.0 - acc));
    }
    return best;
}

/* Demo-data property check (not a code contract): colour cannot tell a
 * stain from the surface, texture can.  The 10-90% ranges of stain and
 * surface pixels overlap in R, G, B, grey and warmth (R - B), because parts
 * differ in brightness (+-10%), tint and ring-light falloff (up to 25%);
 * inside stains the blasting texture is filled, so the local spread is lower. */
enum { F_R, F_G, F_B, F_GREY, F_WARM, F_LOCALSTD, NFEAT };

static void test_colour_does_not_separate_stains(void **state)
{
    (void)state;
    static const char *names[NFEAT] = {"R", "G", "B", "grey", "R-B", "local std"};
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    c.defect_rate = 1.0;
    struct sample stain[NFEAT] = {{0}}, surf[NFEAT] = {{0}};
    for (int i = 0; i < 24; i++) {
        struct render r;
        render(404, i, &c, 480, 360, &r);
        int w = r.img->w, h = r.img->h;
        for (int y = 2; y < h - 2; y += 2)
            for (int x = 2; x < w - 2; x += 2) {
                size_t j = (size_t)y * w + x;
                int cls = r.truth->px[j];
                if (cls != SIM_STAIN && cls != SIM_SURFACE)
                    continue;
                /* 5x5 grey std, only where the window is all of that class */
                double s = 0.0, s2 = 0.0;
                int same = 1;
                for (int dy = -2; dy <= 2; dy++)
                    for (int dx = -2; dx <= 2; dx++) {
                        size_t k = (size_t)(y + dy) * w + x + dx;
                        same &= r.truth->px[k] == cls;
                        double g = grey(r.img, k);
                        s += g;
                        s2 += g * g;
                    }
                if (!same)
                    continue;
                struct sample *dst = cls == SIM_STAIN ? stain : surf;
                const uint8_t *p = r.img->px + 3 * j;
                sample_push(&dst[F_R], p[0]);
                sample_push(&dst[F_G], p[1]);
                sample_push(&dst[F_B], p[2]);
                sample_push(&dst[F_GREY], grey(r.img, j));
                sample_push(&dst[F_WARM], (double)p[0] - p[2]);
                sample_push(&dst[F_LOCALSTD], sqrt(fmax(0.0, s2 / 25 - (s / 25) * (s / 25))));
            }
        render_free(&r);
    }
    assert_true(stain[0].n > 1000 && surf[0].n > 1000);
    double lo_st[NFEAT], hi_st[NFEAT], lo_su[NFEAT], hi_su[NFEAT], med_st[NFEAT], med_su[NFEAT];
    double sep[NFEAT];
    for (int f = 0; f < NFEAT; f++) {
        qsort(stain[f].v, stain[f].n, sizeof *stain[f].v, cmp_double);
        qsort(surf[f].v, surf[f].n, sizeof *surf[f].v, cmp_double);
        sep[f] = best_threshold(&stain[f], &surf[f]);
        lo_st[f] = quantile(&stain[f], 0.1);
        hi_st[f] = quantile(&stain[f], 0.9);
        med_st[f] = quantile(&stain[f], 0.5);
        lo_su[f] = quantile(&surf[f], 0.1);
        hi_su[f] = quantile(&surf[f], 0.9);
        med_su[f] = quantile(&surf[f], 0.5);
        print_message("%-9s stain %6.1f..%6.1f (median %6.1f)  surface %6.1f..%6.1f (median %6.1f)"
                      "  best threshold %.3f\n", names[f], lo_st[f], hi_st[f], med_st[f], lo_su[f],
                      hi_su[f], med_su[f], sep[f]);
        free(stain[f].v);
        free(surf[f].v);
    }
    for (int f = F_R; f <= F_WARM; f++) {
        assert_true(lo_st[f] < hi_su[f] && lo_su[f] < hi_st[f]);
        /* no colour threshold gets past 88% balanced accuracy (about 0.8
         * when written), so the classifier needs the texture features */
        assert_true(sep[f] < 0.88);
    }
    /* reference: the brief, stains darker by 8-15% and warmer */
    assert_true(med_st[F_GREY] < med_su[F_GREY]);
    assert_true(med_st[F_WARM] > med_su[F_WARM]);
    /* the filled texture: typical stain spread at most 3/4 of the surface's */
    assert_true(med_st[F_LOCALSTD] < 0.75 * med_su[F_LOCALSTD]);
}


/* The bench with the part lifted: by simbench's own shading model the part's
 * shadow reaches 0.16 R beyond the rim (0.04 R offset), so beyond 1.25 R
 * from the centre the two renders must be the same bytes (same mat, grain,
 * vignetting and, with the same random draws, the same sensor noise); on the
 * surface the empty bench must show the mat (34..52 grey levels +-10%, the
 * brief's dark mat), never the part's ~172. */
static void test_empty_bench(void **state)
{
    (void)state;
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    struct render r;
    render(21, 3, &c, 211, 150, &r);
    struct image *empty = NULL;
    struct err e = {0};
    assert_int_equal(simbench_render_empty(21, 3, &c, 211, 150, &empty, &e), ST_OK);
    assert_int_equal(empty->w, 211);
    assert_int_equal(empty->h, 150);
    long far = 0, far_same = 0, surf = 0;
    double surf_grey = 0;
    for (int y = 0; y < 150; y++)
        for (int x = 0; x < 211; x++) {
            size_t i = (size_t)y * 211 + x;
            double dx = x - r.info.cx, dy = y - r.info.cy;
            const uint8_t *a = r.img->px + 3 * i, *b = empty->px + 3 * i;
            if (sqrt(dx * dx + dy * dy) > 1.25 * r.info.radius) {
                far++;
                far_same += !memcmp(a, b, 3);
            }
            if (r.truth->px[i] == SIM_SURFACE) {
                surf++;
                surf_grey += (b[0] + b[1] + b[2]) / 3.0;
            }
        }
    assert_true(far > 1000 && surf > 1000);
    assert_int_equal(far_same, far);
    surf_grey /= (double)surf;
    assert_true(surf_grey > 20 && surf_grey < 70);
    struct image *again = NULL;
    assert_int_equal(simbench_render_empty(21, 3, &c, 211, 150, &again, &e), ST_OK);
    assert_memory_equal(again->px, empty->px, (size_t)211 * 150 * 3);
    image_free(again);
    image_free(empty);
    render_free(&r);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_conditions),
        cmocka_unit_test(test_rejects_bad_arguments),
        cmocka_unit_test(test_deterministic),
        cmocka_unit_test(test_golden_checksum),
        cmocka_unit_test(test_geometry_and_bookkeeping),
        cmocka_unit_test(test_population),
        cmocka_unit_test(test_shifted_darker_and_noisier),
        cmocka_unit_test(test_colour_does_not_separate_stains),
        cmocka_unit_test(test_empty_bench),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
