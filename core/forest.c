/* forest: loading a saved model into the layout of forestlayout.h (the
 * breadth-first node arrays, and the wide and rank trees where the CPU
 * and the depth allow them); the walks are in forestwalk.c. */
#include "forest.h"

#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <jansson.h>

#include "forestlayout.h"

static int bad(struct err *e, const char *path, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static int bad(struct err *e, const char *path, const char *fmt, ...)
{
    char buf[400];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    return err_set(e, ST_EFORMAT, "%s: %s", path, buf);
}

/* Walks a dotted path of object keys; NULL when any step is missing. */
static json_t *dig(json_t *j, const char *keys)
{
    char key[64];
    while (j && *keys) {
        size_t len = strcspn(keys, ".");
        if (len >= sizeof key)
            return NULL;
        memcpy(key, keys, len);
        key[len] = '\0';
        j = json_object_get(j, key);
        keys += len + (keys[len] == '.');
    }
    return j;
}

/* XGBoost writes model parameters as JSON strings ("3", "5E-1"). */
static int param_long(const char *path, json_t *root, const char *keys, long *out, struct err *e)
{
    const char *s = json_string_value(dig(root, keys));
    if (!s)
        return bad(e, path, "%s is missing or not a string", keys);
    char *end;
    long v = strtol(s, &end, 10);
    if (end == s || *end)
        return bad(e, path, "%s \"%s\" is not an integer", keys, s);
    *out = v;
    return ST_OK;
}

static int param_float(const char *path, json_t *root, const char *keys, float *out,
                       struct err *e)
{
    const char *s = json_string_value(dig(root, keys));
    if (!s)
        return bad(e, path, "%s is missing or not a string", keys);
    char *end;
    float v = strtof(s, &end);
    if (end == s || *end || !isfinite(v))
        return bad(e, path, "%s \"%s\" is not a finite number", keys, s);
    *out = v;
    return ST_OK;
}

static int param_name(const char *path, json_t *root, const char *keys, const char *want,
                      struct err *e)
{
    const char *s = json_string_value(dig(root, keys));
    if (!s || strcmp(s, want) != 0)
        return bad(e, path, "%s is \"%s\", only \"%s\" is supported", keys, s ? s : "(missing)",
                   want);
    return ST_OK;
}

/* The arrays of one tree, all num_nodes long. */
struct jtree {
    size_t nn;
    json_t *lc, *rc, *si, *sc, *dl, *st;
};

static int tree_arrays(const char *path, json_t *jt, int t, struct jtree *a, struct err *e)
{
    static const char *const names[] = {"left_children", "right_children", "split_indices",
                                        "split_conditions", "default_left"};
    json_t **dst[] = {&a->lc, &a->rc, &a->si, &a->sc, &a->dl};
    long nn = 0;
    int rc = param_long(path, jt, "tree_param.num_nodes", &nn, e);
    if (rc != ST_OK)
        return rc;
    if (nn < 1 || nn > MAX_TREE_NODES)
        return bad(e, path, "tree %d has %ld nodes, outside 1..%d", t, nn, MAX_TREE_NODES);
    a->nn = (size_t)nn;
    for (size_t k = 0; k < sizeof names / sizeof names[0]; k++) {
        json_t *arr = json_object_get(jt, names[k]);
        if (!json_is_array(arr) || json_array_size(arr) != a->nn)
            return bad(e, path, "tree %d: %s is missing or not %zu long", t, names[k], a->nn);
        *dst[k] = arr;
    }
    /* Categorical splits follow other rules; split_type is absent in
     * models written before categorical support, which are numeric. */
    a->st = json_object_get(jt, "split_type");
    if (a->st && (!json_is_array(a->st) || json_array_size(a->st) != a->nn))
        return bad(e, path, "tree %d: split_type is not %zu long", t, a->nn);
    return ST_OK;
}

static int int_at(json_t *arr, size_t i, long long *v)
{
    json_t *x = json_array_get(arr, i);
    if (json_is_integer(x)) {
        *v = json_integer_value(x);
        return 1;
    }
    if (json_is_boolean(x)) {
        *v = json_is_true(x);
        return 1;
    }
    return 0;
}

/* Per-load scratch for the breadth-first relabelling of one tree. */
struct bfs {
    uint32_t *queue; /* original node ids in new order */
    uint32_t *seen;  /* tree number + 1 that reached the node (no clearing per tree) */
    uint16_t *depth;
};

/* Appends tree t, relabelled breadth-first, at f->nnodes.  Split offsets
 * are stored as (feature << 1 | default_left) until the slots are known. */
static int tree_add(struct forest *f, const char *path, const struct jtree *a, int t,
                    struct bfs *q, struct err *e)
{
    size_t base = f->nnodes, head = 0, tail = 1;
    unsigned maxd = 0;
    q->queue[0] = 0;
    q->seen[0] = (uint32_t)t + 1;
    q->depth[0] = 0;
    while (head < tail) {
        size_t id = q->queue[head], nid = base + head;
        unsigned d = q->depth[head];
        head++;
        long long l, r, feat, dl, type = 0;
        if (!int_at(a->lc, id, &l) || !int_at(a->rc, id, &r))
            return bad(e, path, "tree %d node %zu: child is not an integer", t, id);
        /* Checked as a double: converting one beyond float range is undefined. */
        double c = json_number_value(json_array_get(a->sc, id));
        if (!json_is_number(json_array_get(a->sc, id)) || !(fabs(c) <= FLT_MAX))
            return bad(e, path, "tree %d node %zu: split_conditions is not a finite number", t, id);
        if (l == -1 && r == -1) {
            f->node[nid] = (uint64_t)LEAF_KEY << 32;
            f->left[nid] = (uint32_t)(nid - base);
            f->val[nid] = (float)c;
            continue;
        }
        if (l < 0 || r < 0 || (size_t)l >= a->nn || (size_t)r >= a->nn)
            return bad(e, path, "tree %d node %zu: children %lld, %lld outside 0..%zu", t, id, l, r,
                       a->nn - 1);
        /* A node reached twice means a cycle or shared subtree: not a tree. */
        if (q->seen[l] == (uint32_t)t + 1 || q->seen[r] == (uint32_t)t + 1 || l == r)
            return bad(e, path, "tree %d node %zu: child %lld or %lld reached twice", t, id, l, r);
        if (!int_at(a->si, id, &feat) || feat < 0 || feat >= MAX_FEATURES)
            return bad(e, path, "tree %d node %zu: split index outside 0..%d", t, id,
                       MAX_FEATURES - 1);
        if (!int_at(a->dl, id, &dl) || (dl != 0 && dl != 1))
            return bad(e, path, "tree %d node %zu: default_left is not 0 or 1", t, id);
        if (a->st && (!int_at(a->st, id, &type) || type != 0))
            return bad(e, path, "tree %d node %zu: categorical split not supported", t, id);
        if (d + 1 > MAX_DEPTH)
            return bad(e, path, "tree %d is deeper than %d", t, MAX_DEPTH);
        f->node[nid] = (uint64_t)float_key((float)c) << 32 | (uint64_t)(feat << 1 | dl);
        f->left[nid] = (uint32_t)tail;
        f->val[nid] = 0.0f;
        if (feat + 1 > f->nfeatures)
            f->nfeatures = (int)feat + 1;
        q->queue[tail] = (uint32_t)l;
        q->queue[tail + 1] = (uint32_t)r;
        q->seen[l] = q->seen[r] = (uint32_t)t + 1;
        q->depth[tail] = q->depth[tail + 1] = (uint16_t)(d + 1);
        tail += 2;
        if (d + 1 > maxd)
            maxd = d + 1;
    }
    f->nnodes += tail;
    f->trees[t].first = (uint32_t)base;
    f->trees[t].depth = (uint16_t)maxd;
    if ((int)maxd > f->max_depth)
        f->max_depth = (int)maxd;
    return ST_OK;
}

/* A class's margin is base_score plus one leaf per tree of that class, summed
 * in float: leaves that are each finite can still sum past FLT_MAX, and an
 * infinite margin makes softmax NaN, a probability no gate can judge (found
 * by the property tests/fuzz/fuzz_forest checks; its input is in
 * tests/fuzz/regress/forest/).  Bounded by the sum of each tree's
 * largest |leaf|, in double. */
static int check_margins(const struct forest *f, const char *path, struct err *e)
{
    double bound[MAX_CLASSES];
    for (int k = 0; k < f->nclasses; k++)
        bound[k] = fabs((double)f->base_score);
    for (int t = 0; t < f->ntrees; t++) {
        size_t end = t + 1 < f->ntrees ? f->trees[t + 1].first : f->nnodes;
        double most = 0;
        for (size_t i = f->trees[t].first; i < end; i++)
            if (is_leaf(f->node[i]) && fabs((double)f->val[i]) > most)
                most = fabs((double)f->val[i]);
        bound[f->trees[t].cls] += most;
    }
    for (int k = 0; k < f->nclasses; k++)
        if (!(bound[k] <= FLT_MAX / 2))
            return bad(e, path, "class %d: leaf values can sum to %g, beyond %g", k, bound[k],
                       FLT_MAX / 2);
    return ST_OK;
}

/* Numbers the (feature, default direction) pairs in feature order so the
 * per-block copy reads each row front to back, then turns the keys stored
 * by tree_add into table offsets. */
static int assign_slots(struct forest *f, const char *path, struct err *e)
{
    static const uint16_t unused = UINT16_MAX;
    uint16_t slot_of[2 * MAX_FEATURES];
    for (size_t k = 0; k < 2 * MAX_FEATURES; k++)
        slot_of[k] = unused;
    for (size_t i = 0; i < f->nnodes; i++)
        if (!is_leaf(f->node[i]))
            slot_of[(uint32_t)f->node[i]] = 0;
    int s = 0;
    for (size_t k = 0; k < 2 * MAX_FEATURES; k++) {
        if (slot_of[k] == unused)
            continue;
        if (s == MAX_SLOTS)
            return bad(e, path, "model splits on more than %d (feature, default) pairs", MAX_SLOTS);
        f->slot_feat[s] = (uint16_t)(k >> 1);
        f->slot_nan[s] = (k & 1) ? -INFINITY : INFINITY;
        slot_of[k] = (uint16_t)s++;
    }
    f->nslots = s;
    /* the most rows whose keys fit the table, in whole registers of the
     * widest walk they allow (64 rows of ranks, 16 of keys, 8 scalar) */
    int block = s ? SCRATCH_KEYS / s : MAX_BLOCK;
    int unit = block >= RANK_LANES ? RANK_LANES : block >= WIDE_LANES ? WIDE_LANES : GROUP;
    block = block / unit * unit;
    f->block = block < MAX_BLOCK ? block : MAX_BLOCK;
    for (size_t i = 0; i < f->nnodes; i++)
        if (!is_leaf(f->node[i]))
            f->node[i] = (f->node[i] >> 32 << 32) |
                         (uint64_t)slot_of[(uint32_t)f->node[i]] * (uint64_t)f->block;
    return ST_OK;
}

/* Where level d's node n of a wide tree lies in its off and key arrays. */
static uint32_t wide_at(int d, uint32_t n) { return (d < 5 ? 16u * (uint32_t)d : 80u) + n; }

static void wide_fill(const struct forest *f, size_t base, size_t nid, int d, int depth,
                      uint32_t pos, struct wide_tree *w)
{
    uint64_t node = f->node[nid];
    if (d == depth) {
        w->val[pos] = f->val[nid];
        return;
    }
    uint32_t at = wide_at(d, pos);
    if (is_leaf(node)) {
        /* key 0: every input key is >= 0, so the walk goes right and meets
         * this leaf's value at the bottom whichever way */
        w->off[at] = 0;
        w->key[at] = 0;
        wide_fill(f, base, nid, d + 1, depth, 2 * pos, w);
        wide_fill(f, base, nid, d + 1, depth, 2 * pos + 1, w);
        return;
    }
    w->off[at] = (uint32_t)node;
    w->key[at] = (uint32_t)(node >> 32);
    size_t l = base + f->left[nid];
    wide_fill(f, base, l, d + 1, depth, 2 * pos, w);
    wide_fill(f, base, l + 1, d + 1, depth, 2 * pos + 1, w);
}

static int wide_build(struct forest *f, const char *path, struct err *e)
{
    __builtin_cpu_init();
    if (!__builtin_cpu_supports("avx512f") || f->max_depth > WIDE_DEPTH ||
        f->block % WIDE_LANES != 0 || f->ntrees == 0)
        return ST_OK;
    f->wide = aligned_alloc(64, (size_t)f->ntrees * sizeof *f->wide);
    if (!f->wide)
        return err_set(e, ST_ENOMEM, "%s: out of memory for the model", path);
    memset(f->wide, 0, (size_t)f->ntrees * sizeof *f->wide);
    for (int t = 0; t < f->ntrees; t++)
        wide_fill(f, f->trees[t].first, f->trees[t].first, 0, f->trees[t].depth, 0,
                  &f->wide[t]);
    f->walk = WALK_WIDE;
    return ST_OK;
}

static int cmp_u64(const void *a, const void *b)
{
    uint64_t x = *(const uint64_t *)a, y = *(const uint64_t *)b;
    return x < y ? -1 : x > y;
}

/* The slots' sorted distinct split keys into f->cuts: 1 when done, 0 when a
 * slot has more than RANK_CUTS values or memory ran out (no rank walk
 * then). */
static int rank_cuts_build(struct forest *f)
{
    size_t n = 0;
    uint64_t *pairs = malloc((f->nnodes + 1) * sizeof *pairs);
    if (!pairs)
        return 0;
    for (size_t i = 0; i < f->nnodes; i++)
        if (!is_leaf(f->node[i]))
            pairs[n++] = (uint64_t)((uint32_t)f->node[i] / (uint32_t)f->block) << 32 | (f->node[i] >> 32);
    qsort(pairs, n, sizeof *pairs, cmp_u64);
    uint32_t sorted[RANK_CUTS + 1];
    size_t i = 0;
    int ok = 1;
    for (int sl = 0; sl < f->nslots && ok; sl++) {
        int m = 0;
        for (; i < n && pairs[i] >> 32 == (uint64_t)sl; i++) {
            uint32_t k = (uint32_t)pairs[i];
            if (m == 0 || sorted[m - 1] != k) {
                if (m == RANK_CUTS) {
                    ok = 0;
                    break;
                }
                sorted[m++] = k;
            }
        }
        for (int j = m; j <= RANK_CUTS; j++)
            sorted[j] = UINT32_MAX;
        /* level L's value j is the search's pivot after L halvings:
         * sorted[(2j + 1) * 2^(7 - L) - 1] */
        uint32_t *lv = f->cuts[sl].lv;
        for (int L = 0; L < 8; L++)
            for (int j = 0; j < 1 << L; j++)
                lv[RANK_LEVEL(L) + j] = sorted[((2 * j + 1) << (7 - L)) - 1];
    }
    free(pairs);
    return ok;
}

/* The rank walk: on processors with AVX-512 BW and VBMI, for trees no
 * deeper than 6 and slots of at most RANK_CUTS split values. */
static void rank_build(struct forest *f)
{
    if (!__builtin_cpu_supports("avx512bw") || !__builtin_cpu_supports("avx512vbmi") ||
        f->max_depth > RANK_DEPTH || f->block % RANK_LANES != 0 || f->ntrees == 0 ||
        f->nslots == 0)
        return;
    f->cuts = aligned_alloc(64, (size_t)f->nslots * sizeof *f->cuts);
    f->rank = aligned_alloc(64, (size_t)f->ntrees * sizeof *f->rank);
    struct wide_tree *w = aligned_alloc(64, sizeof *w);
    int ok = 0;
    if (f->cuts && f->rank && w) {
        /* whole registers are loaded, unused lanes included */
        memset(f->cuts, 0xff, (size_t)f->nslots * sizeof *f->cuts);
        ok = rank_cuts_build(f);
    }
    for (int t = 0; t < f->ntrees && ok == 1; t++) {
        /* the complete tree at depth 6, then its keys as ranks */
        memset(w, 0, sizeof *w);
        wide_fill(f, f->trees[t].first, f->trees[t].first, 0, RANK_DEPTH, 0, w);
        struct rank_tree *rt = &f->rank[t];
        memset(rt, 0, sizeof *rt);
        for (int d = 0; d < RANK_DEPTH; d++)
            for (int nn = 0; nn < 1 << d; nn++) {
                uint32_t at = wide_at(d, (uint32_t)nn);
                /* x >= split iff rank(x) >= rank(split): the split is
                 * among the values rank(x) counts; key 0 (padding) stays
                 * 0, which every rank reaches */
                rt->off[(1 << d) - 1 + nn] = w->off[at];
                rt->key[d][nn] = w->key[at] ? (uint8_t)rank_of(&f->cuts[w->off[at] / (uint32_t)f->block],
                                                               w->key[at])
                                            : 0;
            }
        memcpy(rt->val, w->val, sizeof rt->val);
    }
    free(w);
    if (ok == 1) {
        f->walk = WALK_RANK;
        return;
    }
    /* optional: without memory for it, or past its limits, the wide walk */
    free(f->cuts);
    free(f->rank);
    f->cuts = NULL;
    f->rank = NULL;
}

static int check_tree_info(struct forest *f, const char *path, json_t *info, struct err *e)
{
    int count[MAX_CLASSES] = {0};
    for (int t = 0; t < f->ntrees; t++) {
        long long c;
        if (!int_at(info, (size_t)t, &c) || c < 0 || c >= f->nclasses)
            return bad(e, path, "tree_info[%d] is not a class 0..%d", t, f->nclasses - 1);
        f->trees[t].cls = (uint16_t)c;
        count[c]++;
    }
    for (int k = 1; k < f->nclasses; k++)
        if (count[k] != count[0])
            return bad(e, path, "class %d has %d trees, class 0 has %d", k, count[k], count[0]);
    return ST_OK;
}

static int load_trees(struct forest *f, const char *path, json_t *jtrees, struct err *e)
{
    struct jtree *a = calloc((size_t)f->ntrees + 1, sizeof *a);
    struct bfs q = {0};
    int rc = ST_ENOMEM;
    if (!a)
        goto nomem;
    size_t total = 0, maxnn = 0;
    for (int t = 0; t < f->ntrees; t++) {
        json_t *jt = json_array_get(jtrees, (size_t)t);
        if (!json_is_object(jt)) {
            rc = bad(e, path, "tree %d is not an object", t);
            goto fail;
        }
        rc = tree_arrays(path, jt, t, &a[t], e);
        if (rc != ST_OK)
            goto fail;
        total += a[t].nn;
        if (total > MAX_NODES) {
            rc = bad(e, path, "model has more than %d nodes", MAX_NODES);
            goto fail;
        }
        if (a[t].nn > maxnn)
            maxnn = a[t].nn;
    }
    rc = ST_ENOMEM;
    /* +1: a model of no trees still gets valid (unused) pointers. */
    f->node = calloc(total + 1, sizeof *f->node);
    f->left = calloc(total + 1, sizeof *f->left);
    f->val = calloc(total + 1, sizeof *f->val);
    q.queue = calloc(maxnn + 1, sizeof *q.queue);
    q.seen = calloc(maxnn + 1, sizeof *q.seen);
    q.depth = calloc(maxnn + 1, sizeof *q.depth);
    if (!f->node || !f->left || !f->val || !q.queue || !q.seen || !q.depth)
        goto nomem;
    for (int t = 0; t < f->ntrees; t++) {
        rc = tree_add(f, path, &a[t], t, &q, e);
        if (rc != ST_OK)
            goto fail;
    }
    if ((rc = check_margins(f, path, e)) == ST_OK && (rc = assign_slots(f, path, e)) == ST_OK &&
        (rc = wide_build(f, path, e)) == ST_OK)
        rank_build(f);
    goto fail;
nomem:
    rc = err_set(e, ST_ENOMEM, "%s: out of memory for the model", path);
fail:
    free(q.depth);
    free(q.seen);
    free(q.queue);
    free(a);
    return rc;
}

int forest_load(const char *json_path, struct forest **out, struct err *e)
{
    const char *path = json_path;
    *out = NULL;
    json_error_t jerr;
    json_t *root = json_load_file(path, JSON_REJECT_DUPLICATES, &jerr);
    if (!root) {
        if (json_error_code(&jerr) == json_error_cannot_open_file)
            return err_set(e, ST_EIO, "%s: %s", path, jerr.text);
        return err_set(e, ST_EFORMAT, "%s:%d: %s", path, jerr.line, jerr.text);
    }
    struct forest *f = calloc(1, sizeof *f);
    int rc;
    if (!f) {
        rc = err_set(e, ST_ENOMEM, "%s: out of memory for the model", path);
        goto fail;
    }
    json_t *learner = json_object_get(root, "learner");
    long ncls, ntrees;
    if ((rc = param_name(path, learner, "objective.name", "multi:softprob", e)) ||
        (rc = param_name(path, learner, "gradient_booster.name", "gbtree", e)) ||
        (rc = param_long(path, learner, "learner_model_param.num_class", &ncls, e)) ||
        (rc = param_float(path, learner, "learner_model_param.base_score", &f->base_score, e)) ||
        (rc = param_long(path, learner, "gradient_booster.model.gbtree_model_param.num_trees",
                         &ntrees, e)))
        goto fail;
    if (ncls < 2 || ncls > MAX_CLASSES) {
        rc = bad(e, path, "num_class %ld outside 2..%d", ncls, MAX_CLASSES);
        goto fail;
    }
    json_t *jtrees = dig(learner, "gradient_booster.model.trees");
    json_t *info = dig(learner, "gradient_booster.model.tree_info");
    if (!json_is_array(jtrees) || !json_is_array(info) || ntrees < 0 || ntrees > MAX_NODES ||
        json_array_size(jtrees) != (size_t)ntrees || json_array_size(info) != (size_t)ntrees) {
        rc = bad(e, path, "trees and tree_info do not both hold num_trees = %ld entries", ntrees);
        goto fail;
    }
    f->nclasses = (int)ncls;
    f->ntrees = (int)ntrees;
    f->trees = calloc((size_t)ntrees + 1, sizeof *f->trees);
    if (!f->trees) {
        rc = err_set(e, ST_ENOMEM, "%s: out of memory for the model", path);
        goto fail;
    }
    if ((rc = check_tree_info(f, path, info, e)) || (rc = load_trees(f, path, jtrees, e)))
        goto fail;
    json_decref(root);
    *out = f;
    return ST_OK;
fail:
    forest_free(f);
    json_decref(root);
    return rc;
}

void forest_free(struct forest *f)
{
    if (!f)
        return;
    free(f->trees);
    free(f->node);
    free(f->left);
    free(f->val);
    free(f->wide);
    free(f->rank);
    free(f->cuts);
    free(f);
}

int forest_nclasses(const struct forest *f) { return f->nclasses; }
int forest_nfeatures(const struct forest *f) { return f->nfeatures; }
int forest_ntrees(const struct forest *f) { return f->ntrees; }
int forest_max_depth(const struct forest *f) { return f->max_depth; }
static const char *const walk_names[] = {"scalar", "wide", "rank"};

const char *forest_walk(const struct forest *f) { return walk_names[f->walk]; }

int forest_use_walk(struct forest *f, const char *walk)
{
    for (int k = WALK_SCALAR; k <= WALK_RANK; k++)
        if (!strcmp(walk, walk_names[k])) {
            if ((k == WALK_WIDE && !f->wide) || (k == WALK_RANK && !f->rank))
                return ST_EINVAL;
            f->walk = (enum walk)k;
            return ST_OK;
        }
    return ST_EINVAL;
}
