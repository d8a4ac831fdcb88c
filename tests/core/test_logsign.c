/* core/logsign and the signatures of core/log and core/logverify: every
 * link's signature checked with libsodium's own crypto_sign_verify_detached
 * (the outside reference, its documented API) over the link's stored hash;
 * the key file's layout as libsodium documents it (the secret key ends with
 * the public key); RFC 8032 section 7.1 test 1 for logsign_verify itself; a
 * log rewritten wholesale (hashes recomputed, re-signed with another key)
 * detected against the right public key at its first record; a wrong
 * public key; a key file others may read refused; the upgrade from schema 3
 * with old links reported unsigned; a moved signing start.  Files live in a
 * fresh mkdtemp folder removed at the end. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <fcntl.h>
#include <sodium.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "core/judge.h"
#include "core/log.h"
#include "core/logcanon.h"
#include "core/logsign.h"
#include "core/logverify.h"
#include "tests/testkit.h"

static int setup(void **state)
{
    (void)state;
    return testkit_scratch_setup("test_logsign") ? -1 : (sodium_init() >= 0 ? 0 : -1);
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}


static struct log_db *open_w(const char *path)
{
    struct log_db *db = NULL;
    struct err e;
    err_clear(&e);
    if (log_open(path, LOG_OPEN_WRITE, NULL, &db, &e))
        fail_msg("%s", e.msg);
    return db;
}

static int64_t append(struct log_db *db, int verdict)
{
    struct log_entry en = {.station = "bench-7", .recipe_id = "ostrel-cap38",
                           .recipe_version = 2, .verdict = verdict,
                           .reasons_json = "[]", .regions_json = "[]"};
    int64_t seq = 0;
    struct err e;
    err_clear(&e);
    if (log_append(db, &en, &seq, &e))
        fail_msg("%s", e.msg);
    return seq;
}

static int sql(const char *path, const char *q)
{
    sqlite3 *h = NULL;
    sqlite3_open(path, &h);
    int rc = sqlite3_exec(h, q, NULL, NULL, NULL);
    sqlite3_close(h);
    return rc;
}

static void verify(const char *path, const char *pk, struct log_verify_result *v)
{
    struct log_db *db = NULL;
    struct err e;
    assert_int_equal(log_open(path, LOG_OPEN_READ, NULL, &db, &e), ST_OK);
    assert_int_equal(log_verify_key(db, pk, v, &e), ST_OK);
    log_close(db);
}

static void hex2bin(const char *hex, unsigned char *bin, size_t len)
{
    assert_int_equal(sodium_hex2bin(bin, len, hex, strlen(hex), NULL, NULL, NULL), 0);
}

/* RFC 8032 section 7.1, TEST 1: the empty message. */
static void test_rfc8032_vector(void **state)
{
    (void)state;
    const char *pk = "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a";
    const char *sig = "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e06522490155"
                      "5fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b";
    assert_int_equal(logsign_verify(pk, "", sig), ST_OK);
    char bad[LOGSIGN_SIG_HEX];
    snprintf(bad, sizeof bad, "%s", sig);
    bad[10] = bad[10] == '0' ? '1' : '0';
    assert_int_equal(logsign_verify(pk, "", bad), ST_EFORMAT);
    assert_int_equal(logsign_verify(pk, "x", sig), ST_EFORMAT);
    assert_int_equal(logsign_verify("zz", "", sig), ST_EFORMAT);
}

/* Every record and disposition verifies with libsodium directly, and the key
 * file is libsodium's secret key whose last 32 bytes are the stored public
 * key (libsodium documentation, "Public-key signatures"). */
static void test_round_trip(void **state)
{
    (void)state;
    const char *p = testkit_path("round.db");
    struct log_db *db = open_w(p);
    for (int i = 0; i < 3; i++)
        append(db, i == 1 ? VERDICT_FAIL : VERDICT_PASS);
    int64_t dseq;
    struct err e;
    assert_int_equal(log_dispose(db, 2, "aud-1", LOG_DISP_CONFIRMED, "ok", &dseq, &e), ST_OK);
    struct log_signing sg;
    assert_int_equal(log_signing_get(db, &sg, &e), ST_OK);
    assert_true(sg.present);
    assert_int_equal(sg.from[0], 1);
    unsigned char pk[crypto_sign_PUBLICKEYBYTES], sk[crypto_sign_SECRETKEYBYTES + 1];
    hex2bin(sg.public_key, pk, sizeof pk);
    char kp[160];
    snprintf(kp, sizeof kp, "%s.key", p);
    struct stat st;
    assert_int_equal(stat(kp, &st), 0);
    assert_int_equal(st.st_mode & 0777, 0600);
    FILE *f = fopen(kp, "rb");
    assert_non_null(f);
    assert_int_equal(fread(sk, 1, sizeof sk, f), crypto_sign_SECRETKEYBYTES);
    fclose(f);
    assert_memory_equal(sk + 32, pk, 32);
    for (int64_t seq = 1; seq <= 3; seq++) {
        struct log_record r;
        log_record_init(&r);
        assert_int_equal(log_get(db, seq, &r, &e), ST_OK);
        unsigned char sig[crypto_sign_BYTES];
        hex2bin(r.sig, sig, sizeof sig);
        assert_int_equal(crypto_sign_verify_detached(sig, (const unsigned char *)r.hash, 64, pk),
                         0);
        if (seq == 2) {
            hex2bin(r.disp.sig, sig, sizeof sig);
            assert_int_equal(
                crypto_sign_verify_detached(sig, (const unsigned char *)r.disp.hash, 64, pk), 0);
        }
        log_record_clear(&r);
    }
    log_close(db);
    struct log_verify_result v;
    verify(p, NULL, &v);
    assert_true(v.ok);
    assert_int_equal(v.signed_links, 4);
    assert_int_equal(v.unsigned_links, 0);
    assert_string_equal(v.public_key, sg.public_key);
    verify(p, sg.public_key, &v);
    assert_true(v.ok);
    assert_true(v.key_given);
    /* a wrong key fails at the first record */
    unsigned char opk[crypto_sign_PUBLICKEYBYTES], osk[crypto_sign_SECRETKEYBYTES];
    crypto_sign_keypair(opk, osk);
    char other[LOGSIGN_PK_HEX];
    sodium_bin2hex(other, sizeof other, opk, sizeof opk);
    verify(p, other, &v);
    assert_false(v.ok);
    assert_string_equal(v.chain, "record");
    assert_int_equal(v.seq, 1);
    assert_non_null(strstr(v.what, "signature does not verify"));
}

