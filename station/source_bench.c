#include "source_bench.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "simbench.h"
#include "cli.h"

#define GTAB_BITS 16

/* One part's pictures: the part on the bench, the bench without it, and
 * the pixels where they differ. */
struct scene {
    int index;
    struct image *part, *empty;
    uint8_t *foot;
    int rc;
    struct err e;
};

struct bench {
    int w, h;
    uint64_t seed;
    long parts;                      /* < 0: no end */
    long lost_start, lost_count, frozen_start, frozen_count;
    struct simbench_conditions cond; /* noise 0: the noise is added per frame */
    int sig256[256];                 /* noise std at each grey level, x 256 */
    int16_t *gtab;                   /* unit Gaussian samples x 256 */
    uint64_t tick, delivered;
    struct scene cur, next;
    pthread_t thread;
    int prefetching;
    struct image *frame;
    int have_frame;
    struct source_pace pace;
    double fps;
    char describe[160];
};

static uint64_t splitmix(uint64_t *s)
{
    uint64_t z = (*s += 0x9e3779b97f4a7c15ull);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
    return z ^ (z >> 31);
}

static void scene_clear(struct scene *s)
{
    image_free(s->part);
    image_free(s->empty);
    free(s->foot);
    memset(s, 0, sizeof *s);
    s->index = -1;
}

static void scene_render(struct bench *b, struct scene *s)
{
    struct image *truth = NULL;
    s->rc = simbench_render(b->seed, s->index, &b->cond, b->w, b->h, &s->part, &truth, NULL,
                            &s->e);
    image_free(truth);
    if (!s->rc)
        s->rc = simbench_render_empty(b->seed, s->index, &b->cond, b->w, b->h, &s->empty, &s->e);
    size_t n = (size_t)b->w * b->h;
    if (!s->rc && !(s->foot = malloc(n)))
        s->rc = err_set(&s->e, ST_ENOMEM, "bench: out of memory for part %d", s->index);
    for (size_t i = 0; !s->rc && i < n; i++)
        s->foot[i] = memcmp(s->part->px + 3 * i, s->empty->px + 3 * i, 3) != 0;
}

static void *prefetch_main(void *arg)
{
    struct bench *b = arg;
    scene_render(b, &b->next);
    return NULL;
}

static void prefetch_join(struct bench *b)
{
    if (b->prefetching)
        pthread_join(b->thread, NULL);
    b->prefetching = 0;
}

/* Makes part `index` current: the prefetched one when it is that part. */
static int scene_load(struct bench *b, int index, struct err *e)
{
    if (b->cur.index == index)
        return ST_OK;
    prefetch_join(b);
    scene_clear(&b->cur);
    if (b->next.index == index) {
        b->cur = b->next;
        memset(&b->next, 0, sizeof b->next);
        b->next.index = -1;
    } else {
        scene_clear(&b->next);
        b->cur.index = index;
        scene_render(b, &b->cur);
    }
    if (b->cur.rc) {
        int rc = err_set(e, b->cur.rc, "%s", b->cur.e.msg);
        scene_clear(&b->cur);
        return rc;
    }
    if (b->parts < 0 || index + 1 < b->parts) {
        b->next.index = index + 1;
        b->prefetching = pthread_create(&b->thread, NULL, prefetch_main, b) == 0;
        if (!b->prefetching)
            b->next.index = -1; /* rendered in line when its turn comes */
    }
    return ST_OK;
}

/* The part shifted by dx over the empty bench. */
static void compose_shifted(struct bench *b, int dx)
{
    const struct scene *s = &b->cur;
    int w = b->w;
    for (int y = 0; y < b->h; y++) {
        size_t row = (size_t)y * w;
        memcpy(b->frame->px + 3 * row, s->empty->px + 3 * row, 3 * (size_t)w);
        for (int x = dx > 0 ? dx : 0; x < w && x - dx < w; x++) {
            size_t src = row + (size_t)(x - dx);
            if (s->foot[src])
                memcpy(b->frame->px + 3 * (row + x), s->part->px + 3 * src, 3);
        }
    }
}

