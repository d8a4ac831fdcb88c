/* logcentral: the plant's central PostgreSQL database read as a log — the
 * read-only back-end behind core/log.h for a connection string
 * (core/logbackend.h), over the schema and the connection rules of
 * core/logpg.h (no password on the command line; messages name the database
 * without one).
 *
 * The central database holds many stations' chains, each keyed by its
 * forwarding station: a record read back carries that key in chain_station
 * and the station's line, and its own station field (rec_station) as the
 * canonical form has it, so core/logverify.h recomputes every hash and checks
 * every signature from the central copy, with each station's own public key
 * (table stations).  Walks (log_iter_new) cross stations, ordered by station
 * then sequence number; the filter's station matches the chain key and its
 * line the station's line.  The per-chain calls (log_get, log_record_hash,
 * log_dispositions_get, log_verifications_get, log_verification_last,
 * log_signing_get) read the scoped station (log_scope), or the only station
 * held; with several held and no scope they refuse, naming them.
 *
 * Read only: the session is opened read-only (default_transaction_read_only),
 * LOG_OPEN_WRITE is refused, and so are log_append, log_dispose and
 * log_verification_append, with the reason: the station's own log is the
 * source of truth and signs what `station sync` forwards.  Evidence files are
 * found under options' evidence_dir as DIR/STATION/NAME (what `station sync
 * --evidence-to DIR` copies); without it evidence is not available here.
 * Walks read through a server-side cursor in batches, inside a read-only
 * repeatable-read transaction, so a walk sees one snapshot and memory stays
 * bounded.
 *
 * Owns the connection (core/logpg.h) and the walk's results.  Never prints;
 * no global state; one handle per thread. */
#ifndef ST_LOGCENTRAL_H
#define ST_LOGCENTRAL_H

#include "logbackend.h"

extern const struct log_ops logcentral_ops;

/* log_open for a connection string: *out is the handle logcentral_ops
 * takes.  The schema must be ours (logpg_schema_check). */
int logcentral_open(const char *conninfo, int mode, const struct log_options *opt, void **out,
                    struct err *e);

#endif
