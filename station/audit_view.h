/* audit_view: `station audit view SEQ` — one record's frame and overlay in
 * a window (station/viewer), read through a read-only log handle.
 *
 * Exit statuses of station/cli.h: 0 shown (or the screenshot written), 3
 * when the record, its evidence or the display is missing, 4 for a wrong
 * command line.  Never changes the log or the evidence. */
#ifndef ST_AUDIT_VIEW_H
#define ST_AUDIT_VIEW_H

/* argv[0] is the verb, as `station audit` hands it on. */
int audit_cmd_view(int argc, char **argv);

#endif