/* Someone without the private key rewrites record 2 from FAIL to PASS and
 * recomputes every hash after it, signs with a key of their own and puts
 * its public key in the log: the log agrees with itself, but not with the
 * station's public key, and the first record is named. */
static void test_wholesale_rewrite(void **state)
{
    (void)state;
    const char *p = testkit_path("rewrite.db");
    struct log_db *db = open_w(p);
    for (int i = 0; i < 4; i++)
        append(db, i == 1 ? VERDICT_FAIL : VERDICT_PASS);
    struct log_signing sg;
    struct err e;
    assert_int_equal(log_signing_get(db, &sg, &e), ST_OK);
    log_close(db);
    const char *q = testkit_path("rewrite-copy.db");
    char cmd[400];
    snprintf(cmd, sizeof cmd, "cp '%s' '%s'", p, q);
    assert_int_equal(system(cmd), 0);

    struct logsign_key forger;
    unsigned char fpk[crypto_sign_PUBLICKEYBYTES];
    crypto_sign_keypair(fpk, forger.sk);
    char fpk_hex[LOGSIGN_PK_HEX], statement[LOGSIGN_STATEMENT_MAX], ssig[LOGSIGN_SIG_HEX];
    logsign_public_hex(&forger, fpk_hex);
    assert_int_equal(sql(q, "DROP TRIGGER records_no_update; DROP TRIGGER meta_no_update"),
                     SQLITE_OK);
    /* first: only the hashes recomputed, the old signatures kept */
    struct log_record r[4];
    assert_int_equal(log_open(q, LOG_OPEN_READ, NULL, &db, &e), ST_OK);
    for (int i = 0; i < 4; i++) {
        log_record_init(&r[i]);
        assert_int_equal(log_get(db, i + 1, &r[i], &e), ST_OK);
    }
    log_close(db);
    r[1].verdict = VERDICT_PASS;
    for (int i = 1; i < 4; i++) {
        memcpy(r[i].prev_hash, r[i - 1].hash, sizeof r[i].prev_hash);
        assert_int_equal(logcanon_record_hash(&r[i], r[i].hash, &e), ST_OK);
        char q2[600];
        snprintf(q2, sizeof q2,
                 "UPDATE records SET verdict = '%s', prev_hash = '%s', hash = '%s' WHERE seq = %d",
                 judge_verdict_name(r[i].verdict), r[i].prev_hash, r[i].hash, i + 1);
        assert_int_equal(sql(q, q2), SQLITE_OK);
    }
    struct log_verify_result v;
    verify(q, NULL, &v);
    assert_false(v.ok);
    assert_string_equal(v.chain, "record");
    assert_int_equal(v.seq, 2);
    /* then: every link re-signed with the forger's key, its key stored */
    for (int i = 0; i < 4; i++) {
        logsign_sign(&forger, r[i].hash, r[i].sig);
        char q2[300];
        snprintf(q2, sizeof q2, "UPDATE records SET sig = '%s' WHERE seq = %d", r[i].sig, i + 1);
        assert_int_equal(sql(q, q2), SQLITE_OK);
        log_record_clear(&r[i]);
    }
    logsign_statement(fpk_hex, sg.from, statement);
    logsign_sign(&forger, statement, ssig);
    char q3[600];
    snprintf(q3, sizeof q3,
             "UPDATE meta SET value = '%s' WHERE key = 'public_key';"
             "UPDATE meta SET value = '%s' WHERE key = 'signing_sig'",
             fpk_hex, ssig);
    assert_int_equal(sql(q, q3), SQLITE_OK);
    verify(q, NULL, &v);
    assert_true(v.ok);   /* consistent with itself: why the public key must come from elsewhere */
    verify(q, sg.public_key, &v);
    assert_false(v.ok);
    assert_string_equal(v.chain, "record");
    assert_int_equal(v.seq, 1);
    char prefix[17];
    snprintf(prefix, sizeof prefix, "%.16s", sg.public_key);
    assert_non_null(strstr(v.what, prefix));
    verify(p, sg.public_key, &v);
    assert_true(v.ok);
}

