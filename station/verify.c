#include "verify.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/inspect.h"
#include "core/judge.h"
#include "core/log.h"
#include "core/pngio.h"
#include "core/qstats.h"
#include "report.h"

static int run_one(struct inspector *in, const struct recipe_master *m,
                   struct verify_master *out, struct err *e)
{
    struct image *img = NULL;
    struct judgement j;
    struct inspect_times t = {0};
    struct err ie;
    err_clear(&ie);
    if (pngio_load_rgb(m->image, &img, &ie) || inspector_run(in, img, &j, &t, &ie)) {
        out->verdict = VERDICT_NONE;
        out->report = report_json_error(m->image, &ie);
    } else {
        out->verdict = j.verdict;
        out->report = report_json(m->image, in, &j, &t);
    }
    out->match = out->verdict == m->expect;
    image_free(img);
    return out->report ? ST_OK : err_set(e, ST_ENOMEM, "out of memory reporting %s", m->image);
}

int verify_run(const struct recipe *r, struct verify_outcome *out, struct err *e)
{
    memset(out, 0, sizeof *out);
    if (r->nmasters == 0)
        return err_set(e, ST_EINVAL, "%s: no [master NAME] sections to verify with", r->path);
    struct inspector *in = NULL;
    int rc = inspector_new(r, &in, e);
    for (int i = 0; i < r->nmasters && !rc; i++) {
        /* masters are separate parts, not a camera's consecutive frames */
        inspector_forget_last_frame(in);
        if ((rc = run_one(in, &r->masters[i], &out->m[i], e)))
            break;
        out->n++;
        out->matched += out->m[i].match;
    }
    inspector_free(in);
    if (rc)
        verify_clear(out);
    return rc;
}

void verify_clear(struct verify_outcome *o)
{
    for (int i = 0; i < o->n; i++)
        json_decref(o->m[i].report);
    memset(o, 0, sizeof *o);
}

int verify_record(struct logbook *lb, const struct recipe *r, const struct verify_outcome *v,
                  int64_t *vseq, struct err *e)
{
    json_t *list = json_array();
    for (int i = 0; list && i < v->n; i++)
        json_array_append_new(list, json_pack("{s:s, s:s, s:s, s:b}", "master",
                                              r->masters[i].name, "expect",
                                              judge_verdict_name(r->masters[i].expect), "verdict",
                                              judge_verdict_name(v->m[i].verdict), "match",
                                              v->m[i].match));
    char *text = list ? json_dumps(list, JSON_COMPACT) : NULL;
    json_decref(list);
    if (!text)
        return err_set(e, ST_ENOMEM, "out of memory recording the verification");
    struct log_verification lv;
    memset(&lv, 0, sizeof lv);
    snprintf(lv.station, sizeof lv.station, "%s", lb->station);
    snprintf(lv.recipe_id, sizeof lv.recipe_id, "%s", r->product);
    lv.recipe_version = r->version;
    snprintf(lv.recipe_sha256, sizeof lv.recipe_sha256, "%s", lb->recipe_sha256);
    snprintf(lv.model_sha256, sizeof lv.model_sha256, "%s", lb->model_sha256);
    lv.passed = v->n > 0 && v->matched == v->n;
    lv.masters_json = text;
    int rc = log_verification_append(lb->db, &lv, e);
    free(text);
    *vseq = lv.vseq;
    return rc;
}

int verify_hours_since(struct logbook *lb, const struct recipe *r, double *hours, struct err *e)
{
    struct log_verification lv;
    int found = 0;
    *hours = JUDGE_NEVER_VERIFIED_H;
    int rc = log_verification_last(lb->db, lb->station, r->product, r->version, lb->model_sha256,
                                   &lv, &found, e);
    if (rc || !found || !lv.passed)
        return rc;
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    int64_t then;
    struct err pe;
    /* a time that does not parse proves nothing either: the gate stays shut */
    if (qstats_parse_time(lv.utc, &then, &pe) == ST_OK) {
        double h = (now.tv_sec + now.tv_nsec / 1e9 - (double)then) / 3600.0;
        /* a record from the future (a clock set back) proves nothing */
        *hours = h >= 0 && h < JUDGE_NEVER_VERIFIED_H ? h : JUDGE_NEVER_VERIFIED_H;
    }
    return ST_OK;
}
