#include "verify.h"

#include <string.h>

#include "core/inspect.h"
#include "core/pngio.h"
#include "report.h"

static int run_one(const struct recipe *r, const struct recipe_master *m,
                   struct verify_master *out, struct err *e)
{
    struct inspector *in = NULL;
    int rc = inspector_new(r, &in, e);
    if (rc)
        return rc;
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
    inspector_free(in);
    return out->report ? ST_OK : err_set(e, ST_ENOMEM, "out of memory reporting %s", m->image);
}

int verify_run(const struct recipe *r, struct verify_outcome *out, struct err *e)
{
    memset(out, 0, sizeof *out);
    if (r->nmasters == 0)
        return err_set(e, ST_EINVAL, "%s: no [master NAME] sections to verify with", r->path);
    for (int i = 0; i < r->nmasters; i++) {
        int rc = run_one(r, &r->masters[i], &out->m[i], e);
        if (rc) {
            verify_clear(out);
            return rc;
        }
        out->n++;
        out->matched += out->m[i].match;
    }
    return ST_OK;
}

void verify_clear(struct verify_outcome *o)
{
    for (int i = 0; i < o->n; i++)
        json_decref(o->m[i].report);
    memset(o, 0, sizeof *o);
}
