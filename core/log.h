/* log: the station's inspection log — one SQLite database per station holding
 * a hash-chained, append-only record per inspection, the evidence files each
 * record names, and the auditors' dispositions in a second chain.
 *
 * Back-ends: this API dispatches through a table of functions
 * (core/logbackend.h) to the station's own SQLite log (core/logsqlite.c,
 * everything below) or, read only, to the plant's central PostgreSQL database
 * the stations forward to (core/logcentral.c).  log_open tells them apart by
 * what it is given (logpg_is_conninfo: a URI or libpq's keyword=value form,
 * else a file path).  The central database holds many stations' chains,
 * each keyed by its forwarding station (log_record's chain_station);
 * log_scope narrows the per-chain calls to one of them.
 *
 * Writing (log_open with LOG_OPEN_WRITE): WAL journal, synchronous=FULL,
 * busy_timeout, every write in one BEGIN IMMEDIATE transaction through
 * prepared statements kept for the handle's life.  log_append writes the
 * record's evidence files first (temporary name, fsync, rename, fsync of the
 * folder), then inserts the record and commits; a record therefore never
 * names a missing or half-written file.  When any step fails the record is
 * not committed and the caller must show the verdict as NO_VERDICT with the
 * returned reason, never PASS.  Evidence lives under EVIDENCE_DIR/YYYY-MM-DD/
 * (default: the folder `evidence` beside the database).  A disk budget for
 * evidence makes room by deleting the oldest PASS evidence first, then
 * evidence of rejects already disposed; evidence of a reject not yet disposed
 * is never deleted — when only such evidence is left, log_append refuses with
 * ST_ERANGE ("evidence budget full ...") and inspection must stop.
 *
 * Master-part verifications (station verify) are a third chain of their own,
 * in the table verifications (schema 3): one row per run of a recipe's
 * masters, append-only like the others.
 *
 * Signatures (schema 4): every record, disposition and verification is
 * also signed over its hash with the station's Ed25519 key (core/logsign.h);
 * opening for writing loads the key file (DB.key), creating it and storing
 * its public key in the log (table meta) the first time.  Links written
 * before schema 4 stay unsigned and are reported so by `audit verify`.
 *
 * Reading (LOG_OPEN_READ) never blocks the writer (WAL readers see the last
 * commit).  log_iter_* walks records in sequence order under a filter.
 *
 * Schema: versioned in PRAGMA user_version (LOG_SCHEMA_VERSION); an older
 * database is upgraded step by step when opened for writing, a newer one is
 * refused ("DB: log schema N is newer than this program's M").  Triggers
 * refuse UPDATE and DELETE on records, evidence and dispositions.  The
 * tables are documented in DEVELOPERS.md ("The inspection log"), the
 * canonical forms the hashes cover in core/logcanon.h, the checks of
 * `audit verify` in core/logverify.h.
 *
 * Owns: the back-end's handle (the SQLite handle and its statements, or the
 * central connection).  Never prints; no global state; file writes and
 * fsyncs of evidence go through struct log_io so tests can make them fail.
 * One handle per thread. */
#ifndef ST_LOG_H
#define ST_LOG_H

#include <stddef.h>
#include <stdint.h>
#include <sys/types.h>

#include "err.h"
#include "image.h"
#include "logsign.h"
#include "sha256.h"

#define LOG_SCHEMA_VERSION 4
#define LOG_SIGNED_SINCE 4         /* the schema that brought signatures */
#define LOG_ID_MAX 64              /* station, operator, serial, recipe, scale, auditor ids */

/* True when s may name a station: 1..LOG_ID_MAX-1 letters, digits, . _ -,
 * and not "." or ".." — it names a folder (the default log's, the central
 * evidence copies' DIR/STATION), so it must stay one path component. */
int log_station_id_ok(const char *s);
#define LOG_UTC_MAX 32             /* "2026-12-01T22:45:44.123Z" */
#define LOG_NAME_MAX 96            /* evidence name relative to the evidence folder */
#define LOG_MAX_EVIDENCE 2         /* the frame and the overlay */

enum log_mode { LOG_OPEN_READ = 0, LOG_OPEN_WRITE = 1 };

/* Dispositions an auditor gives a record; LOG_DISP_NONE = not yet disposed. */
enum log_disp {
    LOG_DISP_NONE = 0,
    LOG_DISP_CONFIRMED,      /* "confirmed": the reject was right */
    LOG_DISP_FALSE_REJECT,   /* "false-reject": the part was good */
    LOG_DISP_REWORK,         /* "rework": sent for rework */
    LOG_DISP_OTHER           /* "other": see the comment */
};
#define LOG_DISP_COUNT 5

