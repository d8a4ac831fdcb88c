/* forwarder: the live station's background forwarding to the central
 * database (`station run --sync-to`), on a thread of its own.
 *
 * The thread has its own read handle of the local log (WAL: a reader never
 * blocks the worker's commits) and its own connection, and runs
 * logsync_run (core/logsync.h) every `every_s` seconds.  A failure (server
 * down, refusal) closes both, is posted as an event, and is retried after
 * 1 s, then twice as long each time up to 60 s; inspection never waits on
 * it.  The first sync (and the first after a failure) rechecks every held
 * link against the local log; later ones only what is new.  The loop
 * (station/live.h) polls the events and shows them as event lines and in the
 * screen's status line.  Stopping does not wait for a last sync: the next
 * run forwards what is left. */
#ifndef ST_FORWARDER_H
#define ST_FORWARDER_H

#include <stdint.h>

#include "core/err.h"

#define FORWARDER_EVERY_DEFAULT 30.0
#define FORWARDER_BACKOFF_MAX_S 60

struct forwarder_options {
    const char *conninfo;          /* checked for passwords by forwarder_start */
    const char *db_path;           /* the local log (the worker's) */
    const char *station;           /* the central key; NULL: the latest record's station */
    const char *line;              /* NULL: as held */
    double every_s;
};

enum forward_kind { FORWARD_SYNCED = 0, FORWARD_FAILED };

struct forward_event {
    int kind;
    int64_t records, dispositions, verifications;  /* SYNCED: forwarded this time */
    int64_t held;                  /* SYNCED: the central copy's last record now */
    int retry_s;                   /* FAILED: the next try in */
    int code;                      /* FAILED: ST_EFORMAT refused by either side, else not reached */
    char message[512];             /* FAILED: why */
};

struct forwarder;
int forwarder_start(const struct forwarder_options *o, struct forwarder **out, struct err *e);
/* Ends the thread: a sync in hand stops between batches, and a statement
 * waiting on a silent server is cut by shutting its socket down (the open
 * batch is rolled back by the server); a connect in hand is bounded by
 * libpq's connect_timeout (10 s).  Accepts NULL. */
void forwarder_stop(struct forwarder *f);
/* Takes the next event: 1 when there was one (older ones are dropped when
 * nobody polls). */
int forwarder_poll(struct forwarder *f, struct forward_event *ev);

#endif
