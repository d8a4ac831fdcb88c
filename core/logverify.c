#include "logverify.h"

#include <inttypes.h>
#include <limits.h>
#include <stdio.h>
#include <string.h>

#include "evidence.h"
#include "judge.h"
#include "logcanon.h"
#include "logsign.h"

/* Notes the first break only; later ones just count as links after it. */
static void brk(struct log_verify_result *res, const char *chain, int64_t seq, const char *what)
{
    if (!res->ok)
        return;
    res->ok = 0;
    snprintf(res->chain, sizeof res->chain, "%s", chain);
    res->seq = seq;
    snprintf(res->what, sizeof res->what, "%s", what);
}

static void check_link(struct log_verify_result *res, const char *chain, int64_t seq,
                       int64_t want_seq, const char *prev, const char *want_prev,
                       const char *hash, const char *want_hash)
{
    char what[400];
    if (seq != want_seq)
        snprintf(what, sizeof what, "%s %" PRId64 " follows %" PRId64 ": %s missing", chain, seq,
                 want_seq - 1, seq > want_seq ? "links are" : "order is");
    else if (strcmp(prev, want_prev) != 0)
        snprintf(what, sizeof what,
                 "%s %" PRId64 ": previous hash %.16s... does not match %s %" PRId64
                 "'s hash %.16s...",
                 chain, seq, prev, chain, seq - 1, want_prev);
    else if (strcmp(hash, want_hash) != 0)
        snprintf(what, sizeof what,
                 "%s %" PRId64 ": content does not match its hash (stored %.16s..., content"
                 " hashes to %.16s...): a field was changed after it was written",
                 chain, seq, hash, want_hash);
    else
        return;
    brk(res, chain, seq, what);
}

/* The signature of link seq of a chain (index 0 records, 1 dispositions, 2
 * verifications) when the log's signing start covers it. */
static void check_sig(struct log_verify_result *res, const struct log_signing *sg, int chain_ix,
                      const char *chain, int64_t seq, const char *hash, const char *sig)
{
    if (!res->ok)
        return;
    if (seq < sg->from[chain_ix]) {
        res->unsigned_links++;
        return;
    }
    char what[400];
    if (!res->public_key[0])
        snprintf(what, sizeof what,
                 "%s %" PRId64 ": the log holds no public key, yet its signing start is %s %" PRId64,
                 chain, seq, chain, sg->from[chain_ix]);
    else if (!sig[0])
        snprintf(what, sizeof what, "%s %" PRId64 ": no signature (signed links start at %" PRId64
                 ")", chain, seq, sg->from[chain_ix]);
    else if (logsign_verify(res->public_key, hash, sig) != ST_OK)
        snprintf(what, sizeof what,
                 "%s %" PRId64 ": signature does not verify with public key %.16s...: written"
                 " or rewritten without the station's private key",
                 chain, seq, res->public_key);
    else {
        res->signed_links++;
        return;
    }
    brk(res, chain, seq, what);
}

static int check_evidence(struct log_db *db, const struct log_record *r,
                          struct log_verify_result *res)
{
    char dir[PATH_MAX];
    const char *root = log_evidence_dir(db, r, dir, sizeof dir);
    for (int i = 0; i < r->nevidence; i++) {
        const struct log_evidence *v = &r->ev[i];
        char what[600];
        if (v->purged) {
            if (r->verdict != VERDICT_PASS && !r->has_disposition) {
                snprintf(what, sizeof what,
                         "record %" PRId64 ": evidence %s of a reject not yet audited was marked"
                         " deleted",
                         r->seq, v->name);
                brk(res, "evidence", r->seq, what);
                return 1;
            }
            continue;
        }
        if (!root) {
            res->evidence_unavailable++;
            continue;
        }
        struct err sub;
        err_clear(&sub);
        res->evidence_files++;
        if (evidence_check(root, v->name, v->sha256, v->bytes, &sub)) {
            snprintf(what, sizeof what, "record %" PRId64 ": %s", r->seq, sub.msg);
            brk(res, "evidence", r->seq, what);
            return 1;
        }
    }
    return 0;
}

static int walk_records(struct log_db *db, const struct log_signing *sg,
                        struct log_verify_result *res, struct err *e)
{
    struct log_iter *it = NULL;
    int rc = log_iter_new(db, NULL, &it, e);
    if (rc)
        return rc;
    struct log_record r;
    log_record_init(&r);
    char prev[SHA256_HEX_LEN] = LOGCANON_GENESIS, hash[SHA256_HEX_LEN];
    int64_t want = 1;
    int broken = 0, have;
    while (!(rc = log_iter_next(it, &r, &have, e)) && have) {
        res->records++;
        if (broken) {
            res->after++;
            continue;
        }
        rc = logcanon_record_hash(&r, hash, e);
        if (rc)
            break;
        check_link(res, "record", r.seq, want, r.prev_hash, prev, r.hash, hash);
        check_sig(res, sg, 0, "record", r.seq, r.hash, r.sig);
        broken = !res->ok || check_evidence(db, &r, res);
        snprintf(prev, sizeof prev, "%s", r.hash);
        want = r.seq + 1;
    }
    log_record_clear(&r);
    log_iter_free(it);
    return rc;
}

