#include "recipever.h"

#include <ctype.h>
#include <errno.h>
#include <jansson.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <nettle/sha2.h>

#include "evidence.h"

/* The file and where its [product] version value lies. */
struct text {
    char *bytes;
    size_t len, value_at, value_len;
};

static int read_text(const char *path, struct text *t, struct err *e)
{
    memset(t, 0, sizeof t[0]);
    FILE *f = fopen(path, "rb");
    if (!f)
        return err_set(e, ST_EIO, "%s: cannot open: %s", path, strerror(errno));
    size_t cap = 4096;
    t->bytes = malloc(cap);
    for (size_t n; t->bytes && (n = fread(t->bytes + t->len, 1, cap - t->len, f)) > 0;) {
        t->len += n;
        if (t->len == cap) {
            char *b = cap < (1u << 24) ? realloc(t->bytes, cap *= 2) : NULL;
            if (!b) {
                free(t->bytes);
                t->bytes = NULL;
            }
            t->bytes = b;
        }
    }
    int bad = ferror(f);
    fclose(f);
    if (!t->bytes)
        return err_set(e, ST_ENOMEM, "%s: too large or out of memory", path);
    if (bad) {
        free(t->bytes);
        return err_set(e, ST_EIO, "%s: cannot read", path);
    }
    /* the same reading of sections and keys as the recipe's INI parser:
     * leading blanks skipped, ';' or '#' starts a comment line */
    int in_product = 0;
    for (size_t i = 0; i < t->len;) {
        size_t end = i;
        while (end < t->len && t->bytes[end] != '\n')
            end++;
        size_t p = i;
        while (p < end && (t->bytes[p] == ' ' || t->bytes[p] == '\t'))
            p++;
        if (p < end && t->bytes[p] == '[') {
            in_product = end - p >= 9 && !strncmp(t->bytes + p, "[product]", 9);
        } else if (in_product && end - p > 7 && !strncmp(t->bytes + p, "version", 7)) {
            size_t q = p + 7;
            while (q < end && (t->bytes[q] == ' ' || t->bytes[q] == '\t'))
                q++;
            if (q < end && t->bytes[q] == '=') {
                q++;
                while (q < end && (t->bytes[q] == ' ' || t->bytes[q] == '\t'))
                    q++;
                size_t v = q;
                while (v < end && isdigit((unsigned char)t->bytes[v]))
                    v++;
                if (v > q && v - q < 10) {
                    t->value_at = q;
                    t->value_len = v - q;
                    return ST_OK;
                }
            }
        }
        i = end + 1;
    }
    free(t->bytes);
    return err_set(e, ST_EFORMAT, "%s: no [product] version = N line", path);
}

static int text_version(const struct text *t)
{
    return atoi(t->bytes + t->value_at);   /* digits only, fewer than 10 */
}

static void content_hash(const struct text *t, char hex[SHA256_HEX_LEN])
{
    struct sha256_ctx c;
    uint8_t d[SHA256_DIGEST_SIZE];
    sha256_init(&c);
    sha256_update(&c, t->value_at, (const uint8_t *)t->bytes);
    sha256_update(&c, t->len - t->value_at - t->value_len,
                  (const uint8_t *)t->bytes + t->value_at + t->value_len);
    sha256_digest(&c, sizeof d, d);
    for (int i = 0; i < SHA256_DIGEST_SIZE; i++)
        snprintf(hex + 2 * i, 3, "%02x", d[i]);
}

static int record_path(const char *path, char *buf, size_t len, struct err *e)
{
    if ((size_t)snprintf(buf, len, "%s.version.json", path) >= len)
        return err_set(e, ST_ERANGE, "%s: path too long", path);
    return ST_OK;
}

static int read_record(const char *path, struct recipever *v, struct err *e)
{
    char rp[PATH_MAX];
    int rc = record_path(path, rp, sizeof rp, e);
    if (rc)
        return rc;
    FILE *f = fopen(rp, "rb");
    if (!f) {
        if (errno == ENOENT)
            return ST_OK;
        return err_set(e, ST_EIO, "%s: cannot open: %s", rp, strerror(errno));
    }
    json_error_t je;
    json_t *o = json_loadf(f, 0, &je);
    fclose(f);
    const char *h = json_string_value(json_object_get(o, "content_sha256"));
    const char *u = json_string_value(json_object_get(o, "saved_utc"));
    json_t *ver = json_object_get(o, "version");
    if (!o || json_integer_value(json_object_get(o, "format")) != 1 || !json_is_integer(ver) ||
        !h || strlen(h) != SHA256_HEX_LEN - 1) {
        json_decref(o);
        return err_set(e, ST_EFORMAT, "%s: not a recipe version record (format 1, version, "
                                      "content_sha256)", rp);
    }
    v->recorded = 1;
    v->recorded_version = (int)json_integer_value(ver);
    memcpy(v->recorded_sha256, h, SHA256_HEX_LEN);
    snprintf(v->saved_utc, sizeof v->saved_utc, "%s", u ? u : "");
    json_decref(o);
    return ST_OK;
}

