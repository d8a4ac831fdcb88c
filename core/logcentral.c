#include "logcentral.h"

#include <inttypes.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "judge.h"
#include "logpg.h"

#define CENTRAL_FETCH 500          /* rows per FETCH of a walk */
#define CENTRAL_PARAMS 16

struct central {
    struct logpg *pg;
    int has_evdir;
    char evdir[PATH_MAX];
    char scope[LOG_ID_MAX];        /* "" none */
    char only[LOG_ID_MAX];         /* the one station held, when the chain key is implied */
    unsigned walks;                /* names each walk's cursor */
};

/* A record row: its columns, the station's line, its two evidence slots
 * (frame, overlay; purged flags from evidence_purged) and its latest
 * disposition, so a walk needs one query, not three per record.  Times are
 * compared byte-wise (COLLATE "C"), as SQLite compares them locally. */
#define REC_SELECT                                                                                \
    "SELECT r.seq, r.utc, r.rec_station, r.operator, r.serial, r.recipe_id, r.recipe_version,"   \
    " r.recipe_sha256, r.model_sha256, r.scale_id, r.verdict, r.reasons, r.regions, r.camera,"   \
    " r.prev_hash, r.hash, r.sig, r.station, s.line,"                                           \
    " ef.name, ef.sha256, ef.bytes, pf.name IS NOT NULL,"                                       \
    " eo.name, eo.sha256, eo.bytes, po.name IS NOT NULL,"                                       \
    " d.dseq, d.record_seq, d.utc, d.auditor, d.disposition, d.comment, d.prev_hash, d.hash,"   \
    " d.sig"                                                                                     \
    " FROM records r JOIN stations s ON s.station = r.station"                                  \
    " LEFT JOIN evidence ef ON ef.station = r.station AND ef.record_seq = r.seq"               \
    " AND ef.kind = 'frame'"                                                                     \
    " LEFT JOIN evidence_purged pf ON pf.station = ef.station AND pf.name = ef.name"            \
    " LEFT JOIN evidence eo ON eo.station = r.station AND eo.record_seq = r.seq"               \
    " AND eo.kind = 'overlay'"                                                                   \
    " LEFT JOIN evidence_purged po ON po.station = eo.station AND po.name = eo.name"            \
    " LEFT JOIN LATERAL (SELECT * FROM dispositions x WHERE x.station = r.station"             \
    " AND x.record_seq = r.seq ORDER BY x.dseq DESC LIMIT 1) d ON true WHERE true"
#define DISP_COLS "dseq, record_seq, utc, auditor, disposition, comment, prev_hash, hash, sig"
#define VER_COLS                                                                              \
    "vseq, utc, rec_station, recipe_id, recipe_version, recipe_sha256, model_sha256, outcome,"  \
    " masters, prev_hash, hash, sig"

/* Runs sql with text parameters; NULL (and e filled) unless it succeeded. */
static PGresult *run(struct central *c, const char *sql, int n, const char *const *p,
                     const char *what, struct err *e)
{
    PGconn *conn = logpg_conn(c->pg);
    PGresult *r = PQexecParams(conn, sql, n, NULL, p, NULL, NULL, 0);
    int st = PQresultStatus(r);
    if (st == PGRES_TUPLES_OK || st == PGRES_COMMAND_OK)
        return r;
    const char *primary = r ? PQresultErrorField(r, PG_DIAG_MESSAGE_PRIMARY) : NULL;
    char line[400];
    err_set(e, PQstatus(conn) == CONNECTION_OK ? ST_ELIB : ST_EIO, "central database %s: %s: %s",
            logpg_name(c->pg), what,
            logpg_first_line(primary ? primary : PQerrorMessage(conn), line, sizeof line));
    PQclear(r);
    return NULL;
}

static void col_copy(PGresult *r, int row, int col, char *dst, size_t len)
{
    snprintf(dst, len, "%s", PQgetisnull(r, row, col) ? "" : PQgetvalue(r, row, col));
}

static char *col_dup(PGresult *r, int row, int col, int *oom)
{
    if (PQgetisnull(r, row, col))
        return NULL;
    char *d = strdup(PQgetvalue(r, row, col));
    if (!d)
        *oom = 1;
    return d;
}

