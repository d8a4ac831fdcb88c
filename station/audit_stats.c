#include "audit_stats.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "core/judge.h"

int audit_stats_init(struct audit_stats *s, const struct qstats_shifts *shifts, struct err *e)
{
    memset(s, 0, sizeof *s);
    qstats_pareto_init(&s->pareto);
    return qstats_counts_init(&s->counts, shifts, e);
}

void audit_stats_clear(struct audit_stats *s)
{
    qstats_counts_clear(&s->counts);
    qstats_pareto_clear(&s->pareto);
    memset(s, 0, sizeof *s);
}

static int add_reasons(struct audit_stats *s, const struct log_record *r, struct err *e)
{
    json_error_t je;
    json_t *a = json_loads(r->reasons_json ? r->reasons_json : "[]", 0, &je);
    if (!json_is_array(a)) {
        json_decref(a);
        return err_set(e, ST_EFORMAT, "record %lld: reasons are not a JSON array",
                       (long long)r->seq);
    }
    size_t i;
    json_t *x;
    int rc = ST_OK;
    json_array_foreach(a, i, x)
    {
        const char *rule = json_string_value(json_object_get(x, "rule"));
        const char *cls = json_string_value(json_object_get(x, "class"));
        const char *zone = json_string_value(json_object_get(x, "zone"));
        if (!rule) {
            rc = err_set(e, ST_EFORMAT, "record %lld: reason %zu has no rule",
                         (long long)r->seq, i);
            break;
        }
        if ((rc = qstats_pareto_add(&s->pareto, rule, cls, zone, e)) != ST_OK)
            break;
    }
    json_decref(a);
    return rc;
}

/* The auditor's call on the part: 0 good, 1 reject, -1 none. */
static int auditor_call(int disp)
{
    switch (disp) {
    case LOG_DISP_FALSE_REJECT:
        return 0;
    case LOG_DISP_CONFIRMED:
    case LOG_DISP_REWORK:
        return 1;
    default:
        return -1;
    }
}

int audit_stats_add(struct audit_stats *s, const struct log_record *r, struct err *e)
{
    int64_t t;
    struct err sub;
    if (qstats_parse_time(r->utc, &t, &sub) != ST_OK)
        return err_set(e, ST_EFORMAT, "record %lld: %s", (long long)r->seq, sub.msg);
    int v = r->verdict == VERDICT_PASS ? QSTATS_PASS
            : r->verdict == VERDICT_FAIL ? QSTATS_FAIL
                                         : QSTATS_NONE;
    int rc = qstats_counts_add(&s->counts, t, v, e);
    if (rc != ST_OK)
        return rc;
    int reject = v != QSTATS_PASS;
    if (reject && (rc = add_reasons(s, r, e)) != ST_OK)
        return rc;
    int disp = r->has_disposition && r->disp.disp > 0 && r->disp.disp < LOG_DISP_COUNT
                   ? r->disp.disp
                   : LOG_DISP_NONE;
    if (reject) {
        s->rejects++;
        s->disposed[disp]++;
    }
    int call = auditor_call(disp);
    if (call >= 0)
        s->agree[reject][call]++;
    if (!s->records || strcmp(r->utc, s->first_utc) < 0)
        snprintf(s->first_utc, sizeof s->first_utc, "%s", r->utc);
    if (!s->records || strcmp(r->utc, s->last_utc) > 0)
        snprintf(s->last_utc, sizeof s->last_utc, "%s", r->utc);
    s->records++;
    return ST_OK;
}

static json_t *real_or_null(double v)
{
    return isfinite(v) ? json_real(v) : json_null();
}

static json_t *verdict_counts(const uint64_t *n)
{
    return json_pack("{s:I,s:I,s:I}", "PASS", (json_int_t)n[QSTATS_PASS], "FAIL",
                     (json_int_t)n[QSTATS_FAIL], "NO_VERDICT", (json_int_t)n[QSTATS_NONE]);
}

static void bucket_label(const struct audit_stats *s, const struct qstats_bucket *b, char *buf,
                         size_t len)
{
    char day[16];
    qstats_format_day(b->day, day, sizeof day);
    if (b->shift < 0)
        snprintf(buf, len, "%s", day);
    else
        snprintf(buf, len, "%s %02d:00", day, s->counts.shifts.start[b->shift]);
}

static json_t *buckets_json(const struct audit_stats *s, const struct qstats_bucket *b, size_t n)
{
    json_t *a = json_array();
    for (size_t i = 0; i < n; i++) {
        char day[16], label[32];
        qstats_format_day(b[i].day, day, sizeof day);
        bucket_label(s, &b[i], label, sizeof label);
        json_t *o = json_pack("{s:s,s:s,s:o}", "label", label, "day", day, "verdicts",
                              verdict_counts(b[i].n));
        if (b[i].shift >= 0)
            json_object_set_new(o, "shift", json_integer(b[i].shift));
        json_array_append_new(a, o);
    }
    return a;
}

