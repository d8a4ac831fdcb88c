#include "model.h"

#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int model_meta_path(const char *model_path, char *buf, size_t len, struct err *e)
{
    int n = snprintf(buf, len, "%s.meta.json", model_path);
    if (n < 0 || (size_t)n >= len)
        return err_set(e, ST_ERANGE, "%s: path too long", model_path);
    return ST_OK;
}

static int features_signature(const struct feat_spec *spec, char hex[SHA256_HEX_LEN],
                              struct err *e)
{
    int n = feat_count(spec);
    /* a network's names carry its tensor's name, so allow long ones */
    size_t cap = (size_t)(n > 0 ? n : 0) * 192 + 1, len = 0;
    char *buf = malloc(cap);
    if (!buf)
        return err_set(e, ST_ENOMEM, "out of memory for %d feature names", n);
    for (int k = 0; k < n; k++) {
        char name[192];
        if (feat_name(spec, k, name, sizeof name)) {
            free(buf);
            return err_set(e, ST_ERANGE, "feature %d has no name of under %zu characters", k, sizeof name);
        }
        len += (size_t)snprintf(buf + len, cap - len, "%s\n", name);
    }
    sha256_hex_buffer(buf, len, hex);
    free(buf);
    return ST_OK;
}

int model_basis(const struct recipe *r, char buf[MODEL_BASIS_MAX], char hex[SHA256_HEX_LEN],
                struct err *e)
{
    char feats[SHA256_HEX_LEN];
    int rc = features_signature(&r->feat, feats, e);
    if (rc)
        return rc;
    size_t n = (size_t)snprintf(buf, MODEL_BASIS_MAX, "product: %s\nclasses:", r->product);
    for (int c = 0; c < r->nclasses && n < MODEL_BASIS_MAX; c++)
        n += (size_t)snprintf(buf + n, MODEL_BASIS_MAX - n, " %s", r->cls[c].name);
    if (n < MODEL_BASIS_MAX)
        n += (size_t)snprintf(buf + n, MODEL_BASIS_MAX - n,
                              "\nfeatures: %d, sha256 %s, normalise %s\n"
                              "classifier: rounds %d, depth %d, learning rate %.10g, seed %d, "
                              "early stop %d, samples per class %d, validation share %.10g\n",
                              feat_count(&r->feat), feats, r->feat.normalise ? "yes" : "no",
                              r->train.rounds, r->train.depth, r->train.eta, r->train.seed,
                              r->train.early_stop, r->samples_per_class, r->validation_fraction);
    if (n >= MODEL_BASIS_MAX)
        return err_set(e, ST_ERANGE, "%s: training basis too long", r->path);
    sha256_hex_buffer(buf, n, hex);
    return ST_OK;
}

int model_meta_from_recipe(const struct recipe *r, struct model_meta *m, struct err *e)
{
    memset(m, 0, sizeof *m);
    m->format = MODEL_META_FORMAT;
    m->ref_sharpness = m->ref_part_area_mm2 = -1;
    snprintf(m->product, sizeof m->product, "%s", r->product);
    m->recipe_version = r->version;
    m->nclasses = r->nclasses;
    for (int c = 0; c < r->nclasses; c++)
        snprintf(m->classes[c], sizeof m->classes[c], "%s", r->cls[c].name);
    m->nfeatures = feat_count(&r->feat);
    m->depth = r->train.depth;
    if (r->feat.cnn.on)
        snprintf(m->cnn_sha256, sizeof m->cnn_sha256, "%s", r->feat.cnn.sha256);
    int rc = features_signature(&r->feat, m->features_sha256, e);
    if (!rc)
        rc = model_basis(r, m->basis, m->basis_sha256, e);
    if (!rc)
        rc = sha256_hex_file(r->path, m->recipe_sha256, e);
    return rc;
}

