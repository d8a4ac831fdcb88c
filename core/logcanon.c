#include "logcanon.h"

#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "judge.h"

/* A growing text; on allocation failure ok drops to 0 and stays there. */
struct text {
    char *s;
    size_t len, cap;
    int ok;
};

static void put(struct text *t, const char *p, size_t n)
{
    if (!t->ok)
        return;
    if (n + 1 > t->cap - t->len) {
        size_t cap = t->cap ? t->cap : 1024;
        while (cap - t->len < n + 1)
            cap *= 2;
        char *s = realloc(t->s, cap);
        if (!s) {
            t->ok = 0;
            return;
        }
        t->s = s;
        t->cap = cap;
    }
    memcpy(t->s + t->len, p, n);
    t->len += n;
    t->s[t->len] = '\0';
}

/* key=value\n with the value escaped. */
static void field(struct text *t, const char *key, const char *v)
{
    put(t, key, strlen(key));
    put(t, "=", 1);
    for (const char *p = v ? v : ""; *p; p++) {
        if (*p == '\\')
            put(t, "\\\\", 2);
        else if (*p == '\n')
            put(t, "\\n", 2);
        else if (*p == '\r')
            put(t, "\\r", 2);
        else
            put(t, p, 1);
    }
    put(t, "\n", 1);
}

static void field_int(struct text *t, const char *key, int64_t v)
{
    char buf[32];
    snprintf(buf, sizeof buf, "%" PRId64, v);
    field(t, key, buf);
}

static char *finish(struct text *t)
{
    if (t->ok)
        return t->s;
    free(t->s);
    return NULL;
}

char *logcanon_record(const struct log_record *r)
{
    struct text t = { .ok = 1 };
    put(&t, "station-log record 1\n", 21);
    field_int(&t, "seq", r->seq);
    field(&t, "utc", r->utc);
    field(&t, "station", r->station);
    field(&t, "operator", r->operator_id);
    field(&t, "serial", r->serial);
    field(&t, "recipe_id", r->recipe_id);
    field_int(&t, "recipe_version", r->recipe_version);
    field(&t, "recipe_sha256", r->recipe_sha256);
    field(&t, "model_sha256", r->model_sha256);
    field(&t, "scale_id", r->scale_id);
    field(&t, "verdict", judge_verdict_name(r->verdict));
    field(&t, "reasons", r->reasons_json);
    field(&t, "regions", r->regions_json);
    field(&t, "camera", r->camera_json);
    for (int i = 0; i < r->nevidence; i++) {
        const struct log_evidence *v = &r->ev[i];
        char line[LOG_NAME_MAX + 128];
        snprintf(line, sizeof line, "%s %s %s %" PRId64, v->kind, v->name, v->sha256, v->bytes);
        field(&t, "evidence", line);
    }
    field(&t, "prev", r->prev_hash);
    return finish(&t);
}

char *logcanon_disposition(const struct log_disposition *d, const char *record_hash)
{
    struct text t = { .ok = 1 };
    put(&t, "station-log disposition 1\n", 26);
    field_int(&t, "dseq", d->dseq);
    field_int(&t, "record_seq", d->record_seq);
    field(&t, "record_hash", record_hash);
    field(&t, "utc", d->utc);
    field(&t, "auditor", d->auditor);
    field(&t, "disposition", log_disp_name(d->disp));
    field(&t, "comment", d->comment);
    field(&t, "prev", d->prev_hash);
    return finish(&t);
}

static int hash_text(char *s, char hex[SHA256_HEX_LEN], struct err *e)
{
    if (!s)
        return err_set(e, ST_ENOMEM, "log: out of memory building a canonical form");
    sha256_hex_buffer(s, strlen(s), hex);
    free(s);
    return ST_OK;
}

int logcanon_record_hash(const struct log_record *r, char hex[SHA256_HEX_LEN], struct err *e)
{
    return hash_text(logcanon_record(r), hex, e);
}

int logcanon_disposition_hash(const struct log_disposition *d, const char *record_hash,
                              char hex[SHA256_HEX_LEN], struct err *e)
{
    return hash_text(logcanon_disposition(d, record_hash), hex, e);
}

int logcanon_verification_hash(const struct log_verification *v, char hex[SHA256_HEX_LEN],
                               struct err *e)
{
    struct text t = { .ok = 1 };
    put(&t, "station-log verification 1\n", 27);
    field_int(&t, "vseq", v->vseq);
    field(&t, "utc", v->utc);
    field(&t, "station", v->station);
    field(&t, "recipe_id", v->recipe_id);
    field_int(&t, "recipe_version", v->recipe_version);
    field(&t, "recipe_sha256", v->recipe_sha256);
    field(&t, "model_sha256", v->model_sha256);
    field(&t, "outcome", v->passed ? "passed" : "failed");
    field(&t, "masters", v->masters_json);
    field(&t, "prev", v->prev_hash);
    return hash_text(finish(&t), hex, e);
}