/* "none", "confirmed", "false-reject", "rework", "other". */
const char *log_disp_name(int disp);
/* The enum for a name above, or -1. */
int log_disp_parse(const char *name);

/* "PASS", "FAIL", "NO_VERDICT" (judge_verdict_name) back to enum verdict, or -1. */
int log_verdict_parse(const char *name);

/* The system calls evidence writing uses; log_io_default() is the real one.
 * A fault shim replaces single entries (same contracts as POSIX). */
struct log_io {
    int (*open)(const char *path, int flags, mode_t mode);
    ssize_t (*write)(int fd, const void *buf, size_t len);
    int (*fsync)(int fd);
    int (*close)(int fd);
    int (*rename)(const char *from, const char *to);
};
const struct log_io *log_io_default(void);

struct log_options {
    const char *evidence_dir;      /* NULL: "evidence" beside the database */
    uint64_t evidence_budget;      /* bytes; 0 = no limit */
    int png_level;                 /* zlib level of evidence PNGs (default 1) */
    const struct log_io *io;       /* NULL: log_io_default() */
    unsigned file_mode;            /* permissions of what the log creates (database, its WAL
                                      and evidence files): LOG_FILE_MODE by default; folders
                                      get log_folder_mode() of it */
    const char *key_path;          /* signing key file; NULL: the database path + ".key" */
};
/* On the central database evidence_dir is the folder `station sync
 * --evidence-to` fills (DIR/STATION/NAME); NULL: evidence not available
 * there, which is not broken. */
void log_options_init(struct log_options *o);

/* Owner only: a log names operators and serials and holds the evidence; a
 * site that shares it with a group says so (STATION_LOG_MODE, README.md). */
#define LOG_FILE_MODE 0600u
/* The folder mode for a file mode: search where read is allowed (0600 ->
 * 0700, 0640 -> 0750). */
unsigned log_folder_mode(unsigned file_mode);

struct log_db;

/* Opens (LOG_OPEN_WRITE: creates or upgrades) the database at path.  opt may
 * be NULL (defaults).  LOG_OPEN_READ on a missing file is ST_EIO.  A
 * connection string (logpg_is_conninfo) opens the central database, for
 * reading only: LOG_OPEN_WRITE there is ST_EINVAL, as are log_append,
 * log_dispose and log_verification_append (records, dispositions and
 * verifications are made in the station's own log, signed by its key, and
 * forwarded by `station sync`). */
int log_open(const char *path, int mode, const struct log_options *opt, struct log_db **out,
             struct err *e);
/* Accepts NULL. */
void log_close(struct log_db *db);

/* What an inspection hands to log_append.  Strings may be NULL or "" when not
 * known (operator, serial, camera).  reasons_json and regions_json are the
 * `reasons` and `regions` arrays of the report JSON, as text. */
struct log_entry {
    const char *station;
    const char *operator_id;
    const char *serial;
    const char *recipe_id;
    int recipe_version;
    const char *recipe_sha256;
    const char *model_sha256;
    const char *scale_id;
    int verdict;                   /* enum verdict (core/judge.h) */
    const char *reasons_json;
    const char *regions_json;
    const char *camera_json;       /* camera settings applied (live), NULL otherwise */
    const struct image *frame;     /* NULL: no evidence */
    const struct image *overlay;   /* NULL: frame only */
};

/* Appends one record (and its evidence when entry->frame is set), durably.
 * On ST_OK *seq is the committed record's sequence number. */
int log_append(struct log_db *db, const struct log_entry *entry, int64_t *seq, struct err *e);

/* Whether a PASS keeps evidence under a recipe's [evidence] pass setting
 * (pass_evidence: enum recipe_pass_evidence, every: its N), counting the
 * PASS inspections asked about in this handle's life. */
int log_pass_wants_evidence(struct log_db *db, int pass_evidence, int every);

struct log_evidence {
    char kind[16];                 /* "frame" or "overlay" */
    char name[LOG_NAME_MAX];       /* "2026-12-01/00000042-frame.png" */
    char sha256[SHA256_HEX_LEN];
    int64_t bytes;
    int purged;                    /* deleted by retention (recorded in the log) */
};

