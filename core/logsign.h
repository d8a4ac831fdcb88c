/* logsign: the station's Ed25519 signatures over its log (libsodium).
 *
 * Each link of the log's chains (records, dispositions, verifications) is
 * signed over its hash as written in the log: the message is the 64
 * lower-case hex characters of the SHA-256 of the link's canonical form
 * (core/logcanon.h), the signature is stored as 128 hex characters.  The
 * chain alone can be recomputed by whoever rewrites the whole database; a
 * signature cannot without the private key, so a copy of the log checked
 * against a public key obtained separately shows any rewrite.
 *
 * The key pair is one file beside the log (DB.key): libsodium's 64-byte
 * secret key, which holds the public key in its last 32 bytes, nothing
 * else.  It is created with crypto_sign_keypair, owner-only (0600), on first
 * use, and refused when group or others may read or write it.  The private
 * key never leaves the file and this module: only the public key is printed
 * or stored in the log.
 *
 * The signing start statement: when a log first gets its key (a new log, or
 * one upgraded from a schema before signing) the first sequence number of
 * each chain that is signed is fixed in the text
 *   "station-log signing 1\npublic_key=HEX\nrecord=N\ndisposition=N\n"
 *   "verification=N\n"
 * and that text is signed too, so nobody without the key can move the start
 * to pass signed links off as old unsigned ones.  Pure except for the key
 * file; never prints; no global state of its own (sodium_init is libsodium's
 * idempotent, thread-safe set-up). */
#ifndef ST_LOGSIGN_H
#define ST_LOGSIGN_H

#include <stdint.h>

#include "err.h"

#define LOGSIGN_PK_HEX 65          /* 64 hex + NUL */
#define LOGSIGN_SIG_HEX 129        /* 128 hex + NUL */
#define LOGSIGN_SK_BYTES 64
#define LOGSIGN_STATEMENT_MAX 192

struct logsign_key {
    unsigned char sk[LOGSIGN_SK_BYTES];
};

/* Reads the key file at path; when it is missing and create is set, makes
 * a new key pair there (0600, fsynced) and sets *created.  A file others may
 * read, of the wrong size, or not a regular file is refused (ST_EIO /
 * ST_EFORMAT) with the path and what is wrong. */
int logsign_key_load(const char *path, int create, struct logsign_key *k, int *created,
                     struct err *e);
/* Overwrites the secret key in memory. */
void logsign_key_wipe(struct logsign_key *k);

void logsign_public_hex(const struct logsign_key *k, char hex[LOGSIGN_PK_HEX]);

/* sig = the detached Ed25519 signature of the NUL-terminated msg, as hex. */
void logsign_sign(const struct logsign_key *k, const char *msg, char sig[LOGSIGN_SIG_HEX]);

/* ST_OK when sig_hex is a valid signature of msg by pk_hex; ST_EFORMAT when
 * not (or either is not well-formed hex). */
int logsign_verify(const char *pk_hex, const char *msg, const char *sig_hex);

/* A public key given by a person: 64 hex characters, or the name of a file
 * holding them (surrounding white space allowed).  hex gets it lower-case. */
int logsign_public_parse(const char *arg, char hex[LOGSIGN_PK_HEX], struct err *e);

/* The signing start statement above. */
void logsign_statement(const char *pk_hex, const int64_t from[3],
                       char out[LOGSIGN_STATEMENT_MAX]);

#endif
