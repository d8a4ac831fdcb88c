#include "logpg.h"

#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "judge.h"
#include "logcanon.h"

/* pg_advisory_xact_lock key for schema changes: 'STLGPG01' as an int64. */
#define LOGPG_SCHEMA_LOCK "6076338063446413361"
#define LOGPG_CONNECT_TIMEOUT "10"
/* A batch of 2000 records commits in well under a second; a recheck reads
 * 4096 hashes a statement. */
#define LOGPG_SESSION_LIMITS                                                                   \
    "SET idle_in_transaction_session_timeout = '60s'; SET lock_timeout = '30s';"               \
    " SET statement_timeout = '120s'"

/* A BEFORE INSERT trigger that holds one chain to its rules on the server:
 * an identical row is skipped, a different one with a held number refused,
 * a new one must be the next number and link to the held one before.  The
 * station's row is locked first, so two clients of one station cannot
 * interleave whatever they do. */
#define CHAIN_TRIGGER(FN, TABLE, KEY, NOUN)                                                      \
    "CREATE OR REPLACE FUNCTION " FN "() RETURNS trigger LANGUAGE plpgsql AS $f$"             \
    " DECLARE held text; top bigint; link text;"                                               \
    " BEGIN"                                                                                   \
    "  PERFORM 1 FROM stations WHERE station = NEW.station FOR UPDATE;"                        \
    "  SELECT hash INTO held FROM " TABLE " WHERE station = NEW.station AND " KEY " = NEW." KEY ";" \
    "  IF FOUND THEN"                                                                          \
    "   IF held = NEW.hash THEN RETURN NULL; END IF;"                                          \
    "   RAISE EXCEPTION 'station % " NOUN " % differs from the central copy (held %, offered %)'," \
    "    NEW.station, NEW." KEY ", held, NEW.hash;"                                            \
    "  END IF;"                                                                                \
    "  SELECT " KEY ", hash INTO top, link FROM " TABLE " WHERE station = NEW.station"         \
    "   ORDER BY " KEY " DESC LIMIT 1;"                                                        \
    "  IF NOT FOUND THEN top := 0; link := repeat('0', 64); END IF;"                           \
    "  IF NEW." KEY " <> top + 1 THEN"                                                         \
    "   RAISE EXCEPTION 'station % " NOUN " % arrives before " NOUN " %',"                     \
    "    NEW.station, NEW." KEY ", top + 1;"                                                   \
    "  END IF;"                                                                                \
    "  IF NEW.prev_hash <> link THEN"                                                          \
    "   RAISE EXCEPTION 'station % " NOUN " %: chain link does not match the central copy of " \
    NOUN " %', NEW.station, NEW." KEY ", top;"                                                 \
    "  END IF;"                                                                                \
    "  RETURN NEW;"                                                                            \
    " END $f$;"                                                                                \
    "CREATE OR REPLACE TRIGGER " TABLE "_chain BEFORE INSERT ON " TABLE                        \
    " FOR EACH ROW EXECUTE FUNCTION " FN "();"

/* The log tables refuse change after the fact, like the local log's. */
#define APPEND_ONLY(TABLE)                                                                     \
    "CREATE OR REPLACE TRIGGER " TABLE "_no_change BEFORE UPDATE OR DELETE ON " TABLE          \
    " FOR EACH ROW EXECUTE FUNCTION central_append_only();"                                    \
    "CREATE OR REPLACE TRIGGER " TABLE "_no_truncate BEFORE TRUNCATE ON " TABLE                \
    " FOR EACH STATEMENT EXECUTE FUNCTION central_append_only();"

/* Step N takes the central database from schema N to N + 1 (DEVELOPERS.md,
 * "The central database"); column names and text as in the local log
 * (core/log.c), plus station (the central key) and rec_station (the
 * record's own field, which its hash covers). */
