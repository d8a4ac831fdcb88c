/* audit_view: `station audit view SEQ` — one record's frame and overlay in
 * a window (station/viewer), read through a read-only log handle.
 *
 * Exit statuses of station/cli.h: 0 shown (or the screenshot written), 3
 * when the record, its evidence or the display is missing, 4 for a wrong
 * command line.  Never changes the log or the evidence. */
#ifndef ST_AUDIT_VIEW_H
#define ST_AUDIT_VIEW_H

#include "core/log.h"

/* argv[0] is the verb, as `station audit` hands it on. */
int audit_cmd_view(int argc, char **argv);

/* Shows r's evidence (mode: enum in station/viewer.h; screenshot NULL for
 * a window); 0 or an exit status, the reason printed. */
int audit_view_record(struct log_db *db, const struct log_record *r, int mode,
                      const char *screenshot);

#endif
