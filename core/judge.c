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
    } w[] = {{"max_area", "area"},
             {"max_length", "length"},
             {"grade_size", "ISO 10110-7 grade"},
             {"max_total", "total area"},
             {"max_count", "regions"},
             {"grade_total", "ISO 10110-7 total area"},
             {"no_part", "no part in view: part share"},
             {"frozen", "frozen camera: frame change"},
             {"too_dark", "too dark: part level"},
             {"too_bright", "too bright: part level"},
             {"saturated", "saturated share"},
             {"black", "black share"},
             {"blurred", "blurred: sharpness"},
             {"part_size", "part area"},
             {"part_at_border", "part at the frame border: gap"},
             {"outside_field", "part outside the field by"},
             {"unsure", "classifier unsure on a share"},
             {"calibration_expired", "calibration expired: age"},
             {"verification_due", "verification due: hours since the last passing one"}};
    for (size_t i = 0; i < sizeof w / sizeof w[0]; i++)
        if (strcmp(w[i].rule, rule) == 0)
            return w[i].words;
    return rule;
}

static const char *unit_words(const char *unit)
{
    if (!strcmp(unit, "mm2"))
        return " mm²";
    if (!strcmp(unit, "mm"))
        return " mm";
    if (!strcmp(unit, "px"))
        return " px";
    if (!strcmp(unit, "days"))
        return " days";
    if (!strcmp(unit, "h"))
        return " h";
    return "";
}

void judge_describe_reason(const struct recipe *r, const struct reason *x, char *buf, size_t len)
{
    char who[96] = "", region[24] = "";
    if (x->cls >= 0 && x->cls < r->nclasses)
        snprintf(who, sizeof who, "%s%s%s: ", r->cls[x->cls].name, x->zone >= 0 ? " in " : "",
                 x->zone >= 0 && x->zone < r->nzones ? r->zones[x->zone].name : "");
    if (x->region > 0)
        snprintf(region, sizeof region, "region %d ", x->region);
    if (!strcmp(x->rule, "verification_due") && x->measured >= JUDGE_NEVER_VERIFIED_H) {
        snprintf(buf, len, "verification due: no passing one on record (needed every %.3g h)",
                 x->limit);
        return;
    }
    const char *u = unit_words(x->unit);
    snprintf(buf, len, "%s%s%s %.3g%s %s %.3g%s", who, region, rule_words(x->rule), x->measured, u,
             x->below ? "<" : ">", x->limit, u);
}

void judge_regions_opts(const struct recipe *r, const struct image *zones, struct regions_opts *o)
{
    memset(o, 0, sizeof *o);
    o->connectivity = 8;
    o->mm_per_px_x = r->mm_per_px_x;
    o->mm_per_px_y = r->mm_per_px_y;
    o->nclasses = r->nclasses;
    for (int c = 0; c < r->nclasses; c++) {
        o->is_defect[c] = r->cls[c].is_defect;
        o->merge_gap_mm[c] = r->merge_gap_mm[c];
    }
    o->zones = zones;
    o->image_to_plane = r->has_calibration ? r->cal.image_to_plane : NULL;
    o->lens = r->has_calibration && r->cal.has_lens && r->cal.lens_corrected ? &r->cal.lens : NULL;
}

static void grey_frame(const struct image *img, uint8_t *grey)
{
    const size_t n = (size_t)img->w * img->h;
    if (img->channels == 1) {
        memcpy(grey, img->px, n);
        return;
    }
    for (size_t i = 0; i < n; i++) {
        const uint8_t *p = img->px + 3 * i;
        grey[i] = (uint8_t)((299 * p[0] + 587 * p[1] + 114 * p[2] + 500) / 1000);
    }
}