static const char *const central_upgrade[LOGPG_SCHEMA_VERSION] = {
    "CREATE TABLE IF NOT EXISTS central_meta(key text PRIMARY KEY, value text NOT NULL);"
    "CREATE TABLE IF NOT EXISTS stations(station text PRIMARY KEY,"
    " line text NOT NULL DEFAULT '', public_key text NOT NULL DEFAULT '',"
    " signed_from_record bigint, signed_from_disposition bigint,"
    " signed_from_verification bigint, statement_sig text NOT NULL DEFAULT '',"
    " log_schema int NOT NULL, first_seen timestamptz DEFAULT now());"
    "CREATE TABLE IF NOT EXISTS records(station text NOT NULL REFERENCES stations,"
    " seq bigint NOT NULL, utc text NOT NULL, rec_station text NOT NULL, operator text NOT NULL,"
    " serial text NOT NULL, recipe_id text NOT NULL, recipe_version int NOT NULL,"
    " recipe_sha256 text NOT NULL, model_sha256 text NOT NULL, scale_id text NOT NULL,"
    " verdict text NOT NULL, reasons text NOT NULL, regions text NOT NULL, camera text,"
    " prev_hash text NOT NULL, hash text NOT NULL, sig text,"
    " received timestamptz DEFAULT now(), PRIMARY KEY(station, seq));"
    "CREATE INDEX IF NOT EXISTS records_utc ON records(utc);"
    "CREATE INDEX IF NOT EXISTS records_recipe ON records(recipe_id);"
    "CREATE TABLE IF NOT EXISTS evidence(station text NOT NULL, record_seq bigint NOT NULL,"
    " kind text NOT NULL, name text NOT NULL, sha256 text NOT NULL, bytes bigint NOT NULL,"
    " PRIMARY KEY(station, record_seq, kind), UNIQUE(station, name),"
    " FOREIGN KEY(station, record_seq) REFERENCES records(station, seq));"
    "CREATE TABLE IF NOT EXISTS evidence_purged(station text NOT NULL, name text NOT NULL,"
    " record_seq bigint NOT NULL, utc text NOT NULL, reason text NOT NULL,"
    " PRIMARY KEY(station, name), FOREIGN KEY(station, name) REFERENCES evidence(station, name));"
    "CREATE TABLE IF NOT EXISTS dispositions(station text NOT NULL, dseq bigint NOT NULL,"
    " record_seq bigint NOT NULL, utc text NOT NULL, auditor text NOT NULL,"
    " disposition text NOT NULL, comment text NOT NULL, prev_hash text NOT NULL,"
    " hash text NOT NULL, sig text, PRIMARY KEY(station, dseq),"
    " FOREIGN KEY(station, record_seq) REFERENCES records(station, seq));"
    "CREATE INDEX IF NOT EXISTS dispositions_record ON dispositions(station, record_seq, dseq);"
    "CREATE TABLE IF NOT EXISTS verifications(station text NOT NULL REFERENCES stations,"
    " vseq bigint NOT NULL, utc text NOT NULL, rec_station text NOT NULL,"
    " recipe_id text NOT NULL, recipe_version int NOT NULL, recipe_sha256 text NOT NULL,"
    " model_sha256 text NOT NULL, outcome text NOT NULL, masters text NOT NULL,"
    " prev_hash text NOT NULL, hash text NOT NULL, sig text, PRIMARY KEY(station, vseq));"
    "CREATE OR REPLACE FUNCTION central_append_only() RETURNS trigger LANGUAGE plpgsql AS $f$"
    " BEGIN RAISE EXCEPTION '% is append-only (% refused)', TG_TABLE_NAME, TG_OP; END $f$;"
    APPEND_ONLY("records") APPEND_ONLY("evidence") APPEND_ONLY("evidence_purged")
    APPEND_ONLY("dispositions") APPEND_ONLY("verifications")
    CHAIN_TRIGGER("central_record_chain", "records", "seq", "record")
    CHAIN_TRIGGER("central_disposition_chain", "dispositions", "dseq", "disposition")
    CHAIN_TRIGGER("central_verification_chain", "verifications", "vseq", "verification")
    /* evidence rows and purges are no chain: identical is skipped, different refused */
    "CREATE OR REPLACE FUNCTION central_evidence_same() RETURNS trigger LANGUAGE plpgsql AS $f$"
    " DECLARE h evidence;"
    " BEGIN"
    "  SELECT * INTO h FROM evidence WHERE station = NEW.station"
    "   AND record_seq = NEW.record_seq AND kind = NEW.kind;"
    "  IF NOT FOUND THEN RETURN NEW; END IF;"
    "  IF (h.name, h.sha256, h.bytes) = (NEW.name, NEW.sha256, NEW.bytes) THEN RETURN NULL; END IF;"
    "  RAISE EXCEPTION 'station % record % evidence % differs from the central copy',"
    "   NEW.station, NEW.record_seq, NEW.kind;"
    " END $f$;"
    "CREATE OR REPLACE TRIGGER evidence_same BEFORE INSERT ON evidence"
    " FOR EACH ROW EXECUTE FUNCTION central_evidence_same();"
    "CREATE OR REPLACE FUNCTION central_purge_same() RETURNS trigger LANGUAGE plpgsql AS $f$"
    " DECLARE h evidence_purged;"
    " BEGIN"
    "  SELECT * INTO h FROM evidence_purged WHERE station = NEW.station AND name = NEW.name;"
    "  IF NOT FOUND THEN RETURN NEW; END IF;"
    "  IF (h.record_seq, h.utc, h.reason) = (NEW.record_seq, NEW.utc, NEW.reason)"
    "   THEN RETURN NULL; END IF;"
    "  RAISE EXCEPTION 'station % purge of % differs from the central copy', NEW.station, NEW.name;"
    " END $f$;"
    "CREATE OR REPLACE TRIGGER evidence_purged_same BEFORE INSERT ON evidence_purged"
    " FOR EACH ROW EXECUTE FUNCTION central_purge_same();"
    "INSERT INTO central_meta VALUES('schema', '1') ON CONFLICT DO NOTHING;",
    /* 2: evidence rows are part of their record's hash, so they arrive with
     * it only (xmin: inserted by this transaction); a station's row keeps its
     * key once it has one, and only its line changes */
    "CREATE OR REPLACE FUNCTION central_evidence_same() RETURNS trigger LANGUAGE plpgsql AS $f$"
    " DECLARE h evidence;"
    " BEGIN"
    "  SELECT * INTO h FROM evidence WHERE station = NEW.station"
    "   AND record_seq = NEW.record_seq AND kind = NEW.kind;"
    "  IF NOT FOUND THEN"
    "   IF NOT EXISTS(SELECT 1 FROM records WHERE station = NEW.station AND seq = NEW.record_seq"
    "    AND xmin::text::bigint = txid_current() % 4294967296) THEN"
    "    RAISE EXCEPTION 'station % record % evidence % arrives without its record (evidence is"
    " part of the record''s hash and comes with it only)', NEW.station, NEW.record_seq, NEW.kind;"
    "   END IF;"
    "   RETURN NEW;"
    "  END IF;"
    "  IF (h.name, h.sha256, h.bytes) = (NEW.name, NEW.sha256, NEW.bytes) THEN RETURN NULL; END IF;"
    "  RAISE EXCEPTION 'station % record % evidence % differs from the central copy',"
    "   NEW.station, NEW.record_seq, NEW.kind;"
    " END $f$;"
    "CREATE OR REPLACE FUNCTION central_station_guard() RETURNS trigger LANGUAGE plpgsql AS $f$"
    " BEGIN"
    "  IF (NEW.station, NEW.log_schema, NEW.first_seen)"
    "   IS DISTINCT FROM (OLD.station, OLD.log_schema, OLD.first_seen)"
    "   OR ((OLD.public_key <> '' OR NEW.public_key = '') AND (NEW.public_key,"
    "    NEW.signed_from_record, NEW.signed_from_disposition, NEW.signed_from_verification,"
    "    NEW.statement_sig) IS DISTINCT FROM (OLD.public_key, OLD.signed_from_record,"
    "    OLD.signed_from_disposition, OLD.signed_from_verification, OLD.statement_sig)) THEN"
    "   RAISE EXCEPTION 'station %: only its line may change, and its signing key once, from"
    " none', OLD.station;"
    "  END IF;"
    "  RETURN NEW;"
    " END $f$;"
    "CREATE OR REPLACE TRIGGER stations_guard BEFORE UPDATE ON stations"
    " FOR EACH ROW EXECUTE FUNCTION central_station_guard();"
    "CREATE OR REPLACE TRIGGER stations_no_delete BEFORE DELETE ON stations"
    " FOR EACH ROW EXECUTE FUNCTION central_append_only();"
    "CREATE OR REPLACE TRIGGER stations_no_truncate BEFORE TRUNCATE ON stations"
    " FOR EACH STATEMENT EXECUTE FUNCTION central_append_only();",
};