static json_t *pchart_json(const struct audit_stats *s, int by_shift)
{
    const struct qstats_bucket *b = by_shift ? s->counts.shift : s->counts.days;
    size_t m = by_shift ? s->counts.nshifts : s->counts.ndays;
    if (m == 0)
        return json_null();
    uint64_t *d = malloc(m * sizeof *d), *n = malloc(m * sizeof *n);
    struct qstats_ppoint *pt = malloc(m * sizeof *pt);
    json_t *out = NULL;
    double pbar;
    if (!d || !n || !pt)
        goto done;
    for (size_t i = 0; i < m; i++) {
        d[i] = b[i].n[QSTATS_FAIL] + b[i].n[QSTATS_NONE];
        n[i] = d[i] + b[i].n[QSTATS_PASS];
    }
    if (qstats_pchart(d, n, m, &pbar, pt, NULL) != ST_OK)
        goto done;
    json_t *points = json_array(), *outside = json_array();
    for (size_t i = 0; i < m; i++) {
        char label[32];
        bucket_label(s, &b[i], label, sizeof label);
        json_array_append_new(points, json_pack("{s:s,s:I,s:I,s:f,s:f,s:f,s:i}", "label", label,
                                                "n", (json_int_t)n[i], "rejects",
                                                (json_int_t)d[i], "p", pt[i].p, "lcl", pt[i].lcl,
                                                "ucl", pt[i].ucl, "outside", pt[i].outside));
        if (pt[i].outside)
            json_array_append_new(outside, json_string(label));
    }
    out = json_pack("{s:s,s:f,s:o,s:o}", "subgroup", by_shift ? "shift" : "day", "pbar", pbar,
                    "points", points, "outside", outside);
done:
    free(d);
    free(n);
    free(pt);
    return out;
}

static json_t *pareto_json(const struct qstats_pareto *p)
{
    json_t *a = json_array();
    for (size_t i = 0; i < p->n; i++) {
        const struct qstats_pareto_row *r = &p->rows[i];
        json_array_append_new(a, json_pack("{s:s,s:s,s:s,s:I,s:f,s:f}", "rule", r->rule, "class",
                                           r->cls, "zone", r->zone, "count",
                                           (json_int_t)r->count, "share", r->share,
                                           "cumulative", r->cumulative));
    }
    return a;
}

static json_t *audit_json(const struct audit_stats *s)
{
    json_t *disp = json_object();
    for (int k = 0; k < LOG_DISP_COUNT; k++)
        json_object_set_new(disp, log_disp_name(k), json_integer((json_int_t)s->disposed[k]));
    uint64_t k = s->disposed[LOG_DISP_FALSE_REJECT];
    uint64_t n = k + s->disposed[LOG_DISP_CONFIRMED] + s->disposed[LOG_DISP_REWORK];
    json_t *fr;
    double lo, hi;
    if (n > 0 && qstats_clopper_pearson(k, n, 0.05, &lo, &hi, NULL) == ST_OK)
        fr = json_pack("{s:I,s:I,s:f,s:[f,f]}", "false_rejects", (json_int_t)k, "audited",
                       (json_int_t)n, "rate", (double)k / (double)n, "ci95", lo, hi);
    else
        fr = json_pack("{s:I,s:I,s:n,s:n}", "false_rejects", (json_int_t)k, "audited",
                       (json_int_t)n, "rate", "ci95");
    const uint64_t t[4] = {s->agree[0][0], s->agree[0][1], s->agree[1][0], s->agree[1][1]};
    json_t *kappa = json_pack(
        "{s:o,s:[[I,I],[I,I]],s:s}", "value", real_or_null(qstats_kappa(t, 2)), "table",
        (json_int_t)t[0], (json_int_t)t[1], (json_int_t)t[2], (json_int_t)t[3], "layout",
        "rows: station good, station reject; columns: auditor good, auditor reject");
    return json_pack("{s:I,s:o,s:o,s:o}", "rejects", (json_int_t)s->rejects, "dispositions",
                     disp, "false_reject", fr, "kappa", kappa);
}

json_t *audit_stats_json(struct audit_stats *s, int by_shift)
{
    qstats_pareto_sort(&s->pareto);
    json_t *shifts = json_array();
    for (int i = 0; i < s->counts.shifts.n; i++)
        json_array_append_new(shifts, json_integer(s->counts.shifts.start[i]));
    json_t *pc = pchart_json(s, by_shift);
    if (!pc)
        pc = json_null();
    return json_pack("{s:I,s:s?,s:s?,s:o,s:i,s:o,s:o,s:o,s:o,s:o,s:o}", "records",
                     (json_int_t)s->records, "first", s->records ? s->first_utc : NULL, "last",
                     s->records ? s->last_utc : NULL, "shift_starts", shifts, "utc_offset_min",
                     s->counts.shifts.offset_min, "verdicts", verdict_counts(s->counts.total),
                     "days", buckets_json(s, s->counts.days, s->counts.ndays), "shifts",
                     buckets_json(s, s->counts.shift, s->counts.nshifts), "pchart", pc, "pareto",
                     pareto_json(&s->pareto), "audit", audit_json(s));
}