int judge_measure_quality(const struct recipe *r, const struct image *img,
                          const struct image *classes, const float *conf, uint8_t *grey,
                          const uint8_t *last, struct quality *q, struct err *e)
{
    if (img->w != classes->w || img->h != classes->h || classes->channels != 1)
        return err_set(e, ST_EINVAL, "class map %dx%d does not match frame %dx%d", classes->w,
                       classes->h, img->w, img->h);
    const int w = img->w, h = img->h;
    const size_t n = (size_t)w * h;
    const struct recipe_gates *g = &r->gates;
    memset(q, 0, sizeof *q);
    grey_frame(img, grey);
    q->frame_change = -1;
    if (last) {
        uint64_t diff = 0;
        for (size_t i = 0; i < n; i++)
            diff += (uint64_t)abs(grey[i] - last[i]);
        q->frame_change = (double)diff / (double)n;
    }
    const uint8_t *cm = classes->px;
    size_t part = 0, sat = 0, black = 0, unsure = 0, lap_n = 0;
    double sum = 0, lap = 0, lap2 = 0;
    for (int y = 0; y < h; y++) {
        for (int x = 0; x < w; x++) {
            size_t i = (size_t)y * w + x;
            if (cm[i] == 0)
                continue;
            part++;
            sum += grey[i];
            const uint8_t *p = img->px + i * img->channels;
            int s = 0;
            for (int c = 0; c < img->channels; c++)
                s |= p[c] == 255;
            sat += s;
            black += grey[i] <= g->black_level;
            unsure += conf && conf[i] < g->low_confidence;
            if (x > 0 && y > 0 && x + 1 < w && y + 1 < h && cm[i - 1] && cm[i + 1] && cm[i - w] &&
                cm[i + w]) {
                double l = (double)grey[i - 1] + grey[i + 1] + grey[i - w] + grey[i + w] -
                           4.0 * grey[i];
                lap += l;
                lap2 += l * l;
                lap_n++;
            }
        }
    }
    q->part_fraction = (double)part / (double)n;
    if (!part)
        return ST_OK;
    q->level = sum / (double)part;
    q->saturated = (double)sat / (double)part;
    q->black = (double)black / (double)part;
    q->unsure = (double)unsure / (double)part;
    if (lap_n) {
        double mean = lap / (double)lap_n;
        double var = lap2 / (double)lap_n - mean * mean;
        double level = q->level > 1 ? q->level : 1;
        q->sharpness = var * (128.0 / level) * (128.0 / level);
    }
    return ST_OK;
}

int judge_region_counts(const struct recipe *r, const struct region *g)
{
    double min = recipe_tolerance_for(r, g->cls, g->zone)->min_area_mm2;
    return min < 0 || g->area_mm2 >= min;
}

static void add_reason(struct judgement *j, const char *rule, int cls, int zone, int region,
                       double measured, double limit, int below, const char *unit)
{
    if (j->nreasons >= JUDGE_MAX_REASONS) {
        j->omitted++;
        return;
    }
    struct reason *x = &j->reasons[j->nreasons++];
    snprintf(x->rule, sizeof x->rule, "%s", rule);
    x->cls = cls;
    x->zone = zone;
    x->region = region;
    x->measured = measured;
    x->limit = limit;
    x->below = below;
    snprintf(x->unit, sizeof x->unit, "%s", unit);
}

static void gate(struct judgement *j, const char *rule, double measured, double limit, int below,
                 const char *unit)
{
    add_reason(j, rule, -1, -1, 0, measured, limit, below, unit);
}

static void check_part(const struct recipe *r, const struct judge_refs *refs,
                       const struct part_pose *p, struct judgement *j)
{
    const struct recipe_part *rp = &r->part;
    double want = refs->part_area_mm2;
    if (rp->area_tolerance >= 0 && want > 0) {
        if (p->area_mm2 < want * (1 - rp->area_tolerance))
            gate(j, "part_size", p->area_mm2, want * (1 - rp->area_tolerance), 1, "mm2");
        else if (p->area_mm2 > want * (1 + rp->area_tolerance))
            gate(j, "part_size", p->area_mm2, want * (1 + rp->area_tolerance), 0, "mm2");
    }
    if (p->border_gap < rp->border_margin_px)
        gate(j, "part_at_border", p->border_gap, rp->border_margin_px, 1, "px");
    if (rp->field[0] >= 0) {
        const int *f = rp->field;
        int out = 0;
        out = f[0] - p->x0 > out ? f[0] - p->x0 : out;
        out = f[1] - p->y0 > out ? f[1] - p->y0 : out;
        out = p->x1 - f[2] > out ? p->x1 - f[2] : out;
        out = p->y1 - f[3] > out ? p->y1 - f[3] : out;
        if (out > 0)
            gate(j, "outside_field", out, 0, 0, "px");
    }
}