enum stmt_id { P_REC, P_EV, P_PURGE, P_DISP, P_VER, P_COUNT };
static const struct {
    const char *name, *sql;
    int nparams;
} stmts[P_COUNT] = {
    [P_REC] = {"st_rec", "INSERT INTO records VALUES($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,$12,$13,"
                         "$14,$15,$16,$17,$18)", 18},
    [P_EV] = {"st_ev", "INSERT INTO evidence VALUES($1,$2,$3,$4,$5,$6)", 6},
    [P_PURGE] = {"st_purge", "INSERT INTO evidence_purged VALUES($1,$2,$3,$4,$5)", 5},
    [P_DISP] = {"st_disp", "INSERT INTO dispositions VALUES($1,$2,$3,$4,$5,$6,$7,$8,$9,$10)", 10},
    [P_VER] = {"st_ver", "INSERT INTO verifications VALUES($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,"
                         "$12,$13)", 13},
};

struct logpg {
    PGconn *c;
    char name[LOGPG_SHOW_MAX];
    char station[LOG_ID_MAX];      /* the open batch's */
    int prepared;
    int in_batch;                  /* BEGIN sent */
    int pipeline;                  /* the batch's pipeline open */
    unsigned char *queued;         /* the statement of each result to come */
    size_t nqueued, capqueued;
};

int logpg_is_conninfo(const char *s)
{
    if (!strncmp(s, "postgresql://", 13) || !strncmp(s, "postgres://", 11))
        return 1;
    const char *p = s;
    while (*p == ' ')
        p++;
    const char *k = p;
    while ((*p >= 'a' && *p <= 'z') || *p == '_')
        p++;
    if (p == k)
        return 0;
    while (*p == ' ')
        p++;
    return *p == '=';
}

/* libpq marks its secrets ("*": password, sslpassword) for any tool that
 * shows a connection's options; a keyword list of our own would miss the next. */
static int secret(const PQconninfoOption *i)
{
    return i->dispchar && i->dispchar[0] == '*';
}

int logpg_conninfo_check(const char *conninfo, struct err *e)
{
    char *msg = NULL;
    PQconninfoOption *o = PQconninfoParse(conninfo, &msg);
    if (!o) {
        char line[256];
        snprintf(line, sizeof line, "%s", msg ? msg : "out of memory");
        line[strcspn(line, "\n")] = 0;
        PQfreemem(msg);
        return err_set(e, ST_EINVAL, "central database: not a connection string or URI: %s", line);
    }
    int pw = 0;
    for (PQconninfoOption *i = o; i->keyword; i++)
        if (secret(i) && i->val && *i->val)
            pw = 1;
    PQconninfoFree(o);
    if (pw)
        return err_set(e, ST_EINVAL,
                       "central database: the connection string carries a password; keep it out"
                       " of command lines and settings: use a password file (PGPASSFILE or"
                       " ~/.pgpass), a service file (PGSERVICEFILE, service=NAME) or PGPASSWORD");
    return ST_OK;
}

