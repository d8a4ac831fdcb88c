/* core/log, core/logcanon, core/logverify, core/evidence: the SHA-256 the
 * chain uses against FIPS 180-4's examples, records and evidence round trips,
 * filters, append-only triggers, schema versions, failing writes through the
 * I/O table, the evidence budget and tampering.  Files live in a fresh
 * mkdtemp folder removed at the end. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "core/judge.h"
#include "core/log.h"
#include "core/logcanon.h"
#include "core/logverify.h"
#include "core/pngio.h"
#include "tests/testkit.h"

static int setup(void **state)
{
    (void)state;
    return testkit_scratch_setup("test_log");
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}


/* FIPS 180-4 (and its predecessor 180-2), appendix examples: SHA-256 of
 * "abc" (one block) and of the 56-byte two-block message. */
static void test_sha256_fips(void **state)
{
    (void)state;
    char hex[SHA256_HEX_LEN];
    sha256_hex_buffer("abc", 3, hex);
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    const char *two = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    sha256_hex_buffer(two, strlen(two), hex);
    assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
}

/* A small asymmetric RGB frame; value v shifts every pixel. */
static struct image *frame(int w, int h, int v)
{
    struct err e;
    struct image *img = image_new(w, h, 3, &e);
    assert_non_null(img);
    for (size_t i = 0; i < (size_t)w * h * 3; i++)
        img->px[i] = (uint8_t)(i * 7 + (size_t)v * 31 + i / 5);
    return img;
}

static struct log_entry entry(int verdict, const char *reasons)
{
    struct log_entry en = {.station = "bench-7", .operator_id = "op-3", .serial = "SN-0001",
                           .recipe_id = "ostrel-cap38", .recipe_version = 2,
                           .recipe_sha256 = "ab", .model_sha256 = "cd", .scale_id = "recipe:0.17",
                           .verdict = verdict, .reasons_json = reasons, .regions_json = "[]"};
    return en;
}

static struct log_db *open_w(const char *path, uint64_t budget, const struct log_io *io)
{
    struct log_options o;
    log_options_init(&o);
    o.evidence_budget = budget;
    o.io = io;
    struct log_db *db = NULL;
    struct err e;
    err_clear(&e);
    int rc = log_open(path, LOG_OPEN_WRITE, &o, &db, &e);
    if (rc)
        fail_msg("%s", e.msg);
    return db;
}

static int64_t append(struct log_db *db, struct log_entry en)
{
    int64_t seq = 0;
    struct err e;
    err_clear(&e);
    if (log_append(db, &en, &seq, &e))
        fail_msg("%s", e.msg);
    return seq;
}

static int count(struct log_db *db, const struct log_filter *f)
{
    struct log_iter *it = NULL;
    struct err e;
    assert_int_equal(log_iter_new(db, f, &it, &e), ST_OK);
    struct log_record r;
    log_record_init(&r);
    int n = 0, have;
    while (log_iter_next(it, &r, &have, &e) == ST_OK && have)
        n++;
    log_record_clear(&r);
    log_iter_free(it);
    return n;
}

