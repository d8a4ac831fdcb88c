#include "flatfield.h"

#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "sha256.h"

#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ != __ORDER_LITTLE_ENDIAN__
#error "flatfield stores float32 little-endian and copies it as is"
#endif

#define FORMAT_NAME "station-flat-field"
#define HEADER_MAX 4096

struct flat_field *flatfield_new(int w, int h, int with_offset, struct err *e)
{
    size_t bytes;
    if (image_check_size(w, h, 3, &bytes, e))
        return NULL;
    struct flat_field *f = calloc(1, sizeof *f);
    if (!f || !(f->gain = malloc(bytes * sizeof(float))) ||
        (with_offset && !(f->offset = calloc(bytes, sizeof(float))))) {
        flatfield_free(f);
        err_set(e, ST_ENOMEM, "out of memory for a %dx%d flat field", w, h);
        return NULL;
    }
    for (size_t i = 0; i < bytes; i++)
        f->gain[i] = 1.0f;
    f->w = w;
    f->h = h;
    return f;
}

void flatfield_free(struct flat_field *f)
{
    if (!f)
        return;
    free(f->gain);
    free(f->offset);
    free(f);
}

static size_t values(const struct flat_field *f)
{
    return (size_t)f->w * f->h * 3;
}

static void data_hash(const struct flat_field *f, char hex[SHA256_HEX_LEN])
{
    /* both maps hashed as one stream: gains then offsets */
    size_t n = values(f) * sizeof(float);
    if (!f->offset) {
        sha256_hex_buffer(f->gain, n, hex);
        return;
    }
    float *both = malloc(2 * n);
    if (!both) {
        hex[0] = '\0';
        return;
    }
    memcpy(both, f->gain, n);
    memcpy((char *)both + n, f->offset, n);
    sha256_hex_buffer(both, 2 * n, hex);
    free(both);
}

int flatfield_save(const char *path, const struct flat_field *f, struct err *e)
{
    char hex[SHA256_HEX_LEN];
    data_hash(f, hex);
    if (!hex[0])
        return err_set(e, ST_ENOMEM, "%s: out of memory hashing the flat field", path);
    json_t *h = json_pack("{s:s, s:i, s:i, s:i, s:i, s:b, s:f, s:i, s:i, s:f, s:f, s:s, s:s}",
                          "format", FORMAT_NAME, "version", FLATFIELD_VERSION, "width", f->w,
                          "height", f->h, "channels", 3, "offset", f->offset != NULL, "sigma",
                          f->sigma, "white_frames", f->white_frames, "dark_frames",
                          f->dark_frames, "nonuniformity_before", f->nonuniformity_before,
                          "nonuniformity_after", f->nonuniformity_after, "created", f->created,
                          "data_sha256", hex);
    char *text = h ? json_dumps(h, JSON_COMPACT | JSON_SORT_KEYS | JSON_REAL_PRECISION(9)) : NULL;
    json_decref(h);
    if (!text)
        return err_set(e, ST_ENOMEM, "%s: out of memory writing the header", path);
    FILE *fp = fopen(path, "wb");
    int rc = ST_OK;
    if (!fp) {
        rc = err_set(e, ST_EIO, "%s: cannot create: %s", path, strerror(errno));
    } else {
        size_t n = values(f);
        int bad = fprintf(fp, "%s\n", text) < 0 || fwrite(f->gain, sizeof(float), n, fp) != n ||
                  (f->offset && fwrite(f->offset, sizeof(float), n, fp) != n);
        if (fclose(fp) != 0 || bad)
            rc = err_set(e, ST_EIO, "%s: write failed: %s", path, strerror(errno));
    }
    free(text);
    return rc;
}

static int get_int(json_t *h, const char *key, int *v)
{
    json_t *x = json_object_get(h, key);
    if (!json_is_integer(x) || json_integer_value(x) < 0 || json_integer_value(x) > 1000000)
        return -1;
    *v = (int)json_integer_value(x);
    return 0;
}

static int get_real(json_t *h, const char *key, double *v)
{
    json_t *x = json_object_get(h, key);
    if (!json_is_number(x))
        return -1;
    *v = json_number_value(x);
    return 0;
}