void logpg_conninfo_show(const char *conninfo, char *buf, size_t len)
{
    PQconninfoOption *o = PQconninfoParse(conninfo, NULL);
    snprintf(buf, len, "%s", o ? "" : "(unparsable connection string)");
    size_t at = 0;
    for (PQconninfoOption *i = o; i && i->keyword; i++) {
        if (!i->val || !*i->val || secret(i))
            continue;
        int n = snprintf(buf + at, at < len ? len - at : 0, "%s%s=%s", at ? " " : "", i->keyword,
                         i->val);
        if (n < 0 || (size_t)n >= len - at)
            break;
        at += (size_t)n;
    }
    if (o && !at)
        snprintf(buf, len, "(libpq defaults)");
    PQconninfoFree(o);
}

const char *logpg_first_line(const char *m, char *buf, size_t len)
{
    snprintf(buf, len, "%s", m && *m ? m : "no reason given");
    buf[strcspn(buf, "\n")] = 0;
    return buf;
}

static int conn_fail(struct logpg *pg, const char *what, struct err *e)
{
    char line[400];
    logpg_first_line(PQerrorMessage(pg->c), line, sizeof line);
    if (PQstatus(pg->c) != CONNECTION_OK && pg->in_batch)
        return err_set(e, ST_EIO, "central database %s: connection lost (%s); the open batch may"
                       " not be committed, and the next sync resumes from what the server holds",
                       pg->name, line);
    return err_set(e, PQstatus(pg->c) != CONNECTION_OK ? ST_EIO : ST_ELIB,
                   "central database %s: %s: %s", pg->name, what, line);
}

/* A result that failed: the server's own primary message when it sent one. */
static int result_fail(struct logpg *pg, PGresult *r, const char *what, struct err *e)
{
    const char *primary = r ? PQresultErrorField(r, PG_DIAG_MESSAGE_PRIMARY) : NULL;
    const char *state = r ? PQresultErrorField(r, PG_DIAG_SQLSTATE) : NULL;
    if (!primary || PQstatus(pg->c) != CONNECTION_OK)
        return conn_fail(pg, what, e);
    char line[400];
    /* class P0 is a RAISE from our triggers, 23 an integrity constraint: a refusal */
    int refused = state && (!strncmp(state, "P0", 2) || !strncmp(state, "23", 2));
    return err_set(e, refused ? ST_EFORMAT : ST_ELIB, "central database %s: %s%s%s", pg->name,
                   refused ? "" : what, refused ? "" : ": ",
                   logpg_first_line(primary, line, sizeof line));
}

static int exec_ok(struct logpg *pg, const char *sql, const char *what, struct err *e)
{
    PGresult *r = PQexec(pg->c, sql);
    int st = PQresultStatus(r);
    int rc = st == PGRES_COMMAND_OK || st == PGRES_TUPLES_OK ? ST_OK : result_fail(pg, r, what, e);
    PQclear(r);
    return rc;
}

int logpg_connect(const char *conninfo, struct logpg **out, struct err *e)
{
    *out = NULL;
    int rc = logpg_conninfo_check(conninfo, e);
    if (rc)
        return rc;
    struct logpg *pg = calloc(1, sizeof *pg);
    if (!pg)
        return err_set(e, ST_ENOMEM, "central database: out of memory");
    logpg_conninfo_show(conninfo, pg->name, sizeof pg->name);
    /* ours first, so the caller's string overrides them; keepalives and the
     * TCP user timeout bound a network that goes silent (libpq would wait on
     * it for ever), a Unix socket ignores them */
    const char *const keys[] = {"application_name", "connect_timeout", "keepalives_idle",
                                "keepalives_interval", "keepalives_count", "tcp_user_timeout",
                                "dbname", NULL};
    const char *const vals[] = {"station", LOGPG_CONNECT_TIMEOUT, "30", "10", "3", "60000",
                                conninfo, NULL};
    pg->c = PQconnectdbParams(keys, vals, 1);
    if (!pg->c) {
        free(pg);
        return err_set(e, ST_ENOMEM, "central database: out of memory");
    }
    if (PQstatus(pg->c) != CONNECTION_OK) {
        rc = conn_fail(pg, "cannot connect", e);
        logpg_close(pg);
        return rc;
    }
    /* a client gone quiet in a transaction must not hold a station's row for
     * ever, nor wait for ever on one */
    rc = exec_ok(pg, LOGPG_SESSION_LIMITS, "cannot set the session's time limits", e);
    if (rc) {
        logpg_close(pg);
        return rc;
    }
    *out = pg;
    return ST_OK;
}

void logpg_close(struct logpg *pg)
{
    if (!pg)
        return;
    PQfinish(pg->c);
    free(pg->queued);
    free(pg);
}

PGconn *logpg_conn(struct logpg *pg)
{
    return pg->c;
}

const char *logpg_name(const struct logpg *pg)
{
    return pg->name;
}

