#include "audit_csv.h"

#include <string.h>

#include "core/judge.h"

static void field(FILE *f, const char *s, int last)
{
    s = s ? s : "";
    if (s[strcspn(s, ",\"\r\n")]) {
        fputc('"', f);
        for (; *s; s++) {
            if (*s == '"')
                fputc('"', f);
            fputc(*s, f);
        }
        fputc('"', f);
    } else {
        fputs(s, f);
    }
    fputs(last ? "\r\n" : ",", f);
}

void audit_csv_header(FILE *f)
{
    fputs(AUDIT_CSV_COLUMNS "\r\n", f);
}

static const char *evidence(const struct log_record *r, const char *kind)
{
    for (int i = 0; i < r->nevidence; i++)
        if (strcmp(r->ev[i].kind, kind) == 0)
            return r->ev[i].name;
    return "";
}

void audit_csv_row(FILE *f, const struct log_record *r)
{
    char seq[24], ver[16];
    snprintf(seq, sizeof seq, "%lld", (long long)r->seq);
    snprintf(ver, sizeof ver, "%d", r->recipe_version);
    const struct log_disposition *d = r->has_disposition ? &r->disp : NULL;
    const char *v[] = {seq,
                       r->utc,
                       r->station,
                       r->operator_id,
                       r->serial,
                       r->recipe_id,
                       ver,
                       r->recipe_sha256,
                       r->model_sha256,
                       r->scale_id,
                       judge_verdict_name(r->verdict),
                       r->reasons_json,
                       r->regions_json,
                       evidence(r, "frame"),
                       evidence(r, "overlay"),
                       d ? log_disp_name(d->disp) : "",
                       d ? d->auditor : "",
                       d ? d->utc : "",
                       d ? d->comment : "",
                       r->hash,
                       r->chain_station,
                       r->line};
    size_t n = sizeof v / sizeof v[0];
    for (size_t i = 0; i < n; i++)
        field(f, v[i], i + 1 == n);
}
