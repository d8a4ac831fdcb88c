#include "judge.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

const char *judge_verdict_name(int verdict)
{
    switch (verdict) {
    case VERDICT_PASS: return "PASS";
    case VERDICT_FAIL: return "FAIL";
    default: return "NO_VERDICT";
    }
}

static const char *rule_words(const char *rule)
{
    static const struct {
        const char *rule, *words;
    } w[] = {{"max_area", "largest region"}, {"max_total", "total area"},
             {"max_count", "regions"},       {"too_dark", "too dark: part level"},
             {"saturated", "saturated share"}, {"blurred", "blurred: sharpness"},
             {"no_part", "no part in view: part share"}};
    for (size_t i = 0; i < sizeof w / sizeof w[0]; i++)
        if (strcmp(w[i].rule, rule) == 0)
            return w[i].words;
    return rule;
}

void judge_describe_reason(const struct recipe *r, const struct reason *x, char *buf, size_t len)
{
    /* the gates are lower limits, the tolerances upper ones */
    int lower = x->cls < 0 && strcmp(x->rule, "saturated") != 0;
    const char *cls = x->cls >= 0 && x->cls < r->nclasses ? r->cls[x->cls].name : "";
    snprintf(buf, len, "%s%s%s %.3g %s %.3g%s", cls, *cls ? " " : "", rule_words(x->rule),
             x->measured, lower ? "<" : ">", x->limit, strcmp(x->unit, "mm2") == 0 ? " mm²" : "");
}

static int grey_at(const struct image *img, size_t i)
{
    if (img->channels == 1)
        return img->px[i];
    const uint8_t *p = img->px + 3 * i;
    return (299 * p[0] + 587 * p[1] + 114 * p[2] + 500) / 1000;
}

int judge_measure_quality(const struct image *img, const struct image *classes,
                          struct quality *q, struct err *e)
{
    if (img->w != classes->w || img->h != classes->h || classes->channels != 1)
        return err_set(e, ST_EINVAL, "class map %dx%d does not match frame %dx%d", classes->w,
                       classes->h, img->w, img->h);
    const int w = img->w, h = img->h;
    uint64_t hist[256] = {0};
    size_t part = 0, sat = 0;
    double lap = 0;
    size_t lap_n = 0;
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            if (classes->px[i] == 0)
                continue;
            part++;
            int g = grey_at(img, i);
            hist[g]++;
            const uint8_t *p = img->px + i * img->channels;
            int s = 0;
            for (int c = 0; c < img->channels; c++)
                s |= p[c] == 255;
            sat += s;
            if (x > 0 && y > 0 && x + 1 < w && y + 1 < h) {
                int l = grey_at(img, i - 1) + grey_at(img, i + 1) + grey_at(img, i - w) +
                        grey_at(img, i + w) - 4 * g;
                lap += abs(l);
                lap_n++;
            }
        }
    }
    memset(q, 0, sizeof *q);
    q->part_fraction = (double)part / ((double)w * h);
    if (!part)
        return ST_OK;
    size_t half = (part + 1) / 2, acc = 0;
    int med = 0;
    while (med < 255 && acc + hist[med] < half)
        acc += hist[med++];
    q->level = med;
    q->saturated = (double)sat / part;
    double level = q->level > 1 ? q->level : 1;
    q->sharpness = lap_n ? 100.0 * (lap / lap_n) / level : 0;
    return ST_OK;
}

void judge_regions_opts(const struct recipe *r, const struct image *zones, struct regions_opts *o)
{
    memset(o, 0, sizeof *o);
    o->connectivity = 8;
    o->mm_per_px_x = r->mm_per_px_x;
    o->mm_per_px_y = r->mm_per_px_y;
    o->nclasses = r->nclasses;
    for (int c = 0; c < r->nclasses; c++)
        o->is_defect[c] = r->cls[c].is_defect;
    o->zones = zones;
}

int judge_region_counts(const struct recipe *r, const struct region *g)
{
    double min = r->tol[g->cls].min_area_mm2;
    return min < 0 || g->area_mm2 >= min;
}

static void add_reason(struct judgement *j, const char *rule, int cls, double measured,
                       double limit, const char *unit)
{
    if (j->nreasons >= JUDGE_MAX_REASONS)
        return;
    struct reason *x = &j->reasons[j->nreasons++];
    snprintf(x->rule, sizeof x->rule, "%s", rule);
    x->cls = cls;
    x->zone = -1;
    x->region = 0;
    x->measured = measured;
    x->limit = limit;
    snprintf(x->unit, sizeof x->unit, "%s", unit);
}

static void check_gates(const struct recipe *r, const struct quality *q, struct judgement *j)
{
    const struct recipe_gates *g = &r->gates;
    if (q->part_fraction < g->min_part_fraction) {
        add_reason(j, "no_part", -1, q->part_fraction, g->min_part_fraction, "fraction");
        return; /* the other gates are measured over the part */
    }
    if (q->level < g->min_level)
        add_reason(j, "too_dark", -1, q->level, g->min_level, "level");
    if (q->saturated > g->max_saturated)
        add_reason(j, "saturated", -1, q->saturated, g->max_saturated, "fraction");
    if (q->sharpness < g->min_sharpness)
        add_reason(j, "blurred", -1, q->sharpness, g->min_sharpness, "sharpness");
}

void judge_part(const struct recipe *r, const struct quality *q, const struct region_set *rs,
                struct judgement *j)
{
    memset(j, 0, sizeof *j);
    check_gates(r, q, j);
    if (j->nreasons) {
        j->verdict = VERDICT_NONE;
        return;
    }
    double largest[RECIPE_MAX_CLASSES] = {0};
    for (int i = 0; i < rs->n; i++) {
        const struct region *g = &rs->r[i];
        if (!judge_region_counts(r, g))
            continue;
        j->count[g->cls]++;
        j->total_mm2[g->cls] += g->area_mm2;
        if (g->area_mm2 > largest[g->cls])
            largest[g->cls] = g->area_mm2;
    }
    for (int c = 0; c < r->nclasses; c++) {
        if (!r->cls[c].is_defect)
            continue;
        const struct recipe_tolerance *t = &r->tol[c];
        if (t->max_area_mm2 >= 0 && largest[c] > t->max_area_mm2)
            add_reason(j, "max_area", c, largest[c], t->max_area_mm2, "mm2");
        if (t->max_total_mm2 >= 0 && j->total_mm2[c] > t->max_total_mm2)
            add_reason(j, "max_total", c, j->total_mm2[c], t->max_total_mm2, "mm2");
        if (t->max_count >= 0 && j->count[c] > t->max_count)
            add_reason(j, "max_count", c, j->count[c], t->max_count, "count");
    }
    j->verdict = j->nreasons ? VERDICT_FAIL : VERDICT_PASS;
}
