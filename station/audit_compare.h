/* audit_compare: the audit's figures per station, side by side — what
 * `audit stats` and `audit report` add when the log holds several stations
 * (the central database; a local log holds one).
 *
 * Records are counted by the station whose chain holds them (log_record's
 * chain_station) into one struct audit_stats each, with the same
 * definitions as the total (station/audit_stats.h), so every station's
 * figures and the total come from one set of rules and the total is the
 * sum of the stations' counts.  Stations are kept in the order first seen
 * (a walk of the central database is ordered by station).
 *
 * Owns its rows and their figures (audit_compare_clear frees them).  Never
 * reads the log; prints only in audit_compare_print. */
#ifndef ST_AUDIT_COMPARE_H
#define ST_AUDIT_COMPARE_H

#include <jansson.h>
#include <stdio.h>

#include "audit_stats.h"

struct audit_compare_row {
    char station[LOG_ID_MAX];
    char line[LOG_ID_MAX];
    struct audit_stats st;
};

struct audit_compare {
    struct audit_compare_row *rows;
    size_t n, cap;
    struct qstats_shifts shifts;
};

void audit_compare_init(struct audit_compare *c, const struct qstats_shifts *shifts);
void audit_compare_clear(struct audit_compare *c);
/* Counts r under its station (audit_stats_add's errors). */
int audit_compare_add(struct audit_compare *c, const struct log_record *r, struct err *e);

/* One object per station: station, line, records, first, last, verdicts,
 * rejects, reject_rate (null without records) and audit (dispositions,
 * false_reject, kappa), as audit_stats_json has them.  NULL when memory runs
 * out. */
json_t *audit_compare_json(struct audit_compare *c);

/* The table for a person: one row per station and the total's row (from
 * the audit_stats_json object total); nothing when fewer than two stations. */
void audit_compare_print(FILE *f, const json_t *stations, const json_t *total);

#endif
