#include "logsync.h"

#include <inttypes.h>
#include <stdatomic.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "evidence.h"
#include "fileio.h"
#include "logcanon.h"
#include "sha256.h"

#define RECHECK_CHUNK 4096
#define EVIDENCE_FILE_MAX ((size_t)256 << 20)

void logsync_options_init(struct logsync_options *o)
{
    memset(o, 0, sizeof *o);
    o->batch = LOGSYNC_BATCH_DEFAULT;
    o->recheck = 1;
}

/* What the run reads of the local log once: its chains other than records,
 * and the purges. */
struct local {
    struct log_db *db;
    const char *station;
    struct log_disposition *d;
    int nd;
    struct log_verification *v;
    int nv;
    struct log_purge *p;
    int np;
};

static void local_free(struct local *L)
{
    log_dispositions_free(L->d, L->nd);
    log_verifications_free(L->v, L->nv);
    free(L->p);
}

static int local_load(struct local *L, struct err *e)
{
    return log_dispositions_get(L->db, 0, &L->d, &L->nd, e) ||
           log_verifications_get(L->db, &L->v, &L->nv, e) ||
           log_purges_get(L->db, &L->p, &L->np, e);
}

static int stopped(const struct logsync_options *o)
{
    return o->stop && atomic_load(o->stop);
}

/* The checks before anything is forwarded: the stored hash is the hash of
 * the content (a link altered in place without its hash is caught here). */
static int hash_matches(const struct local *L, const char *what, int64_t seq, const char *computed,
                        const char *stored, struct err *e)
{
    return strcmp(computed, stored) == 0
               ? ST_OK
               : err_set(e, ST_EFORMAT,
                         "station %s: LOG %s: %s %" PRId64 " does not match its hash; run station"
                         " audit verify", L->station, log_path(L->db), what, seq);
}

static int check_record(const struct local *L, const struct log_record *r, struct err *e)
{
    char h[SHA256_HEX_LEN];
    int rc = logcanon_record_hash(r, h, e);
    return rc ? rc : hash_matches(L, "record", r->seq, h, r->hash, e);
}

static int check_disposition(const struct local *L, const struct log_disposition *d,
                             struct err *e)
{
    char rh[SHA256_HEX_LEN], h[SHA256_HEX_LEN];
    if (log_record_hash(L->db, d->record_seq, rh, e) || logcanon_disposition_hash(d, rh, h, e))
        return e->code;
    return hash_matches(L, "disposition", d->dseq, h, d->hash, e);
}

static int check_verification(const struct local *L, const struct log_verification *v,
                              struct err *e)
{
    char h[SHA256_HEX_LEN];
    int rc = logcanon_verification_hash(v, h, e);
    return rc ? rc : hash_matches(L, "verification", v->vseq, h, v->hash, e);
}

/* One evidence file to ROOT/NAME, unless it is there already and intact. */
static int copy_one(const struct local *L, const char *root, const struct log_evidence *v,
                    struct err *e)
{
    if (!evidence_check(root, v->name, v->sha256, v->bytes, NULL))
        return ST_OK;
    char src[PATH_MAX], hex[SHA256_HEX_LEN];
    int rc = log_evidence_path(L->db, v->name, src, sizeof src, e);
    uint8_t *buf = NULL;
    size_t len = 0;
    if (!rc)
        rc = fileio_read_path(src, EVIDENCE_FILE_MAX, &buf, &len, e);
    if (!rc) {
        sha256_hex_buffer(buf, len, hex);
        if (strcmp(hex, v->sha256) || (int64_t)len != v->bytes)
            rc = err_set(e, ST_EFORMAT, "%s: differs from its recorded SHA-256", src);
    }
    if (!rc)
        rc = evidence_write(log_io_default(), root, v->name, buf, len, 0, e);
    if (!rc)
        rc = evidence_check(root, v->name, v->sha256, v->bytes, e);
    free(buf);
    return rc;
}

static void copy_evidence(const struct local *L, const struct logsync_options *o,
                          const struct log_record *r, struct logsync_result *res)
{
    char root[PATH_MAX];
    if ((size_t)snprintf(root, sizeof root, "%s/%s", o->evidence_to, L->station) >= sizeof root)
        return;
    for (int i = 0; i < r->nevidence; i++) {
        if (r->ev[i].purged)
            continue;
        struct err e = {0};
        if (copy_one(L, root, &r->ev[i], &e)) {
            if (!res->copy_failed++)
                snprintf(res->copy_problem, sizeof res->copy_problem, "%s", e.msg);
        } else {
            res->copied++;
        }
    }
}