static int64_t col_i64(PGresult *r, int row, int col)
{
    return PQgetisnull(r, row, col) ? 0 : strtoll(PQgetvalue(r, row, col), NULL, 10);
}

static int col_true(PGresult *r, int row, int col)
{
    return !PQgetisnull(r, row, col) && PQgetvalue(r, row, col)[0] == 't';
}

/* The disposition columns DISP_COLS starting at col. */
/* Every row of r (then cleared) as a heap array of elem-sized values, each
 * filled by read (nonzero: out of memory); on failure free_rows, given the
 * rows read, frees what they hold and the array. */
static int rows_read(const struct central *c, PGresult *r, size_t elem,
                     int (*read)(PGresult *, int, void *), void (*free_rows)(void *, int),
                     void **out, int *n, struct err *e)
{
    int rows = PQntuples(r), oom = 0;
    char *a = calloc(rows ? (size_t)rows : 1, elem);
    for (int i = 0; a && !oom && i < rows; i++)
        oom = read(r, i, a + (size_t)i * elem);
    PQclear(r);
    if (!a || oom) {
        free_rows(a, a ? rows : 0);
        return err_set(e, ST_ENOMEM, "central database %s: out of memory", logpg_name(c->pg));
    }
    *out = a;
    *n = rows;
    return ST_OK;
}

static void free_plain(void *a, int n)
{
    (void)n;
    free(a);
}

static int read_disposition(PGresult *r, int row, int col, struct log_disposition *d)
{
    int oom = 0;
    d->dseq = col_i64(r, row, col);
    d->record_seq = col_i64(r, row, col + 1);
    col_copy(r, row, col + 2, d->utc, sizeof d->utc);
    col_copy(r, row, col + 3, d->auditor, sizeof d->auditor);
    d->disp = log_disp_parse(PQgetvalue(r, row, col + 4));
    d->comment = col_dup(r, row, col + 5, &oom);
    col_copy(r, row, col + 6, d->prev_hash, sizeof d->prev_hash);
    col_copy(r, row, col + 7, d->hash, sizeof d->hash);
    col_copy(r, row, col + 8, d->sig, sizeof d->sig);
    return oom;
}

/* One REC_SELECT row into rec (cleared first). */
static int read_record(struct central *c, PGresult *res, int row, struct log_record *rec,
                       struct err *e)
{
    log_record_clear(rec);
    int oom = 0;
    rec->seq = col_i64(res, row, 0);
    col_copy(res, row, 1, rec->utc, sizeof rec->utc);
    col_copy(res, row, 2, rec->station, sizeof rec->station);
    col_copy(res, row, 3, rec->operator_id, sizeof rec->operator_id);
    col_copy(res, row, 4, rec->serial, sizeof rec->serial);
    col_copy(res, row, 5, rec->recipe_id, sizeof rec->recipe_id);
    rec->recipe_version = (int)col_i64(res, row, 6);
    col_copy(res, row, 7, rec->recipe_sha256, sizeof rec->recipe_sha256);
    col_copy(res, row, 8, rec->model_sha256, sizeof rec->model_sha256);
    col_copy(res, row, 9, rec->scale_id, sizeof rec->scale_id);
    rec->verdict = log_verdict_parse(PQgetvalue(res, row, 10));
    rec->reasons_json = col_dup(res, row, 11, &oom);
    rec->regions_json = col_dup(res, row, 12, &oom);
    rec->camera_json = col_dup(res, row, 13, &oom);
    col_copy(res, row, 14, rec->prev_hash, sizeof rec->prev_hash);
    col_copy(res, row, 15, rec->hash, sizeof rec->hash);
    col_copy(res, row, 16, rec->sig, sizeof rec->sig);
    col_copy(res, row, 17, rec->chain_station, sizeof rec->chain_station);
    col_copy(res, row, 18, rec->line, sizeof rec->line);
    static const char *const kinds[LOG_MAX_EVIDENCE] = {"frame", "overlay"};
    for (int k = 0; k < LOG_MAX_EVIDENCE; k++) {
        int col = 19 + 4 * k;
        if (PQgetisnull(res, row, col))
            continue;
        struct log_evidence *v = &rec->ev[rec->nevidence++];
        snprintf(v->kind, sizeof v->kind, "%s", kinds[k]);
        col_copy(res, row, col, v->name, sizeof v->name);
        col_copy(res, row, col + 1, v->sha256, sizeof v->sha256);
        v->bytes = col_i64(res, row, col + 2);
        v->purged = col_true(res, row, col + 3);
    }
    if (!PQgetisnull(res, row, 27)) {
        rec->has_disposition = 1;
        oom |= read_disposition(res, row, 27, &rec->disp);
    }
    if (oom)
        return err_set(e, ST_ENOMEM, "central database %s: out of memory reading record %" PRId64,
                       logpg_name(c->pg), rec->seq);
    return ST_OK;
}

