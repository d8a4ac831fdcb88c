#include "forwarder.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <time.h>

#include "core/log.h"
#include "core/logpg.h"
#include "core/logsync.h"

#define EVENTS 8

struct forwarder {
    char conninfo[1024], db_path[4096], station[LOG_ID_MAX], line[LOG_ID_MAX];
    int has_station, has_line;
    double every_s;
    pthread_t th;
    pthread_mutex_t mu;
    pthread_cond_t cv;
    atomic_int stop;
    int sock;                      /* the connection's socket, -1 none; under mu */
    int rechecked;                 /* a sync since the last (re)connect rechecked */
    struct forward_event ev[EVENTS];
    int head, count;
    int failing;                   /* the last try failed */
};

static void post(struct forwarder *f, const struct forward_event *ev)
{
    pthread_mutex_lock(&f->mu);
    if (f->count == EVENTS) {      /* nobody polled: drop the oldest */
        f->head = (f->head + 1) % EVENTS;
        f->count--;
    }
    f->ev[(f->head + f->count++) % EVENTS] = *ev;
    pthread_mutex_unlock(&f->mu);
}

/* Sleeps s seconds or until stopped; 1 when stopped. */
static int wait_s(struct forwarder *f, double s)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    double end = (double)t.tv_sec + t.tv_nsec / 1e9 + s;
    t.tv_sec = (time_t)end;
    t.tv_nsec = (long)((end - (double)t.tv_sec) * 1e9);
    pthread_mutex_lock(&f->mu);
    while (!f->stop && pthread_cond_timedwait(&f->cv, &f->mu, &t) == 0)
        ;
    int stop = f->stop;
    pthread_mutex_unlock(&f->mu);
    return stop;
}

/* One sync with fresh handles where the last try failed. */
static int once(struct forwarder *f, struct log_db **db, struct logpg **pg,
                struct logsync_result *r, struct err *e)
{
    struct logsync_options o;
    logsync_options_init(&o);
    o.station = f->has_station ? f->station : NULL;
    o.line = f->has_line ? f->line : NULL;
    o.stop = &f->stop;
    o.recheck = !f->rechecked;
    if (!*db && log_open(f->db_path, LOG_OPEN_READ, NULL, db, e))
        return e->code;
    if (!*pg && logpg_connect(f->conninfo, pg, e))
        return e->code;
    pthread_mutex_lock(&f->mu);
    f->sock = PQsocket(logpg_conn(*pg));
    if (f->stop)
        shutdown(f->sock, SHUT_RDWR);
    pthread_mutex_unlock(&f->mu);
    int rc = logsync_run(*db, *pg, &o, r, e);
    f->rechecked |= !rc;
    return rc;
}

/* The socket is forgotten under the lock before the connection closes, so
 * forwarder_stop never shuts down a descriptor that has been reused. */
static void close_pg(struct forwarder *f, struct logpg **pg)
{
    pthread_mutex_lock(&f->mu);
    f->sock = -1;
    pthread_mutex_unlock(&f->mu);
    logpg_close(*pg);
    *pg = NULL;
}

static void *run(void *arg)
{
    struct forwarder *f = arg;
    struct log_db *db = NULL;
    struct logpg *pg = NULL;
    int backoff = 1;
    do {
        struct err e;
        err_clear(&e);
        struct logsync_result r;
        memset(&r, 0, sizeof r);
        struct forward_event ev;
        memset(&ev, 0, sizeof ev);
        if (once(f, &db, &pg, &r, &e)) {
            close_pg(f, &pg);
            log_close(db);
            db = NULL;
            f->rechecked = 0;
            if (f->stop)
                break;
            ev.kind = FORWARD_FAILED;
            ev.code = e.code;
            ev.retry_s = backoff;
            snprintf(ev.message, sizeof ev.message, "%s", e.msg);
            post(f, &ev);
            f->failing = 1;
            if (wait_s(f, backoff))
                break;
            backoff = backoff * 2 > FORWARDER_BACKOFF_MAX_S ? FORWARDER_BACKOFF_MAX_S : backoff * 2;
            continue;
        }
        backoff = 1;
        ev.kind = FORWARD_SYNCED;
        ev.records = r.sent_records;
        ev.dispositions = r.sent_dispositions;
        ev.verifications = r.sent_verifications;
        ev.held = r.central_seq;
        /* quiet while nothing happens, but say when a failure is over */
        if (f->failing || ev.records || ev.dispositions || ev.verifications || r.sent_purges)
            post(f, &ev);
        f->failing = 0;
    } while (!wait_s(f, f->every_s));
    close_pg(f, &pg);
    log_close(db);
    return NULL;
}

int forwarder_start(const struct forwarder_options *o, struct forwarder **out, struct err *e)
{
    *out = NULL;
    int rc = logpg_conninfo_check(o->conninfo, e);
    if (rc)
        return rc;
    struct forwarder *f = calloc(1, sizeof *f);
    if (!f)
        return err_set(e, ST_ENOMEM, "central forwarding: out of memory");
    if ((size_t)snprintf(f->conninfo, sizeof f->conninfo, "%s", o->conninfo) >= sizeof f->conninfo ||
        (size_t)snprintf(f->db_path, sizeof f->db_path, "%s", o->db_path) >= sizeof f->db_path ||
        (o->station && (size_t)snprintf(f->station, sizeof f->station, "%s", o->station) >=
                           sizeof f->station) ||
        (o->line && (size_t)snprintf(f->line, sizeof f->line, "%s", o->line) >= sizeof f->line)) {
        free(f);
        return err_set(e, ST_EINVAL, "central forwarding: connection string, log path, station"
                                     " or line too long");
    }
    f->has_station = o->station != NULL;
    f->has_line = o->line != NULL;
    f->every_s = o->every_s > 0 ? o->every_s : FORWARDER_EVERY_DEFAULT;
    f->sock = -1;
    pthread_condattr_t ca;
    pthread_condattr_init(&ca);
    pthread_condattr_setclock(&ca, CLOCK_MONOTONIC);
    pthread_mutex_init(&f->mu, NULL);
    pthread_cond_init(&f->cv, &ca);
    pthread_condattr_destroy(&ca);
    if (pthread_create(&f->th, NULL, run, f)) {
        pthread_cond_destroy(&f->cv);
        pthread_mutex_destroy(&f->mu);
        free(f);
        return err_set(e, ST_ENOMEM, "central forwarding: cannot start its thread");
    }
    *out = f;
    return ST_OK;
}

void forwarder_stop(struct forwarder *f)
{
    if (!f)
        return;
    pthread_mutex_lock(&f->mu);
    f->stop = 1;
    /* PQcancel would do it politely, but in libpq 15 it waits on the server
     * with no bound, and a silent server is the case to end */
    if (f->sock >= 0)
        shutdown(f->sock, SHUT_RDWR);
    pthread_cond_signal(&f->cv);
    pthread_mutex_unlock(&f->mu);
    pthread_join(f->th, NULL);
    pthread_cond_destroy(&f->cv);
    pthread_mutex_destroy(&f->mu);
    free(f);
}

int forwarder_poll(struct forwarder *f, struct forward_event *ev)
{
    pthread_mutex_lock(&f->mu);
    int got = f->count > 0;
    if (got) {
        *ev = f->ev[f->head];
        f->head = (f->head + 1) % EVENTS;
        f->count--;
    }
    pthread_mutex_unlock(&f->mu);
    return got;
}