/* recheck: every held hash of one chain against the local one. */
typedef int (*local_hash_fn)(const struct local *L, int64_t seq, char h[SHA256_HEX_LEN],
                             struct err *e);

static int record_hash_checked(const struct local *L, int64_t seq, char h[SHA256_HEX_LEN],
                               struct err *e)
{
    struct log_record r;
    log_record_init(&r);
    int rc = log_get(L->db, seq, &r, e);
    if (!rc)
        rc = check_record(L, &r, e);
    if (!rc)
        memcpy(h, r.hash, SHA256_HEX_LEN);
    log_record_clear(&r);
    return rc;
}

static int disposition_hash_checked(const struct local *L, int64_t seq, char h[SHA256_HEX_LEN],
                                    struct err *e)
{
    if (seq < 1 || seq > L->nd || L->d[seq - 1].dseq != seq)
        return err_set(e, ST_ERANGE, "no such disposition");
    int rc = check_disposition(L, &L->d[seq - 1], e);
    if (!rc)
        memcpy(h, L->d[seq - 1].hash, SHA256_HEX_LEN);
    return rc;
}

static int verification_hash_checked(const struct local *L, int64_t seq,
                                     char h[SHA256_HEX_LEN], struct err *e)
{
    if (seq < 1 || seq > L->nv || L->v[seq - 1].vseq != seq)
        return err_set(e, ST_ERANGE, "no such verification");
    int rc = check_verification(L, &L->v[seq - 1], e);
    if (!rc)
        memcpy(h, L->v[seq - 1].hash, SHA256_HEX_LEN);
    return rc;
}

static int recheck_chain(const struct local *L, struct logpg *pg, int chain, const char *noun,
                         int64_t held, local_hash_fn local_hash, const struct logsync_options *o,
                         struct logsync_result *res, struct err *e)
{
    int64_t *seqs = malloc(RECHECK_CHUNK * sizeof *seqs);
    char (*hashes)[SHA256_HEX_LEN] = malloc(RECHECK_CHUNK * sizeof *hashes);
    int rc = seqs && hashes ? ST_OK : err_set(e, ST_ENOMEM, "recheck: out of memory");
    for (int64_t from = 1; !rc && from <= held && !stopped(o); from += RECHECK_CHUNK) {
        int n;
        rc = logpg_held_hashes(pg, chain, L->station, from, from + RECHECK_CHUNK - 1, seqs, hashes,
                               &n, e);
        for (int i = 0; !rc && i < n; i++) {
            char h[SHA256_HEX_LEN];
            rc = local_hash(L, seqs[i], h, e);
            if (rc == ST_ERANGE)
                rc = err_set(e, ST_EFORMAT,
                             "station %s %s %" PRId64 " is held centrally but not in the local log"
                             " %s", L->station, noun, seqs[i], log_path(L->db));
            else if (!rc && strcmp(h, hashes[i]))
                rc = err_set(e, ST_EFORMAT,
                             "station %s %s %" PRId64 " differs from the central copy (held %s,"
                             " local %s)", L->station, noun, seqs[i], hashes[i], h);
            res->rechecked += !rc;
        }
    }
    free(seqs);
    free(hashes);
    return rc;
}

/* Each link pushed must name the one before it: a record altered and
 * rehashed in place keeps its old successor's prev_hash pointing at the old
 * hash, and that is caught here before the server is asked. */
static int check_link(const struct local *L, const char *noun, int64_t n, const char *prev_hash,
                      const char *want, struct err *e)
{
    if (!strcmp(prev_hash, want))
        return ST_OK;
    return err_set(e, ST_EFORMAT,
                   "station %s: LOG %s: %s %" PRId64 " does not link to %s %" PRId64 "; run station"
                   " audit verify", L->station, log_path(L->db), noun, n, noun, n - 1);
}

/* The purges are counted against what the server holds; the last one it
 * holds must be the local one of that number, by name. */
