/* log_bench: figures of the inspection log, printed, never judged.
 *
 *   log_bench DIR [N] [M]
 *
 * Records per second with reject evidence (a lossless frame and an overlay,
 * both PNG at the log's zlib level, fsynced and renamed, then the record
 * committed with synchronous=FULL) at 640x480 and 1280x960, N records each
 * (default 100) in DIR; then M records (default 100000) without evidence
 * are appended through the same API into a log on /dev/shm when it exists
 * (their fsyncs would only time the disk), and log_verify walks them: the
 * time of `station audit verify` on M records.  Frames are simulated bench
 * parts; the overlay is the next part of the series, which compresses like
 * an overlay. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "core/judge.h"
#include "core/log.h"
#include "core/logverify.h"
#include "station/simbench.h"

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + ts.tv_nsec / 1e9;
}

static int die(const struct err *e)
{
    fprintf(stderr, "log_bench: %s\n", e->msg);
    return 1;
}

static const struct log_entry base = {
    .station = "bench-1", .operator_id = "op-1", .serial = "SN-1", .recipe_id = "ostrel-cap38",
    .recipe_version = 1, .recipe_sha256 = "00", .model_sha256 = "00", .scale_id = "recipe",
    .verdict = VERDICT_FAIL,
    .reasons_json = "[{\"rule\":\"max_area\",\"class\":\"scratch\",\"measured\":0.81,"
                    "\"limit\":0.6,\"unit\":\"mm2\"}]",
    .regions_json = "[{\"class\":\"scratch\",\"pixels\":42,\"area_mm2\":0.81}]"};

static int bench_size(const char *dir, int w, int h, int n, struct err *e)
{
    struct simbench_conditions c;
    simbench_conditions_nominal(&c);
    struct image *f = NULL, *o = NULL, *t1 = NULL, *t2 = NULL;
    if (simbench_render(7, 0, &c, w, h, &f, &t1, NULL, e) ||
        simbench_render(7, 1, &c, w, h, &o, &t2, NULL, e))
        return e->code;
    char path[512];
    snprintf(path, sizeof path, "%s/log-%dx%d.db", dir, w, h);
    struct log_db *db = NULL;
    int rc = log_open(path, LOG_OPEN_WRITE, NULL, &db, e);
    struct log_entry en = base;
    en.frame = f;
    en.overlay = o;
    double t0 = now_s();
    int64_t seq = 0;
    for (int i = 0; !rc && i < n; i++)
        rc = log_append(db, &en, &seq, e);
    double dt = now_s() - t0;
    if (!rc) {
        struct log_record r;
        log_record_init(&r);
        rc = log_get(db, seq, &r, e);
        double mb = rc ? 0 : (double)(r.ev[0].bytes + r.ev[1].bytes) / 1e6;
        log_record_clear(&r);
        printf("{\"bench\":\"log_append\",\"size\":\"%dx%d\",\"records\":%d,\"seconds\":%.3f,"
               "\"records_per_s\":%.1f,\"evidence_mb_per_record\":%.3f}\n",
               w, h, n, dt, n / dt, mb);
        fprintf(stderr, "log: %dx%d reject with frame + overlay evidence: %.1f records/s"
                        " (%.1f ms each, %.2f MB of PNG per record, on %s)\n",
                w, h, n / dt, 1e3 * dt / n, mb, dir);
    }
    log_close(db);
    image_free(f);
    image_free(o);
    image_free(t1);
    image_free(t2);
    return rc;
}

static int bench_verify(const char *dir, int m, struct err *e)
{
    char path[512];
    const char *where = access("/dev/shm", W_OK) == 0 ? "/dev/shm" : dir;
    snprintf(path, sizeof path, "%s/station-log-bench-%d.db", where, (int)getpid());
    struct log_db *db = NULL;
    int rc = log_open(path, LOG_OPEN_WRITE, NULL, &db, e);
    struct log_entry en = base;
    int64_t seq;
    double t0 = now_s();
    for (int i = 0; !rc && i < m; i++) {
        en.verdict = i % 10 ? VERDICT_PASS : VERDICT_FAIL;
        rc = log_append(db, &en, &seq, e);
    }
    double tw = now_s() - t0;
    log_close(db);
    db = NULL;
    struct log_verify_result v;
    if (!rc)
        rc = log_open(path, LOG_OPEN_READ, NULL, &db, e);
    t0 = now_s();
    if (!rc)
        rc = log_verify(db, &v, e);
    double tv = now_s() - t0;
    if (!rc) {
        printf("{\"bench\":\"log_verify\",\"records\":%" PRId64 ",\"ok\":%s,\"seconds\":%.3f,"
               "\"append_seconds\":%.3f}\n",
               v.records, v.ok ? "true" : "false", tv, tw);
        fprintf(stderr, "log: audit verify of %" PRId64 " records (chain, no evidence files): "
                        "%.2f s; appending them one transaction each took %.1f s (on %s)\n",
                v.records, tv, tw, where);
    }
    log_close(db);
    char side[600];
    unlink(path);
    snprintf(side, sizeof side, "%s-wal", path);
    unlink(side);
    snprintf(side, sizeof side, "%s-shm", path);
    unlink(side);
    return rc;
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: log_bench DIR [N] [M]\n");
        return 4;
    }
    const char *dir = argv[1];
    int n = argc > 2 ? atoi(argv[2]) : 100, m = argc > 3 ? atoi(argv[3]) : 100000;
    mkdir(dir, 0777);
    struct err e;
    err_clear(&e);
    if (bench_size(dir, 640, 480, n, &e) || bench_size(dir, 1280, 960, n, &e) ||
        bench_verify(dir, m, &e))
        return die(&e);
    return 0;
}
