/* logbook: what `station inspect` and `station demo` share to record each
 * inspection in the station's log (core/log.h).
 *
 * Opens the log for one recipe (refused when the file was edited since its
 * version was saved, core/recipever.h; its file's SHA-256, its model's SHA-256 from
 * the model metadata, its scale), and records one judged report: the
 * report's `reasons` and `regions` arrays as the JSON text jansson dumps,
 * the frame and the overlay from report_overlay as evidence for every FAIL
 * and NO_VERDICT and for the PASS inspections the recipe's [evidence] pass
 * asks for.  A record that cannot be made durable turns the report into
 * NO_VERDICT with rule "log_failed" and the reason: never a PASS.  On success
 * the report gains "log_seq", printed only after the commit.
 *
 * The default database of a station is
 * $XDG_DATA_HOME/station/STATION/log.db (XDG_DATA_HOME defaulting to
 * ~/.local/share), evidence in the folder `evidence` beside it. */
#ifndef ST_LOGBOOK_H
#define ST_LOGBOOK_H

#include <jansson.h>
#include <stdint.h>

#include "core/inspect.h"
#include "core/log.h"

#define LOGBOOK_DEFAULT_STATION "bench-1"

struct logbook {
    struct log_db *db;
    const struct recipe *r;
    char station[LOG_ID_MAX];
    char recipe_sha256[SHA256_HEX_LEN];
    char model_sha256[SHA256_HEX_LEN];
    char scale_id[LOG_ID_MAX];
    /* The live camera's settings as applied (source_settings_json), stored
     * with every record while set; NULL (logbook_open's) off line. */
    const char *camera_json;
};

/* The default database path of a station id (letters, digits, . _ -). */
int logbook_default_path(const char *station, char *buf, size_t len, struct err *e);

/* db_path NULL: the station's default; its folder is created when missing.
 * budget_bytes 0: no evidence budget. */
int logbook_open(struct logbook *lb, const char *db_path, const char *station,
                 uint64_t budget_bytes, const struct recipe *r, struct err *e);
void logbook_close(struct logbook *lb);

/* Records one report (j NULL and frame NULL when the image could not be
 * inspected).  On failure the report is already NO_VERDICT with the reason
 * and e says why; *seq is set on success.  overlay (may be NULL) receives
 * the overlay made for the evidence, NULL when none was kept, so a caller
 * that shows or saves the overlay too need not draw it again; the caller
 * frees it. */
int logbook_record(struct logbook *lb, json_t *report, const struct inspector *in,
                   const struct image *frame, const struct judgement *j, const char *operator_id,
                   const char *serial, int64_t *seq, struct image **overlay, struct err *e);

#endif