static void check_gates(const struct recipe *r, const struct judge_refs *refs,
                        const struct quality *q, const struct part_pose *p, struct judgement *j)
{
    const struct recipe_gates *g = &r->gates;
    if (r->has_calibration && !(refs->calibration_age_days <= r->cal.valid_days))
        gate(j, "calibration_expired", refs->calibration_age_days, r->cal.valid_days, 0, "days");
    if (r->verify_interval_hours > 0 && refs->since_verified_h > r->verify_interval_hours)
        gate(j, "verification_due", refs->since_verified_h, r->verify_interval_hours, 0, "h");
    if (!p->found || q->part_fraction < g->min_part_fraction) {
        gate(j, "no_part", q->part_fraction, g->min_part_fraction, 1, "fraction");
        return; /* the other gates are measured over the part */
    }
    /* a "part" that fills the view is the classifier seeing part in an
     * empty scene (the bench mat under normalised light), not a part */
    if (q->part_fraction > g->max_part_fraction) {
        gate(j, "no_part", q->part_fraction, g->max_part_fraction, 0, "fraction");
        return;
    }
    if (g->min_frame_change >= 0 && q->frame_change >= 0 && q->frame_change <= g->min_frame_change)
        gate(j, "frozen", q->frame_change, g->min_frame_change, 1, "level");
    if (q->level < g->min_level)
        gate(j, "too_dark", q->level, g->min_level, 1, "level");
    if (q->level > g->max_level)
        gate(j, "too_bright", q->level, g->max_level, 0, "level");
    if (q->saturated > g->max_saturated)
        gate(j, "saturated", q->saturated, g->max_saturated, 0, "fraction");
    if (q->black > g->max_black)
        gate(j, "black", q->black, g->max_black, 0, "fraction");
    double ref = refs->sharpness;
    /* no reference at all is refused when the inspector starts; here it
     * still must not let a frame through unchecked */
    if (!(ref > 0) || q->sharpness < g->min_sharpness_ratio * ref)
        gate(j, "blurred", q->sharpness, g->min_sharpness_ratio * ref, 1, "sharpness");
    check_part(r, refs, p, j);
    if (q->unsure > g->max_low_confidence)
        gate(j, "unsure", q->unsure, g->max_low_confidence, 0, "fraction");
}

/* Totals are kept per class and per tolerance: zone z's own (slot z + 1) or
 * the class's (slot 0), which pools every region it judges. */
struct tally {
    int count[RECIPE_MAX_CLASSES][ZONE_MAX + 1];
    double total[RECIPE_MAX_CLASSES][ZONE_MAX + 1];
};

static void judge_region(const struct recipe *r, const struct region *g, struct tally *t,
                         struct judgement *j)
{
    int z = recipe_tolerance_zone(r, g->cls, g->zone);
    const struct recipe_tolerance *tol = recipe_tolerance_for(r, g->cls, z);
    t->count[g->cls][z + 1]++;
    t->total[g->cls][z + 1] += g->area_mm2;
    j->count[g->cls]++;
    j->total_mm2[g->cls] += g->area_mm2;
    if (tol->max_area_mm2 >= 0 && g->area_mm2 > tol->max_area_mm2)
        add_reason(j, "max_area", g->cls, z, g->id, g->area_mm2, tol->max_area_mm2, 0, "mm2");
    if (tol->max_length_mm >= 0 && g->length_mm > tol->max_length_mm)
        add_reason(j, "max_length", g->cls, z, g->id, g->length_mm, tol->max_length_mm, 0, "mm");
    /* ISO 10110-7: an imperfection's grade is the square root of its area */
    if (tol->grade_n > 0 && sqrt(g->area_mm2) > tol->grade_a_mm)
        add_reason(j, "grade_size", g->cls, z, g->id, sqrt(g->area_mm2), tol->grade_a_mm, 0,
                   "mm");
}

void judge_tolerances(const struct recipe *r, const struct region_set *rs, struct judgement *j)
{
    memset(j, 0, sizeof *j);
    struct tally t;
    memset(&t, 0, sizeof t);
    for (int i = 0; i < rs->n; i++)
        if (judge_region_counts(r, &rs->r[i]))
            judge_region(r, &rs->r[i], &t, j);
    for (int c = 0; c < r->nclasses; c++) {
        if (!r->cls[c].is_defect)
            continue;
        for (int z = -1; z < r->nzones; z++) {
            if (z >= 0 && recipe_tolerance_zone(r, c, z) < 0)
                continue;
            const struct recipe_tolerance *tol = recipe_tolerance_for(r, c, z);
            int n = t.count[c][z + 1];
            double total = t.total[c][z + 1];
            if (tol->max_total_mm2 >= 0 && total > tol->max_total_mm2)
                add_reason(j, "max_total", c, z, 0, total, tol->max_total_mm2, 0, "mm2");
            if (tol->max_count >= 0 && n > tol->max_count)
                add_reason(j, "max_count", c, z, 0, n, tol->max_count, 0, "count");
            /* N x A: smaller imperfections may stand in for grade-A ones
             * while their total area stays within N A^2 */
            double budget = tol->grade_n * tol->grade_a_mm * tol->grade_a_mm;
            if (tol->grade_n > 0 && total > budget)
                add_reason(j, "grade_total", c, z, 0, total, budget, 0, "mm2");
        }
    }
    j->verdict = j->nreasons || j->omitted ? VERDICT_FAIL : VERDICT_PASS;
}

void judge_part(const struct recipe *r, const struct judge_refs *refs, const struct quality *q,
                const struct part_pose *pose, const struct region_set *rs, struct judgement *j)
{
    memset(j, 0, sizeof *j);
    check_gates(r, refs, q, pose, j);
    if (j->nreasons) {
        j->verdict = VERDICT_NONE;
        return;
    }
    judge_tolerances(r, rs, j);
}