/* One text value (NULL: none) from a query of one row and column. */
static int query_value(struct logpg *pg, const char *sql, char *buf, size_t len, int *have,
                       struct err *e)
{
    *have = 0;
    PGresult *r = PQexec(pg->c, sql);
    if (PQresultStatus(r) != PGRES_TUPLES_OK) {
        int rc = result_fail(pg, r, "cannot read the schema version", e);
        PQclear(r);
        return rc;
    }
    if (PQntuples(r) == 1 && !PQgetisnull(r, 0, 0)) {
        snprintf(buf, len, "%s", PQgetvalue(r, 0, 0));
        *have = 1;
    }
    PQclear(r);
    return ST_OK;
}

int logpg_schema_version(struct logpg *pg, int *version, struct err *e)
{
    *version = 0;
    char v[32];
    int have;
    /* the table is named only once it is known to exist: a query naming a
     * missing one fails as a whole */
    int rc = query_value(pg, "SELECT to_regclass('central_meta')::text", v, sizeof v, &have, e);
    if (!rc && have)
        rc = query_value(pg, "SELECT value FROM central_meta WHERE key = 'schema'", v, sizeof v,
                         &have, e);
    if (!rc && have)
        *version = atoi(v);
    return rc;
}

int logpg_schema_check(struct logpg *pg, struct err *e)
{
    int v, rc = logpg_schema_version(pg, &v, e);
    if (rc)
        return rc;
    if (v == LOGPG_SCHEMA_VERSION)
        return ST_OK;
    if (v == 0)
        return err_set(e, ST_EFORMAT,
                       "central database %s holds no station log yet (station sync creates it)",
                       pg->name);
    return err_set(e, ST_EFORMAT, "central database %s: schema %d is %s than this program's %d%s",
                   pg->name, v, v > LOGPG_SCHEMA_VERSION ? "newer" : "older",
                   LOGPG_SCHEMA_VERSION, v > LOGPG_SCHEMA_VERSION ? "" : " (station sync upgrades it)");
}

int logpg_schema_ensure(struct logpg *pg, struct err *e)
{
    /* SET LOCAL: the notices of IF NOT EXISTS are no one's business */
    int rc = exec_ok(pg, "BEGIN; SET LOCAL client_min_messages = warning;"
                         " SELECT pg_advisory_xact_lock(" LOGPG_SCHEMA_LOCK ")",
                     "cannot lock the schema", e);
    int v = 0;
    if (!rc)
        rc = logpg_schema_version(pg, &v, e);
    if (!rc && v > LOGPG_SCHEMA_VERSION)
        rc = err_set(e, ST_EFORMAT, "central database %s: schema %d is newer than this program's %d",
                     pg->name, v, LOGPG_SCHEMA_VERSION);
    for (int step = v; !rc && step < LOGPG_SCHEMA_VERSION; step++) {
        char set[96];
        snprintf(set, sizeof set, "UPDATE central_meta SET value = '%d' WHERE key = 'schema'",
                 step + 1);
        rc = exec_ok(pg, central_upgrade[step], "cannot create the schema", e) ||
             exec_ok(pg, set, "cannot set the schema version", e);
    }
    if (!rc)
        return exec_ok(pg, "COMMIT", "cannot commit the schema", e);
    PQclear(PQexec(pg->c, "ROLLBACK"));
    return rc;
}

static int prepare(struct logpg *pg, struct err *e)
{
    for (int i = 0; i < P_COUNT && !pg->prepared; i++) {
        PGresult *r = PQprepare(pg->c, stmts[i].name, stmts[i].sql, stmts[i].nparams, NULL);
        int rc = PQresultStatus(r) == PGRES_COMMAND_OK ? ST_OK
                                                        : result_fail(pg, r, "cannot prepare", e);
        PQclear(r);
        if (rc)
            return rc;
    }
    pg->prepared = 1;
    return ST_OK;
}

static void copy_hash(char dst[SHA256_HEX_LEN], PGresult *r, int col)
{
    snprintf(dst, SHA256_HEX_LEN, "%s", PQgetisnull(r, 0, col) ? LOGCANON_GENESIS
                                                                : PQgetvalue(r, 0, col));
}

static int64_t get_i64(PGresult *r, int col)
{
    return PQgetisnull(r, 0, col) ? 0 : strtoll(PQgetvalue(r, 0, col), NULL, 10);
}

