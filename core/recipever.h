/* recipever: a recipe file's version, kept in step with its content.
 *
 * The content hash of a recipe is the SHA-256 of the file's bytes with the
 * value of [product] version left out (the line `version = 7 ; note` is
 * hashed as `version =  ; note`), so a content hash does not change when
 * only the version number does.  The last save is recorded beside the file
 * in FILE.version.json: {"format": 1, "version": N, "content_sha256": HEX,
 * "saved_utc": "..."}.
 *
 * recipever_save compares the content hash with the record: unchanged, or
 * no record yet (the first save records the file as it is), and nothing in
 * the recipe changes; changed, and [product] version becomes one more than
 * the larger of the file's and the record's, rewritten in place (only that
 * number; the file replaced atomically: FILE.tmp, fsync, rename), and the
 * record follows.  recipever_check says whether the file still matches its
 * record (no record: it does, there is nothing to hold it to).  The whole
 * file's SHA-256 (what the log stores with every record) is separate:
 * sha256_hex_file.  Never prints; keeps no state. */
#ifndef ST_RECIPEVER_H
#define ST_RECIPEVER_H

#include "err.h"
#include "sha256.h"

struct recipever {
    int version;                          /* in the file (after a save: as saved) */
    char content_sha256[SHA256_HEX_LEN];  /* the file's content hash now */
    int recorded;                         /* FILE.version.json exists */
    int recorded_version;
    char recorded_sha256[SHA256_HEX_LEN];
    char saved_utc[32];
    int first_save;                       /* recipever_save found no record and made one */
};

/* Reads FILE and its record into v (no change). */
int recipever_read(const char *path, struct recipever *v, struct err *e);
/* Saves as above; *changed says whether the version was incremented. */
int recipever_save(const char *path, struct recipever *v, int *changed, struct err *e);
/* ST_OK when FILE matches its record or has none; else ST_EFORMAT naming
 * the file, the version saved and both hashes. */
int recipever_check(const char *path, struct err *e);

#endif
