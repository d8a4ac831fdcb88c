/* audit_csv: log records as CSV for a spreadsheet or another tool.
 *
 * RFC 4180: one header row, CRLF line ends, a field in double quotes when it
 * holds a comma, a double quote, CR or LF, with inner quotes doubled.  The
 * columns are AUDIT_CSV_COLUMNS in that order; reasons and regions are the
 * record's JSON text; evidence columns hold names relative to the evidence
 * folder, empty when the record has none; the disposition columns hold the
 * latest disposition, empty when not yet disposed; log_station and line are
 * the station whose chain holds the record (the central database's key) and
 * its production line (empty in a local log).
 *
 * Owns nothing; writes only to the FILE it is handed. */
#ifndef ST_AUDIT_CSV_H
#define ST_AUDIT_CSV_H

#include <stdio.h>

#include "core/log.h"

#define AUDIT_CSV_COLUMNS                                                                    \
    "seq,utc,station,operator,serial,recipe,recipe_version,recipe_sha256,model_sha256,scale," \
    "verdict,reasons,regions,frame,overlay,disposition,auditor,disposed_utc,comment,hash,"  \
    "log_station,line"

void audit_csv_header(FILE *f);
void audit_csv_row(FILE *f, const struct log_record *r);

#endif
