/* auditcalc: station/audit_stats and station/audit_report on records given
 * as JSON lines, so the reference tests choose every time and verdict.
 *
 *   auditcalc [--shifts H,H,..] [--offset MIN] [--by-shift] [--html OUT [--thumb PNG]]
 *
 * stdin: one JSON object per line: seq, utc, verdict ("PASS", "FAIL",
 * "NO_VERDICT"), reasons (an array), disp (a log_disp_name, optional).
 * stdout: audit_stats_json's object as one line.  With --html the report page
 * is written to OUT, every reject shown with PNG (downscaled) as its
 * thumbnail, newest first as `audit report` does.  Errors exit 3. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/judge.h"
#include "core/pngio.h"
#include "station/audit_report.h"
#include "station/audit_stats.h"
#include "toolarg.h"

#define MAX_RECORDS 100000

static int fail(const char *msg)
{
    fprintf(stderr, "auditcalc: %s\n", msg);
    return 3;
}

int main(int argc, char **argv)
{
    const char *shifts = "6,14,22", *html = NULL, *thumb = NULL;
    int offset = 0, by_shift = 0;
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--shifts") && i + 1 < argc)
            shifts = argv[++i];
        else if (!strcmp(argv[i], "--offset") && i + 1 < argc && !parse_int(argv[i + 1], &offset))
            i++;
        else if (!strcmp(argv[i], "--by-shift"))
            by_shift = 1;
        else if (!strcmp(argv[i], "--html") && i + 1 < argc)
            html = argv[++i];
        else if (!strcmp(argv[i], "--thumb") && i + 1 < argc)
            thumb = argv[++i];
        else
            return fail("usage: auditcalc [--shifts H,..] [--offset MIN] [--by-shift] "
                        "[--html OUT [--thumb PNG]]");
    }
    struct err e;
    err_clear(&e);
    struct qstats_shifts sh;
    struct audit_stats st;
    if (qstats_shifts_parse(shifts, &sh, &e))
        return fail(e.msg);
    sh.offset_min = offset;
    if (audit_stats_init(&st, &sh, &e))
        return fail(e.msg);
    struct log_record *recs = calloc(MAX_RECORDS, sizeof *recs);
    size_t n = 0;
    char line[8192];
    while (recs && n < MAX_RECORDS && fgets(line, sizeof line, stdin)) {
        json_error_t je;
        json_t *o = json_loads(line, 0, &je);
        if (!o)
            return fail(je.text);
        struct log_record *r = &recs[n++];
        r->seq = json_integer_value(json_object_get(o, "seq"));
        snprintf(r->utc, sizeof r->utc, "%s", json_string_value(json_object_get(o, "utc")));
        r->verdict = log_verdict_parse(json_string_value(json_object_get(o, "verdict")));
        if (r->verdict < 0)
            return fail("a record's verdict is not PASS, FAIL or NO_VERDICT");
        r->reasons_json = json_dumps(json_object_get(o, "reasons"), JSON_COMPACT);
        const char *d = json_string_value(json_object_get(o, "disp"));
        r->disp.disp = d ? log_disp_parse(d) : LOG_DISP_NONE;
        r->has_disposition = r->disp.disp > 0;
        snprintf(r->disp.auditor, sizeof r->disp.auditor, "a-%lld", (long long)r->seq);
        json_decref(o);
        if (audit_stats_add(&st, r, &e))
            return fail(e.msg);
    }
    json_t *js = audit_stats_json(&st, by_shift);
    if (!recs || !js)
        return fail("out of memory");
    json_dumpf(js, stdout, JSON_COMPACT | JSON_REAL_PRECISION(17));
    fputc('\n', stdout);
    int rc = 0;
    if (html) {
        struct image *full = NULL, *small = NULL;
        if (thumb && (pngio_load_rgb(thumb, &full, &e) ||
                      !(small = audit_thumb_scale(full, AUDIT_THUMB_SIDE, &e))))
            return fail(e.msg);
        struct audit_thumb *t = calloc(n + 1, sizeof *t);
        size_t nt = 0;
        for (size_t i = n; t && i-- > 0;)
            if (recs[i].verdict != VERDICT_PASS)
                t[nt++] = (struct audit_thumb){&recs[i], small, "no evidence"};
        FILE *f = fopen(html, "wb");
        if (!t || !f || audit_report_html(f, "records <from> \"stdin\"", js, t, nt, &e) ||
            fclose(f))
            rc = fail(e.msg[0] ? e.msg : "cannot write the page");
        free(t);
        image_free(full);
        image_free(small);
    }
    for (size_t i = 0; i < n; i++)
        free(recs[i].reasons_json);
    free(recs);
    json_decref(js);
    audit_stats_clear(&st);
    return rc;
}