/* ---- stations and the chain key ---- */

static int read_station(PGresult *r, int i, void *out)
{
    struct log_station *s = out;
    col_copy(r, i, 0, s->station, sizeof s->station);
    col_copy(r, i, 1, s->line, sizeof s->line);
    col_copy(r, i, 2, s->public_key, sizeof s->public_key);
    s->records = col_i64(r, i, 3);
    s->last_seq = col_i64(r, i, 4);
    return 0;
}

static int stations_get(void *self, struct log_station **out, int *n, struct err *e)
{
    struct central *c = self;
    *out = NULL;
    *n = 0;
    PGresult *r = run(c,
                      "SELECT s.station, s.line, s.public_key,"
                      " (SELECT count(*) FROM records r WHERE r.station = s.station),"
                      " (SELECT COALESCE(max(seq), 0) FROM records r WHERE r.station = s.station)"
                      " FROM stations s ORDER BY s.station COLLATE \"C\"",
                      0, NULL, "cannot list the stations", e);
    if (!r)
        return e ? e->code : ST_ELIB;
    void *a = NULL;
    int rc = rows_read(c, r, sizeof **out, read_station, free_plain, &a, n, e);
    *out = a;
    return rc;
}

/* "A, B, C" of the stations held, for messages; *n their count. */
static int held_names(struct central *c, char *buf, size_t len, int *n, struct err *e)
{
    struct log_station *s;
    int rc = stations_get(c, &s, n, e);
    if (rc)
        return rc;
    size_t at = 0;
    buf[0] = '\0';
    for (int i = 0; i < *n && at < len; i++)
        at += (size_t)snprintf(buf + at, len - at, "%s%s", i ? ", " : "", s[i].station);
    if (*n == 1)
        snprintf(c->only, sizeof c->only, "%s", s[0].station);
    log_stations_free(s);
    return ST_OK;
}

/* The station the per-chain calls read: the scope, else the only one held. */
static int chain_key(struct central *c, const char **key, struct err *e)
{
    *key = c->scope;
    if (c->scope[0])
        return ST_OK;
    char names[400];
    int n, rc = held_names(c, names, sizeof names, &n, e);
    if (rc)
        return rc;
    if (n == 1) {
        *key = c->only;
        return ST_OK;
    }
    if (n == 0)
        return err_set(e, ST_ERANGE, "central database %s holds no station yet (station sync"
                       " forwards one)", logpg_name(c->pg));
    return err_set(e, ST_EINVAL,
                   "central database %s holds %d stations (%s): sequence numbers are per"
                   " station, so name one (--station ID)",
                   logpg_name(c->pg), n, names);
}

/* Runs sql on the one chain the reader is on: $1 is that chain's station
 * (into *key when key is not NULL), $2 on the nmore values of more. */
static int chain_run(struct central *c, const char *sql, const char *const *more, int nmore, const char *what,
                     const char **key, PGresult **out, struct err *e)
{
    enum { MORE_MAX = 4 };
    const char *p[1 + MORE_MAX];
    int rc = nmore > MORE_MAX ? err_set(e, ST_EINVAL, "chain_run: %d parameters", nmore) : chain_key(c, &p[0], e);
    if (rc)
        return rc;
    for (int i = 0; i < nmore; i++)
        p[1 + i] = more[i];
    if (key)
        *key = p[0];
    *out = run(c, sql, 1 + nmore, p, what, e);
    return *out ? ST_OK : e ? e->code : ST_ELIB;
}