/* INSERT the station's row if missing, then lock it and read the tails. */
static int station_lock(struct logpg *pg, const struct logpg_station *st, struct logpg_held *h,
                        char *held_key, size_t keylen, struct err *e)
{
    const struct log_signing *sg = st->signing;
    char from[3][24], schema[16];
    for (int i = 0; i < 3; i++)
        snprintf(from[i], sizeof from[i], "%" PRId64, sg && sg->present ? sg->from[i] : 0);
    snprintf(schema, sizeof schema, "%d", st->log_schema);
    int signed_ = sg && sg->present;
    const char *ins[8] = {st->station, st->line ? st->line : "", signed_ ? sg->public_key : "",
                          signed_ ? from[0] : NULL, signed_ ? from[1] : NULL,
                          signed_ ? from[2] : NULL, signed_ ? sg->statement_sig : "", schema};
    PGresult *r = PQexecParams(pg->c,
                               "INSERT INTO stations(station, line, public_key, signed_from_record,"
                               " signed_from_disposition, signed_from_verification, statement_sig,"
                               " log_schema) VALUES($1,$2,$3,$4,$5,$6,$7,$8) ON CONFLICT DO NOTHING",
                               8, NULL, ins, NULL, NULL, 0);
    int rc = PQresultStatus(r) == PGRES_COMMAND_OK ? ST_OK
                                                    : result_fail(pg, r, "cannot add the station", e);
    PQclear(r);
    if (rc)
        return rc;
    const char *p[1] = {st->station};
    /* the lock first, the tails in a statement of their own: under READ
     * COMMITTED each statement sees what committed before it began, and one
     * that waited on the lock began before the holder committed */
    r = PQexecParams(pg->c, "SELECT public_key FROM stations WHERE station = $1 FOR UPDATE", 1,
                     NULL, p, NULL, NULL, 0);
    if (PQresultStatus(r) != PGRES_TUPLES_OK || PQntuples(r) != 1) {
        rc = result_fail(pg, r, "cannot lock the station's row", e);
        PQclear(r);
        return rc;
    }
    snprintf(held_key, keylen, "%s", PQgetvalue(r, 0, 0));
    PQclear(r);
    r = PQexecParams(pg->c,
                     "SELECT 0,"
                     " (SELECT seq FROM records WHERE station = $1 ORDER BY seq DESC LIMIT 1),"
                     " (SELECT hash FROM records WHERE station = $1 ORDER BY seq DESC LIMIT 1),"
                     " (SELECT dseq FROM dispositions WHERE station = $1 ORDER BY dseq DESC LIMIT 1),"
                     " (SELECT hash FROM dispositions WHERE station = $1 ORDER BY dseq DESC LIMIT 1),"
                     " (SELECT vseq FROM verifications WHERE station = $1 ORDER BY vseq DESC LIMIT 1),"
                     " (SELECT hash FROM verifications WHERE station = $1 ORDER BY vseq DESC LIMIT 1),"
                     " (SELECT count(*) FROM evidence_purged WHERE station = $1)",
                     1, NULL, p, NULL, NULL, 0);
    if (PQresultStatus(r) != PGRES_TUPLES_OK || PQntuples(r) != 1) {
        rc = result_fail(pg, r, "cannot read what the station's row holds", e);
        PQclear(r);
        return rc;
    }
    h->seq = get_i64(r, 1);
    copy_hash(h->hash, r, 2);
    h->dseq = get_i64(r, 3);
    copy_hash(h->dhash, r, 4);
    h->vseq = get_i64(r, 5);
    copy_hash(h->vhash, r, 6);
    h->purges = get_i64(r, 7);
    PQclear(r);
    return ST_OK;
}

/* A station first seen unsigned gets its key when its log gets one; the line
 * follows what the site says now. */
static int station_update(struct logpg *pg, const struct logpg_station *st, const char *held_key,
                          struct err *e)
{
    const struct log_signing *sg = st->signing;
    if (*held_key && !(sg && sg->present))
        return err_set(e, ST_EFORMAT,
                       "central database %s: station %s is held with a signing key, and this log"
                       " has none", pg->name, st->station);
    if (sg && sg->present && *held_key && strcmp(held_key, sg->public_key))
        return err_set(e, ST_EFORMAT,
                       "central database %s: station %s is held with another signing key (held %s,"
                       " this log's %s)",
                       pg->name, st->station, held_key, sg->public_key);
    if (sg && sg->present && !*held_key) {
        char from[3][24];
        for (int i = 0; i < 3; i++)
            snprintf(from[i], sizeof from[i], "%" PRId64, sg->from[i]);
        const char *p[6] = {st->station, sg->public_key, from[0], from[1], from[2],
                            sg->statement_sig};
        PGresult *r = PQexecParams(pg->c,
                                   "UPDATE stations SET public_key = $2, signed_from_record = $3,"
                                   " signed_from_disposition = $4, signed_from_verification = $5,"
                                   " statement_sig = $6 WHERE station = $1",
                                   6, NULL, p, NULL, NULL, 0);
        int rc = PQresultStatus(r) == PGRES_COMMAND_OK
                     ? ST_OK : result_fail(pg, r, "cannot record the station's key", e);
        PQclear(r);
        if (rc)
            return rc;
    }
    if (st->line) {
        const char *p[2] = {st->station, st->line};
        PGresult *r = PQexecParams(pg->c, "UPDATE stations SET line = $2 WHERE station = $1"
                                          " AND line <> $2", 2, NULL, p, NULL, NULL, 0);
        int rc = PQresultStatus(r) == PGRES_COMMAND_OK
                     ? ST_OK : result_fail(pg, r, "cannot record the station's line", e);
        PQclear(r);
        return rc;
    }
    return ST_OK;
}

