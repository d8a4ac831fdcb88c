/* evidence: writes one evidence file durably — the bytes go to NAME.tmp,
 * are fsynced, renamed to NAME, and the folder is fsynced, so after a crash
 * NAME is either absent or complete.  Folders under the root are created as
 * needed (and their parent fsynced).  Every write, fsync, rename and close
 * goes through the caller's struct log_io, so a test can make any of them
 * fail.  Never prints; keeps no state. */
#ifndef ST_EVIDENCE_H
#define ST_EVIDENCE_H

#include <stddef.h>

#include "log.h"

/* Writes len bytes to ROOT/NAME (NAME may hold one folder: "DATE/FILE"),
 * the file with permissions mode and new folders with log_folder_mode(mode),
 * exactly (fchmod / chmod after creating, so the umask cannot widen or
 * narrow them); mode 0 leaves both to the umask (0644 and 0777 asked), for
 * files that are not the log's (captured frames, recipe versions). */
int evidence_write(const struct log_io *io, const char *root, const char *name,
                   const void *data, size_t len, unsigned mode, struct err *e);

/* Checks ROOT/NAME against its recorded SHA-256 and size: ST_OK, or ST_EIO
 * (missing, unreadable) / ST_EFORMAT (differs) with the reason in e. */
int evidence_check(const char *root, const char *name, const char *sha256, long long bytes,
                   struct err *e);

#endif