/* chain_run's rows, each read into an element of elem bytes (rows_read);
 * *out is NULL when it fails. */
static int chain_rows(struct central *c, const char *sql, const char *const *more, int nmore, const char *what,
                      size_t elem, int (*read)(PGresult *, int, void *), void (*free_rows)(void *, int),
                      void **out, int *n, struct err *e)
{
    PGresult *r;
    *out = NULL;
    int rc = chain_run(c, sql, more, nmore, what, NULL, &r, e);
    return rc ? rc : rows_read(c, r, elem, read, free_rows, out, n, e);
}

static int scope(void *self, const char *station, struct err *e)
{
    struct central *c = self;
    c->scope[0] = '\0';
    if (!station || !*station)
        return ST_OK;
    if (!log_station_id_ok(station))
        return err_set(e, ST_EINVAL, "station id '%s' must be 1..%d of letters, digits, . _ -",
                       station, LOG_ID_MAX - 1);
    const char *p[1] = {station};
    PGresult *r = run(c, "SELECT 1 FROM stations WHERE station = $1", 1, p,
                      "cannot read the stations", e);
    if (!r)
        return e ? e->code : ST_ELIB;
    int found = PQntuples(r) == 1;
    PQclear(r);
    if (!found) {
        char names[400];
        int n, rc = held_names(c, names, sizeof names, &n, e);
        return rc ? rc
                  : err_set(e, ST_ERANGE, "central database %s holds no station %s (held: %s)",
                            logpg_name(c->pg), station, n ? names : "none");
    }
    if ((size_t)snprintf(c->scope, sizeof c->scope, "%s", station) >= sizeof c->scope)
        return err_set(e, ST_ERANGE, "station id '%.20s...' too long", station);
    return ST_OK;
}

/* ---- walks ---- */

/* A query under construction: conditions appended with their parameters. */
struct query {
    char sql[4096];
    const char *p[CENTRAL_PARAMS];
    char num[CENTRAL_PARAMS][24];
    int n;
    int overflow;                  /* a condition did not fit: the query must not run */
};

/* Appends " AND " cond, where every %d in cond (at most two) is the next
 * parameter's number, bound to v. */
static void q_cond(struct query *q, const char *cond, const char *v)
{
    size_t at = strlen(q->sql);
    int k = q->n + 1;
    int n = snprintf(q->sql + at, sizeof q->sql - at, " AND ");
    if (n >= 0 && (size_t)n < sizeof q->sql - at) {
        at += (size_t)n;
        n = snprintf(q->sql + at, sizeof q->sql - at, cond, k, k);
    }
    if (n < 0 || (size_t)n >= sizeof q->sql - at || q->n >= CENTRAL_PARAMS) {
        q->overflow = 1;
        return;
    }
    q->p[q->n++] = v;
}

static void q_text(struct query *q, const char *text)
{
    size_t at = strlen(q->sql);
    if ((size_t)snprintf(q->sql + at, sizeof q->sql - at, "%s", text) >= sizeof q->sql - at)
        q->overflow = 1;
}

static int q_check(struct central *c, const struct query *q, struct err *e)
{
    return q->overflow ? err_set(e, ST_ERANGE, "central database %s: the selection is too long"
                                 " for one query", logpg_name(c->pg))
                       : ST_OK;
}

static void q_cond_i64(struct query *q, const char *cond, int64_t v)
{
    snprintf(q->num[q->n], sizeof q->num[q->n], "%" PRId64, v);
    q_cond(q, cond, q->num[q->n]);
}

#define JSON_HAS(key)                                                                      \
    "(EXISTS(SELECT 1 FROM json_array_elements(r.reasons::json) x WHERE x->>'" key "' = $%d)" \
    " OR EXISTS(SELECT 1 FROM json_array_elements(r.regions::json) x WHERE x->>'" key        \
    "' = $%d))"

