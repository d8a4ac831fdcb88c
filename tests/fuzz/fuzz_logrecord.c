/* Fuzzes what the audit parses of a stored log record: the UTC text
 * (core/qstats' ISO 8601 reader), the reasons, regions and camera JSON
 * columns (station/audit_stats.c, station/audit.c) and the canonical text
 * the hash covers (core/logcanon.c, whose escaping must hold for any bytes).
 * The input is the columns as stored, separated by '\n': utc, reasons,
 * regions, camera; its first byte picks the verdict.  Every record goes into
 * one audit_stats per input, and the figures are built and dumped, so a
 * record that confuses the arithmetic is caught too. */
#include <jansson.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "core/logcanon.h"
#include "station/audit.h"
#include "station/audit_stats.h"

static char *column(const char **p, const char *end)
{
    const char *nl = memchr(*p, '\n', (size_t)(end - *p));
    const char *stop = nl ? nl : end;
    size_t n = (size_t)(stop - *p);
    char *s = malloc(n + 1);
    if (!s)
        abort();
    memcpy(s, *p, n);
    s[n] = '\0';
    *p = nl ? nl + 1 : end;
    return s;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 1)
        return 0;
    const char *p = (const char *)data + 1, *end = (const char *)data + size;
    struct log_record r;
    log_record_init(&r);
    r.seq = 1;
    r.verdict = data[0] % 3;
    char *utc = column(&p, end);
    snprintf(r.utc, sizeof r.utc, "%s", utc);
    free(utc);
    r.reasons_json = column(&p, end);
    r.regions_json = column(&p, end);
    r.camera_json = p < end ? column(&p, end) : NULL;
    snprintf(r.station, sizeof r.station, "bench-1");

    struct qstats_shifts sh = {.n = 3, .start = {6, 14, 22}, .offset_min = 0};
    struct audit_stats st;
    struct err e = {0};
    if (audit_stats_init(&st, &sh, &e) != ST_OK)
        abort();
    if (audit_stats_add(&st, &r, &e) == ST_OK) {
        json_t *j = audit_stats_json(&st, 1);
        char *s = j ? json_dumps(j, JSON_COMPACT) : NULL;
        free(s);
        json_decref(j);
    }
    audit_stats_clear(&st);

    json_t *o = audit_record_json(NULL, &r);
    char *s = o ? json_dumps(o, JSON_COMPACT) : NULL;
    free(s);
    json_decref(o);

    char *canon = logcanon_record(&r);
    if (!canon)
        abort();
    /* no value may forge a line: the fixed form has exactly this many */
    int lines = 0;
    for (const char *c = canon; *c; c++)
        lines += *c == '\n';
    if (lines != 16)
        abort();
    free(canon);
    log_record_clear(&r);
    return 0;
}
