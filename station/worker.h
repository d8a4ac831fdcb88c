/* worker: the live station's inspection thread.
 *
 * The worker owns the inspector and the station's log (station/logbook.h)
 * for its whole life; the loop (station/live.h) only hands it jobs and
 * takes back results, so nothing the display thread does can race with an
 * inspection or a commit.  One job at a time: an inspection of a frame (the
 * worker owns the copy it is handed) or a refusal (a NO_VERDICT record with
 * one reason, e.g. camera_lost).  Each job ends in inspector_run (for a
 * frame), report_json, logbook_record and only then its result: a verdict
 * is posted only once its record is durable, with log_seq.  When the log
 * fails the result is HALTED (the report NO_VERDICT, log_failed, not
 * recorded) and the worker takes no job until the log works again: every
 * retry_ms it tries to record that NO_VERDICT (no evidence) and posts
 * RESUMED with its log_seq once that commit succeeds.  Before each
 * inspection, at most every 60 s, the hours since the last passing
 * master-part verification are read from the log again
 * (inspector_set_verified, as station inspect does once). */
#ifndef ST_WORKER_H
#define ST_WORKER_H

#include <jansson.h>
#include <stdint.h>

#include "core/image.h"
#include "core/log.h"
#include "core/recipe.h"

enum job_kind { JOB_INSPECT = 0, JOB_REFUSE };

struct job {
    int kind;
    struct image *frame;             /* JOB_INSPECT: handed over to the worker */
    char name[256];                  /* the report's "image" */
    char rule[32], message[256];     /* JOB_REFUSE */
    char operator_id[LOG_ID_MAX], serial[LOG_ID_MAX];
    char *camera_json;               /* the camera's settings now (heap, the worker frees it); NULL: none */
    int forget_last;                 /* not a camera's next frame (replay) */
    double t_ms;                     /* when the frame was captured (latency) */
};

enum result_kind { RESULT_VERDICT = 0, RESULT_HALTED, RESULT_RESUMED };

struct result {
    int kind;
    json_t *report;                  /* VERDICT, HALTED: the caller owns it */
    int verdict;                     /* enum verdict */
    int64_t seq;                     /* VERDICT, RESUMED: the durable record */
    struct image *overlay;           /* VERDICT with a judged frame, when asked for; caller frees */
    char serial[LOG_ID_MAX];         /* the serial the record was logged with */
    char message[512];               /* HALTED: why */
    double t_ms, done_ms;            /* capture, and when the record was durable */
};

struct worker_options {
    const char *db_path, *station;   /* as logbook_open */
    uint64_t budget_bytes;
    int want_overlay;                /* draw an overlay for every judged frame (the screen) */
    int retry_ms;                    /* log retries while halted (default 1000) */
};

struct worker;
/* Opens the inspector and the log here (errors come back at once), then
 * starts the thread. */
int worker_start(const struct recipe *r, const struct worker_options *o, struct worker **out,
                 struct err *e);
/* Finishes the job in hand (a halted worker gives up its retries), joins
 * the thread, closes the log.  Accepts NULL. */
void worker_stop(struct worker *w);

/* A job in hand, a result not yet taken, or halted. */
int worker_busy(struct worker *w);
/* Takes the job when the worker is free (returns 1; its frame and
 * camera_json are the worker's now), else returns 0 and leaves the job to
 * the caller.  The camera settings travel with each job because a camera
 * that reconnected may hold other values than at the start. */
int worker_submit(struct worker *w, struct job *j);
/* Takes the next result: 1 when there was one. */
int worker_poll(struct worker *w, struct result *r);
/* The log's path, for the closing line. */
const char *worker_log_path(struct worker *w);

#endif