static void q_filter(struct central *c, struct query *q, const struct log_filter *f)
{
    snprintf(q->sql, sizeof q->sql, "%s", REC_SELECT);
    q->n = 0;
    q->overflow = 0;
    if (c->scope[0])
        q_cond(q, "r.station = $%d", c->scope);
    if (!f)
        return;
    if (f->from_utc)
        q_cond(q, "r.utc COLLATE \"C\" >= $%d", f->from_utc);
    if (f->to_utc)
        q_cond(q, "r.utc COLLATE \"C\" < $%d", f->to_utc);
    if (f->verdict >= 0)
        q_cond(q, "r.verdict = $%d", judge_verdict_name(f->verdict));
    if (f->rejects)
        q_text(q, " AND r.verdict <> 'PASS'");
    if (f->cls)
        q_cond(q, JSON_HAS("class"), f->cls);
    if (f->zone)
        q_cond(q, JSON_HAS("zone"), f->zone);
    if (f->recipe_id)
        q_cond(q, "r.recipe_id = $%d", f->recipe_id);
    if (f->station)
        q_cond(q, "r.station = $%d", f->station);
    if (f->line)
        q_cond(q, "s.line = $%d", f->line);
    if (f->disp == LOG_DISP_NONE)
        q_text(q, " AND d.dseq IS NULL");
    else if (f->disp > 0)
        q_cond(q, "d.disposition = $%d", log_disp_name(f->disp));
    if (f->seq_from > 0)
        q_cond_i64(q, "r.seq >= $%d", f->seq_from);
    if (f->seq_to > 0)
        q_cond_i64(q, "r.seq <= $%d", f->seq_to);
}

struct central_iter {
    struct central *c;
    PGresult *batch;
    int row, done, began;
    char cursor[32];
};

static int exec_plain(struct central *c, const char *sql, const char *what, struct err *e)
{
    PGresult *r = run(c, sql, 0, NULL, what, e);
    PQclear(r);
    return r ? ST_OK : e ? e->code : ST_ELIB;
}

static void iter_free(void *self)
{
    struct central_iter *it = self;
    if (!it)
        return;
    PQclear(it->batch);
    char sql[64];
    snprintf(sql, sizeof sql, "CLOSE %s", it->cursor);
    if (it->cursor[0])
        exec_plain(it->c, sql, "cannot close the walk", NULL);
    if (it->began)
        exec_plain(it->c, "COMMIT", "cannot end the walk", NULL);
    free(it);
}

/* A walk is a cursor in a read-only snapshot (a transaction of its own
 * unless one is open: an inner walk shares the outer one's). */
static int iter_new(void *self, const struct log_filter *f, void **out, struct err *e)
{
    struct central *c = self;
    *out = NULL;
    struct central_iter *it = calloc(1, sizeof *it);
    struct query *q = malloc(sizeof *q);
    int rc = ST_OK;
    if (!it || !q) {
        rc = err_set(e, ST_ENOMEM, "central database %s: out of memory", logpg_name(c->pg));
        goto fail;
    }
    it->c = c;
    if (PQtransactionStatus(logpg_conn(c->pg)) == PQTRANS_IDLE) {
        rc = exec_plain(c, "BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY",
                        "cannot start reading", e);
        if (rc)
            goto fail;
        it->began = 1;
    }
    q_filter(c, q, f);
    rc = q_check(c, q, e);
    if (rc)
        goto fail;
    char head[64];
    snprintf(it->cursor, sizeof it->cursor, "station_walk_%u", ++c->walks);
    snprintf(head, sizeof head, "DECLARE %s NO SCROLL CURSOR FOR ", it->cursor);
    size_t hl = strlen(head), sl = strlen(q->sql);
    char *sql = malloc(hl + sl + 64);
    if (!sql) {
        rc = err_set(e, ST_ENOMEM, "central database %s: out of memory", logpg_name(c->pg));
        goto fail;
    }
    snprintf(sql, hl + sl + 64, "%s%s ORDER BY r.station COLLATE \"C\", r.seq", head, q->sql);
    PGresult *r = run(c, sql, q->n, q->p, "cannot query the records", e);
    free(sql);
    if (!r) {
        it->cursor[0] = '\0';
        rc = e ? e->code : ST_ELIB;
        goto fail;
    }
    PQclear(r);
    free(q);
    *out = it;
    return ST_OK;
fail:
    free(q);
    iter_free(it);
    return rc;
}

