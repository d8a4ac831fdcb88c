/* logverify: checks a station log end to end — what `station audit verify`
 * runs.
 *
 * In order: SQLite's PRAGMA integrity_check; the record chain (sequence
 * numbers without gaps from 1, each prev_hash equal to the previous record's
 * hash, each hash equal to the SHA-256 of the record's canonical form, see
 * core/logcanon.h); every evidence file a record names (present, same size,
 * same SHA-256) unless retention deleted it or the handle has no evidence
 * folder (the central database without one: counted as unavailable), and
 * retention may only have deleted evidence of a PASS or of a disposed
 * reject; then the disposition
 * chain the same way, each disposition bound to its record's hash; then the
 * verification chain (master-part runs) the same way; then the Ed25519
 * signature of every link from the log's signing start on (core/logsign.h),
 * against the public key stored in the log or, for a third party's check,
 * one given from elsewhere, and the signed start statement itself.  Links
 * before the signing start (written before schema 4) are counted as
 * unsigned, never as broken.  A signature that does not verify breaks its
 * chain at that link like a changed field.  The
 * first broken link is reported: the chain, the sequence number and what
 * differs.  A break at the very last link of a chain, with every earlier
 * link intact, is told apart as torn (an interrupted last write) from damage
 * with intact links after it.  On a handle holding several stations (the
 * central database) the caller scopes it to one first (log_scope): the
 * chains, keys and signing start are per station.  Reads only; never prints. */
#ifndef ST_LOGVERIFY_H
#define ST_LOGVERIFY_H

#include "log.h"

struct log_verify_result {
    int ok;                        /* 1 only when everything verified */
    int64_t records, dispositions, evidence_files;   /* links checked */
    int64_t verifications;
    int64_t evidence_unavailable;  /* files named but not reachable from this handle (a
                                      central database opened without an evidence folder):
                                      not checked, and not counted as broken */
    int torn;                      /* the first break is at a chain's last link */
    char chain[16];                /* "database", "record", "evidence", "disposition",
                                      "verification" */
    int64_t seq;                   /* the broken link's sequence number */
    int64_t after;                 /* links of that chain after the break */
    char what[600];                /* what differs, one line */
    char public_key[LOGSIGN_PK_HEX];   /* the key checked against; "" when the log has none */
    int key_given;                 /* public_key came from the caller, not the log */
    int64_t signed_links;          /* signatures verified */
    int64_t unsigned_links;        /* links from before signing (schema < LOG_SIGNED_SINCE) */
};

/* ST_OK when the walk finished (res says whether all verified); an error
 * only when the log could not be read at all. */
int log_verify(struct log_db *db, struct log_verify_result *res, struct err *e);

/* The same, checking signatures against public_key (64 hex) instead of the
 * key the log stores; NULL is log_verify. */
int log_verify_key(struct log_db *db, const char *public_key, struct log_verify_result *res,
                   struct err *e);

#endif
