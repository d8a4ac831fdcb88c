#include "worker.h"

#include <errno.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/inspect.h"
#include "logbook.h"
#include "report.h"
#include "source.h"
#include "verify.h"
#include "cli.h"

#define VERIFY_REFRESH_MS 60000.0

struct worker {
    const struct recipe *r;
    struct inspector *in;
    struct logbook lb;
    int want_overlay, retry_ms;
    double verified_ms;               /* when inspector_set_verified was last refreshed */

    pthread_t thread;
    pthread_mutex_t mu;
    pthread_cond_t cv;
    int started, stop;
    int has_job, has_result, halted;
    struct job job;
    struct result result;
    char outage_name[256], outage_msg[512];
};

static void refresh_verified(struct worker *w)
{
    if (!w->r->nmasters || (w->verified_ms > 0 &&
                            cli_now_ms() - w->verified_ms < VERIFY_REFRESH_MS))
        return;
    double since;
    struct err e;
    err_clear(&e);
    verify_hours_since(&w->lb, w->r, &since, &e); /* an unreadable log reads as never verified */
    inspector_set_verified(w->in, since);
    w->verified_ms = cli_now_ms();
}

/* Runs one job (without the lock) into res. */
static void run_job(struct worker *w, struct job *jb, struct result *res)
{
    struct err e;
    err_clear(&e);
    memset(res, 0, sizeof *res);
    res->t_ms = jb->t_ms;
    snprintf(res->serial, sizeof res->serial, "%s", jb->serial);
    json_t *o;
    struct judgement j;
    int judged = 0;
    if (jb->kind == JOB_REFUSE) {
        o = report_json_refused(jb->name, jb->rule, jb->message);
    } else {
        refresh_verified(w);
        if (jb->forget_last)
            inspector_forget_last_frame(w->in);
        struct inspect_times t = {0};
        if (inspector_run(w->in, jb->frame, &j, &t, &e)) {
            o = report_json_error(jb->name, &e);
        } else {
            o = report_json(jb->name, w->in, &j, &t);
            judged = 1;
        }
    }
    int64_t seq = 0;
    struct image *ov = NULL;
    err_clear(&e);
    w->lb.camera_json = jb->camera_json;
    int rc = logbook_record(&w->lb, o, w->in, judged ? jb->frame : NULL, judged ? &j : NULL,
                            jb->operator_id, jb->serial, &seq, judged ? &ov : NULL, &e);
    res->report = o;
    res->done_ms = cli_now_ms();
    if (rc) {
        res->kind = RESULT_HALTED;
        res->verdict = VERDICT_NONE;
        snprintf(res->message, sizeof res->message, "%s", e.msg);
        snprintf(w->outage_name, sizeof w->outage_name, "%s", jb->name);
        snprintf(w->outage_msg, sizeof w->outage_msg, "not recorded: %.480s", e.msg);
        image_free(ov);
        return;
    }
    res->kind = RESULT_VERDICT;
    res->verdict = judged ? j.verdict : VERDICT_NONE;
    res->seq = seq;
    if (judged && w->want_overlay && !ov)
        ov = report_overlay(w->in, jb->frame, &j, &e);
    res->overlay = ov;
}

/* While halted: one attempt to record the NO_VERDICT of the part the log
 * failed on; 1 when it is durable. */
static int retry_log(struct worker *w, struct result *res)
{
    struct err e;
    err_clear(&e);
    json_t *o = report_json_refused(w->outage_name, "log_failed", w->outage_msg);
    int64_t seq;
    int rc = logbook_record(&w->lb, o, w->in, NULL, NULL, NULL, NULL, &seq, NULL, &e);
    json_decref(o);
    if (rc)
        return 0;
    memset(res, 0, sizeof *res);
    res->kind = RESULT_RESUMED;
    res->seq = seq;
    res->done_ms = cli_now_ms();
    return 1;
}

static void timed_wait(struct worker *w, int ms)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    ts.tv_sec += ms / 1000;
    ts.tv_nsec += (long)(ms % 1000) * 1000000L;
    if (ts.tv_nsec >= 1000000000L) {
        ts.tv_sec++;
        ts.tv_nsec -= 1000000000L;
    }
    pthread_cond_timedwait(&w->cv, &w->mu, &ts);
}