int logpg_batch_begin(struct logpg *pg, const struct logpg_station *st, struct logpg_held *held,
                      struct err *e)
{
    if (!log_station_id_ok(st->station))
        return err_set(e, ST_EINVAL, "station id '%s' must be 1..%d of letters, digits, . _ -",
                       st->station, LOG_ID_MAX - 1);
    snprintf(pg->station, sizeof pg->station, "%s", st->station);
    char held_key[LOGSIGN_PK_HEX + 8];
    int rc = prepare(pg, e) || exec_ok(pg, "BEGIN", "cannot begin", e);
    if (rc)
        return e->code;
    rc = station_lock(pg, st, held, held_key, sizeof held_key, e) ||
         station_update(pg, st, held_key, e);
    if (rc) {
        PQclear(PQexec(pg->c, "ROLLBACK"));
        return e->code;
    }
    pg->in_batch = 1;
    pg->pipeline = 0;
    pg->nqueued = 0;
    return ST_OK;
}

int logpg_purge_held(struct logpg *pg, const char *name, int *held, struct err *e)
{
    *held = 0;
    if (!pg->in_batch || pg->pipeline)
        return err_set(e, ST_EINVAL, "central database: a purge is looked up before pushing");
    const char *p[2] = {pg->station, name};
    PGresult *r = PQexecParams(pg->c, "SELECT 1 FROM evidence_purged WHERE station = $1"
                                      " AND name = $2", 2, NULL, p, NULL, NULL, 0);
    int rc = PQresultStatus(r) == PGRES_TUPLES_OK ? ST_OK
                                                   : result_fail(pg, r, "cannot read a purge", e);
    *held = !rc && PQntuples(r) == 1;
    PQclear(r);
    return rc;
}

/* The pipeline opens with the first statement pushed, so a batch may still
 * ask the server questions before it (logpg_purge_held). */
static int pipeline_open(struct logpg *pg, struct err *e)
{
    if (pg->pipeline)
        return ST_OK;
    if (!PQenterPipelineMode(pg->c))
        return conn_fail(pg, "cannot enter pipeline mode", e);
    pg->pipeline = 1;
    return ST_OK;
}

/* Notes which statement the next result answers, so the commit can count
 * what the server inserted rather than what was sent. */
static int note(struct logpg *pg, int id, struct err *e)
{
    if (pg->nqueued == pg->capqueued) {
        size_t cap = pg->capqueued ? 2 * pg->capqueued : 1024;
        unsigned char *q = realloc(pg->queued, cap);
        if (!q)
            return err_set(e, ST_ENOMEM, "central database: out of memory");
        pg->queued = q;
        pg->capqueued = cap;
    }
    pg->queued[pg->nqueued++] = (unsigned char)id;
    return ST_OK;
}

static int send(struct logpg *pg, int id, const char *const *p, struct err *e)
{
    if (!pg->in_batch)
        return err_set(e, ST_EINVAL, "central database: no batch open");
    int rc = pipeline_open(pg, e) || note(pg, id, e);
    if (rc)
        return e->code;
    if (!PQsendQueryPrepared(pg->c, stmts[id].name, stmts[id].nparams, p, NULL, NULL, 0))
        return conn_fail(pg, "cannot send", e);
    return ST_OK;
}

static const char *or_null(const char *s)
{
    return s && *s ? s : NULL;
}

int logpg_push_record(struct logpg *pg, const struct log_record *r, struct err *e)
{
    char seq[24], ver[16];
    snprintf(seq, sizeof seq, "%" PRId64, r->seq);
    snprintf(ver, sizeof ver, "%d", r->recipe_version);
    const char *p[18] = {pg->station, seq, r->utc, r->station, r->operator_id, r->serial,
                         r->recipe_id, ver, r->recipe_sha256, r->model_sha256, r->scale_id,
                         judge_verdict_name(r->verdict), r->reasons_json, r->regions_json,
                         r->camera_json, r->prev_hash, r->hash, or_null(r->sig)};
    int rc = send(pg, P_REC, p, e);
    for (int i = 0; !rc && i < r->nevidence; i++) {
        const struct log_evidence *v = &r->ev[i];
        char bytes[24];
        snprintf(bytes, sizeof bytes, "%" PRId64, v->bytes);
        const char *q[6] = {pg->station, seq, v->kind, v->name, v->sha256, bytes};
        rc = send(pg, P_EV, q, e);
    }
    return rc;
}

int logpg_push_purge(struct logpg *pg, const struct log_purge *u, struct err *e)
{
    char seq[24];
    snprintf(seq, sizeof seq, "%" PRId64, u->record_seq);
    const char *p[5] = {pg->station, u->name, seq, u->utc, u->reason};
    return send(pg, P_PURGE, p, e);
}

int logpg_push_disposition(struct logpg *pg, const struct log_disposition *d, struct err *e)
{
    char dseq[24], seq[24];
    snprintf(dseq, sizeof dseq, "%" PRId64, d->dseq);
    snprintf(seq, sizeof seq, "%" PRId64, d->record_seq);
    const char *p[10] = {pg->station, dseq, seq, d->utc, d->auditor, log_disp_name(d->disp),
                         d->comment ? d->comment : "", d->prev_hash, d->hash, or_null(d->sig)};
    return send(pg, P_DISP, p, e);
}