static int iter_next(void *self, struct log_record *rec, int *have, struct err *e)
{
    struct central_iter *it = self;
    *have = 0;
    if (!it->batch || it->row >= PQntuples(it->batch)) {
        PQclear(it->batch);
        it->batch = NULL;
        it->row = 0;
        if (it->done)
            return ST_OK;
        char sql[64];
        snprintf(sql, sizeof sql, "FETCH FORWARD %d FROM %s", CENTRAL_FETCH, it->cursor);
        it->batch = run(it->c, sql, 0, NULL, "cannot read the records", e);
        if (!it->batch)
            return e ? e->code : ST_ELIB;
        if (PQntuples(it->batch) < CENTRAL_FETCH)
            it->done = 1;
        if (PQntuples(it->batch) == 0)
            return ST_OK;
    }
    int rc = read_record(it->c, it->batch, it->row++, rec, e);
    *have = !rc;
    return rc;
}

/* ---- one chain ---- */

static int get(void *self, int64_t seq, struct log_record *rec, struct err *e)
{
    struct central *c = self;
    const char *key;
    int rc = chain_key(c, &key, e);
    if (rc)
        return rc;
    struct query *q = malloc(sizeof *q);
    if (!q)
        return err_set(e, ST_ENOMEM, "central database %s: out of memory", logpg_name(c->pg));
    q_filter(c, q, NULL);
    if (!c->scope[0])
        q_cond(q, "r.station = $%d", key);
    q_cond_i64(q, "r.seq = $%d", seq);
    rc = q_check(c, q, e);
    PGresult *r = rc ? NULL : run(c, q->sql, q->n, q->p, "cannot read a record", e);
    free(q);
    if (!r)
        return e ? e->code : ST_ELIB;
    rc = PQntuples(r) == 1 ? read_record(c, r, 0, rec, e)
                           : err_set(e, ST_ERANGE, "central database %s: station %s: no record %"
                                     PRId64, logpg_name(c->pg), key, seq);
    PQclear(r);
    return rc;
}

static int read_disposition_row(PGresult *r, int i, void *out)
{
    return read_disposition(r, i, 0, out);
}

static void free_dispositions(void *a, int n)
{
    log_dispositions_free(a, n);
}

static int dispositions_get(void *self, int64_t seq, struct log_disposition **out, int *n,
                            struct err *e)
{
    char num[24];
    snprintf(num, sizeof num, "%" PRId64, seq);
    const char *more[1] = {num};
    void *a;
    int rc = chain_rows(self,
                        seq > 0 ? "SELECT " DISP_COLS " FROM dispositions WHERE station = $1"
                                  " AND record_seq = $2 ORDER BY dseq"
                                : "SELECT " DISP_COLS " FROM dispositions WHERE station = $1"
                                  " ORDER BY dseq",
                        more, seq > 0, "cannot read dispositions", sizeof **out, read_disposition_row,
                        free_dispositions, &a, n, e);
    *out = a;
    return rc;
}

static int record_hash(void *self, int64_t seq, char hex[SHA256_HEX_LEN], struct err *e)
{
    struct central *c = self;
    hex[0] = '\0';
    char num[24];
    snprintf(num, sizeof num, "%" PRId64, seq);
    const char *more[1] = {num}, *key;
    PGresult *r;
    int rc = chain_run(c, "SELECT hash FROM records WHERE station = $1 AND seq = $2", more, 1,
                       "cannot read a record", &key, &r, e);
    if (rc)
        return rc;
    if (PQntuples(r) == 1)
        col_copy(r, 0, 0, hex, SHA256_HEX_LEN);
    PQclear(r);
    return hex[0] ? ST_OK
                  : err_set(e, ST_ERANGE, "central database %s: station %s: no record %" PRId64,
                            logpg_name(c->pg), key, seq);
}