static int check_purges(const struct local *L, struct logpg *pg, const struct logpg_held *h,
                        struct err *e)
{
    if (h->purges > L->np)
        return err_set(e, ST_EFORMAT,
                       "station %s: the central database holds %" PRId64 " evidence purges, the"
                       " local log %s %d: not the log the central database knows as %s",
                       L->station, h->purges, log_path(L->db), L->np, L->station);
    if (h->purges == 0)
        return ST_OK;
    const struct log_purge *u = &L->p[h->purges - 1];
    int held, rc = logpg_purge_held(pg, u->name, &held, e);
    if (!rc && !held)
        rc = err_set(e, ST_EFORMAT,
                     "station %s: the central database holds %" PRId64 " evidence purges but not"
                     " the local log's purge %" PRId64 " (%s): the purges of %s differ from its"
                     " central copy", L->station, h->purges, h->purges, u->name, log_path(L->db));
    return rc;
}

/* One transaction: the anchors, then what is new, within the batch size. */
static int push_batch(const struct local *L, struct logpg *pg, const struct logpg_station *st,
                      const struct logsync_options *o, struct logsync_result *res, int *more,
                      struct err *e)
{
    struct logpg_held h;
    int rc = logpg_batch_begin(pg, st, &h, e);
    if (rc)
        return rc;
    res->central_seq = h.seq;
    if (!res->batches++) {
        res->held_seq = h.seq;
        res->held_dseq = h.dseq;
        res->held_vseq = h.vseq;
        res->held_purges = h.purges;
    }
    int64_t sent = 0, top = h.seq;
    char link[SHA256_HEX_LEN];
    memcpy(link, h.hash, SHA256_HEX_LEN);
    struct log_record r;
    log_record_init(&r);
    rc = check_purges(L, pg, &h, e);
    if (!rc && h.seq > 0) {
        rc = log_get(L->db, h.seq, &r, e);
        if (rc == ST_ERANGE)
            rc = err_set(e, ST_EFORMAT,
                         "station %s: the central database holds record %" PRId64 " but the local"
                         " log %s ends before it: not the log the central database knows as %s",
                         L->station, h.seq, log_path(L->db), L->station);
        if (!rc)
            rc = check_record(L, &r, e) || logpg_push_record(pg, &r, e);
        if (!rc)
            memcpy(link, r.hash, SHA256_HEX_LEN);
    }
    if (!rc && (h.dseq > L->nd || h.vseq > L->nv))
        rc = err_set(e, ST_EFORMAT,
                     "station %s: the central database holds %" PRId64 " dispositions and %" PRId64
                     " verifications, the local log %s %d and %d: not the log the central"
                     " database knows as %s", L->station, h.dseq, h.vseq, log_path(L->db), L->nd,
                     L->nv, L->station);
    struct log_filter f;
    log_filter_init(&f);
    f.seq_from = h.seq + 1;
    f.seq_to = h.seq + o->batch;
    struct log_iter *it = NULL;
    if (!rc)
        rc = log_iter_new(L->db, &f, &it, e);
    for (int have = 1; !rc;) {
        rc = log_iter_next(it, &r, &have, e);
        if (rc || !have)
            break;
        rc = check_record(L, &r, e) || check_link(L, "record", r.seq, r.prev_hash, link, e);
        if (!rc && o->evidence_to)
            copy_evidence(L, o, &r, res);
        if (!rc)
            rc = logpg_push_record(pg, &r, e);
        if (!rc) {
            memcpy(link, r.hash, SHA256_HEX_LEN);
            top = r.seq;
            sent++;
        }
    }
    log_iter_free(it);
    log_record_clear(&r);
    int64_t np = 0, nd = 0, nv = 0;
    /* purges and dispositions follow the records they name */
    for (int64_t i = h.purges; !rc && i < L->np && L->p[i].record_seq <= top && np < o->batch; i++)
        rc = logpg_push_purge(pg, &L->p[i], e) ? e->code : (np++, ST_OK);
    if (!rc && h.dseq > 0)
        rc = check_disposition(L, &L->d[h.dseq - 1], e) ||
             logpg_push_disposition(pg, &L->d[h.dseq - 1], e);
    for (int64_t i = h.dseq; !rc && i < L->nd && L->d[i].record_seq <= top && nd < o->batch; i++)
        rc = check_disposition(L, &L->d[i], e) ||
                     check_link(L, "disposition", L->d[i].dseq, L->d[i].prev_hash,
                                i ? L->d[i - 1].hash : LOGCANON_GENESIS, e) ||
                     logpg_push_disposition(pg, &L->d[i], e)
                 ? e->code : (nd++, ST_OK);
    if (!rc && h.vseq > 0)
        rc = check_verification(L, &L->v[h.vseq - 1], e) ||
             logpg_push_verification(pg, &L->v[h.vseq - 1], e);
    for (int64_t i = h.vseq; !rc && i < L->nv && nv < o->batch; i++)
        rc = check_verification(L, &L->v[i], e) ||
                     check_link(L, "verification", L->v[i].vseq, L->v[i].prev_hash,
                                i ? L->v[i - 1].hash : LOGCANON_GENESIS, e) ||
                     logpg_push_verification(pg, &L->v[i], e)
                 ? e->code : (nv++, ST_OK);
    if (rc) {
        logpg_batch_abort(pg);
        return e->code ? e->code : rc;
    }
    struct logpg_counts got;
    rc = logpg_batch_commit(pg, &got, e);
    if (rc)
        return rc;
    /* what the server inserted: another sync of this station may have sent
     * some of it first */
    res->sent_records += got.records;
    res->sent_evidence += got.evidence;
    res->sent_purges += got.purges;
    res->sent_dispositions += got.dispositions;
    res->sent_verifications += got.verifications;
    res->central_seq += got.records;
    *more = sent > 0 || np > 0 || nd > 0 || nv > 0;
    return ST_OK;
}

