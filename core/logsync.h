/* logsync: store-and-forward of one station's local log to the central
 * database (core/logpg.h).  The local SQLite log stays the source of truth;
 * the central copy is what it held when last forwarded.
 *
 * logsync_run walks the local log through core/log.h's read API and, per
 * batch of records in one central transaction, sends what the server does
 * not hold yet, in order: records with their evidence rows, then evidence
 * purges, dispositions and verifications whose records are held.  Before
 * sending it recomputes each link's canonical hash (core/logcanon.h) and
 * refuses one whose stored hash does not match its content or whose
 * prev_hash does not name the link before it.  Each batch also sends the
 * local copy of the last link the server holds of each chain (the anchor),
 * and checks that the last purge it holds is the local one of that number.
 * Keyed by (station, seq) and checked by hash on the server, a retry after a
 * cut connection resumes from what the server holds: nothing is doubled or
 * skipped.  recheck (the default) first compares every held hash of every
 * chain with the local log (a full reconciliation: a record altered anywhere
 * after it was forwarded is named with station and sequence number) and
 * forwards nothing when one differs.
 *
 * evidence_to (optional) copies each forwarded record's evidence files to
 * EVIDENCE_TO/STATION/NAME (temporary name, fsync, rename; SHA-256 checked
 * before and after) before the batch that names them commits.  A file that
 * cannot be copied (missing, altered) is counted and named in the result,
 * never a reason to stop forwarding records.
 *
 * Never prints; no global state. */
#ifndef ST_LOGSYNC_H
#define ST_LOGSYNC_H

#include <stdatomic.h>
#include <stdint.h>

#include "err.h"
#include "log.h"
#include "logpg.h"

#define LOGSYNC_BATCH_DEFAULT 500
/* A batch is one transaction holding the station's row: the bound keeps what
 * a cut connection loses, and what libpq buffers of its replies, small. */
#define LOGSYNC_BATCH_MAX 2000

struct logsync_options {
    const char *station;           /* the central key; NULL: the latest record's station */
    const char *line;              /* the station's production line; NULL: as held */
    const char *evidence_to;       /* NULL: evidence files are not copied */
    int batch;                     /* records per transaction; 0: LOGSYNC_BATCH_DEFAULT */
    int recheck;                   /* 1 (the default): every held link compared first */
    const atomic_int *stop;        /* NULL, or set by another thread: end between batches */
};
void logsync_options_init(struct logsync_options *o);

/* What one run did, per chain: the server held *_before, the local log has
 * local_*, sent_* the server inserted (a row it held already, sent again by a
 * retry, an anchor or another sync of the station, is not counted). */
struct logsync_result {
    char station[LOG_ID_MAX];
    int64_t local_seq, local_dseq, local_vseq, local_purges;
    int64_t held_seq, held_dseq, held_vseq, held_purges;       /* before the run */
    int64_t sent_records, sent_evidence, sent_purges, sent_dispositions, sent_verifications;
    int64_t central_seq;           /* the central copy's last record after the run */
    int64_t rechecked;             /* links compared by recheck */
    int stopped;                   /* o->stop ended the run early */
    int batches;
    int64_t copied, copy_failed;   /* evidence files */
    char copy_problem[512];        /* the first copy failure, "" when none */
};

/* Forwards db (opened for reading) into pg.  On failure res holds what was
 * committed before it; a retry continues from there.  A log without records
 * and no station given is nothing to do (res->station stays ""). */
int logsync_run(struct log_db *db, struct logpg *pg, const struct logsync_options *o,
                struct logsync_result *res, struct err *e);

#endif