static void test_round_trip_and_filters(void **state)
{
    (void)state;
    const char *p = testkit_path("rt.db");
    struct log_db *db = open_w(p, 0, NULL);
    struct image *f = frame(13, 9, 1), *o = frame(13, 9, 2);
    int64_t s1 = append(db, entry(VERDICT_PASS, "[]"));
    struct log_entry en = entry(VERDICT_FAIL, "[{\"rule\":\"max_area\",\"class\":\"scratch\","
                                              "\"zone\":\"rim\"}]");
    en.frame = f;
    en.overlay = o;
    en.serial = "line\nbreak\\";
    int64_t s2 = append(db, en);
    int64_t s3 = append(db, entry(VERDICT_NONE, "[{\"rule\":\"too_dark\",\"class\":\"image\"}]"));
    assert_int_equal(s1, 1);
    assert_int_equal(s2, 2);
    assert_int_equal(s3, 3);

    struct log_record r;
    log_record_init(&r);
    struct err e;
    assert_int_equal(log_get(db, 2, &r, &e), ST_OK);
    assert_string_equal(r.station, "bench-7");
    assert_string_equal(r.serial, "line\nbreak\\");
    assert_int_equal(r.verdict, VERDICT_FAIL);
    assert_int_equal(r.recipe_version, 2);
    assert_int_equal(r.nevidence, 2);
    assert_string_equal(r.ev[0].kind, "frame");
    assert_string_equal(r.ev[1].kind, "overlay");
    assert_int_equal(r.utc[10], 'T');
    /* the frame evidence is lossless: the same pixels come back */
    char path[PATH_MAX];
    assert_int_equal(log_evidence_path(db, r.ev[0].name, path, sizeof path, &e), ST_OK);
    struct image *back = NULL;
    assert_int_equal(pngio_load_rgb(path, &back, &e), ST_OK);
    assert_memory_equal(back->px, f->px, 13 * 9 * 3);
    image_free(back);
    /* the documented canonical form: one line per field, values escaped */
    char *canon = logcanon_record(&r);
    assert_non_null(strstr(canon, "\nserial=line\\nbreak\\\\\n"));
    assert_non_null(strstr(canon, "\nprev="));
    char hex[SHA256_HEX_LEN];
    sha256_hex_buffer(canon, strlen(canon), hex);
    assert_string_equal(hex, r.hash);
    free(canon);
    log_record_clear(&r);
    assert_int_equal(log_get(db, 9, &r, &e), ST_ERANGE);

    struct log_filter flt;
    log_filter_init(&flt);
    assert_int_equal(count(db, &flt), 3);
    flt.rejects = 1;
    assert_int_equal(count(db, &flt), 2);
    log_filter_init(&flt);
    flt.cls = "scratch";
    assert_int_equal(count(db, &flt), 1);
    log_filter_init(&flt);
    flt.zone = "rim";
    assert_int_equal(count(db, &flt), 1);
    log_filter_init(&flt);
    flt.verdict = VERDICT_NONE;
    assert_int_equal(count(db, &flt), 1);
    log_filter_init(&flt);
    flt.station = "bench-8";
    assert_int_equal(count(db, &flt), 0);
    log_filter_init(&flt);
    flt.from_utc = "2000-01-01";
    flt.to_utc = "2000-01-02";
    assert_int_equal(count(db, &flt), 0);

    int64_t dseq;
    assert_int_equal(log_dispose(db, 2, "auditor-1", LOG_DISP_FALSE_REJECT, "fine", &dseq, &e),
                     ST_OK);
    assert_int_equal(log_dispose(db, 2, "", LOG_DISP_OTHER, NULL, &dseq, &e), ST_EINVAL);
    assert_int_equal(log_dispose(db, 44, "a", LOG_DISP_OTHER, NULL, &dseq, &e), ST_ERANGE);
    log_filter_init(&flt);
    flt.disp = LOG_DISP_FALSE_REJECT;
    assert_int_equal(count(db, &flt), 1);
    flt.disp = LOG_DISP_NONE;
    assert_int_equal(count(db, &flt), 2);
    assert_int_equal(log_get(db, 2, &r, &e), ST_OK);
    assert_true(r.has_disposition);
    assert_string_equal(r.disp.auditor, "auditor-1");
    log_record_clear(&r);

    struct log_verify_result v;
    assert_int_equal(log_verify(db, &v, &e), ST_OK);
    assert_true(v.ok);
    assert_int_equal(v.records, 3);
    assert_int_equal(v.dispositions, 1);
    assert_int_equal(v.evidence_files, 2);
    log_close(db);
    image_free(f);
    image_free(o);
}

static int sql(const char *path, const char *stmt, char *msg, size_t len)
{
    sqlite3 *h;
    assert_int_equal(sqlite3_open(path, &h), SQLITE_OK);
    char *m = NULL;
    int rc = sqlite3_exec(h, stmt, NULL, NULL, &m);
    if (msg)
        snprintf(msg, len, "%s", m ? m : "");
    sqlite3_free(m);
    sqlite3_close(h);
    return rc;
}

