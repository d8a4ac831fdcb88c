#include "calfile.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "civil.h"

void calfile_format_time(long long t, char *buf, size_t len)
{
    long long days = t >= 0 ? t / 86400 : -((-t + 86399) / 86400), s = t - days * 86400;
    int64_t y;
    int m, d;
    civil_date(days, &y, &m, &d);
    snprintf(buf, len, "%04lld-%02d-%02dT%02d:%02d:%02dZ", (long long)y, m, d, (int)(s / 3600),
             (int)(s / 60 % 60), (int)(s % 60));
}

static int parse_time(const char *s, long long *t)
{
    int y, mo, d, h, mi, se, n = 0;
    if (sscanf(s, "%4d-%2d-%2dT%2d:%2d:%2dZ%n", &y, &mo, &d, &h, &mi, &se, &n) != 6 ||
        n != (int)strlen(s) || n != 20 || y < 1970 || mo < 1 || mo > 12 || d < 1 || d > 31 ||
        h > 23 || mi > 59 || se > 59 || h < 0 || mi < 0 || se < 0)
        return -1;
    int64_t yy;
    int mm, dd;
    long long days = civil_days(y, mo, d);
    civil_date(days, &yy, &mm, &dd);
    if (dd != d) /* 31 April and the like */
        return -1;
    *t = days * 86400 + h * 3600 + mi * 60 + se;
    return 0;
}

double calfile_age_days(const struct calfile *c, time_t now)
{
    return ((double)now - (double)c->created) / 86400.0;
}

json_t *calfile_lens_json(const struct calfile *c)
{
    const struct lens_model *l = &c->lens;
    return c->has_lens ? json_pack("{s:f,s:f,s:f,s:f,s:f,s:f,s:f,s:b}", "fx", l->fx, "fy", l->fy,
                                   "cx", l->cx, "cy", l->cy, "k1", l->k1, "k2", l->k2, "rms_px",
                                   c->lens_rms_px, "corrected_pixels", c->lens_corrected)
                       : NULL;
}

int calfile_save(const char *path, const struct calfile *c, struct err *e)
{
    char when[32];
    calfile_format_time(c->created, when, sizeof when);
    json_t *h = json_array();
    for (int i = 0; i < 9; i++)
        json_array_append_new(h, json_real(c->image_to_plane[i]));
    json_t *o = json_pack(
        "{s:i,s:s,s:i,s:i,s:s,s:i,s:f,s:f,s:o,s:f,s:{s:f,s:f,s:f,s:f},s:{s:i,s:i,s:f,s:i}}",
        "format", CALFILE_FORMAT, "camera", c->camera, "width", c->width, "height", c->height,
        "created", when, "valid_days", c->valid_days, "mm_per_px_x", c->mm_per_px_x,
        "mm_per_px_y", c->mm_per_px_y, "image_to_plane", h, "tilt_deg", c->tilt_deg,
        "reprojection", "rms_px", c->rms_px, "worst_px", c->worst_px, "rms_mm", c->rms_mm,
        "worst_mm", c->worst_mm, "board", "cols", c->board_cols, "rows", c->board_rows,
        "square_mm", c->square_mm, "views", c->views);
    if (o && c->has_lens)
        json_object_set_new(o, "lens", calfile_lens_json(c));
    int rc = ST_OK;
    if (!o)
        rc = err_set(e, ST_ENOMEM, "%s: cannot build the calibration", path);
    else if (json_dump_file(o, path, JSON_INDENT(2) | JSON_SORT_KEYS) != 0)
        rc = err_set(e, ST_EIO, "%s: cannot write the calibration", path);
    json_decref(o);
    return rc;
}

struct reader {
    const char *path;
    json_t *o;
    struct err *e;
};

static int get_num(struct reader *rd, json_t *o, const char *key, double lo, double hi, double *v)
{
    json_t *x = json_object_get(o, key);
    if (!json_is_number(x))
        return err_set(rd->e, ST_EFORMAT, "%s: '%s' missing or not a number", rd->path, key);
    *v = json_number_value(x);
    if (!(*v >= lo && *v <= hi))
        return err_set(rd->e, ST_ERANGE, "%s: '%s' = %g outside [%g, %g]", rd->path, key, *v, lo,
                       hi);
    return ST_OK;
}

static int get_int(struct reader *rd, json_t *o, const char *key, int lo, int hi, int *v)
{
    json_t *x = json_object_get(o, key);
    if (!json_is_integer(x))
        return err_set(rd->e, ST_EFORMAT, "%s: '%s' missing or not an integer", rd->path, key);
    json_int_t n = json_integer_value(x);
    if (n < lo || n > hi)
        return err_set(rd->e, ST_ERANGE, "%s: '%s' = %lld outside [%d, %d]", rd->path, key,
                       (long long)n, lo, hi);
    *v = (int)n;
    return ST_OK;
}

static int get_obj(struct reader *rd, const char *key, json_t **out)
{
    *out = json_object_get(rd->o, key);
    if (!json_is_object(*out))
        return err_set(rd->e, ST_EFORMAT, "%s: '%s' missing or not an object", rd->path, key);
    return ST_OK;
}

