/* report: one inspection as a JSON line and as a line for a person.
 *
 * Shared by `station inspect` and `station demo`.  The JSON object holds
 * schema (REPORT_SCHEMA, raised on any incompatible change), image, verdict
 * (PASS, FAIL, NO_VERDICT), reasons (rule, class, measured, limit, unit),
 * regions (class, pixels, area_mm2, bbox, centroid, confidence, counted),
 * quality and stage times. */
#ifndef ST_REPORT_H
#define ST_REPORT_H

#include <jansson.h>
#include <stdio.h>

#include "core/inspect.h"

#define REPORT_SCHEMA 1

/* A judged inspection; in is the inspector that judged it. */
json_t *report_json(const char *image, const struct inspector *in, const struct judgement *j,
                    const struct inspect_times *t);
/* An image that could not be inspected: NO_VERDICT with the reason. */
json_t *report_json_error(const char *image, const struct err *e);
/* A frame refused before inspection (the live station: camera_lost,
 * frozen, log_failed): NO_VERDICT with one reason {rule, class "image",
 * message}, the same shape as report_json_error's. */
json_t *report_json_refused(const char *image, const char *rule, const char *message);

/* The overlay picture of a judged inspection (operator view and evidence);
 * the caller frees it. */
struct image *report_overlay(const struct inspector *in, const struct image *frame,
                             const struct judgement *j, struct err *e);

/* "IMAGE: FAIL — scratch largest region 0.81 mm2 > 0.60 mm2; ..." */
void report_print(FILE *f, const char *image, const struct recipe *r, const struct judgement *j);

#endif
