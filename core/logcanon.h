/* logcanon: the canonical text each log hash covers, and the hash itself.
 *
 * A record's canonical form is UTF-8 text, one `key=value` line per field in
 * this fixed order, each line ending in '\n':
 *
 *   station-log record 1
 *   seq utc station operator serial recipe_id recipe_version recipe_sha256
 *   model_sha256 scale_id verdict reasons regions camera
 *   evidence=KIND NAME SHA256 BYTES      (one line per evidence file, frame first)
 *   prev=PREVIOUS_RECORD_HASH            (64 zeros for the first record)
 *
 * Values are written as stored, with '\\' as "\\\\", newline as "\\n" and
 * carriage return as "\\r", so no value can forge a line; integers in
 * decimal; the verdict as PASS / FAIL / NO_VERDICT; reasons, regions and
 * camera are the exact JSON text stored (camera empty when none).  A
 * disposition's form is "station-log disposition 1" then dseq record_seq
 * record_hash utc auditor disposition comment prev, the same way; binding the
 * record's hash ties an audit to exactly what was judged.  hash = SHA-256 of
 * the text, lower-case hex.  A verification's form is "station-log
 * verification 1" then vseq utc station recipe_id recipe_version
 * recipe_sha256 model_sha256 outcome (passed / failed) masters prev, the
 * same way.  Pure functions; never prints. */
#ifndef ST_LOGCANON_H
#define ST_LOGCANON_H

#include "log.h"

#define LOGCANON_GENESIS "0000000000000000000000000000000000000000000000000000000000000000"

/* Heap strings, caller frees; NULL when memory runs out. */
char *logcanon_record(const struct log_record *r);
char *logcanon_disposition(const struct log_disposition *d, const char *record_hash);

/* hex = SHA-256 of the canonical form; ST_ENOMEM when it cannot be built. */
int logcanon_record_hash(const struct log_record *r, char hex[SHA256_HEX_LEN], struct err *e);
int logcanon_disposition_hash(const struct log_disposition *d, const char *record_hash,
                              char hex[SHA256_HEX_LEN], struct err *e);

int logcanon_verification_hash(const struct log_verification *v, char hex[SHA256_HEX_LEN],
                               struct err *e);

#endif
