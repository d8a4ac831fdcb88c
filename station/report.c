#include "report.h"

#include <string.h>

#include "core/overlay.h"

static const char *class_name(const struct recipe *r, int c)
{
    return c >= 0 && c < r->nclasses ? r->cls[c].name : "image";
}

static json_t *reasons_json(const struct recipe *r, const struct judgement *j)
{
    json_t *a = json_array();
    for (int i = 0; i < j->nreasons; i++) {
        const struct reason *x = &j->reasons[i];
        json_array_append_new(a, json_pack("{s:s,s:s,s:f,s:f,s:s}", "rule", x->rule, "class",
                                           class_name(r, x->cls), "measured", x->measured,
                                           "limit", x->limit, "unit", x->unit));
    }
    return a;
}

json_t *report_json(const char *image, const struct inspector *in, const struct judgement *j,
                    const struct inspect_times *t)
{
    const struct recipe *r = inspector_recipe(in);
    const struct region_set *rs = inspector_regions(in);
    const struct quality *q = inspector_quality(in);
    json_t *regions = json_array();
    for (int i = 0; i < rs->n; i++) {
        const struct region *g = &rs->r[i];
        json_array_append_new(
            regions,
            json_pack("{s:s,s:i,s:f,s:[i,i,i,i],s:[f,f],s:f,s:f,s:b}", "class",
                      class_name(r, g->cls), "pixels", g->pixels, "area_mm2", g->area_mm2,
                      "bbox", g->x0, g->y0, g->x1, g->y1, "centroid", g->cx, g->cy,
                      "confidence", (double)g->mean_conf, "min_confidence",
                      (double)g->min_conf, "counted", judge_region_counts(r, g)));
    }
    return json_pack("{s:i,s:s,s:s,s:o,s:o,s:{s:f,s:f,s:f,s:f},s:{s:f,s:f,s:f,s:f},s:s,s:i}",
                     "schema", REPORT_SCHEMA, "image", image, "verdict", judge_verdict_name(j->verdict), "reasons",
                     reasons_json(r, j), "regions", regions, "quality", "level", q->level,
                     "saturated", q->saturated, "part_fraction", q->part_fraction, "sharpness",
                     q->sharpness, "ms", "features", t->features_ms, "classify", t->classify_ms,
                     "regions", t->regions_ms, "verdict", t->verdict_ms, "recipe", r->product,
                     "recipe_version", r->version);
}

json_t *report_json_error(const char *image, const struct err *e)
{
    return json_pack("{s:i,s:s,s:s,s:[{s:s,s:s,s:s}],s:[]}", "schema", REPORT_SCHEMA, "image",
                     image, "verdict",
                     "NO_VERDICT", "reasons", "rule", "unreadable", "class", "image", "message",
                     e->msg, "regions");
}

struct image *report_overlay(const struct inspector *in, const struct image *frame,
                             const struct judgement *j, struct err *e)
{
    /* NULL zone map until the inspector holds one */
    return overlay_inspection(frame, inspector_classes(in), inspector_regions(in), NULL,
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