static void *worker_main(void *arg)
{
    struct worker *w = arg;
    pthread_mutex_lock(&w->mu);
    while (!w->stop) {
        if (w->has_result) {
            pthread_cond_wait(&w->cv, &w->mu);
        } else if (w->halted) {
            timed_wait(w, w->retry_ms);
            if (w->stop)
                break;
            pthread_mutex_unlock(&w->mu);
            struct result res;
            int ok = retry_log(w, &res);
            pthread_mutex_lock(&w->mu);
            if (ok) {
                w->halted = 0;
                w->result = res;
                w->has_result = 1;
            }
        } else if (w->has_job) {
            struct job jb = w->job;
            pthread_mutex_unlock(&w->mu);
            struct result res;
            run_job(w, &jb, &res);
            image_free(jb.frame);
            free(jb.camera_json);
            w->lb.camera_json = NULL;
            pthread_mutex_lock(&w->mu);
            w->has_job = 0;
            w->halted = res.kind == RESULT_HALTED;
            w->result = res;
            w->has_result = 1;
        } else {
            pthread_cond_wait(&w->cv, &w->mu);
        }
    }
    pthread_mutex_unlock(&w->mu);
    return NULL;
}

int worker_start(const struct recipe *r, const struct worker_options *o, struct worker **out,
                 struct err *e)
{
    *out = NULL;
    struct worker *w = calloc(1, sizeof *w);
    if (!w)
        return err_set(e, ST_ENOMEM, "worker: out of memory");
    w->r = r;
    w->want_overlay = o->want_overlay;
    w->retry_ms = o->retry_ms > 0 ? o->retry_ms : 1000;
    int rc = inspector_new(r, &w->in, e);
    if (!rc)
        rc = logbook_open(&w->lb, o->db_path, o->station, o->budget_bytes, r, e);
    if (rc) {
        inspector_free(w->in);
        if (w->lb.db)
            logbook_close(&w->lb);
        free(w);
        return rc;
    }
    refresh_verified(w);
    pthread_mutex_init(&w->mu, NULL);
    pthread_cond_init(&w->cv, NULL);
    int perr = pthread_create(&w->thread, NULL, worker_main, w);
    if (perr) {
        w->started = 0;
        worker_stop(w);
        return err_set(e, ST_ENOMEM, "worker: cannot start the inspection thread: %s",
                       strerror(perr));
    }
    w->started = 1;
    *out = w;
    return ST_OK;
}

void worker_stop(struct worker *w)
{
    if (!w)
        return;
    if (w->started) {
        pthread_mutex_lock(&w->mu);
        /* the job in hand finishes (its record is committed or refused) */
        while (w->has_job)
            timed_wait(w, 10);
        w->stop = 1;
        pthread_cond_broadcast(&w->cv);
        pthread_mutex_unlock(&w->mu);
        pthread_join(w->thread, NULL);
    }
    if (w->has_result) {
        json_decref(w->result.report);
        image_free(w->result.overlay);
    }
    pthread_mutex_destroy(&w->mu);
    pthread_cond_destroy(&w->cv);
    inspector_free(w->in);
    logbook_close(&w->lb);
    free(w);
}

int worker_busy(struct worker *w)
{
    pthread_mutex_lock(&w->mu);
    int busy = w->has_job || w->has_result || w->halted;
    pthread_mutex_unlock(&w->mu);
    return busy;
}

int worker_submit(struct worker *w, struct job *j)
{
    pthread_mutex_lock(&w->mu);
    int free_now = !w->has_job && !w->has_result && !w->halted;
    if (free_now) {
        w->job = *j;
        w->has_job = 1;
        j->frame = NULL;
        j->camera_json = NULL;
        pthread_cond_broadcast(&w->cv);
    }
    pthread_mutex_unlock(&w->mu);
    return free_now;
}

int worker_poll(struct worker *w, struct result *r)
{
    pthread_mutex_lock(&w->mu);
    int have = w->has_result;
    if (have) {
        *r = w->result;
        w->has_result = 0;
        pthread_cond_broadcast(&w->cv);
    }
    pthread_mutex_unlock(&w->mu);
    return have;
}

const char *worker_log_path(struct worker *w)
{
    return log_path(w->lb.db);
}
