/* screen_state_init and screen_state_set_report (station/screen.h): the
 * state the live loop hands the screen, filled from a report. */
#include <stdio.h>
#include <string.h>

#include "core/judge.h"
#include "screen.h"

void screen_state_init(struct screen_state *s)
{
    memset(s, 0, sizeof *s);
    s->verdict = -1;
    s->log_seq = -1;
    s->field = SCREEN_FIELD_SERIAL;
    snprintf(s->trigger, sizeof s->trigger, "key");
}

static int verdict_from_name(const char *name)
{
    for (int v = VERDICT_PASS; v <= VERDICT_NONE; v++)
        if (name && !strcmp(name, judge_verdict_name(v)))
            return v;
    return VERDICT_NONE;   /* an unknown verdict word is no verdict, never PASS */
}

/* A reason's words: its own text, or report_json_error's message. */
static const char *reason_words(const json_t *x)
{
    const char *t = json_string_value(json_object_get(x, "text"));
    if (!t)
        t = json_string_value(json_object_get(x, "message"));
    if (!t)
        t = json_string_value(json_object_get(x, "rule"));
    return t ? t : "reason without words";
}

static void set_reasons(struct screen_state *s, const json_t *report)
{
    const json_t *a = json_object_get(report, "reasons");
    size_t n = json_is_array(a) ? json_array_size(a) : 0;
    s->nreasons = 0;
    for (size_t i = 0; i < n && s->nreasons < SCREEN_MAX_REASONS; i++)
        snprintf(s->reasons[s->nreasons++], SCREEN_TEXT, "%s",
                 reason_words(json_array_get(a, i)));
    s->more_reasons = (int)(n - (size_t)s->nreasons) +
                      (int)json_integer_value(json_object_get(report, "reasons_omitted"));
}

/* Counted regions of class name: their total area and their number. */
static void class_totals(const json_t *regions, const char *name, double *mm2, int *count)
{
    *mm2 = 0;
    *count = 0;
    size_t i;
    const json_t *g;
    json_array_foreach(regions, i, g) {
        const char *c = json_string_value(json_object_get(g, "class"));
        if (!c || strcmp(c, name) || !json_is_true(json_object_get(g, "counted")))
            continue;
        *mm2 += json_number_value(json_object_get(g, "area_mm2"));
        (*count)++;
    }
}

static void set_bars(struct screen_state *s, const struct recipe *r, const json_t *report)
{
    const json_t *regions = json_object_get(report, "regions");
    s->nbars = 0;
    for (int c = 0; c < r->nclasses && s->nbars < SCREEN_MAX_BARS; c++) {
        if (!r->cls[c].is_defect)
            continue;
        struct screen_bar *b = &s->bars[s->nbars++];
        double mm2;
        int count;
        class_totals(regions, r->cls[c].name, &mm2, &count);
        snprintf(b->name, sizeof b->name, "%s", r->cls[c].name);
        const struct recipe_tolerance *t = &r->tol[c];
        if (t->max_total_mm2 < 0 && t->max_count >= 0) {
            b->value = count;
            b->limit = t->max_count;
            snprintf(b->unit, sizeof b->unit, "regions");
        } else {
            b->value = mm2;
            b->limit = t->max_total_mm2;
            snprintf(b->unit, sizeof b->unit, "mm²");
        }
    }
}

void screen_state_set_report(struct screen_state *s, const struct recipe *r, const json_t *report)
{
    s->verdict = verdict_from_name(json_string_value(json_object_get(report, "verdict")));
    const json_t *seq = json_object_get(report, "log_seq");
    s->log_seq = json_is_integer(seq) ? (int64_t)json_integer_value(seq) : -1;
    set_reasons(s, report);
    /* a frame that got no verdict was not judged: its measures are not
     * shown as if they were */
    if (s->verdict == VERDICT_NONE)
        s->nbars = 0;
    else
        set_bars(s, r, report);
}