static void add_noise(struct bench *b, uint64_t t)
{
    uint64_t st = b->seed * 0x2545f4914f6cdd1dull ^ t;
    size_t rowlen = 3 * (size_t)b->w;
    const uint32_t mask = (1u << GTAB_BITS) - 1;
    for (int y = 0; y < b->h; y++) {
        uint8_t *p = b->frame->px + rowlen * y;
        uint32_t off = (uint32_t)splitmix(&st);
        for (size_t j = 0; j < rowlen; j++) {
            int v = p[j];
            int32_t d = b->sig256[v] * b->gtab[(off + j) & mask];
            /* rounded d / 65536 without a branch on its sign (a coin toss
             * per sample the branch predictor loses): offset into unsigned */
            v += (int)((uint32_t)(d + (1 << 30) + 32768) >> 16) - (1 << 14);
            p[j] = (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : v);
        }
    }
}

static void compose(struct bench *b, uint64_t t, struct source_frame *f)
{
    long cycle = (long)(t / SOURCE_BENCH_CYCLE);
    int k = (int)(t % SOURCE_BENCH_CYCLE);
    int over = b->parts >= 0 && cycle >= b->parts;
    int travel = b->w; /* the footprint starts and ends wholly outside the frame */
    if (over || k < SOURCE_BENCH_EMPTY) {
        memcpy(b->frame->px, b->cur.empty->px, (size_t)b->w * b->h * 3);
        snprintf(f->name, sizeof f->name, "bench:%llu:empty", (unsigned long long)b->seed);
    } else {
        k -= SOURCE_BENCH_EMPTY;
        if (k < SOURCE_BENCH_SLIDE)
            compose_shifted(b, -(SOURCE_BENCH_SLIDE - k) * travel / SOURCE_BENCH_SLIDE);
        else if (k < SOURCE_BENCH_SLIDE + SOURCE_BENCH_STILL)
            memcpy(b->frame->px, b->cur.part->px, (size_t)b->w * b->h * 3);
        else
            compose_shifted(b, (k - SOURCE_BENCH_SLIDE - SOURCE_BENCH_STILL + 1) * travel /
                                   SOURCE_BENCH_SLIDE);
        snprintf(f->name, sizeof f->name, "bench:%llu:%ld", (unsigned long long)b->seed, cycle);
    }
    add_noise(b, t);
}

static int in_window(uint64_t t, long start, long count)
{
    return count > 0 && (long)t >= start && (long)t < start + count;
}

static int bench_next(void *impl, int timeout_ms, struct source_frame *f, int *status,
                      struct err *e)
{
    struct bench *b = impl;
    if (!source_pace(&b->pace, b->fps, timeout_ms)) {
        *status = SOURCE_WAIT;
        return ST_OK;
    }
    uint64_t t = b->tick++;
    if (in_window(t, b->lost_start, b->lost_count)) {
        *status = SOURCE_LOST;
        return ST_OK;
    }
    if (!(in_window(t, b->frozen_start, b->frozen_count) && b->have_frame)) {
        long cycle = (long)(t / SOURCE_BENCH_CYCLE);
        if (b->parts >= 0 && cycle >= b->parts)
            cycle = b->parts > 0 ? b->parts - 1 : 0;
        int rc = scene_load(b, (int)cycle, e);
        if (rc)
            return rc;
        compose(b, t, f);
        b->have_frame = 1;
    }
    f->img = b->frame;
    f->index = b->delivered++;
    f->t_ms = cli_now_ms();
    *status = SOURCE_FRAME;
    return ST_OK;
}

static const char *bench_describe(void *impl)
{
    return ((struct bench *)impl)->describe;
}

static void bench_free(void *impl)
{
    struct bench *b = impl;
    if (!b)
        return;
    prefetch_join(b);
    scene_clear(&b->cur);
    scene_clear(&b->next);
    image_free(b->frame);
    free(b->gtab);
    free(b);
}

