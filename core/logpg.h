/* logpg: the central quality database, PostgreSQL through libpq — the
 * connection and its credential rules, the central schema and its
 * server-side chain checks, and the primitives that push one station's log
 * into it.  core/logsync.h decides what to push; readers of the central
 * database (the audit verbs) check its schema with logpg_schema_check.
 *
 * Credentials: a connection string or URI that carries a secret (URI
 * userinfo `user:pw@`, `password=`, `sslpassword=`: every option libpq marks
 * secret) is refused; passwords come from
 * libpq's password file (PGPASSFILE, ~/.pgpass), a service file
 * (PGSERVICEFILE, `service=NAME`) or PGPASSWORD.  Messages name the database
 * by logpg_conninfo_show, which leaves any password out.
 *
 * Schema (LOGPG_SCHEMA_VERSION, in central_meta('schema')): stations, and
 * per station the local log's tables keyed by (station, seq / dseq / vseq /
 * name), every text column exactly as the local log stores it, so a record's
 * canonical hash (core/logcanon.h) can be recomputed from the central copy.
 * Triggers on the server refuse UPDATE, DELETE and TRUNCATE of the log
 * tables, and a BEFORE INSERT trigger on each chain table enforces the chain
 * whoever the client is: a row already held with the same hash is skipped (a
 * retry is idempotent), one held with another hash is refused ("station S
 * record N differs from the central copy ..."), a new row must be the next
 * number and link to the held hash of the one before.  DEVELOPERS.md
 * ("The central database") has the tables and the reasons.
 *
 * Pushing: logpg_batch_begin opens a transaction, locks the station's row
 * (creating it on first contact) and returns what the server holds; the
 * push_* calls queue inserts in libpq's pipeline mode; logpg_batch_commit
 * sends them with COMMIT and returns the first refusal, with the whole batch
 * rolled back.  A cut connection loses only the open batch.
 *
 * Owns: the PGconn.  Never prints; no global state; one handle per thread. */
#ifndef ST_LOGPG_H
#define ST_LOGPG_H

#include <libpq-fe.h>
#include <stddef.h>
#include <stdint.h>

#include "err.h"
#include "log.h"

#define LOGPG_SCHEMA_VERSION 2
#define LOGPG_SHOW_MAX 512         /* logpg_conninfo_show's text */

/* True when s names a PostgreSQL database rather than a file: it starts with
 * "postgresql://" or "postgres://", or is libpq's keyword=value form. */
int logpg_is_conninfo(const char *s);

/* ST_OK when libpq parses conninfo and it carries no password; otherwise
 * ST_EINVAL with one line saying where passwords belong. */
int logpg_conninfo_check(const char *conninfo, struct err *e);

/* conninfo as keyword=value pairs without any secret (for messages), or
 * "(unparsable connection string)". */
void logpg_conninfo_show(const char *conninfo, char *buf, size_t len);

/* m's first line into buf ("no reason given" when empty): libpq's messages
 * may run over several lines, ours are one. */
const char *logpg_first_line(const char *m, char *buf, size_t len);

struct logpg;

/* Connects (after logpg_conninfo_check).  Does not touch the schema. */
int logpg_connect(const char *conninfo, struct logpg **out, struct err *e);
/* Accepts NULL. */
void logpg_close(struct logpg *pg);
/* The libpq connection, for a reader of the central tables. */
PGconn *logpg_conn(struct logpg *pg);
/* The redacted name of the database, as in messages. */
const char *logpg_name(const struct logpg *pg);

/* The central schema version held (0: none yet). */
int logpg_schema_version(struct logpg *pg, int *version, struct err *e);
/* ST_OK when the database holds exactly LOGPG_SCHEMA_VERSION; otherwise
 * ST_EFORMAT: none yet ("run station sync first"), older ("station sync
 * upgrades it") or newer than this program. */
int logpg_schema_check(struct logpg *pg, struct err *e);
/* Creates or upgrades the schema in one transaction under an advisory lock,
 * so stations arriving at once do not race; refuses a newer one. */
int logpg_schema_ensure(struct logpg *pg, struct err *e);

/* What a station's row says about it (stations table). */
struct logpg_station {
    const char *station;           /* the central key: the forwarding station id */
    const char *line;              /* production line; NULL leaves a held one as it is */
    const struct log_signing *signing;   /* the local log's key and signing start */
    int log_schema;                /* the local log's schema */
};

/* The tail of each chain as the server holds it (seq 0, genesis hash when
 * empty), and how many evidence purges it holds. */
struct logpg_held {
    int64_t seq, dseq, vseq, purges;
    char hash[SHA256_HEX_LEN], dhash[SHA256_HEX_LEN], vhash[SHA256_HEX_LEN];
};

/* BEGIN, the station's row created when missing and locked, its signing key
 * compared ("station S is held with another signing key"), its line set when
 * given, and what it holds.  A station id that is not log_station_id_ok is
 * refused (ST_EINVAL). */
int logpg_batch_begin(struct logpg *pg, const struct logpg_station *st, struct logpg_held *held,
                      struct err *e);
/* Whether the server holds a purge of evidence file name for the open
 * batch's station; only before anything is pushed. */
int logpg_purge_held(struct logpg *pg, const char *name, int *held, struct err *e);
/* Queue one insert each (the station's key is the batch's). */
int logpg_push_record(struct logpg *pg, const struct log_record *r, struct err *e);
int logpg_push_purge(struct logpg *pg, const struct log_purge *p, struct err *e);
int logpg_push_disposition(struct logpg *pg, const struct log_disposition *d, struct err *e);
int logpg_push_verification(struct logpg *pg, const struct log_verification *v,
                            struct err *e);
/* What a committed batch inserted: a row the server held already (an anchor,
 * or what another sync of the station sent first) is not counted. */
struct logpg_counts {
    int64_t records, evidence, purges, dispositions, verifications;
};
/* Sends the queue and COMMIT; on any refusal rolls back and returns ST_EFORMAT
 * with the server's one-line reason (a lost connection is ST_EIO). */
int logpg_batch_commit(struct logpg *pg, struct logpg_counts *inserted, struct err *e);
/* Abandons an open batch (after a failure on the client side). */
void logpg_batch_abort(struct logpg *pg);

/* The held hashes of one chain of station with numbers in [from, to], in
 * order: seqs[i], hashes[i] for i < *n (arrays of at least to - from + 1). */
enum logpg_chain { LOGPG_RECORDS, LOGPG_DISPOSITIONS, LOGPG_VERIFICATIONS };
int logpg_held_hashes(struct logpg *pg, int chain, const char *station, int64_t from, int64_t to,
                      int64_t *seqs, char (*hashes)[SHA256_HEX_LEN], int *n, struct err *e);

#endif