static int walk_dispositions(struct log_db *db, const struct log_signing *sg,
                             struct log_verify_result *res, struct err *e)
{
    struct log_disposition *d = NULL;
    int n = 0;
    int rc = log_dispositions_get(db, 0, &d, &n, e);
    if (rc)
        return rc;
    char prev[SHA256_HEX_LEN] = LOGCANON_GENESIS, hash[SHA256_HEX_LEN];
    int broken = !res->ok;
    char record_hash[SHA256_HEX_LEN];
    for (int i = 0; i < n && !rc; i++) {
        res->dispositions++;
        if (broken) {
            if (strcmp(res->chain, "disposition") == 0)
                res->after++;
            continue;
        }
        struct err sub;
        if (log_record_hash(db, d[i].record_seq, record_hash, &sub)) {
            char what[600];
            snprintf(what, sizeof what, "disposition %" PRId64 ": %s", d[i].dseq, sub.msg);
            brk(res, "disposition", d[i].dseq, what);
        } else {
            rc = logcanon_disposition_hash(&d[i], record_hash, hash, e);
            if (!rc)
                check_link(res, "disposition", d[i].dseq, i + 1, d[i].prev_hash, prev,
                           d[i].hash, hash);
            check_sig(res, sg, 1, "disposition", d[i].dseq, d[i].hash, d[i].sig);
        }
        broken = !res->ok;
        snprintf(prev, sizeof prev, "%s", d[i].hash);
    }
    log_dispositions_free(d, n);
    return rc;
}

static int walk_verifications(struct log_db *db, const struct log_signing *sg,
                              struct log_verify_result *res, struct err *e)
{
    struct log_verification *v = NULL;
    int n = 0;
    int rc = log_verifications_get(db, &v, &n, e);
    if (rc)
        return rc;
    char prev[SHA256_HEX_LEN] = LOGCANON_GENESIS, hash[SHA256_HEX_LEN];
    int broken = !res->ok;
    for (int i = 0; i < n && !rc; i++) {
        res->verifications++;
        if (broken) {
            if (strcmp(res->chain, "verification") == 0)
                res->after++;
            continue;
        }
        rc = logcanon_verification_hash(&v[i], hash, e);
        if (!rc)
            check_link(res, "verification", v[i].vseq, i + 1, v[i].prev_hash, prev, v[i].hash,
                       hash);
        check_sig(res, sg, 2, "verification", v[i].vseq, v[i].hash, v[i].sig);
        broken = !res->ok;
        snprintf(prev, sizeof prev, "%s", v[i].hash);
    }
    log_verifications_free(v, n);
    return rc;
}

/* The signed start statement: without it (or with a forged one) the start
 * could be moved to pass signed links off as old unsigned ones. */
static void check_statement(struct log_verify_result *res, const struct log_signing *sg)
{
    char statement[LOGSIGN_STATEMENT_MAX], what[400];
    if (!res->ok || (!sg->present && !res->key_given))
        return;
    if (!sg->present)
        snprintf(what, sizeof what, "the log holds no signing key, but public key %.16s... was"
                 " given: its signatures were removed, or it is another station's log",
                 res->public_key);
    else {
        logsign_statement(res->public_key, sg->from, statement);
        if (logsign_verify(res->public_key, statement, sg->statement_sig) == ST_OK)
            return;
        snprintf(what, sizeof what,
                 "the signing start (records from %" PRId64 ", dispositions from %" PRId64
                 ", verifications from %" PRId64 ") is not signed by public key %.16s...%s",
                 sg->from[0], sg->from[1], sg->from[2], res->public_key,
                 strcmp(sg->public_key, res->public_key) ? " (the log names another key)" : "");
    }
    brk(res, "signature", 0, what);
}

int log_verify(struct log_db *db, struct log_verify_result *res, struct err *e)
{
    return log_verify_key(db, NULL, res, e);
}

int log_verify_key(struct log_db *db, const char *public_key, struct log_verify_result *res,
                   struct err *e)
{
    memset(res, 0, sizeof *res);
    res->ok = 1;
    struct err sub;
    if (log_check_integrity(db, &sub)) {
        brk(res, "database", 0, sub.msg);
        return ST_OK;
    }
    struct log_signing sg;
    int rc = log_signing_get(db, &sg, e);
    if (rc)
        return rc;
    res->key_given = public_key != NULL;
    snprintf(res->public_key, sizeof res->public_key, "%s", public_key ? public_key : sg.public_key);
    rc = walk_records(db, &sg, res, e);
    if (!rc)
        rc = walk_dispositions(db, &sg, res, e);
    if (!rc)
        rc = walk_verifications(db, &sg, res, e);
    if (!rc)
        check_statement(res, &sg);
    if (!rc && !res->ok)
        res->torn = res->after == 0 && strcmp(res->chain, "database") != 0 &&
                    strcmp(res->chain, "signature") != 0;
    return rc;
}
