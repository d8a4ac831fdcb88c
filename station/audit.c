#include "audit.h"

#include <limits.h>
#include <stdlib.h>

#include "cli.h"
#include "core/judge.h"
#include "logbook.h"

int audit_open_source(const struct audit_source *src, int mode, struct log_db **out)
{
    char def[PATH_MAX];
    struct err e;
    err_clear(&e);
    const char *db_path = src->log;
    if (!db_path && logbook_default_path(src->station ? src->station : LOGBOOK_DEFAULT_STATION,
                                         def, sizeof def, &e) == ST_OK)
        db_path = def;
    struct log_options o;
    log_options_init(&o);
    o.evidence_dir = src->evidence;
    if (e.code || log_open(db_path, mode, &o, out, &e) ||
        ((src->scope || src->station) && log_scope(*out, src->station, &e))) {
        cli_say("%s", e.msg);
        log_close(*out);
        *out = NULL;
        return EXIT_ERROR;
    }
    return 0;
}

int audit_open_log(const char *db_path, const char *station, int mode, struct log_db **out)
{
    struct audit_source src = {.log = db_path, .station = station};
    return audit_open_source(&src, mode, out);
}

static json_t *parsed(const char *text)
{
    json_t *v = text ? json_loads(text, 0, NULL) : NULL;
    return v ? v : json_null();
}

json_t *audit_disposition_json(const struct log_disposition *d)
{
    return json_pack("{s:I,s:s,s:s,s:s,s:s}", "dseq", (json_int_t)d->dseq, "utc", d->utc,
                     "auditor", d->auditor, "disposition", log_disp_name(d->disp), "comment",
                     d->comment ? d->comment : "");
}

json_t *audit_record_json(const struct log_db *db, const struct log_record *r)
{
    json_t *ev = json_array();
    for (int i = 0; i < r->nevidence; i++) {
        char path[PATH_MAX];
        const struct log_evidence *v = &r->ev[i];
        if (log_record_evidence_path(db, r, v->name, path, sizeof path, NULL))
            path[0] = '\0';
        json_array_append_new(ev, json_pack("{s:s,s:s,s:s,s:s,s:I,s:b}", "kind", v->kind, "name",
                                            v->name, "path", path, "sha256", v->sha256, "bytes",
                                            (json_int_t)v->bytes, "purged", v->purged));
    }
    return json_pack("{s:I,s:s,s:s,s:s,s:s,s:s,s:i,s:s,s:s,s:s,s:s,s:o,s:o,s:o,s:o,s:o,s:s,s:s,"
                     "s:s,s:s}",
                     "seq", (json_int_t)r->seq, "utc", r->utc, "station", r->station, "operator",
                     r->operator_id, "serial", r->serial, "recipe", r->recipe_id,
                     "recipe_version", r->recipe_version, "recipe_sha256", r->recipe_sha256,
                     "model_sha256", r->model_sha256, "scale_id", r->scale_id, "verdict",
                     judge_verdict_name(r->verdict), "reasons", parsed(r->reasons_json),
                     "regions", parsed(r->regions_json), "camera", parsed(r->camera_json),
                     "evidence", ev, "disposition",
                     r->has_disposition ? audit_disposition_json(&r->disp) : json_null(), "prev_hash",
                     r->prev_hash, "hash", r->hash, "log_station", r->chain_station, "line",
                     r->line);
}

long long audit_parse_seq(const char *s)
{
    char *end;
    long long v = s ? strtoll(s, &end, 10) : 0;
    return s && *s && !*end && v >= 1 ? v : -1;
}
