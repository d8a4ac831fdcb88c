/* audit: the sub-verbs of `station audit` and what they share.
 *
 * cmd_audit.c dispatches `station audit VERB ...` to one function per verb,
 * each in its own file (audit_list.c, audit_show.c, audit_dispose.c,
 * audit_verify.c; further verbs add a file and a row in cmd_audit.c).  Every
 * verb takes --log DB (default: the station's log, see station/logbook.h,
 * chosen with --station ID).  Verbs only read the log, through a read-only
 * handle that never blocks the station writing (WAL), except dispose, which
 * appends to the disposition chain.  JSON lines go to stdout, text for a
 * person to stderr; errors are one line. */
#ifndef ST_AUDIT_H
#define ST_AUDIT_H

#include <jansson.h>

#include "core/log.h"

/* Each returns an exit_status (station/cli.h); argv[0] is the verb. */
int audit_list(int argc, char **argv);
int audit_show(int argc, char **argv);
int audit_dispose(int argc, char **argv);
int audit_verify(int argc, char **argv);

/* Where a verb reads. */
struct audit_source {
    const char *log;               /* --log: a path or a connection string; NULL: the default */
    const char *station;           /* --station */
    const char *evidence;          /* --evidence: the evidence folder (central: DIR/STATION/) */
    int scope;                     /* narrow the handle to station (log_scope) */
};

/* Opens src->log, or the default log of src->station
 * (LOGBOOK_DEFAULT_STATION when NULL), scoped to src->station when asked or
 * when a station is named at all, so a station the central database does
 * not hold is an error naming those it does, not an empty selection; prints
 * the one-line reason and returns EXIT_ERROR on failure. */
int audit_open_source(const struct audit_source *src, int mode, struct log_db **out);
/* The same for db_path and station alone (no evidence folder, no scope). */
int audit_open_log(const char *db_path, const char *station, int mode, struct log_db **out);

/* A record as a JSON object: every field of struct log_record, reasons and
 * regions parsed back into arrays, evidence with full paths, the latest
 * disposition.  NULL when memory runs out. */
json_t *audit_record_json(const struct log_db *db, const struct log_record *r);

/* A whole number >= 1 for a record sequence number, or -1. */
long long audit_parse_seq(const char *s);

/* A disposition as a JSON object. */
json_t *audit_disposition_json(const struct log_disposition *d);

#endif