/* SQLite's own RAISE(ABORT) is what refuses: the statement fails with our message. */
static void test_append_only(void **state)
{
    (void)state;
    const char *p = testkit_path("ao.db");
    struct log_db *db = open_w(p, 0, NULL);
    struct image *f = frame(5, 4, 1);
    struct log_entry en = entry(VERDICT_FAIL, "[]");
    en.frame = f;
    append(db, en);
    image_free(f);
    int64_t dseq;
    struct err e;
    assert_int_equal(log_dispose(db, 1, "a", LOG_DISP_CONFIRMED, "", &dseq, &e), ST_OK);
    log_close(db);
    char msg[256];
    assert_int_equal(sql(p, "UPDATE records SET verdict = 'PASS'", msg, sizeof msg),
                     SQLITE_CONSTRAINT);
    assert_string_equal(msg, "records are append-only");
    assert_int_equal(sql(p, "DELETE FROM records", msg, sizeof msg), SQLITE_CONSTRAINT);
    assert_int_equal(sql(p, "UPDATE dispositions SET comment = 'x'", msg, sizeof msg),
                     SQLITE_CONSTRAINT);
    assert_string_equal(msg, "dispositions are append-only");
    assert_int_equal(sql(p, "DELETE FROM dispositions", msg, sizeof msg), SQLITE_CONSTRAINT);
    assert_int_equal(sql(p, "DELETE FROM evidence", msg, sizeof msg), SQLITE_CONSTRAINT);
    assert_string_equal(msg, "evidence rows are append-only");
}

static void test_schema_versions(void **state)
{
    (void)state;
    const char *p = testkit_path("schema.db");
    struct log_db *db = open_w(p, 0, NULL);
    append(db, entry(VERDICT_PASS, "[]"));
    log_close(db);
    struct err e;
    /* a future schema is refused, for reading and writing */
    assert_int_equal(sql(p, "PRAGMA user_version = 99", NULL, 0), SQLITE_OK);
    assert_int_equal(log_open(p, LOG_OPEN_READ, NULL, &db, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "log schema 99 is newer than this program's 4"));
    assert_int_equal(log_open(p, LOG_OPEN_WRITE, NULL, &db, &e), ST_EFORMAT);
    assert_null(db);
    /* schema 1 (before the retention table): reading asks for an upgrade,
     * writing upgrades step by step and keeps the records */
    assert_int_equal(sql(p, "DROP TRIGGER purged_no_update; DROP TRIGGER purged_no_delete;"
                            "DROP TABLE evidence_purged; DROP TABLE verifications;"
                            "DROP TABLE meta; ALTER TABLE records DROP COLUMN sig;"
                            "ALTER TABLE dispositions DROP COLUMN sig;"
                            "PRAGMA user_version = 1",
                         NULL, 0),
                     SQLITE_OK);
    assert_int_equal(log_open(p, LOG_OPEN_READ, NULL, &db, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "older"));
    db = open_w(p, 0, NULL);
    assert_int_equal(append(db, entry(VERDICT_FAIL, "[]")), 2);
    struct log_verify_result v;
    assert_int_equal(log_verify(db, &v, &e), ST_OK);
    assert_true(v.ok);
    log_close(db);
    assert_int_equal(sql(p, "SELECT count(*) FROM evidence_purged", NULL, 0), SQLITE_OK);
    assert_int_equal(sql(p, "SELECT count(*) FROM verifications", NULL, 0), SQLITE_OK);
    /* not a station log */
    const char *q = testkit_path("other.db");
    assert_int_equal(sql(q, "CREATE TABLE t(x)", NULL, 0), SQLITE_OK);
    assert_int_equal(log_open(q, LOG_OPEN_WRITE, NULL, &db, &e), ST_EFORMAT);
    assert_non_null(strstr(e.msg, "not a station log"));
}

/* The fault shim: the n-th fsync (or any rename) fails with EIO. */
static int fsync_calls, fsync_fail_at, rename_fails;
static int bad_fsync(int fd)
{
    if (++fsync_calls == fsync_fail_at) {
        errno = EIO;
        return -1;
    }
    return fsync(fd);
}
static int bad_rename(const char *a, const char *b)
{
    if (rename_fails) {
        errno = EIO;
        return -1;
    }
    return rename(a, b);
}