static const struct source_ops bench_ops = {bench_next, bench_describe, NULL, bench_free};

static int parse_window(const char *v, long *start, long *count)
{
    char *end;
    *start = strtol(v, &end, 10);
    if (end == v || *end != '+' || *start < 0)
        return -1;
    const char *c = end + 1;
    *count = strtol(c, &end, 10);
    return end == c || *end || *count < 1 ? -1 : 0;
}

static int parse_params(struct bench *b, const char *params, struct err *e)
{
    char buf[256];
    if (snprintf(buf, sizeof buf, "%s", params) >= (int)sizeof buf)
        return err_set(e, ST_EINVAL, "source bench:%s: too long", params);
    char *save = NULL;
    for (char *kv = strtok_r(buf, ",", &save); kv; kv = strtok_r(NULL, ",", &save)) {
        char *eq = strchr(kv, '='), *end;
        int bad = !eq;
        if (!bad) {
            *eq = '\0';
            const char *v = eq + 1;
            if (!strcmp(kv, "seed")) {
                b->seed = strtoull(v, &end, 10);
                bad = end == v || *end;
            } else if (!strcmp(kv, "parts")) {
                b->parts = strtol(v, &end, 10);
                bad = end == v || *end || b->parts < 0;
            } else if (!strcmp(kv, "lost")) {
                bad = parse_window(v, &b->lost_start, &b->lost_count);
            } else if (!strcmp(kv, "frozen")) {
                bad = parse_window(v, &b->frozen_start, &b->frozen_count);
            } else {
                bad = 1;
            }
        }
        if (eq)
            *eq = '=';
        if (bad)
            return err_set(e, ST_EINVAL,
                           "source bench:%s: '%s' is not seed=N, parts=N, lost=START+COUNT or "
                           "frozen=START+COUNT",
                           params, kv);
    }
    return ST_OK;
}

int source_bench_open(const char *params, const struct source_options *o, struct source **out,
                      struct err *e)
{
    struct bench *b = calloc(1, sizeof *b);
    if (!b)
        return err_set(e, ST_ENOMEM, "bench: out of memory");
    b->w = o->width > 0 ? o->width : 480;
    b->h = o->height > 0 ? o->height : 360;
    b->seed = o->seed;
    b->parts = -1;
    b->fps = o->fps;
    b->cur.index = b->next.index = -1;
    simbench_conditions_nominal(&b->cond);
    double noise = b->cond.noise;
    b->cond.noise = 0;
    int rc = parse_params(b, params, e);
    if (!rc && !(b->frame = image_new(b->w, b->h, 3, e)))
        rc = e->code ? e->code : ST_ENOMEM;
    if (!rc && !(b->gtab = malloc(sizeof *b->gtab << GTAB_BITS)))
        rc = err_set(e, ST_ENOMEM, "bench: out of memory");
    if (rc) {
        bench_free(b);
        return rc;
    }
    /* the same sum of four 16-bit uniforms as simbench's sensor noise,
     * in integers so the table is the same on every machine */
    uint64_t st = 0x5eed5eedull;
    for (size_t i = 0; i < (size_t)1 << GTAB_BITS; i++) {
        uint64_t v = splitmix(&st);
        int64_t s = (int64_t)((v & 0xffff) + ((v >> 16) & 0xffff) + ((v >> 32) & 0xffff) +
                              (v >> 48));
        b->gtab[i] = (int16_t)((s - 131070) * 256 / 37837);
    }
    for (int v = 0; v < 256; v++)
        b->sig256[v] = (int)(noise * sqrt(0.6 + 0.4 * v / 128.0) * 256.0 + 0.5);
    snprintf(b->describe, sizeof b->describe,
             "simulated bench %dx%d, seed %llu", b->w, b->h, (unsigned long long)b->seed);
    return source_wrap(&bench_ops, b, out, e);
}