struct log_disposition {
    int64_t dseq;                  /* the disposition's own sequence number */
    int64_t record_seq;
    char utc[LOG_UTC_MAX];
    char auditor[LOG_ID_MAX];
    int disp;                      /* enum log_disp */
    char *comment;                 /* heap, "" when none */
    char prev_hash[SHA256_HEX_LEN];
    char hash[SHA256_HEX_LEN];
    char sig[LOGSIGN_SIG_HEX];     /* "" when written before signing */
};

/* One record as read back.  The heap strings belong to the record:
 * log_record_clear frees them (log_iter_next and log_get clear first). */
struct log_record {
    int64_t seq;
    char utc[LOG_UTC_MAX];
    char station[LOG_ID_MAX];
    char operator_id[LOG_ID_MAX];
    char serial[LOG_ID_MAX];
    char recipe_id[LOG_ID_MAX];
    int recipe_version;
    char recipe_sha256[SHA256_HEX_LEN];
    char model_sha256[SHA256_HEX_LEN];
    char scale_id[LOG_ID_MAX];
    int verdict;                   /* enum verdict */
    char *reasons_json;            /* heap, a JSON array */
    char *regions_json;            /* heap, a JSON array */
    char *camera_json;             /* heap, NULL when none */
    int nevidence;
    struct log_evidence ev[LOG_MAX_EVIDENCE];
    char prev_hash[SHA256_HEX_LEN];
    char hash[SHA256_HEX_LEN];
    char sig[LOGSIGN_SIG_HEX];     /* "" when written before signing */
    int has_disposition;           /* the latest disposition, when any */
    struct log_disposition disp;
    char chain_station[LOG_ID_MAX];   /* whose chain holds it: centrally the forwarding
                                         station (the key), locally the log's own station
                                         (its latest record's) */
    char line[LOG_ID_MAX];         /* that station's production line; "" locally */
};
void log_record_init(struct log_record *r);
void log_record_clear(struct log_record *r);

/* A filter for log_iter_new; log_filter_init sets "any" everywhere. */
struct log_filter {
    const char *from_utc;          /* inclusive, ISO 8601 prefix compare ("2026-12-01") */
    const char *to_utc;            /* exclusive */
    int verdict;                   /* enum verdict, -1 any */
    int rejects;                   /* 1: FAIL and NO_VERDICT only */
    const char *cls;               /* a reason or region with this class */
    const char *zone;              /* a reason or region with this zone */
    const char *recipe_id;
    const char *station;           /* centrally the forwarding station (the chain key);
                                      locally the record's station field */
    const char *line;              /* production line (central; a local log has none, so
                                      only "" matches there) */
    int disp;                      /* enum log_disp of the latest disposition, -1 any */
    int64_t seq_from, seq_to;      /* inclusive; 0 = open */
};
void log_filter_init(struct log_filter *f);

struct log_iter;
int log_iter_new(struct log_db *db, const struct log_filter *f, struct log_iter **out,
                 struct err *e);
/* Fills rec with the next match and sets *have = 1, or *have = 0 at the end. */
int log_iter_next(struct log_iter *it, struct log_record *rec, int *have, struct err *e);
void log_iter_free(struct log_iter *it);

/* One record by sequence number; no such record is ST_ERANGE. */
int log_get(struct log_db *db, int64_t seq, struct log_record *rec, struct err *e);

/* Every disposition of a record (seq <= 0: of every record), oldest first;
 * free with log_dispositions_free. */
int log_dispositions_get(struct log_db *db, int64_t seq, struct log_disposition **out, int *n,
                         struct err *e);
void log_dispositions_free(struct log_disposition *d, int n);

/* The stored hash of record seq (ST_ERANGE: no such record). */
int log_record_hash(struct log_db *db, int64_t seq, char hex[SHA256_HEX_LEN], struct err *e);

/* Appends a disposition (auditor required, comment may be NULL) to the
 * disposition chain; the record must exist.  *dseq gets its number. */
int log_dispose(struct log_db *db, int64_t seq, const char *auditor, int disp,
                const char *comment, int64_t *dseq, struct err *e);

/* The full path of evidence `name` of record r; ST_EIO "not available" when
 * the handle has no evidence folder for it (log_evidence_dir is NULL). */
int log_record_evidence_path(const struct log_db *db, const struct log_record *r,
                             const char *name, char *buf, size_t len, struct err *e);
/* The same for the handle's own chain: a local log's, centrally the scoped
 * station's (log_scope). */