int model_meta_save(const char *model_path, const struct model_meta *m, struct err *e)
{
    char path[PATH_MAX];
    int rc = model_meta_path(model_path, path, sizeof path, e);
    if (rc)
        return rc;
    json_t *classes = json_array(), *samples = json_object();
    for (int c = 0; c < m->nclasses; c++) {
        json_array_append_new(classes, json_string(m->classes[c]));
        json_object_set_new(samples, m->classes[c],
                            json_pack("{s:I,s:i,s:I}", "pixels", (json_int_t)m->samples[c],
                                      "images", m->images[c], "labelled",
                                      (json_int_t)m->labelled[c]));
    }
    json_t *o = json_pack("{s:i,s:s,s:i,s:s,s:s,s:i,s:o,s:o,s:i,s:i,s:f,s:s,s:{s:f,s:f,s:i}}",
                          "format",
                          m->format, "product", m->product, "recipe_version", m->recipe_version,
                          "model_sha256", m->model_sha256, "features_sha256",
                          m->features_sha256, "features", m->nfeatures, "classes", classes,
                          "training_samples", samples, "best_round", m->best_round, "depth",
                          m->depth, "validation_mlogloss", m->val_mlogloss, "trained_utc",
                          m->trained_utc, "references", "sharpness", m->ref_sharpness,
                          "part_area_mm2", m->ref_part_area_mm2, "frames", m->ref_frames);
    if (!o)
        return err_set(e, ST_ENOMEM, "%s: cannot build metadata", path);
    if (m->cnn_sha256[0])
        json_object_set_new(o, "cnn_sha256", json_string(m->cnn_sha256));
    if (m->format >= 3)
        json_object_update_new(o, json_pack("{s:s,s:s,s:s,s:f}", "recipe_sha256", m->recipe_sha256,
                                            "recipe_basis", m->basis, "recipe_basis_sha256",
                                            m->basis_sha256, "holdout_fraction", m->holdout));
    if (json_dump_file(o, path, JSON_INDENT(2) | JSON_SORT_KEYS) != 0)
        rc = err_set(e, ST_EIO, "%s: cannot write model metadata", path);
    json_decref(o);
    return rc;
}

static int copy_str(json_t *o, const char *key, char *dst, size_t len, const char *path,
                    struct err *e)
{
    const char *s = json_string_value(json_object_get(o, key));
    if (!s || strlen(s) >= len)
        return err_set(e, ST_EFORMAT, "%s: '%s' missing or too long", path, key);
    memcpy(dst, s, strlen(s) + 1);
    return ST_OK;
}

int model_meta_load(const char *model_path, struct model_meta *m, struct err *e)
{
    char path[PATH_MAX];
    int rc = model_meta_path(model_path, path, sizeof path, e);
    if (rc)
        return rc;
    memset(m, 0, sizeof *m);
    json_error_t je;
    json_t *o = json_load_file(path, 0, &je);
    if (!o)
        return err_set(e, ST_EFORMAT, "%s:%d: %s", path, je.line, je.text);
    json_t *fmt = json_object_get(o, "format");
    json_t *classes = json_object_get(o, "classes");
    if (!json_is_integer(fmt)) {
        rc = err_set(e, ST_EFORMAT, "%s: 'format' missing", path);
        goto done;
    }
    m->format = (int)json_integer_value(fmt);
    if (m->format > MODEL_META_FORMAT || m->format < 1) {
        rc = err_set(e, ST_EFORMAT, "%s: format %d is not supported (1..%d)", path, m->format,
                     MODEL_META_FORMAT);
        goto done;
    }
    if ((rc = copy_str(o, "product", m->product, sizeof m->product, path, e)) ||
        (rc = copy_str(o, "model_sha256", m->model_sha256, sizeof m->model_sha256, path, e)) ||
        (rc = copy_str(o, "features_sha256", m->features_sha256, sizeof m->features_sha256,
                       path, e)) ||
        (rc = copy_str(o, "trained_utc", m->trained_utc, sizeof m->trained_utc, path, e)))
        goto done;
    if (!json_is_array(classes) || json_array_size(classes) < 2 ||
        json_array_size(classes) > RECIPE_MAX_CLASSES) {
        rc = err_set(e, ST_EFORMAT, "%s: 'classes' must list 2..%d names", path,
                     RECIPE_MAX_CLASSES);
        goto done;
    }
    m->nclasses = (int)json_array_size(classes);
    json_t *samples = json_object_get(o, "training_samples");
    for (int c = 0; c < m->nclasses; c++) {
        const char *s = json_string_value(json_array_get(classes, (size_t)c));
        if (!s || strlen(s) >= sizeof m->classes[c]) {
            rc = err_set(e, ST_EFORMAT, "%s: class %d is not a short string", path, c);
            goto done;
        }
        memcpy(m->classes[c], s, strlen(s) + 1);
        json_t *sc = json_object_get(samples, s);
        m->samples[c] = (size_t)json_integer_value(json_object_get(sc, "pixels"));
        m->images[c] = (int)json_integer_value(json_object_get(sc, "images"));
        m->labelled[c] = (size_t)json_integer_value(json_object_get(sc, "labelled"));
    }
    const char *cs = json_string_value(json_object_get(o, "cnn_sha256"));
    if (cs && strlen(cs) != SHA256_HEX_LEN - 1) {
        rc = err_set(e, ST_EFORMAT, "%s: 'cnn_sha256' is not a SHA-256", path);
        goto done;
    }
    if (cs)
        memcpy(m->cnn_sha256, cs, SHA256_HEX_LEN);
    m->recipe_version = (int)json_integer_value(json_object_get(o, "recipe_version"));
    m->nfeatures = (int)json_integer_value(json_object_get(o, "features"));
    m->best_round = (int)json_integer_value(json_object_get(o, "best_round"));
    m->depth = (int)json_integer_value(json_object_get(o, "depth"));
    m->val_mlogloss = json_number_value(json_object_get(o, "validation_mlogloss"));
    json_t *refs = json_object_get(o, "references");
    m->ref_sharpness = refs ? json_number_value(json_object_get(refs, "sharpness")) : -1;
    m->ref_part_area_mm2 = refs ? json_number_value(json_object_get(refs, "part_area_mm2")) : -1;
    m->ref_frames = refs ? (int)json_integer_value(json_object_get(refs, "frames")) : 0;
    if (m->format >= 2 && (!json_is_number(json_object_get(refs, "sharpness")) ||
                           !json_is_number(json_object_get(refs, "part_area_mm2")))) {
        rc = err_set(e, ST_EFORMAT, "%s: 'references' missing or not numbers", path);
        goto done;
    }
    if (m->format >= 3 &&
        ((rc = copy_str(o, "recipe_sha256", m->recipe_sha256, sizeof m->recipe_sha256, path, e)) ||
         (rc = copy_str(o, "recipe_basis", m->basis, sizeof m->basis, path, e)) ||
         (rc = copy_str(o, "recipe_basis_sha256", m->basis_sha256, sizeof m->basis_sha256, path,
                        e))))
        goto done;
    m->holdout = json_number_value(json_object_get(o, "holdout_fraction"));
done:
    json_decref(o);
    return rc;
}

