/* verify: a recipe's master parts run through the inspector.
 *
 * Each [master NAME] image (core/recipe.h) is inspected exactly as
 * `station inspect` would, by a fresh inspector per master (so one master
 * is never compared with the last as a frozen camera), and its verdict is
 * compared with the one the recipe expects.  The verification passes only
 * when every master gets its expected verdict; an unreadable master image
 * is NO_VERDICT and so a mismatch (fail closed).  verify_run fails only
 * when no inspector can be made (recipe, model, flat field) or the recipe
 * has no masters.  Owns the JSON reports it keeps until verify_clear.
 *
 * With the station's log (station/logbook.h): verify_record appends the
 * outcome to the log's verification chain (core/log.h), and
 * verify_hours_since says how long ago the last passing one was, for the
 * inspector's verification_due gate.  The verification that counts is the
 * latest at this station for this recipe id and version with this model
 * (a retrained model must be verified again); when it failed, the pass
 * before it no longer counts, and none on record reads as
 * JUDGE_NEVER_VERIFIED_H. */
#ifndef ST_VERIFY_H
#define ST_VERIFY_H

#include <jansson.h>

#include "core/recipe.h"
#include "logbook.h"

struct verify_master {
    int verdict;               /* enum verdict the master got */
    int match;                 /* verdict == the recipe's expect */
    json_t *report;            /* the inspection's JSON line (report.h) */
};

struct verify_outcome {
    int n, matched;
    struct verify_master m[RECIPE_MAX_MASTERS];
};

int verify_run(const struct recipe *r, struct verify_outcome *out, struct err *e);
void verify_clear(struct verify_outcome *o);

int verify_record(struct logbook *lb, const struct recipe *r, const struct verify_outcome *v,
                  int64_t *vseq, struct err *e);
int verify_hours_since(struct logbook *lb, const struct recipe *r, double *hours,
                       struct err *e);

#endif