static int read_all(struct reader *rd, struct calfile *c)
{
    json_t *o = rd->o, *rep, *board, *lens = json_object_get(o, "lens");
    int rc;
    if ((rc = get_int(rd, o, "format", 1, 1 << 30, &c->format)))
        return rc;
    if (c->format > CALFILE_FORMAT)
        return err_set(rd->e, ST_EFORMAT,
                       "%s: calibration format %d is newer than this station supports (%d)",
                       rd->path, c->format, CALFILE_FORMAT);
    const char *cam = json_string_value(json_object_get(o, "camera"));
    const char *when = json_string_value(json_object_get(o, "created"));
    if (!cam || !*cam || strlen(cam) >= sizeof c->camera ||
        strspn(cam, "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-") !=
            strlen(cam))
        return err_set(rd->e, ST_EFORMAT, "%s: 'camera' missing or not 1..63 of A-Z a-z 0-9 . _ -",
                       rd->path);
    snprintf(c->camera, sizeof c->camera, "%s", cam);
    if (!when || parse_time(when, &c->created))
        return err_set(rd->e, ST_EFORMAT, "%s: 'created' missing or not YYYY-MM-DDTHH:MM:SSZ",
                       rd->path);
    json_t *h = json_object_get(o, "image_to_plane");
    if (!json_is_array(h) || json_array_size(h) != 9)
        return err_set(rd->e, ST_EFORMAT, "%s: 'image_to_plane' must be an array of 9 numbers",
                       rd->path);
    for (int i = 0; i < 9; i++) {
        json_t *x = json_array_get(h, (size_t)i);
        if (!json_is_number(x) || !isfinite(json_number_value(x)))
            return err_set(rd->e, ST_EFORMAT, "%s: 'image_to_plane' must be an array of 9 numbers",
                           rd->path);
        c->image_to_plane[i] = json_number_value(x);
    }
    if (fabs(c->image_to_plane[8] - 1) > 1e-9)
        return err_set(rd->e, ST_ERANGE, "%s: 'image_to_plane' must end in 1 (h8 = 1)", rd->path);
    const double *m = c->image_to_plane;
    if (!(fabs(m[0] * m[4] - m[1] * m[3]) > 0))
        return err_set(rd->e, ST_ERANGE, "%s: 'image_to_plane' is singular", rd->path);
    if ((rc = get_int(rd, o, "width", 1, 16384, &c->width)) ||
        (rc = get_int(rd, o, "height", 1, 16384, &c->height)) ||
        (rc = get_int(rd, o, "valid_days", 1, 3650, &c->valid_days)) ||
        (rc = get_num(rd, o, "mm_per_px_x", 1e-6, 100, &c->mm_per_px_x)) ||
        (rc = get_num(rd, o, "mm_per_px_y", 1e-6, 100, &c->mm_per_px_y)) ||
        (rc = get_num(rd, o, "tilt_deg", 0, 90, &c->tilt_deg)) ||
        (rc = get_obj(rd, "reprojection", &rep)) ||
        (rc = get_num(rd, rep, "rms_px", 0, 1e6, &c->rms_px)) ||
        (rc = get_num(rd, rep, "worst_px", 0, 1e6, &c->worst_px)) ||
        (rc = get_num(rd, rep, "rms_mm", 0, 1e6, &c->rms_mm)) ||
        (rc = get_num(rd, rep, "worst_mm", 0, 1e6, &c->worst_mm)) ||
        (rc = get_obj(rd, "board", &board)) ||
        (rc = get_int(rd, board, "cols", 2, 4096, &c->board_cols)) ||
        (rc = get_int(rd, board, "rows", 2, 4096, &c->board_rows)) ||
        (rc = get_num(rd, board, "square_mm", 1e-3, 1e4, &c->square_mm)) ||
        (rc = get_int(rd, board, "views", 1, 1000, &c->views)))
        return rc;
    c->has_lens = lens != NULL;
    struct lens_model *l = &c->lens;
    if (lens && (!json_is_object(lens) || (rc = get_num(rd, lens, "fx", 1e-3, 1e7, &l->fx)) ||
                 (rc = get_num(rd, lens, "fy", 1e-3, 1e7, &l->fy)) ||
                 (rc = get_num(rd, lens, "cx", -1e5, 1e5, &l->cx)) ||
                 (rc = get_num(rd, lens, "cy", -1e5, 1e5, &l->cy)) ||
                 (rc = get_num(rd, lens, "k1", -1e3, 1e3, &l->k1)) ||
                 (rc = get_num(rd, lens, "k2", -1e3, 1e3, &l->k2)) ||
                 (rc = get_num(rd, lens, "rms_px", 0, 1e6, &c->lens_rms_px))))
        return rc ? rc : err_set(rd->e, ST_EFORMAT, "%s: 'lens' is not an object", rd->path);
    if (lens && c->format >= 2) {
        json_t *b = json_object_get(lens, "corrected_pixels");
        if (!json_is_boolean(b))
            return err_set(rd->e, ST_EFORMAT, "%s: 'lens.corrected_pixels' missing or not true/false",
                           rd->path);
        c->lens_corrected = json_is_true(b);
    }
    if (lens && c->lens_corrected && !lensmodel_holds(&c->lens, c->width, c->height))
        return err_set(rd->e, ST_ERANGE,
                       "%s: the lens (k1 %g, k2 %g) cannot be undone over the %dx%d frame: it "
                       "folds or diverges towards the edges; calibrate again with the target "
                       "also near the corners",
                       rd->path, c->lens.k1, c->lens.k2, c->width, c->height);
    return ST_OK;
}

int calfile_load(const char *path, struct calfile *c, struct err *e)
{
    json_error_t je;
    FILE *f = fopen(path, "rb");
    if (!f)
        return err_set(e, ST_EIO, "%s: cannot open the calibration", path);
    json_t *o = json_loadf(f, JSON_REJECT_DUPLICATES, &je);
    fclose(f);
    if (!json_is_object(o)) {
        json_decref(o);
        return err_set(e, ST_EFORMAT, "%s:%d: not a calibration (JSON object): %s", path,
                       je.line, o ? "not an object" : je.text);
    }
    struct calfile t;
    memset(&t, 0, sizeof t);
    struct reader rd = {path, o, e};
    int rc = read_all(&rd, &t);
    json_decref(o);
    if (!rc)
        *c = t;
    return rc;
}