int logsync_run(struct log_db *db, struct logpg *pg, const struct logsync_options *o,
                struct logsync_result *res, struct err *e)
{
    memset(res, 0, sizeof *res);
    struct logsync_options opt = *o;
    if (opt.batch <= 0)
        opt.batch = LOGSYNC_BATCH_DEFAULT;
    if (opt.batch > LOGSYNC_BATCH_MAX)
        return err_set(e, ST_EINVAL, "batch of %d records: at most %d", opt.batch,
                       LOGSYNC_BATCH_MAX);
    struct stat sb;
    if (opt.evidence_to && (stat(opt.evidence_to, &sb) || !S_ISDIR(sb.st_mode)))
        return err_set(e, ST_EINVAL, "%s: no such folder for evidence copies", opt.evidence_to);
    struct local L = {.db = db};
    struct log_station *own;
    int n;
    int rc = log_stations_get(db, &own, &n, e);
    if (rc)
        return rc;
    res->local_seq = n ? own->last_seq : 0;
    if (!opt.station && n)
        snprintf(res->station, sizeof res->station, "%s", own->station);
    log_stations_free(own);
    if (!opt.station && !n)
        return ST_OK;      /* nothing to forward, nor a station to forward it as */
    if (opt.station)
        snprintf(res->station, sizeof res->station, "%s", opt.station);
    /* the id names a folder of the evidence copies (DIR/STATION) */
    if (!log_station_id_ok(opt.station ? opt.station : res->station))
        return err_set(e, ST_EINVAL, "station id '%s'%s must be 1..%d of letters, digits, . _ -",
                       opt.station ? opt.station : res->station,
                       opt.station ? "" : " (the log's latest record's)", LOG_ID_MAX - 1);
    L.station = res->station;
    struct log_signing sg;
    rc = log_signing_get(db, &sg, e) || logpg_schema_ensure(pg, e) || local_load(&L, e);
    if (!rc) {
        res->local_dseq = L.nd;
        res->local_vseq = L.nv;
        res->local_purges = L.np;
        struct logpg_station st = {.station = L.station, .line = opt.line, .signing = &sg,
                                   .log_schema = LOG_SCHEMA_VERSION};
        if (opt.recheck) {
            struct logpg_held h;
            rc = logpg_batch_begin(pg, &st, &h, e);
            if (!rc) {
                logpg_batch_abort(pg);
                rc = recheck_chain(&L, pg, LOGPG_RECORDS, "record", h.seq, record_hash_checked,
                                   &opt, res, e) ||
                     recheck_chain(&L, pg, LOGPG_DISPOSITIONS, "disposition", h.dseq,
                                   disposition_hash_checked, &opt, res, e) ||
                     recheck_chain(&L, pg, LOGPG_VERIFICATIONS, "verification", h.vseq,
                                   verification_hash_checked, &opt, res, e);
            }
        }
        for (int more = 1; !rc && more && !(res->stopped = stopped(&opt));)
            rc = push_batch(&L, pg, &st, &opt, res, &more, e);
    }
    local_free(&L);
    return rc ? e->code : ST_OK;
}
