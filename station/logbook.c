#include "logbook.h"

#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "core/model.h"
#include "core/recipever.h"
#include "report.h"

int logbook_default_path(const char *station, char *buf, size_t len, struct err *e)
{
    if (!log_station_id_ok(station))
        return err_set(e, ST_EINVAL, "station id '%s' must be 1..%d of letters, digits, . _ -",
                       station ? station : "", LOG_ID_MAX - 1);
    const char *xdg = getenv("XDG_DATA_HOME"), *home = getenv("HOME");
    int n;
    if (xdg && *xdg)
        n = snprintf(buf, len, "%s/station/%s/log.db", xdg, station);
    else if (home && *home)
        n = snprintf(buf, len, "%s/.local/share/station/%s/log.db", home, station);
    else
        n = snprintf(buf, len, "station-log/%s/log.db", station);
    if (n < 0 || (size_t)n >= len)
        return err_set(e, ST_ERANGE, "default log path for station '%s' too long", station);
    return ST_OK;
}

/* The log's file mode: LOG_FILE_MODE, or STATION_LOG_MODE for a site that
 * shares the log with a group (0640: the group reads, 0660: it writes too);
 * nothing for others, ever. */
static int log_mode(unsigned *mode, struct err *e)
{
    const char *s = getenv("STATION_LOG_MODE");
    *mode = LOG_FILE_MODE;
    if (!s || !*s)
        return ST_OK;
    char *end;
    unsigned long m = strtoul(s, &end, 8);
    if (*end || (m != 0600 && m != 0640 && m != 0660))
        return err_set(e, ST_EINVAL, "STATION_LOG_MODE '%s' must be 0600, 0640 or 0660", s);
    *mode = (unsigned)m;
    return ST_OK;
}

/* mkdir -p of the folder that holds path; folders it makes get mode
 * exactly. */
static int make_parent(const char *path, unsigned mode, struct err *e)
{
    char dir[PATH_MAX];
    snprintf(dir, sizeof dir, "%s", path);
    char *slash = strrchr(dir, '/');
    if (!slash || slash == dir)
        return ST_OK;
    *slash = '\0';
    for (char *p = dir + 1; ; p++) {
        if (*p != '/' && *p != '\0')
            continue;
        char c = *p;
        *p = '\0';
        if (mkdir(dir, mode) == 0 ? chmod(dir, mode) != 0 : errno != EEXIST)
            return err_set(e, ST_EIO, "%s: cannot create folder: %s", dir, strerror(errno));
        *p = c;
        if (!c)
            return ST_OK;
    }
}

int logbook_open(struct logbook *lb, const char *db_path, const char *station,
                 uint64_t budget_bytes, const struct recipe *r, struct err *e)
{
    memset(lb, 0, sizeof *lb);
    lb->r = r;
    char def[PATH_MAX];
    if (!station)
        station = LOGBOOK_DEFAULT_STATION;
    int rc = log_station_id_ok(station) ? ST_OK
                                    : err_set(e, ST_EINVAL,
                                              "station id '%s' must be 1..%d of letters, digits,"
                                              " . _ -",
                                              station, LOG_ID_MAX - 1);
    if (!rc && !db_path && !(rc = logbook_default_path(station, def, sizeof def, e)))
        db_path = def;
    struct model_meta m;
    /* the version every record names must be the recipe's: an edit not
     * saved (station recipe save) would be logged under the old number */
    if (!rc)
        rc = recipever_check(r->path, e);
    if (!rc)
        rc = sha256_hex_file(r->path, lb->recipe_sha256, e);
    if (!rc && !(rc = model_meta_load(r->model_path, &m, e)))
        snprintf(lb->model_sha256, sizeof lb->model_sha256, "%s", m.model_sha256);
    unsigned mode = LOG_FILE_MODE;
    if (!rc)
        rc = log_mode(&mode, e);
    if (!rc)
        rc = make_parent(db_path, log_folder_mode(mode), e);
    if (rc)
        return rc;
    snprintf(lb->station, sizeof lb->station, "%s", station);
    snprintf(lb->scale_id, sizeof lb->scale_id, "recipe:%.6gx%.6g-mm-per-px", r->mm_per_px_x,
             r->mm_per_px_y);
    struct log_options o;
    log_options_init(&o);
    o.evidence_budget = budget_bytes;
    o.file_mode = mode;
    return log_open(db_path, LOG_OPEN_WRITE, &o, &lb->db, e);
}

void logbook_close(struct logbook *lb)
{
    log_close(lb->db);
    lb->db = NULL;
}

static void fail_closed(json_t *report, const struct err *e)
{
    json_object_set_new(report, "verdict", json_string("NO_VERDICT"));
    json_t *reasons = json_object_get(report, "reasons");
    if (json_is_array(reasons))
        json_array_append_new(reasons, json_pack("{s:s,s:s,s:s}", "rule", "log_failed", "class",
                                                 "image", "message", e->msg));
}

static char *dump_array(json_t *report, const char *key)
{
    json_t *a = json_object_get(report, key);
    return a ? json_dumps(a, JSON_COMPACT | JSON_REAL_PRECISION(6)) : strdup("[]");
}

int logbook_record(struct logbook *lb, json_t *report, const struct inspector *in,
                   const struct image *frame, const struct judgement *j, const char *operator_id,
                   const char *serial, int64_t *seq, struct image **overlay, struct err *e)
{
    const struct recipe *r = lb->r;
    struct log_entry en = {
        .station = lb->station, .operator_id = operator_id, .serial = serial,
        .recipe_id = r->product, .recipe_version = r->version,
        .recipe_sha256 = lb->recipe_sha256, .model_sha256 = lb->model_sha256,
        .scale_id = lb->scale_id, .verdict = j ? j->verdict : VERDICT_NONE,
        .camera_json = lb->camera_json,
    };
    char *reasons = dump_array(report, "reasons"), *regions = dump_array(report, "regions");
    en.reasons_json = reasons;
    en.regions_json = regions;
    struct image *ov = NULL;
    int rc = reasons && regions ? ST_OK : err_set(e, ST_ENOMEM, "log: out of memory");
    int keep = frame && j &&
               (j->verdict != VERDICT_PASS ||
                log_pass_wants_evidence(lb->db, r->evidence_pass, r->evidence_every));
    if (!rc && keep) {
        en.frame = frame;
        ov = report_overlay(in, frame, j, e);
        en.overlay = ov;
        if (!ov)
            rc = e->code ? e->code : ST_ENOMEM;
    }
    if (!rc)
        rc = log_append(lb->db, &en, seq, e);
    if (rc)
        fail_closed(report, e);
    else
        json_object_set_new(report, "log_seq", json_integer((json_int_t)*seq));
    if (overlay && !rc)
        *overlay = ov;
    else
        image_free(ov);
    free(reasons);
    free(regions);
    return rc;
}