/* The first line where two basis texts differ, as "a' at training, recipe says 'b'". */
static void basis_difference(const char *had, const char *want, char *out, size_t len)
{
    while (*had || *want) {
        size_t a = strcspn(had, "\n"), b = strcspn(want, "\n");
        if (a != b || strncmp(had, want, a) != 0) {
            snprintf(out, len, "'%.*s' at training, the recipe now gives '%.*s'", (int)a, had,
                     (int)b, want);
            return;
        }
        had += a + (had[a] == '\n');
        want += b + (want[b] == '\n');
    }
    snprintf(out, len, "the basis hashes differ");
}

int model_check(const struct recipe *r, struct model_meta *m, struct err *e)
{
    int rc = model_meta_load(r->model_path, m, e);
    if (rc)
        return rc;
    struct model_meta want;
    if ((rc = model_meta_from_recipe(r, &want, e)))
        return rc;
    if (strcmp(m->product, want.product) != 0)
        return err_set(e, ST_EFORMAT, "%s: model was trained for product '%s', recipe is '%s'",
                       r->model_path, m->product, want.product);
    if (m->nclasses != want.nclasses)
        return err_set(e, ST_EFORMAT, "%s: model has %d classes, recipe %s has %d",
                       r->model_path, m->nclasses, r->path, want.nclasses);
    for (int c = 0; c < m->nclasses; c++)
        if (strcmp(m->classes[c], want.classes[c]) != 0)
            return err_set(e, ST_EFORMAT, "%s: model class %d is '%s', recipe says '%s'",
                           r->model_path, c, m->classes[c], want.classes[c]);
    if (strcmp(m->features_sha256, want.features_sha256) != 0)
        return err_set(e, ST_EFORMAT,
                       "%s: model was trained on other features than recipe %s selects; retrain",
                       r->model_path, r->path);
    if (strcmp(m->cnn_sha256, want.cnn_sha256) != 0)
        return err_set(e, ST_EFORMAT, "%s: trained with network %s of SHA-256 %.12s..., recipe %s now reads "
                       "%.12s...; the network changed, retrain", r->model_path, r->feat.cnn.model,
                       m->cnn_sha256[0] ? m->cnn_sha256 : "(none)", r->path,
                       want.cnn_sha256[0] ? want.cnn_sha256 : "(none)");
    if (m->format >= 3 && strcmp(m->basis_sha256, want.basis_sha256) != 0) {
        char why[400];
        basis_difference(m->basis, want.basis, why, sizeof why);
        return err_set(e, ST_EFORMAT,
                       "%s does not belong to recipe %s: %s; train it again (station train)",
                       r->model_path, r->path, why);
    }
    char hex[SHA256_HEX_LEN];
    if ((rc = sha256_hex_file(r->model_path, hex, e)))
        return rc;
    if (strcmp(hex, m->model_sha256) != 0)
        return err_set(e, ST_EFORMAT,
                       "%s: SHA-256 %.12s... differs from %.12s... recorded at training; the "
                       "model file was changed",
                       r->model_path, hex, m->model_sha256);
    return ST_OK;
}