static void test_failing_writes(void **state)
{
    (void)state;
    const char *p = testkit_path("fault.db");
    struct log_io io = *log_io_default();
    io.fsync = bad_fsync;
    io.rename = bad_rename;
    struct image *f = frame(11, 7, 3);
    struct log_entry en = entry(VERDICT_FAIL, "[]");
    en.frame = f;
    en.overlay = f;
    struct log_db *db = open_w(p, 0, &io);
    append(db, en);
    struct err e;
    int64_t seq = -5;
    for (int at = 1; at <= 4; at++) {
        fsync_calls = 0;
        fsync_fail_at = at;   /* file, folder, second file, folder */
        err_clear(&e);
        assert_int_equal(log_append(db, &en, &seq, &e), ST_EIO);
        assert_int_equal(seq, -5);
        assert_non_null(strstr(e.msg, "cannot sync"));
    }
    fsync_fail_at = 0;
    rename_fails = 1;
    assert_int_equal(log_append(db, &en, &seq, &e), ST_EIO);
    assert_non_null(strstr(e.msg, "cannot rename"));
    rename_fails = 0;
    /* nothing half-done stays: the next record takes the next number */
    assert_int_equal(append(db, en), 2);
    struct log_filter flt;
    log_filter_init(&flt);
    assert_int_equal(count(db, &flt), 2);
    struct log_verify_result v;
    assert_int_equal(log_verify(db, &v, &e), ST_OK);
    assert_true(v.ok);
    log_close(db);
    image_free(f);
}

static void test_evidence_budget(void **state)
{
    (void)state;
    const char *p = testkit_path("budget.db");
    struct image *f = frame(16, 12, 5);
    struct log_entry pass = entry(VERDICT_PASS, "[]"), fail = entry(VERDICT_FAIL, "[]");
    pass.frame = fail.frame = f;
    struct log_db *db = open_w(p, 0, NULL);
    append(db, pass);
    append(db, pass);
    append(db, fail);
    struct log_record r;
    log_record_init(&r);
    struct err e;
    assert_int_equal(log_get(db, 1, &r, &e), ST_OK);
    uint64_t one = (uint64_t)r.ev[0].bytes;   /* same frame: every file has this size */
    log_record_clear(&r);
    log_close(db);

    /* room for three: the fourth goes in after the oldest PASS evidence goes */
    db = open_w(p, 3 * one, NULL);
    append(db, fail);
    assert_int_equal(log_get(db, 1, &r, &e), ST_OK);
    assert_true(r.ev[0].purged);
    log_record_clear(&r);
    assert_int_equal(log_get(db, 2, &r, &e), ST_OK);
    assert_false(r.ev[0].purged);
    log_record_clear(&r);
    append(db, fail);   /* record 2's PASS evidence goes */
    /* only unaudited rejects are left: refused, and nothing is recorded */
    int64_t seq = 0;
    char path[PATH_MAX];
    assert_int_equal(log_append(db, &fail, &seq, &e), ST_ERANGE);
    assert_non_null(strstr(e.msg, "evidence budget full"));
    struct log_filter flt;
    log_filter_init(&flt);
    assert_int_equal(count(db, &flt), 5);
    /* once audited, a reject's evidence may go */
    int64_t dseq;
    assert_int_equal(log_dispose(db, 3, "a", LOG_DISP_CONFIRMED, "", &dseq, &e), ST_OK);
    assert_int_equal(append(db, fail), 6);
    assert_int_equal(log_get(db, 3, &r, &e), ST_OK);
    assert_true(r.ev[0].purged);
    assert_int_equal(log_evidence_path(db, r.ev[0].name, path, sizeof path, &e), ST_OK);
    assert_int_equal(access(path, F_OK), -1);
    log_record_clear(&r);
    struct log_verify_result v;
    assert_int_equal(log_verify(db, &v, &e), ST_OK);
    assert_true(v.ok);
    assert_int_equal(v.evidence_files, 3);
    log_close(db);
    image_free(f);
}

static void verify_expect(const char *p, const char *chain, int64_t seq, int torn)
{
    struct log_db *db = NULL;
    struct err e;
    assert_int_equal(log_open(p, LOG_OPEN_READ, NULL, &db, &e), ST_OK);
    struct log_verify_result v;
    assert_int_equal(log_verify(db, &v, &e), ST_OK);
    log_close(db);
    assert_false(v.ok);
    assert_string_equal(v.chain, chain);
    assert_int_equal(v.seq, seq);
    assert_int_equal(v.torn, torn);
}

