#include "audit_compare.h"

#include <stdlib.h>
#include <string.h>

void audit_compare_init(struct audit_compare *c, const struct qstats_shifts *shifts)
{
    memset(c, 0, sizeof *c);
    c->shifts = *shifts;
}

void audit_compare_clear(struct audit_compare *c)
{
    for (size_t i = 0; i < c->n; i++)
        audit_stats_clear(&c->rows[i].st);
    free(c->rows);
    memset(c, 0, sizeof *c);
}

static struct audit_compare_row *row_for(struct audit_compare *c, const struct log_record *r,
                                         struct err *e)
{
    /* a walk comes ordered by station: the last row is nearly always it */
    for (size_t i = c->n; i-- > 0;)
        if (!strcmp(c->rows[i].station, r->chain_station))
            return &c->rows[i];
    if (c->n == c->cap) {
        size_t cap = c->cap ? 2 * c->cap : 8;
        void *g = realloc(c->rows, cap * sizeof *c->rows);
        if (!g) {
            err_set(e, ST_ENOMEM, "audit: out of memory");
            return NULL;
        }
        c->rows = g;
        c->cap = cap;
    }
    struct audit_compare_row *w = &c->rows[c->n];
    memset(w, 0, sizeof *w);
    if (audit_stats_init(&w->st, &c->shifts, e))
        return NULL;
    snprintf(w->station, sizeof w->station, "%s", r->chain_station);
    snprintf(w->line, sizeof w->line, "%s", r->line);
    c->n++;
    return w;
}

int audit_compare_add(struct audit_compare *c, const struct log_record *r, struct err *e)
{
    struct audit_compare_row *w = row_for(c, r, e);
    return w ? audit_stats_add(&w->st, r, e) : e->code;
}

static json_t *pick(json_t *from, const char *key)
{
    json_t *v = json_object_get(from, key);
    return v ? json_incref(v) : json_null();
}

json_t *audit_compare_json(struct audit_compare *c)
{
    json_t *a = json_array();
    for (size_t i = 0; a && i < c->n; i++) {
        struct audit_compare_row *w = &c->rows[i];
        json_t *full = audit_stats_json(&w->st, 0);
        if (!full) {
            json_decref(a);
            return NULL;
        }
        json_t *audit = json_object_get(full, "audit");
        json_t *o = json_pack("{s:s,s:s,s:I,s:o,s:o,s:o,s:I,s:o,s:o}", "station", w->station,
                              "line", w->line, "records", (json_int_t)w->st.records, "first",
                              pick(full, "first"), "last", pick(full, "last"), "verdicts",
                              pick(full, "verdicts"), "rejects", (json_int_t)w->st.rejects,
                              "reject_rate",
                              w->st.records ? json_real((double)w->st.rejects /
                                                        (double)w->st.records)
                                            : json_null(),
                              "audit", json_pack("{s:O,s:O,s:O}", "dispositions",
                                                 json_object_get(audit, "dispositions"),
                                                 "false_reject",
                                                 json_object_get(audit, "false_reject"), "kappa",
                                                 json_object_get(audit, "kappa")));
        json_decref(full);
        if (!o || json_array_append_new(a, o)) {
            json_decref(a);
            return NULL;
        }
    }
    return a;
}

static json_int_t geti(const json_t *o, const char *key)
{
    return json_integer_value(json_object_get(o, key));
}

static void print_row(FILE *f, const char *station, const char *line, const json_t *st,
                      json_int_t rej, const json_t *au)
{
    const json_t *v = json_object_get(st, "verdicts");
    const json_t *fr = json_object_get(au, "false_reject");
    json_int_t n = geti(st, "records");
    char rate[16] = "-", frs[48] = "-";
    if (n > 0)
        snprintf(rate, sizeof rate, "%.4f", (double)rej / (double)n);
    if (json_is_real(json_object_get(fr, "rate")))
        snprintf(frs, sizeof frs, "%lld/%lld = %.1f%%", (long long)geti(fr, "false_rejects"),
                 (long long)geti(fr, "audited"),
                 100 * json_real_value(json_object_get(fr, "rate")));
    fprintf(f, "  %-16s %-10s %8lld %8lld %8lld %10lld %8lld  %-11s %s\n", station,
            line && *line ? line : "-", (long long)n, (long long)geti(v, "PASS"),
            (long long)geti(v, "FAIL"), (long long)geti(v, "NO_VERDICT"), (long long)rej, rate,
            frs);
}

void audit_compare_print(FILE *f, const json_t *stations, const json_t *total)
{
    if (json_array_size(stations) < 2)
        return;
    fprintf(f, "per station:\n  %-16s %-10s %8s %8s %8s %10s %8s  %-11s %s\n", "STATION", "LINE",
            "RECORDS", "PASS", "FAIL", "NO_VERDICT", "REJECTS", "REJECT RATE", "FALSE REJECTS");
    size_t i;
    json_t *s;
    json_array_foreach(stations, i, s)
        print_row(f, json_string_value(json_object_get(s, "station")),
                  json_string_value(json_object_get(s, "line")), s, geti(s, "rejects"),
                  json_object_get(s, "audit"));
    const json_t *au = json_object_get(total, "audit");
    print_row(f, "total", "", total, geti(au, "rejects"), au);
}
