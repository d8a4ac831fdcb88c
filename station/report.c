#include "report.h"

#include <math.h>
#include <string.h>

#include "core/overlay.h"

static const double rad_to_deg = 57.295779513082321;

static const char *class_name(const struct recipe *r, int c)
{
    return c >= 0 && c < r->nclasses ? r->cls[c].name : "image";
}

/* A zone's name, or JSON null outside every zone. */
static json_t *zone_json(const struct recipe *r, int z)
{
    return z >= 0 && z < r->nzones ? json_string(r->zones[z].name) : json_null();
}

static json_t *reasons_json(const struct recipe *r, const struct judgement *j)
{
    json_t *a = json_array();
    for (int i = 0; i < j->nreasons; i++) {
        const struct reason *x = &j->reasons[i];
        char words[200];
        judge_describe_reason(r, x, words, sizeof words);
        json_array_append_new(
            a, json_pack("{s:s,s:s,s:o,s:o,s:f,s:f,s:s,s:s,s:s}", "rule", x->rule, "class",
                         class_name(r, x->cls), "zone", zone_json(r, x->zone), "region",
                         x->region > 0 ? json_integer(x->region) : json_null(), "measured",
                         x->measured, "limit", x->limit, "limit_kind", x->below ? "min" : "max",
                         "unit", x->unit, "text", words));
    }
    return a;
}

static json_t *regions_json(const struct recipe *r, const struct region_set *rs)
{
    json_t *a = json_array();
    for (int i = 0; i < rs->n; i++) {
        const struct region *g = &rs->r[i];
        json_array_append_new(
            a, json_pack("{s:i,s:s,s:o,s:i,s:f,s:f,s:f,s:f,s:[i,i,i,i],s:[f,f],s:f,s:f,s:i,s:b}",
                         "id", g->id, "class", class_name(r, g->cls), "zone",
                         zone_json(r, g->zone), "pixels", g->pixels, "area_mm2", g->area_mm2,
                         "length_mm", g->length_mm, "width_mm", g->width_mm, "orientation_deg",
                         g->orientation * rad_to_deg, "bbox", g->x0, g->y0, g->x1, g->y1,
                         "centroid", g->cx, g->cy, "confidence", (double)g->mean_conf,
                         "min_confidence", (double)g->min_conf, "fragments", g->fragments,
                         "counted", judge_region_counts(r, g)));
    }
    return a;
}

json_t *report_json(const char *image, const struct inspector *in, const struct judgement *j,
                    const struct inspect_times *t)
{
    const struct recipe *r = inspector_recipe(in);
    const struct quality *q = inspector_quality(in);
    const struct part_pose *p = inspector_pose(in);
    json_t *part = json_pack("{s:b,s:f,s:[f,f],s:f,s:b,s:[i,i,i,i],s:i}", "found", p->found,
                             "area_mm2", p->area_mm2, "centroid", p->cx, p->cy, "angle_deg",
                             p->angle * rad_to_deg, "isotropic", p->isotropic, "bbox", p->x0,
                             p->y0, p->x1, p->y1, "border_gap_px", p->border_gap);
    json_t *quality = json_pack("{s:f,s:f,s:f,s:f,s:f,s:f,s:o}", "level", q->level, "saturated",
                                q->saturated, "black", q->black, "part_fraction",
                                q->part_fraction, "sharpness", q->sharpness, "unsure", q->unsure,
                                "frame_change",
                                q->frame_change >= 0 ? json_real(q->frame_change) : json_null());
    return json_pack("{s:i,s:s,s:s,s:o,s:i,s:o,s:o,s:o,s:{s:f,s:f,s:f,s:f},s:s,s:i}", "schema",
                     REPORT_SCHEMA, "image", image, "verdict", judge_verdict_name(j->verdict),
                     "reasons", reasons_json(r, j), "reasons_omitted", j->omitted, "regions",
                     regions_json(r, inspector_regions(in)), "part", part, "quality", quality,
                     "ms", "features", t->features_ms, "classify", t->classify_ms, "regions",
                     t->regions_ms, "verdict", t->verdict_ms, "recipe", r->product,
                     "recipe_version", r->version);
}

json_t *report_json_refused(const char *image, const char *rule, const char *message)
{
    return json_pack("{s:i,s:s,s:s,s:[{s:s,s:s,s:s}],s:[]}", "schema", REPORT_SCHEMA, "image",
                     image, "verdict", "NO_VERDICT", "reasons", "rule", rule, "class", "image",
                     "message", message, "regions");
}

json_t *report_json_error(const char *image, const struct err *e)
{
    return report_json_refused(image, "unreadable", e->msg);
}

struct image *report_overlay(const struct inspector *in, const struct image *frame,
                             const struct judgement *j, struct err *e)
{
    return overlay_inspection(frame, inspector_classes(in), inspector_regions(in),
                              inspector_zone_map(in),
                              inspector_recipe(in), j, e);
}

void report_print(FILE *f, const char *image, const struct recipe *r, const struct judgement *j)
{
    fprintf(f, "%s: %s", image, j->verdict == VERDICT_NONE ? "NO VERDICT"
                                                           : judge_verdict_name(j->verdict));
    for (int i = 0; i < j->nreasons; i++) {
        char words[200];
        judge_describe_reason(r, &j->reasons[i], words, sizeof words);
        fprintf(f, "%s %s", i ? ";" : " —", words);
    }
    fputc('\n', f);
}