/* An attacker with file access drops the triggers and edits a row. */
static void test_tamper(void **state)
{
    (void)state;
    const char *p = testkit_path("tamper.db");
    struct image *f = frame(9, 9, 7);
    struct log_entry fail = entry(VERDICT_FAIL, "[{\"rule\":\"max_area\",\"class\":\"pit\"}]");
    fail.frame = f;
    struct log_db *db = open_w(p, 0, NULL);
    for (int i = 0; i < 4; i++)
        append(db, fail);
    int64_t dseq;
    struct err e;
    assert_int_equal(log_dispose(db, 2, "a", LOG_DISP_CONFIRMED, "ok", &dseq, &e), ST_OK);
    assert_int_equal(log_dispose(db, 3, "a", LOG_DISP_REWORK, "ok", &dseq, &e), ST_OK);
    log_close(db);
    char cmd[256];
    snprintf(cmd, sizeof cmd, "cp '%s' '%s.orig'", p, p);
    assert_int_equal(system(cmd), 0);

    assert_int_equal(sql(p, "DROP TRIGGER records_no_update;"
                            "UPDATE records SET verdict = 'PASS' WHERE seq = 2",
                         NULL, 0),
                     SQLITE_OK);
    verify_expect(p, "record", 2, 0);
    snprintf(cmd, sizeof cmd, "cp '%s.orig' '%s'", p, p);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(sql(p, "DROP TRIGGER records_no_update;"
                            "UPDATE records SET serial = 'SN-0002' WHERE seq = 4",
                         NULL, 0),
                     SQLITE_OK);
    verify_expect(p, "record", 4, 1);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(sql(p, "DROP TRIGGER dispositions_no_update;"
                            "UPDATE dispositions SET comment = 'ok!' WHERE dseq = 1",
                         NULL, 0),
                     SQLITE_OK);
    verify_expect(p, "disposition", 1, 0);
    assert_int_equal(system(cmd), 0);
    /* a deleted record in the middle breaks the sequence */
    assert_int_equal(sql(p, "DROP TRIGGER records_no_delete; DROP TRIGGER evidence_no_delete;"
                            " DELETE FROM evidence WHERE"
                            " record_seq = 1; DELETE FROM records WHERE seq = 1",
                         NULL, 0),
                     SQLITE_OK);
    verify_expect(p, "record", 2, 0);
    assert_int_equal(system(cmd), 0);
    /* one byte of an evidence file */
    snprintf(cmd, sizeof cmd, "f=$(ls %s/evidence/*/00000003-frame.png) &&"
                              " printf 'X' | dd of=\"$f\" bs=1 seek=60 conv=notrunc 2>/dev/null",
             testkit_dir);
    assert_int_equal(system(cmd), 0);
    verify_expect(p, "evidence", 3, 0);
    image_free(f);
}

/* The verification chain: the latest per station, recipe and model; the
 * chain checked like the others (an edited outcome is caught). */
static void test_verifications(void **state)
{
    (void)state;
    const char *p = testkit_path("verify.db");
    struct log_db *db = open_w(p, 0, NULL);
    struct err e;
    struct log_verification v, got;
    int found = 1;
    assert_int_equal(log_verification_last(db, "st-1", "cap", 2, "m1", &got, &found, &e), ST_OK);
    assert_false(found);
    const int passed[3] = {1, 0, 1};
    const char *model[3] = {"m1", "m1", "m2"};
    for (int i = 0; i < 3; i++) {
        memset(&v, 0, sizeof v);
        snprintf(v.station, sizeof v.station, "st-1");
        snprintf(v.recipe_id, sizeof v.recipe_id, "cap");
        v.recipe_version = 2;
        snprintf(v.model_sha256, sizeof v.model_sha256, "%s", model[i]);
        v.passed = passed[i];
        v.masters_json = (char *)"[{\"master\":\"good\",\"match\":true}]";
        assert_int_equal(log_verification_append(db, &v, &e), ST_OK);
        assert_int_equal(v.vseq, i + 1);
    }
    assert_int_equal(log_verification_last(db, "st-1", "cap", 2, "m1", &got, &found, &e), ST_OK);
    assert_true(found);
    assert_int_equal(got.vseq, 2);   /* the failed one after the pass */
    assert_false(got.passed);
    assert_int_equal(log_verification_last(db, "st-1", "cap", 2, "m2", &got, &found, &e), ST_OK);
    assert_true(found && got.passed && got.vseq == 3);
    assert_int_equal(log_verification_last(db, "st-2", "cap", 2, "m2", &got, &found, &e), ST_OK);
    assert_false(found);
    struct log_verification *all = NULL;
    int n = 0;
    assert_int_equal(log_verifications_get(db, &all, &n, &e), ST_OK);
    assert_int_equal(n, 3);
    assert_string_equal(all[2].prev_hash, all[1].hash);
    assert_non_null(strstr(all[0].masters_json, "good"));
    log_verifications_free(all, n);
    struct log_verify_result r;
    assert_int_equal(log_verify(db, &r, &e), ST_OK);
    assert_true(r.ok);
    assert_int_equal(r.verifications, 3);
    log_close(db);
    char msg[128];
    assert_int_equal(sql(p, "UPDATE verifications SET outcome = 'passed' WHERE vseq = 2", msg,
                         sizeof msg),
                     SQLITE_CONSTRAINT);
    assert_non_null(strstr(msg, "append-only"));
    assert_int_equal(sql(p, "DROP TRIGGER verifications_no_update;"
                            "UPDATE verifications SET outcome = 'passed' WHERE vseq = 2",
                         NULL, 0),
                     SQLITE_OK);
    verify_expect(p, "verification", 2, 0);
}

