/* The dispatcher: what core/log.h promises for every back-end, and each
 * storage call handed to the back-end's table (core/logbackend.h). */
#include "log.h"

#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "judge.h"
#include "logbackend.h"
#include "logcentral.h"
#include "logpg.h"
#include "logsqlite.h"
#include "recipe.h"

struct log_db {
    const struct log_ops *ops;
    void *b;                   /* the back-end's handle */
    long pass_count;           /* PASS inspections seen by log_pass_wants_evidence */
};

struct log_iter {
    const struct log_ops *ops;
    void *it;
};

static const char *const disp_names[LOG_DISP_COUNT] = {"none", "confirmed", "false-reject",
                                                       "rework", "other"};

const char *log_disp_name(int disp)
{
    return disp >= 0 && disp < LOG_DISP_COUNT ? disp_names[disp] : "?";
}

int log_disp_parse(const char *name)
{
    for (int i = 0; i < LOG_DISP_COUNT; i++)
        if (name && strcmp(name, disp_names[i]) == 0)
            return i;
    return -1;
}

int log_verdict_parse(const char *s)
{
    for (int v = VERDICT_PASS; v <= VERDICT_NONE; v++)
        if (s && strcmp(s, judge_verdict_name(v)) == 0)
            return v;
    return -1;
}

static int sys_open(const char *path, int flags, mode_t mode)
{
    return open(path, flags, mode);
}

static const struct log_io io_default = {sys_open, write, fsync, close, rename};

const struct log_io *log_io_default(void)
{
    return &io_default;
}

unsigned log_folder_mode(unsigned file_mode)
{
    return file_mode | (file_mode & 0444u) >> 2;
}

void log_options_init(struct log_options *o)
{
    memset(o, 0, sizeof *o);
    o->file_mode = LOG_FILE_MODE;
    o->png_level = 1;
}

void log_record_init(struct log_record *r)
{
    memset(r, 0, sizeof *r);
}

void log_record_clear(struct log_record *r)
{
    free(r->reasons_json);
    free(r->regions_json);
    free(r->camera_json);
    free(r->disp.comment);
    log_record_init(r);
}

void log_filter_init(struct log_filter *f)
{
    memset(f, 0, sizeof *f);
    f->verdict = -1;
    f->disp = -1;
}

void log_dispositions_free(struct log_disposition *d, int n)
{
    for (int i = 0; d && i < n; i++)
        free(d[i].comment);
    free(d);
}

void log_verifications_free(struct log_verification *v, int n)
{
    for (int i = 0; v && i < n; i++)
        free(v[i].masters_json);
    free(v);
}

int log_pass_wants_evidence(struct log_db *db, int pass_evidence, int every)
{
    db->pass_count++;
    if (pass_evidence == RECIPE_PASS_ALL)
        return 1;
    return pass_evidence == RECIPE_PASS_EVERY && every > 0 && db->pass_count % every == 0;
}


void log_stations_free(struct log_station *s)
{
    free(s);
}

int log_open(const char *path, int mode, const struct log_options *opt, struct log_db **out,
             struct err *e)
{
    *out = NULL;
    struct log_db *db = calloc(1, sizeof *db);
    if (!db)
        return err_set(e, ST_ENOMEM, "log: out of memory");
    int central = path && logpg_is_conninfo(path);
    db->ops = central ? &logcentral_ops : &logsqlite_ops;
    int rc = central ? logcentral_open(path, mode, opt, &db->b, e)
                     : logsqlite_open(path, mode, opt, &db->b, e);
    if (rc) {
        free(db);
        return rc;
    }
    *out = db;
    return ST_OK;
}

void log_close(struct log_db *db)
{
    if (!db)
        return;
    db->ops->close(db->b);
    free(db);
}

const char *log_kind(const struct log_db *db)
{
    return db->ops->kind;
}

int log_append(struct log_db *db, const struct log_entry *entry, int64_t *seq, struct err *e)
{
    return db->ops->append(db->b, entry, seq, e);
}

int log_iter_new(struct log_db *db, const struct log_filter *f, struct log_iter **out,
                 struct err *e)
{
    *out = NULL;
    struct log_iter *it = calloc(1, sizeof *it);
    if (!it)
        return err_set(e, ST_ENOMEM, "%s: out of memory", log_path(db));
    it->ops = db->ops;
    int rc = db->ops->iter_new(db->b, f, &it->it, e);
    if (rc) {
        free(it);
        return rc;
    }
    *out = it;
    return ST_OK;
}