static int read_verification(PGresult *r, int row, struct log_verification *v, int want_masters)
{
    int oom = 0;
    v->vseq = col_i64(r, row, 0);
    col_copy(r, row, 1, v->utc, sizeof v->utc);
    col_copy(r, row, 2, v->station, sizeof v->station);
    col_copy(r, row, 3, v->recipe_id, sizeof v->recipe_id);
    v->recipe_version = (int)col_i64(r, row, 4);
    col_copy(r, row, 5, v->recipe_sha256, sizeof v->recipe_sha256);
    col_copy(r, row, 6, v->model_sha256, sizeof v->model_sha256);
    v->passed = !strcmp(PQgetvalue(r, row, 7), "passed");
    v->masters_json = want_masters ? col_dup(r, row, 8, &oom) : NULL;
    col_copy(r, row, 9, v->prev_hash, sizeof v->prev_hash);
    col_copy(r, row, 10, v->hash, sizeof v->hash);
    col_copy(r, row, 11, v->sig, sizeof v->sig);
    return oom;
}

static int verification_last(void *self, const char *station, const char *recipe_id,
                             int recipe_version, const char *model_sha256,
                             struct log_verification *v, int *found, struct err *e)
{
    struct central *c = self;
    memset(v, 0, sizeof *v);
    *found = 0;
    char ver[16];
    snprintf(ver, sizeof ver, "%d", recipe_version);
    const char *more[4] = {station ? station : "", recipe_id ? recipe_id : "", ver, model_sha256 ? model_sha256 : ""};
    PGresult *r;
    int rc = chain_run(c,
                       "SELECT " VER_COLS " FROM verifications WHERE station = $1"
                       " AND rec_station = $2 AND recipe_id = $3 AND recipe_version = $4"
                       " AND model_sha256 = $5 ORDER BY vseq DESC LIMIT 1",
                       more, 4, "cannot read the last verification", NULL, &r, e);
    if (rc)
        return rc;
    *found = PQntuples(r) == 1;
    if (*found)
        read_verification(r, 0, v, 0);
    PQclear(r);
    return ST_OK;
}

static int read_verification_row(PGresult *r, int i, void *out)
{
    return read_verification(r, i, out, 1);
}

static void free_verifications(void *a, int n)
{
    log_verifications_free(a, n);
}

static int verifications_get(void *self, struct log_verification **out, int *n, struct err *e)
{
    void *a;
    int rc = chain_rows(self, "SELECT " VER_COLS " FROM verifications WHERE station = $1 ORDER BY vseq", NULL, 0,
                        "cannot read the verifications", sizeof **out, read_verification_row, free_verifications,
                        &a, n, e);
    *out = a;
    return rc;
}

static int read_purge(PGresult *r, int i, void *out)
{
    struct log_purge *u = out;
    col_copy(r, i, 0, u->name, sizeof u->name);
    u->record_seq = col_i64(r, i, 1);
    col_copy(r, i, 2, u->utc, sizeof u->utc);
    col_copy(r, i, 3, u->reason, sizeof u->reason);
    return 0;
}

static int purges_get(void *self, struct log_purge **out, int *n, struct err *e)
{
    void *a;
    /* PostgreSQL keeps no insertion order a query can rely on */
    int rc = chain_rows(self,
                        "SELECT name, record_seq, utc, reason FROM evidence_purged"
                        " WHERE station = $1 ORDER BY utc, record_seq, name COLLATE \"C\"",
                        NULL, 0, "cannot read the evidence purges", sizeof **out, read_purge, free_plain, &a, n, e);
    *out = a;
    return rc;
}

static int signing_get(void *self, struct log_signing *s, struct err *e)
{
    struct central *c = self;
    memset(s, 0, sizeof *s);
    PGresult *r;
    int rc = chain_run(c,
                       "SELECT public_key, statement_sig, signed_from_record,"
                       " signed_from_disposition, signed_from_verification FROM stations"
                       " WHERE station = $1",
                       NULL, 0, "cannot read the station's signing key", NULL, &r, e);
    if (rc)
        return rc;
    if (PQntuples(r) == 1) {
        col_copy(r, 0, 0, s->public_key, sizeof s->public_key);
        col_copy(r, 0, 1, s->statement_sig, sizeof s->statement_sig);
        for (int i = 0; i < 3; i++)
            s->from[i] = PQgetisnull(r, 0, 2 + i) ? 1 : col_i64(r, 0, 2 + i);
    }
    PQclear(r);
    s->present = s->public_key[0] != '\0';
    return ST_OK;
}

