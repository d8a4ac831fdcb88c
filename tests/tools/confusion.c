/* confusion: exposes core/metrics to the reference tests.
 *
 *   confusion N [--defects MASK] TRUTH PRED [TRUTH PRED ...]
 *
 * Each TRUTH/PRED pair is two raw uint8 files of the same length, added to
 * one confusion matrix of N classes with one metrics_add call per pair.
 * MASK is one digit per class (e.g. 00111), 1 marking a defect class.
 * Writes one JSON object to stdout: n, pixels (counted), accuracy, iou (per
 * class), mean_iou, mean_iou_defects (with --defects), confusion (rows =
 * truth); an undefined value is null.  A metrics error goes to stderr with
 * exit status 3; a usage or file error exits 2. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "core/metrics.h"

static int usage(void)
{
    fprintf(stderr, "usage: confusion N [--defects MASK] TRUTH PRED [TRUTH PRED ...]\n");
    return 2;
}

static uint8_t *read_all(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    uint8_t *buf = NULL;
    size_t cap = 0, n = 0;
    if (!f)
        return NULL;
    for (;;) {
        if (n == cap) {
            cap = cap ? 2 * cap : 4096;
            uint8_t *grown = realloc(buf, cap);
            if (!grown) {
                free(buf);
                fclose(f);
                return NULL;
            }
            buf = grown;
        }
        size_t got = fread(buf + n, 1, cap - n, f);
        n += got;
        if (got == 0)
            break;
    }
    int bad = ferror(f);
    fclose(f);
    if (bad) {
        free(buf);
        return NULL;
    }
    *len = n;
    return buf;
}

static json_t *real_or_null(double v)
{
    return v < 0 ? json_null() : json_real(v);
}

int main(int argc, char **argv)
{
    if (argc < 4)
        return usage();
    char *end;
    long n = strtol(argv[1], &end, 10);
    if (*end || n < 1 || n > METRICS_MAX_CLASSES)
        return usage();
    int is_defect[METRICS_MAX_CLASSES] = {0};
    int have_mask = 0, arg = 2;
    if (!strcmp(argv[arg], "--defects")) {
        const char *mask = argv[arg + 1];
        if ((long)strlen(mask) != n || mask[strspn(mask, "01")])
            return usage();
        for (int k = 0; k < n; k++)
            is_defect[k] = mask[k] == '1';
        have_mask = 1;
        arg += 2;
    }
    if (arg >= argc || (argc - arg) % 2)
        return usage();

    struct confusion cm;
    metrics_init(&cm, (int)n);
    struct err e;
    err_clear(&e);
    for (; arg < argc; arg += 2) {
        size_t nt = 0, np = 0;
        uint8_t *t = read_all(argv[arg], &nt);
        uint8_t *p = read_all(argv[arg + 1], &np);
        int rc = t && p && nt == np ? metrics_add(&cm, t, p, nt, &e) : -1;
        free(t);
        free(p);
        if (rc < 0) {
            fprintf(stderr, "confusion: cannot read %s and %s of equal length\n", argv[arg],
                    argv[arg + 1]);
            return 2;
        }
        if (rc != ST_OK) {
            fprintf(stderr, "%s\n", e.msg);
            return 3;
        }
    }

    json_t *out = json_object();
    json_t *iou = json_array();
    json_t *rows = json_array();
    json_int_t pixels = 0;
    for (int k = 0; k < n; k++) {
        json_array_append_new(iou, real_or_null(metrics_iou(&cm, k)));
        json_t *row = json_array();
        for (int j = 0; j < n; j++) {
            json_array_append_new(row, json_integer((json_int_t)cm.c[k][j]));
            pixels += (json_int_t)cm.c[k][j];
        }
        json_array_append_new(rows, row);
    }
    json_object_set_new(out, "n", json_integer(n));
    json_object_set_new(out, "pixels", json_integer(pixels));
    json_object_set_new(out, "accuracy", real_or_null(metrics_accuracy(&cm)));
    json_object_set_new(out, "iou", iou);
    json_object_set_new(out, "mean_iou", real_or_null(metrics_mean_iou(&cm, NULL)));
    if (have_mask)
        json_object_set_new(out, "mean_iou_defects",
                            real_or_null(metrics_mean_iou(&cm, is_defect)));
    json_object_set_new(out, "confusion", rows);
    int rc = json_dumpf(out, stdout, JSON_COMPACT | JSON_REAL_PRECISION(17));
    json_decref(out);
    fputc('\n', stdout);
    return rc ? 2 : 0;
}