int recipever_read(const char *path, struct recipever *v, struct err *e)
{
    memset(v, 0, sizeof *v);
    struct text t;
    int rc = read_text(path, &t, e);
    if (rc)
        return rc;
    v->version = text_version(&t);
    content_hash(&t, v->content_sha256);
    free(t.bytes);
    return read_record(path, v, e);
}

/* FILE's folder and name, for evidence_write's atomic replace. */
static int split_path(const char *path, char *dir, size_t dlen, const char **base)
{
    const char *slash = strrchr(path, '/');
    *base = slash ? slash + 1 : path;
    int n = slash ? snprintf(dir, dlen, "%.*s", (int)(slash - path), path)
                  : snprintf(dir, dlen, ".");
    if (slash == path)
        snprintf(dir, dlen, "/");
    return n < 0 || (size_t)n >= dlen;
}

static int write_record(const char *path, struct recipever *v, struct err *e)
{
    time_t now = time(NULL);
    struct tm tm;
    gmtime_r(&now, &tm);
    strftime(v->saved_utc, sizeof v->saved_utc, "%Y-%m-%dT%H:%M:%SZ", &tm);
    json_t *o = json_pack("{s:i,s:i,s:s,s:s}", "format", 1, "version", v->version,
                          "content_sha256", v->content_sha256, "saved_utc", v->saved_utc);
    char *s = o ? json_dumps(o, JSON_INDENT(2) | JSON_SORT_KEYS) : NULL;
    json_decref(o);
    char rp[PATH_MAX], dir[PATH_MAX];
    const char *base;
    int rc = !s ? err_set(e, ST_ENOMEM, "%s: out of memory", path) : record_path(path, rp, sizeof rp, e);
    if (!rc && split_path(rp, dir, sizeof dir, &base))
        rc = err_set(e, ST_ERANGE, "%s: path too long", rp);
    if (!rc)
        rc = evidence_write(log_io_default(), dir, base, s, strlen(s), 0, e);
    free(s);
    if (!rc) {
        v->recorded = 1;
        v->recorded_version = v->version;
        memcpy(v->recorded_sha256, v->content_sha256, SHA256_HEX_LEN);
    }
    return rc;
}

int recipever_save(const char *path, struct recipever *v, int *changed, struct err *e)
{
    *changed = 0;
    memset(v, 0, sizeof *v);
    struct text t;
    int rc = read_text(path, &t, e);
    if (rc)
        return rc;
    v->version = text_version(&t);
    content_hash(&t, v->content_sha256);
    if ((rc = read_record(path, v, e)))
        goto done;
    if (v->recorded && !strcmp(v->recorded_sha256, v->content_sha256))
        goto done;   /* unchanged: nothing written, the version stays */
    if (v->recorded) {
        int next = (v->version > v->recorded_version ? v->version : v->recorded_version) + 1;
        char num[16], dir[PATH_MAX];
        const char *base;
        int nlen = snprintf(num, sizeof num, "%d", next);
        size_t len = t.len - t.value_len + (size_t)nlen;
        char *out = malloc(len);
        if (!out) {
            rc = err_set(e, ST_ENOMEM, "%s: out of memory", path);
            goto done;
        }
        memcpy(out, t.bytes, t.value_at);
        memcpy(out + t.value_at, num, (size_t)nlen);
        memcpy(out + t.value_at + nlen, t.bytes + t.value_at + t.value_len,
               t.len - t.value_at - t.value_len);
        if (split_path(path, dir, sizeof dir, &base))
            rc = err_set(e, ST_ERANGE, "%s: path too long", path);
        else
            rc = evidence_write(log_io_default(), dir, base, out, len, 0, e);
        free(out);
        if (rc)
            goto done;
        v->version = next;
        *changed = 1;
    } else {
        v->first_save = 1;
    }
    rc = write_record(path, v, e);
done:
    free(t.bytes);
    return rc;
}

int recipever_check(const char *path, struct err *e)
{
    struct recipever v;
    int rc = recipever_read(path, &v, e);
    if (rc || !v.recorded || !strcmp(v.recorded_sha256, v.content_sha256))
        return rc;
    return err_set(e, ST_EFORMAT,
                   "%s: changed since version %d was saved (content SHA-256 %.12s..., saved "
                   "%.12s...); run `station recipe save %s` to make it version %d",
                   path, v.recorded_version, v.content_sha256, v.recorded_sha256, path,
                   (v.version > v.recorded_version ? v.version : v.recorded_version) + 1);
}