static int check_integrity(void *self, struct err *e)
{
    struct central *c = self;
    return logpg_schema_check(c->pg, e);
}

/* ---- what the central database does not do ---- */

static int append(void *self, const struct log_entry *en, int64_t *seq, struct err *e)
{
    struct central *c = self;
    (void)en;
    (void)seq;
    return err_set(e, ST_EINVAL,
                   "central database %s is read-only: inspections are recorded in the station's"
                   " own log and forwarded by station sync", logpg_name(c->pg));
}

static int dispose(void *self, int64_t seq, const char *auditor, int disp, const char *comment,
                   int64_t *dseq, struct err *e)
{
    struct central *c = self;
    (void)auditor;
    (void)disp;
    (void)comment;
    (void)dseq;
    return err_set(e, ST_EINVAL,
                   "central database %s is read-only: dispose of record %" PRId64 " in the"
                   " station's own log (--log its log.db), which signs it with the station's key;"
                   " station sync then forwards it", logpg_name(c->pg), seq);
}

static int verification_append(void *self, struct log_verification *v, struct err *e)
{
    struct central *c = self;
    (void)v;
    return err_set(e, ST_EINVAL,
                   "central database %s is read-only: master-part verifications are recorded in"
                   " the station's own log and forwarded by station sync", logpg_name(c->pg));
}

/* ---- the handle ---- */

static const char *evidence_dir(const void *self, const struct log_record *r, char *buf,
                                size_t len)
{
    const struct central *c = self;
    const char *station = r ? r->chain_station : c->scope;
    /* the id is a folder name here: one that is not (a row written past
     * station sync's checks) names no folder of the copies */
    if (!c->has_evdir || !log_station_id_ok(station))
        return NULL;
    snprintf(buf, len, "%s/%s", c->evdir, station);
    return buf;
}

static const char *path(const void *self)
{
    const struct central *c = self;
    return logpg_name(c->pg);
}

static void central_close(void *self)
{
    struct central *c = self;
    if (!c)
        return;
    logpg_close(c->pg);
    free(c);
}

int logcentral_open(const char *conninfo, int mode, const struct log_options *opt, void **out,
                    struct err *e)
{
    *out = NULL;
    if (mode == LOG_OPEN_WRITE) {
        char name[LOGPG_SHOW_MAX];
        logpg_conninfo_show(conninfo, name, sizeof name);
        return err_set(e, ST_EINVAL,
                       "central database %s is read-only here: records, dispositions and"
                       " verifications are made in each station's own log and forwarded by"
                       " station sync", name);
    }
    struct central *c = calloc(1, sizeof *c);
    if (!c)
        return err_set(e, ST_ENOMEM, "central database: out of memory");
    int rc = logpg_connect(conninfo, &c->pg, e);
    if (!rc)
        rc = exec_plain(c, "SET default_transaction_read_only = on",
                        "cannot make the session read-only", e);
    if (!rc)
        rc = logpg_schema_check(c->pg, e);
    if (!rc && opt && opt->evidence_dir) {
        c->has_evdir = 1;
        if ((size_t)snprintf(c->evdir, sizeof c->evdir, "%s", opt->evidence_dir) >=
            sizeof c->evdir)
            rc = err_set(e, ST_ERANGE, "%s: path too long", opt->evidence_dir);
    }
    if (rc) {
        central_close(c);
        return rc;
    }
    *out = c;
    return ST_OK;
}

const struct log_ops logcentral_ops = {
    .kind = "postgresql",
    .close = central_close,
    .append = append,
    .iter_new = iter_new,
    .iter_next = iter_next,
    .iter_free = iter_free,
    .get = get,
    .dispositions_get = dispositions_get,
    .record_hash = record_hash,
    .dispose = dispose,
    .verification_append = verification_append,
    .verification_last = verification_last,
    .verifications_get = verifications_get,
    .signing_get = signing_get,
    .check_integrity = check_integrity,
    .evidence_dir = evidence_dir,
    .path = path,
    .scope = scope,
    .stations_get = stations_get,
    .purges_get = purges_get,
};