/* The header line, checked field by field; fills everything but the maps. */
static int parse_header(const char *path, const char *line, struct flat_field *f, int *offset,
                        const char **hash, json_t **keep, struct err *e)
{
    json_error_t je;
    json_t *h = json_loads(line, 0, &je);
    *keep = h;
    if (!json_is_object(h))
        return err_set(e, ST_EFORMAT, "%s: not a flat-field file (header: %s)", path, je.text);
    const char *fmt = json_string_value(json_object_get(h, "format"));
    if (!fmt || strcmp(fmt, FORMAT_NAME))
        return err_set(e, ST_EFORMAT, "%s: not a flat-field file (format is not \"%s\")", path,
                       FORMAT_NAME);
    int version, channels;
    if (get_int(h, "version", &version) || version < 1)
        return err_set(e, ST_EFORMAT, "%s: header lacks a valid version", path);
    if (version > FLATFIELD_VERSION)
        return err_set(e, ST_EFORMAT, "%s: flat-field version %d is newer than this station's (%d)",
                       path, version, FLATFIELD_VERSION);
    json_t *off = json_object_get(h, "offset");
    const char *created = json_string_value(json_object_get(h, "created"));
    *hash = json_string_value(json_object_get(h, "data_sha256"));
    if (get_int(h, "width", &f->w) || get_int(h, "height", &f->h) ||
        get_int(h, "channels", &channels) || channels != 3 || !json_is_boolean(off) ||
        get_real(h, "sigma", &f->sigma) || get_int(h, "white_frames", &f->white_frames) ||
        get_int(h, "dark_frames", &f->dark_frames) ||
        get_real(h, "nonuniformity_before", &f->nonuniformity_before) ||
        get_real(h, "nonuniformity_after", &f->nonuniformity_after) || !created ||
        strlen(created) >= sizeof f->created || !*hash || strlen(*hash) != SHA256_HEX_LEN - 1)
        return err_set(e, ST_EFORMAT,
                       "%s: header lacks or mangles a key (width, height, channels 3, offset, "
                       "sigma, white_frames, dark_frames, nonuniformity_*, created, data_sha256)",
                       path);
    *offset = json_is_true(off);
    snprintf(f->created, sizeof f->created, "%s", created);
    struct err se;
    if (image_check_size(f->w, f->h, 3, NULL, &se))
        return err_set(e, ST_ERANGE, "%s: %s", path, se.msg);
    return ST_OK;
}

int flatfield_load(const char *path, struct flat_field **out, struct err *e)
{
    *out = NULL;
    struct flat_field hdr = {0}, *f = NULL;
    json_t *h = NULL;
    char line[HEADER_MAX];
    int rc, offset = 0;
    const char *hash = NULL;
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
    if (!fgets(line, sizeof line, fp) || !strchr(line, '\n')) {
        rc = err_set(e, ST_EFORMAT, "%s: not a flat-field file (no header line)", path);
        goto fail;
    }
    if ((rc = parse_header(path, line, &hdr, &offset, &hash, &h, e)))
        goto fail;
    if (!(f = flatfield_new(hdr.w, hdr.h, offset, e))) {
        rc = e->code;
        goto fail;
    }
    float *gain = f->gain, *off = f->offset;
    *f = hdr;
    f->gain = gain;
    f->offset = off;
    size_t n = values(f);
    if (fread(f->gain, sizeof(float), n, fp) != n ||
        (f->offset && fread(f->offset, sizeof(float), n, fp) != n) || fgetc(fp) != EOF) {
        rc = err_set(e, ST_EFORMAT, "%s: data is not the %s %dx%dx3 float32 the header says",
                     path, offset ? "two maps of" : "one map of", f->w, f->h);
        goto fail;
    }
    char got[SHA256_HEX_LEN];
    data_hash(f, got);
    if (strcmp(got, hash)) {
        rc = err_set(e, ST_EFORMAT, "%s: data does not match its data_sha256 (damaged file)", path);
        goto fail;
    }
    for (size_t i = 0; i < n; i++) {
        float g = f->gain[i], o = f->offset ? f->offset[i] : 0.0f;
        if (!(g > 0.0f && g <= FLATFIELD_MAX_GAIN) || !(o >= 0.0f && o <= 255.0f)) {
            rc = err_set(e, ST_ERANGE, "%s: pixel (%zu, %zu) has gain %g, offset %g "
                         "(allowed (0, %g] and [0, 255])", path, i / 3 % f->w, i / 3 / f->w,
                         g, o, FLATFIELD_MAX_GAIN);
            goto fail;
        }
    }
    *out = f;
    f = NULL;
fail:
    json_decref(h);
    flatfield_free(f);
    fclose(fp);
    return rc;
}

/* Round half up; below the dark level (negative) clamps to 0. */
static inline uint8_t to_byte(float v)
{
    v = v < 0.0f ? 0.0f : v + 0.5f;
    return v >= 255.0f ? 255 : (uint8_t)v;
}

int flatfield_apply(const struct flat_field *f, const struct image *in, struct image *out,
                    struct err *e)
{
    if (in->w != f->w || in->h != f->h || out->w != f->w || out->h != f->h ||
        out->channels != 3 || (in->channels != 1 && in->channels != 3))
        return err_set(e, ST_EINVAL, "flat field is %dx%d, frame is %dx%d", f->w, f->h, in->w,
                       in->h);
    const size_t n = (size_t)f->w * f->h * 3;
    const float *g = f->gain, *o = f->offset;
    uint8_t *dst = out->px;
    /* one flat loop per case so the compiler vectorises it */
    if (in->channels == 3 && o) {
        for (size_t i = 0; i < n; i++)
            dst[i] = to_byte(((float)in->px[i] - o[i]) * g[i]);
    } else if (in->channels == 3) {
        for (size_t i = 0; i < n; i++)
            dst[i] = to_byte((float)in->px[i] * g[i]);
    } else {
        for (size_t i = 0; i < n; i++)
            dst[i] = to_byte(((float)in->px[i / 3] - (o ? o[i] : 0.0f)) * g[i]);
    }
    return ST_OK;
}