int log_evidence_path(const struct log_db *db, const char *name, char *buf, size_t len,
                      struct err *e);

/* One run of a recipe's master parts.  masters_json is a JSON array of
 * {master, expect, verdict, match}: heap on read (freed by
 * log_verifications_free), borrowed on append. */
struct log_verification {
    int64_t vseq;
    char utc[LOG_UTC_MAX];
    char station[LOG_ID_MAX];
    char recipe_id[LOG_ID_MAX];
    int recipe_version;
    char recipe_sha256[SHA256_HEX_LEN];
    char model_sha256[SHA256_HEX_LEN];
    int passed;                    /* every master got its verdict */
    char *masters_json;
    char prev_hash[SHA256_HEX_LEN];
    char hash[SHA256_HEX_LEN];
    char sig[LOGSIGN_SIG_HEX];     /* "" when written before signing */
};

/* Appends v (station, recipe_*, model_sha256, passed, masters_json set by
 * the caller) to the verification chain; fills vseq, utc, prev_hash, hash. */
int log_verification_append(struct log_db *db, struct log_verification *v, struct err *e);

/* The latest verification at station of recipe_id version with this model:
 * *found = 0 when there is none.  v->masters_json is left NULL. */
int log_verification_last(struct log_db *db, const char *station, const char *recipe_id,
                          int recipe_version, const char *model_sha256,
                          struct log_verification *v, int *found, struct err *e);

/* Every verification, oldest first; free with log_verifications_free. */
int log_verifications_get(struct log_db *db, struct log_verification **out, int *n,
                          struct err *e);
void log_verifications_free(struct log_verification *v, int n);

/* The log's signing key as stored in it (meta table, schema 4). */
struct log_signing {
    int present;                   /* 0: no key yet (never opened for writing since) */
    char public_key[LOGSIGN_PK_HEX];
    int64_t from[3];               /* first signed record, disposition, verification */
    char statement_sig[LOGSIGN_SIG_HEX];   /* over logsign_statement */
};
int log_signing_get(struct log_db *db, struct log_signing *s, struct err *e);

/* One station's chains as a log holds them. */
struct log_station {
    char station[LOG_ID_MAX];
    char line[LOG_ID_MAX];
    char public_key[LOGSIGN_PK_HEX];   /* "" when not signed */
    int64_t records;
    int64_t last_seq;              /* the newest record's number, 0 when none */
};
/* Every station the log holds, by id: a local log its own one (none while
 * empty), the central database each station that forwarded to it.  Free
 * with log_stations_free. */
int log_stations_get(struct log_db *db, struct log_station **out, int *n, struct err *e);
void log_stations_free(struct log_station *s);

/* Retention's deletions of evidence (the evidence budget): a local log's in
 * the order it made them, the central database's of the scoped station by
 * time, record and name.  Free with free(). */
#define LOG_REASON_MAX 64
struct log_purge {
    char name[LOG_NAME_MAX];
    int64_t record_seq;
    char utc[LOG_UTC_MAX];
    char reason[LOG_REASON_MAX];
};
int log_purges_get(struct log_db *db, struct log_purge **out, int *n, struct err *e);

/* Narrows log_get, log_record_hash, log_dispositions_get,
 * log_verifications_get, log_signing_get and log_iter_new (and so
 * log_verify) to the chains of one station; NULL widens again.  Centrally a
 * station not held is ST_ERANGE naming those held, and without a scope the
 * per-chain calls refuse when several stations are held (sequence numbers
 * are per station).  A local log is one station's chain: scope does not
 * narrow it. */
int log_scope(struct log_db *db, const char *station, struct err *e);

/* "sqlite" or "postgresql". */
const char *log_kind(const struct log_db *db);

/* PRAGMA integrity_check: ST_OK when SQLite answers "ok", else ST_EFORMAT
 * with its first complaint (centrally: the schema is ours and readable). */
int log_check_integrity(struct log_db *db, struct err *e);

/* The folder r's evidence names resolve against (r NULL: the handle's own
 * chain's, as log_evidence_path), written into buf (len PATH_MAX suffices),
 * or NULL when this handle has none: a central database opened without
 * evidence_dir, or not scoped when r is NULL. */
const char *log_evidence_dir(const struct log_db *db, const struct log_record *r, char *buf,
                             size_t len);

/* The database path the handle was opened with (a connection string without
 * its password). */
const char *log_path(const struct log_db *db);

#endif