/* Permission bits of what the log creates, whatever the umask (POSIX
 * open(2)/mkdir(2) apply the umask; the log sets the mode exactly with
 * fchmod/chmod): owner only by default, a group mode when asked, folders
 * searchable where readable.  SQLite gives the WAL the database's mode
 * (its unix VFS, findCreateFileMode). */
static void check_mode(const char *path, unsigned want)
{
    struct stat st;
    if (stat(path, &st) != 0)
        fail_msg("%s: %s", path, strerror(errno));
    if ((st.st_mode & 07777) != want)
        fail_msg("%s: mode %03o, want %03o", path, (unsigned)(st.st_mode & 07777), want);
}

static void modes_case(const char *name, mode_t mask, unsigned file_mode)
{
    mode_t old = umask(mask);
    char sub[160], p[200], ev[PATH_MAX], evroot[PATH_MAX];
    snprintf(sub, sizeof sub, "%s/%s", testkit_dir, name);
    assert_int_equal(mkdir(sub, 0755), 0);
    snprintf(p, sizeof p, "%s/log.db", sub);
    struct log_options o;
    log_options_init(&o);
    assert_int_equal(o.file_mode, 0600);
    if (file_mode)
        o.file_mode = file_mode;
    struct log_db *db = NULL;
    struct err e;
    err_clear(&e);
    if (log_open(p, LOG_OPEN_WRITE, &o, &db, &e))
        fail_msg("%s", e.msg);
    struct image *f = frame(5, 4, 3);
    struct log_entry en = entry(VERDICT_FAIL, "[]");
    en.frame = f;
    int64_t seq = append(db, en);
    struct log_record r;
    log_record_init(&r);
    assert_int_equal(log_get(db, seq, &r, &e), ST_OK);
    assert_int_equal(log_evidence_path(db, r.ev[0].name, ev, sizeof ev, &e), ST_OK);
    unsigned want = file_mode ? file_mode : 0600;
    unsigned want_dir = want | (want & 0444) >> 2;
    check_mode(p, want);
    snprintf(evroot, sizeof evroot, "%s-wal", p);
    check_mode(evroot, want);
    check_mode(ev, want);
    *strrchr(ev, '/') = '\0';
    check_mode(ev, want_dir);          /* evidence/DATE */
    snprintf(evroot, sizeof evroot, "%s/evidence", sub);
    check_mode(evroot, want_dir);
    log_record_clear(&r);
    log_close(db);
    image_free(f);
    umask(old);
}

static void test_file_modes(void **state)
{
    (void)state;
    modes_case("modes-open-umask", 0, 0);      /* the umask would allow 0666 */
    modes_case("modes-group", 077, 0640);      /* the umask would strip the group */
    assert_int_equal(log_folder_mode(0660), 0770);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_sha256_fips),
        cmocka_unit_test(test_round_trip_and_filters),
        cmocka_unit_test(test_append_only),
        cmocka_unit_test(test_schema_versions),
        cmocka_unit_test(test_failing_writes),
        cmocka_unit_test(test_evidence_budget),
        cmocka_unit_test(test_tamper),
        cmocka_unit_test(test_verifications),
        cmocka_unit_test(test_file_modes),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
