/* audit_stats: the numbers of `station audit stats` and of the HTML report,
 * gathered from log records one at a time (core/qstats does the arithmetic).
 *
 * Definitions (documented in DEVELOPERS.md, "The audit's numbers"):
 * - A reject is a record whose verdict is not PASS (FAIL or NO_VERDICT): both
 *   stop the part, as `audit list --rejects` counts them.
 * - The p-chart plots the reject rate per subgroup (a day, or a shift):
 *   d = rejects, n = records in the subgroup.
 * - The Pareto counts every reason of every reject by (rule, class, zone).
 * - The false-reject rate is k / n over rejects whose latest disposition is
 *   confirmed, rework or false-reject (n), k the false rejects, with its
 *   Clopper–Pearson 95% interval; "other" and undisposed rejects are left out.
 * - Cohen's kappa compares two calls on the same part, 2×2: the station's
 *   (PASS = good, FAIL or NO_VERDICT = reject) against the auditor's latest
 *   disposition read as a call on the part (false-reject = good; confirmed or
 *   rework = reject; other = no call, left out), over disposed records.  When
 *   only rejects are audited the station's row is constant and κ is 0 or
 *   undefined by construction: the table is reported beside κ for that reason.
 *
 * Owns the counts and Pareto rows it gathers (audit_stats_clear frees them).
 * Never reads the log itself and never prints except in audit_stats_print. */
#ifndef ST_AUDIT_STATS_H
#define ST_AUDIT_STATS_H

#include <jansson.h>
#include <stdio.h>

#include "core/log.h"
#include "core/qstats.h"

struct audit_stats {
    struct qstats_counts counts;
    struct qstats_pareto pareto;
    uint64_t records, rejects;
    uint64_t disposed[LOG_DISP_COUNT];  /* rejects by latest disposition ([0]: not yet) */
    uint64_t agree[2][2];               /* [station][auditor]: 0 good, 1 reject */
    char first_utc[LOG_UTC_MAX], last_utc[LOG_UTC_MAX];
};

int audit_stats_init(struct audit_stats *s, const struct qstats_shifts *shifts, struct err *e);
void audit_stats_clear(struct audit_stats *s);
/* Counts one record; a malformed time or reasons JSON is ST_EFORMAT naming
 * the record's sequence number. */
int audit_stats_add(struct audit_stats *s, const struct log_record *r, struct err *e);

/* Every figure as one JSON object: period, verdicts, days, shifts, pchart
 * (subgroups by day, or by shift when by_shift), pareto, audit
 * (dispositions, false_reject with ci95, kappa with its table); undefined
 * figures are null.  Sorts the Pareto rows.  NULL when memory runs out. */
json_t *audit_stats_json(struct audit_stats *s, int by_shift);

/* The same figures as text for a person. */
void audit_stats_print(FILE *f, const json_t *stats);

#endif