int log_iter_next(struct log_iter *it, struct log_record *rec, int *have, struct err *e)
{
    return it->ops->iter_next(it->it, rec, have, e);
}

void log_iter_free(struct log_iter *it)
{
    if (!it)
        return;
    it->ops->iter_free(it->it);
    free(it);
}

int log_get(struct log_db *db, int64_t seq, struct log_record *rec, struct err *e)
{
    return db->ops->get(db->b, seq, rec, e);
}

int log_dispositions_get(struct log_db *db, int64_t seq, struct log_disposition **out, int *n,
                         struct err *e)
{
    *out = NULL;
    *n = 0;
    return db->ops->dispositions_get(db->b, seq, out, n, e);
}

int log_record_hash(struct log_db *db, int64_t seq, char hex[SHA256_HEX_LEN], struct err *e)
{
    return db->ops->record_hash(db->b, seq, hex, e);
}

int log_dispose(struct log_db *db, int64_t seq, const char *auditor, int disp,
                const char *comment, int64_t *dseq, struct err *e)
{
    return db->ops->dispose(db->b, seq, auditor, disp, comment, dseq, e);
}

int log_verification_append(struct log_db *db, struct log_verification *v, struct err *e)
{
    return db->ops->verification_append(db->b, v, e);
}

int log_verification_last(struct log_db *db, const char *station, const char *recipe_id,
                          int recipe_version, const char *model_sha256,
                          struct log_verification *v, int *found, struct err *e)
{
    return db->ops->verification_last(db->b, station, recipe_id, recipe_version, model_sha256,
                                      v, found, e);
}

int log_verifications_get(struct log_db *db, struct log_verification **out, int *n,
                          struct err *e)
{
    *out = NULL;
    *n = 0;
    return db->ops->verifications_get(db->b, out, n, e);
}

int log_signing_get(struct log_db *db, struct log_signing *s, struct err *e)
{
    return db->ops->signing_get(db->b, s, e);
}

int log_check_integrity(struct log_db *db, struct err *e)
{
    return db->ops->check_integrity(db->b, e);
}

int log_stations_get(struct log_db *db, struct log_station **out, int *n, struct err *e)
{
    *out = NULL;
    *n = 0;
    return db->ops->stations_get(db->b, out, n, e);
}

int log_purges_get(struct log_db *db, struct log_purge **out, int *n, struct err *e)
{
    *out = NULL;
    *n = 0;
    return db->ops->purges_get(db->b, out, n, e);
}

int log_scope(struct log_db *db, const char *station, struct err *e)
{
    return db->ops->scope(db->b, station, e);
}

const char *log_evidence_dir(const struct log_db *db, const struct log_record *r, char *buf,
                             size_t len)
{
    return db->ops->evidence_dir(db->b, r, buf, len);
}

int log_record_evidence_path(const struct log_db *db, const struct log_record *r,
                             const char *name, char *buf, size_t len, struct err *e)
{
    char dir[PATH_MAX];
    if (!log_evidence_dir(db, r, dir, sizeof dir))
        return err_set(e, ST_EIO,
                       "evidence %s not available here (a central database: --evidence DIR"
                       " finds what station sync --evidence-to copied)", name);
    if ((size_t)snprintf(buf, len, "%s/%s", dir, name) >= len)
        return err_set(e, ST_ERANGE, "%s/%s: path too long", dir, name);
    return ST_OK;
}

int log_evidence_path(const struct log_db *db, const char *name, char *buf, size_t len,
                      struct err *e)
{
    return log_record_evidence_path(db, NULL, name, buf, len, e);
}

const char *log_path(const struct log_db *db)
{
    return db->ops->path(db->b);
}

int log_station_id_ok(const char *s)
{
    if (!s || !*s || strlen(s) >= LOG_ID_MAX || !strcmp(s, ".") || !strcmp(s, ".."))
        return 0;
    for (; *s; s++)
        if (!(*s >= 'a' && *s <= 'z') && !(*s >= 'A' && *s <= 'Z') && !(*s >= '0' && *s <= '9') &&
            !strchr("._-", *s))
            return 0;
    return 1;
}