int logpg_push_verification(struct logpg *pg, const struct log_verification *v, struct err *e)
{
    char vseq[24], ver[16];
    snprintf(vseq, sizeof vseq, "%" PRId64, v->vseq);
    snprintf(ver, sizeof ver, "%d", v->recipe_version);
    const char *p[13] = {pg->station, vseq, v->utc, v->station, v->recipe_id, ver,
                         v->recipe_sha256, v->model_sha256, v->passed ? "passed" : "failed",
                         v->masters_json ? v->masters_json : "[]", v->prev_hash, v->hash,
                         or_null(v->sig)};
    return send(pg, P_VER, p, e);
}

/* Reads every result up to the pipeline's sync point; the first failure
 * (the ones after it are PGRES_PIPELINE_ABORTED) goes into e.  "INSERT 0 0"
 * is a row the server already held (its trigger skipped it). */
static int drain(struct logpg *pg, struct logpg_counts *got, struct err *e)
{
    int rc = ST_OK;
    int64_t n[P_COUNT] = {0};
    size_t at = 0;
    for (;;) {
        PGresult *r = PQgetResult(pg->c);
        if (!r) {
            if (PQstatus(pg->c) != CONNECTION_OK)
                return rc ? rc : conn_fail(pg, "connection lost", e);
            continue;      /* end of one statement's results */
        }
        int st = PQresultStatus(r);
        if (st == PGRES_PIPELINE_SYNC) {
            PQclear(r);
            if (got)
                *got = (struct logpg_counts){n[P_REC], n[P_EV], n[P_PURGE], n[P_DISP], n[P_VER]};
            return rc;
        }
        if (st == PGRES_FATAL_ERROR && !rc)
            rc = result_fail(pg, r, "refused", e);
        if (st == PGRES_COMMAND_OK && at < pg->nqueued)
            n[pg->queued[at]] += strtoll(PQcmdTuples(r), NULL, 10);
        at++;
        PQclear(r);
    }
}

int logpg_batch_commit(struct logpg *pg, struct logpg_counts *inserted, struct err *e)
{
    *inserted = (struct logpg_counts){0};
    if (!pg->in_batch)
        return err_set(e, ST_EINVAL, "central database: no batch open");
    int rc = pipeline_open(pg, e);
    if (!rc && (!PQsendQueryParams(pg->c, "COMMIT", 0, NULL, NULL, NULL, NULL, 0) ||
                !PQpipelineSync(pg->c)))
        rc = conn_fail(pg, "cannot send", e);
    if (!rc)
        rc = drain(pg, inserted, e);
    if (PQstatus(pg->c) != CONNECTION_OK) {
        rc = rc ? rc : conn_fail(pg, "connection lost", e);
        pg->in_batch = 0;
        return rc;
    }
    pg->in_batch = 0;
    pg->pipeline = 0;
    PQexitPipelineMode(pg->c);
    if (rc) {
        *inserted = (struct logpg_counts){0};
        PQclear(PQexec(pg->c, "ROLLBACK"));
    }
    return rc;
}

void logpg_batch_abort(struct logpg *pg)
{
    if (!pg->in_batch)
        return;
    pg->in_batch = 0;
    if (PQstatus(pg->c) != CONNECTION_OK)
        return;
    if (pg->pipeline && PQpipelineSync(pg->c)) {
        struct err ignored;
        drain(pg, NULL, &ignored);
    }
    if (pg->pipeline)
        PQexitPipelineMode(pg->c);
    pg->pipeline = 0;
    PQclear(PQexec(pg->c, "ROLLBACK"));
}

int logpg_held_hashes(struct logpg *pg, int chain, const char *station, int64_t from, int64_t to,
                      int64_t *seqs, char (*hashes)[SHA256_HEX_LEN], int *n, struct err *e)
{
    static const char *const sql[3] = {
        [LOGPG_RECORDS] = "SELECT seq, hash FROM records WHERE station = $1"
                          " AND seq BETWEEN $2 AND $3 ORDER BY seq",
        [LOGPG_DISPOSITIONS] = "SELECT dseq, hash FROM dispositions WHERE station = $1"
                               " AND dseq BETWEEN $2 AND $3 ORDER BY dseq",
        [LOGPG_VERIFICATIONS] = "SELECT vseq, hash FROM verifications WHERE station = $1"
                                " AND vseq BETWEEN $2 AND $3 ORDER BY vseq",
    };
    *n = 0;
    char a[24], b[24];
    snprintf(a, sizeof a, "%" PRId64, from);
    snprintf(b, sizeof b, "%" PRId64, to);
    const char *p[3] = {station, a, b};
    PGresult *r = PQexecParams(pg->c, sql[chain], 3, NULL, p, NULL, NULL, 0);
    if (PQresultStatus(r) != PGRES_TUPLES_OK) {
        int rc = result_fail(pg, r, "cannot read the held hashes", e);
        PQclear(r);
        return rc;
    }
    int rows = PQntuples(r);
    for (int i = 0; i < rows && (int64_t)i <= to - from; i++) {
        seqs[i] = strtoll(PQgetvalue(r, i, 0), NULL, 10);
        snprintf(hashes[i], SHA256_HEX_LEN, "%s", PQgetvalue(r, i, 1));
        (*n)++;
    }
    PQclear(r);
    return ST_OK;
}
