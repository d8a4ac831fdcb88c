/* audit_report: the audit as one self-contained HTML file.
 *
 * The HTML page needs nothing outside itself: no scripts, no fonts, no
 * network.  Its charts are inline SVG drawn here (the p-chart with its
 * per-subgroup limits, the Pareto bars with their cumulative line), and the
 * rejects' overlay evidence appears as downscaled thumbnails embedded as
 * base64 PNG data URIs.  It carries the caution that the tool aids, and does
 * not replace, qualified inspection, and the public key the log is signed
 * with (stats "public_key", when the log has one).  Every text from the log
 * is escaped.
 *
 * Owns nothing between calls; writes only to the FILE it is handed. */
#ifndef ST_AUDIT_REPORT_H
#define ST_AUDIT_REPORT_H

#include <jansson.h>
#include <stdio.h>

#include "core/image.h"
#include "core/log.h"

/* The longer side of a thumbnail, in pixels. */
#define AUDIT_THUMB_SIDE 192

/* One reject shown in the report: the record and its downscaled overlay
 * (NULL when the evidence is missing or was purged; note then says why). */
struct audit_thumb {
    const struct log_record *rec;
    const struct image *img;
    const char *note;
};

/* An area-average downscale of src so its longer side is at most side
 * pixels (a copy when it already fits). */
struct image *audit_thumb_scale(const struct image *src, int side, struct err *e);

/* Writes the page.  stats is audit_stats_json's object; source names the log
 * (shown, escaped); thumbs may be empty.  ST_EIO when writing fails. */
int audit_report_html(FILE *f, const char *source, const json_t *stats,
                      const struct audit_thumb *thumbs, size_t nthumbs, struct err *e);

/* RFC 4648 base64 of len bytes into a new NUL-terminated string; NULL when
 * memory runs out. */
char *audit_base64(const unsigned char *data, size_t len);

#endif