static void test_key_file_mode(void **state)
{
    (void)state;
    const char *p = testkit_path("mode.db");
    struct log_db *db = open_w(p);
    append(db, VERDICT_PASS);
    log_close(db);
    char kp[160];
    snprintf(kp, sizeof kp, "%s.key", p);
    assert_int_equal(chmod(kp, 0644), 0);
    struct err e;
    err_clear(&e);
    assert_int_equal(log_open(p, LOG_OPEN_WRITE, NULL, &db, &e), ST_EIO);
    assert_null(db);
    assert_non_null(strstr(e.msg, "mode 0644"));
    assert_non_null(strstr(e.msg, kp));
    /* a missing key of a log that has one is refused, never replaced */
    assert_int_equal(chmod(kp, 0600), 0);
    char moved[170];
    snprintf(moved, sizeof moved, "%s.away", kp);
    assert_int_equal(rename(kp, moved), 0);
    assert_int_equal(log_open(p, LOG_OPEN_WRITE, NULL, &db, &e), ST_EIO);
    assert_non_null(strstr(e.msg, "signing key missing"));
    assert_int_equal(access(kp, F_OK), -1);
    /* another log's key is refused */
    const char *p2 = testkit_path("mode2.db");
    db = open_w(p2);
    log_close(db);
    char kp2[160];
    snprintf(kp2, sizeof kp2, "%s.key", p2);
    assert_int_equal(rename(kp2, kp), 0);
    assert_int_equal(log_open(p, LOG_OPEN_WRITE, NULL, &db, &e), ST_EINVAL);
    assert_non_null(strstr(e.msg, "is not the log's"));
    assert_int_equal(rename(moved, kp), 0);
    db = open_w(p);
    log_close(db);
}

/* A schema 3 log: its records stay unsigned, later ones are signed, and the
 * start cannot be moved without the key. */
static void test_upgrade_from_3(void **state)
{
    (void)state;
    const char *p = testkit_path("old.db");
    struct log_db *db = open_w(p);
    append(db, VERDICT_PASS);
    append(db, VERDICT_FAIL);
    log_close(db);
    char kp[160];
    snprintf(kp, sizeof kp, "%s.key", p);
    unlink(kp);
    assert_int_equal(sql(p, "DROP TABLE meta; ALTER TABLE records DROP COLUMN sig;"
                            "ALTER TABLE dispositions DROP COLUMN sig;"
                            "ALTER TABLE verifications DROP COLUMN sig;"
                            "PRAGMA user_version = 3"),
                     SQLITE_OK);
    db = open_w(p);
    append(db, VERDICT_PASS);
    struct log_signing sg;
    struct err e;
    assert_int_equal(log_signing_get(db, &sg, &e), ST_OK);
    assert_int_equal(sg.from[0], 3);
    assert_int_equal(sg.from[1], 1);
    log_close(db);
    struct log_verify_result v;
    verify(p, sg.public_key, &v);
    assert_true(v.ok);
    assert_int_equal(v.unsigned_links, 2);
    assert_int_equal(v.signed_links, 1);
    assert_int_equal(sql(p, "DROP TRIGGER meta_no_update;"
                            "UPDATE meta SET value = '9' WHERE key = 'signed_from_record'"),
                     SQLITE_OK);
    verify(p, sg.public_key, &v);
    assert_false(v.ok);
    assert_string_equal(v.chain, "signature");
    assert_non_null(strstr(v.what, "records from 9"));
}

static void test_public_parse(void **state)
{
    (void)state;
    char hex[LOGSIGN_PK_HEX];
    struct err e;
    const char *k = "D75A980182B10AB7D54BFED3C964073A0EE172F3DAA62325AF021A68F707511A";
    assert_int_equal(logsign_public_parse(k, hex, &e), ST_OK);
    assert_string_equal(hex, "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a");
    const char *f = testkit_path("pub.txt");
    FILE *fp = fopen(f, "w");
    fprintf(fp, "  %s\n", k);
    fclose(fp);
    assert_int_equal(logsign_public_parse(f, hex, &e), ST_OK);
    assert_int_equal(logsign_public_parse("d75a98", hex, &e), ST_EIO);
    assert_non_null(strstr(e.msg, "not 64 hex"));
    fp = fopen(f, "w");
    fprintf(fp, "%.60s\n", k);
    fclose(fp);
    assert_int_equal(logsign_public_parse(f, hex, &e), ST_EFORMAT);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rfc8032_vector),  cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_wholesale_rewrite), cmocka_unit_test(test_key_file_mode),
        cmocka_unit_test(test_upgrade_from_3),  cmocka_unit_test(test_public_parse),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