static json_int_t geti(const json_t *o, const char *key)
{
    return json_integer_value(json_object_get(o, key));
}

static void print_buckets(FILE *f, const char *title, const json_t *a)
{
    size_t i;
    json_t *b;
    fprintf(f, "%s:\n", title);
    json_array_foreach(a, i, b)
    {
        const json_t *v = json_object_get(b, "verdicts");
        fprintf(f, "  %-17s PASS %6lld  FAIL %6lld  NO_VERDICT %6lld\n",
                json_string_value(json_object_get(b, "label")), (long long)geti(v, "PASS"),
                (long long)geti(v, "FAIL"), (long long)geti(v, "NO_VERDICT"));
    }
}

void audit_stats_print(FILE *f, const json_t *st)
{
    const json_t *v = json_object_get(st, "verdicts");
    fprintf(f, "%lld records", (long long)geti(st, "records"));
    if (json_is_string(json_object_get(st, "first")))
        fprintf(f, " from %s to %s", json_string_value(json_object_get(st, "first")),
                json_string_value(json_object_get(st, "last")));
    fprintf(f, ": PASS %lld, FAIL %lld, NO_VERDICT %lld\n", (long long)geti(v, "PASS"),
            (long long)geti(v, "FAIL"), (long long)geti(v, "NO_VERDICT"));
    print_buckets(f, "per day", json_object_get(st, "days"));
    print_buckets(f, "per shift (day the shift began, start hour)", json_object_get(st, "shifts"));

    const json_t *pc = json_object_get(st, "pchart");
    if (json_is_object(pc)) {
        fprintf(f, "reject rate per %s: centre line p = %.4f\n",
                json_string_value(json_object_get(pc, "subgroup")),
                json_real_value(json_object_get(pc, "pbar")));
        size_t i;
        json_t *p;
        json_array_foreach(json_object_get(pc, "points"), i, p)
        {
            json_int_t out = geti(p, "outside");
            fprintf(f, "  %-17s %6lld of %6lld = %.4f  limits %.4f .. %.4f%s\n",
                    json_string_value(json_object_get(p, "label")), (long long)geti(p, "rejects"),
                    (long long)geti(p, "n"), json_real_value(json_object_get(p, "p")),
                    json_real_value(json_object_get(p, "lcl")),
                    json_real_value(json_object_get(p, "ucl")),
                    out > 0 ? "  ABOVE the upper limit" : out < 0 ? "  below the lower limit" : "");
        }
    }
    fprintf(f, "reasons of rejects, most frequent first:\n");
    size_t i;
    json_t *r;
    json_array_foreach(json_object_get(st, "pareto"), i, r)
    {
        const char *zone = json_string_value(json_object_get(r, "zone"));
        fprintf(f, "  %6lld  %5.1f%%  cum. %5.1f%%  %s %s%s%s\n", (long long)geti(r, "count"),
                100 * json_real_value(json_object_get(r, "share")),
                100 * json_real_value(json_object_get(r, "cumulative")),
                json_string_value(json_object_get(r, "class")),
                json_string_value(json_object_get(r, "rule")), zone && *zone ? " in " : "",
                zone ? zone : "");
    }
    const json_t *au = json_object_get(st, "audit");
    const json_t *fr = json_object_get(au, "false_reject");
    fprintf(f, "rejects %lld, not yet disposed %lld\n", (long long)geti(au, "rejects"),
            (long long)geti(json_object_get(au, "dispositions"), "none"));
    if (json_is_real(json_object_get(fr, "rate"))) {
        const json_t *ci = json_object_get(fr, "ci95");
        fprintf(f, "false rejects: %lld of %lld audited = %.1f%% (95%% interval %.1f%% .. %.1f%%)\n",
                (long long)geti(fr, "false_rejects"), (long long)geti(fr, "audited"),
                100 * json_real_value(json_object_get(fr, "rate")),
                100 * json_real_value(json_array_get(ci, 0)),
                100 * json_real_value(json_array_get(ci, 1)));
    } else {
        fprintf(f, "false rejects: no audited rejects yet\n");
    }
    const json_t *ka = json_object_get(au, "kappa");
    if (json_is_real(json_object_get(ka, "value")))
        fprintf(f, "station and auditor agree: Cohen's kappa %.3f\n",
                json_real_value(json_object_get(ka, "value")));
    else
        fprintf(f, "station and auditor agree: kappa undefined (too few or one-sided audits)\n");
    fprintf(f, "%s\n", CLI_CAUTION);
}
