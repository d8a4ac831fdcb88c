#include "forest.h"

#include <float.h>
#include <math.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <immintrin.h>
#include <jansson.h>

/* Layout.  Each tree is relabelled breadth-first so that the two children
 * of a node are adjacent: right = left + 1.  A node is a 64-bit word (input
 * offset in the low half, split key in the high half) plus its left child
 * and leaf value in parallel arrays, so a walk step is three loads (word,
 * input, left child), a shift and an add-with-carry of the compare.
 * A leaf points to itself with key UINT32_MAX, which no input key reaches,
 * so every row of a tree takes exactly `depth` steps and the walk has no
 * branch.
 *
 * Keys.  Floats are compared as unsigned integers: key(v) flips all bits of
 * a negative float and sets the sign bit of a positive one, which orders
 * keys as the floats, once -0 is made +0 (they compare equal as floats).
 * Splits and inputs alike become keys, so the compare needs no float
 * register and the split travels in the same load as the offset.
 *
 * Missing values.  XGBoost sends NaN to default_left and otherwise goes
 * right iff !(x < split).  Rows are copied per block into a scratch
 * "slot" table with one column per (feature, default direction) pair the
 * model uses: NaN becomes -inf in a default-left column and +inf in a
 * default-right one.  With finite splits, (x' >= split) then reproduces
 * XGBoost's choice for every x, NaN included, with no test for NaN in the
 * walk.  The table is column-major (slot * block + row) so that the offset
 * stored in a node is the same for every row of the block and a row of a
 * group of GROUP rows is a constant displacement.
 *
 * Blocks: trees outer, rows inner, so a tree's nodes stay in L1 while a
 * block of rows walks it; GROUP rows walk together so their independent
 * load chains overlap.  Margins are summed per class in tree order in
 * float, the order XGBoost's CPU predictor uses, so the sums agree
 * bitwise.
 *
 * Wide walk.  On a processor with AVX-512 and for trees no deeper than
 * WIDE_DEPTH, each tree is also stored as a complete tree, level by level
 * (a leaf above the bottom becomes a node that always goes right, with its
 * value copied to every bottom leaf under it), and 16 rows walk it in the
 * lanes of one register: a level's split offsets and keys come from a
 * register permute instead of a load per row, and only the input key is
 * gathered (the top four levels, with 1 to 8 nodes, need no gather at all:
 * their inputs are plain loads blended by lane).  It visits the same leaves as the walk above, so the sums are
 * the same floats added in the same order. */

#define MAX_FEATURES 4096
#define MAX_SLOTS 2048
#define MAX_CLASSES 16
#define MAX_DEPTH 64
#define MAX_TREE_NODES (1 << 20)
#define MAX_NODES (1 << 24)
#define MAX_THREADS 64
#define GROUP 8
#define MAX_BLOCK 256
/* Keys in the per-call slot table; MAX_SLOTS * GROUP fits. */
#define SCRATCH_KEYS 16384
#define LEAF_KEY UINT32_MAX
#define WIDE_DEPTH 6
#define WIDE_LANES 16
#define WIDE_GROUPS 8 /* registers of rows walking one tree together */
#define RANK_DEPTH 6
#define RANK_LANES 64 /* rows per register of ranks */
#define RANK_GROUPS 4
#define RANK_CHAINS 4 /* slots whose ranks are searched together */
#define RANK_CUTS 255 /* split values per slot a byte's rank can tell apart */

/* One tree as a complete tree for the wide walk.  Level d < 5 holds its
 * 2^d nodes at [16 d, 16 d + 16); level 5 holds 32 at [80, 112). */
struct wide_tree {
    uint32_t off[112];
    uint32_t key[112];
    float val[64];
} __attribute__((aligned(64)));

/* One tree for the rank walk: the wide tree's complete form at depth 6
 * (shallower trees padded with always-right nodes), its splits as ranks.
 * Level d's node n is key[d][n] (its split's rank among its slot's
 * split values, plus one; 0 goes right always) and off[2^d - 1 + n] (its
 * slot's offset into the rank table). */
struct rank_tree {
    uint8_t key[RANK_DEPTH][64];
    uint32_t off[64];
    float val[64];
} __attribute__((aligned(64)));

/* A slot's sorted split values as the levels of a complete binary search
 * tree of depth 8, padded with UINT32_MAX: level L (2^L values) at
 * RANK_LEVEL(L).  An input's rank is how many of them it reaches. */
struct rank_cuts {
    uint32_t lv[304];
} __attribute__((aligned(64)));
#define RANK_LEVEL(L) ((L) < 5 ? 16 * (L) : (L) == 5 ? 80 : (L) == 6 ? 112 : 176)

struct tree {
    uint32_t first; /* index of the root in the node arrays */
    uint16_t depth;
    uint16_t cls;
};

struct forest {
    int nclasses, nfeatures, ntrees, max_depth;
    int nslots, block;
    float base_score;
    struct tree *trees;
    size_t nnodes;
    uint64_t *node; /* key(split) << 32 | slot * block; LEAF_KEY << 32 in a leaf */
    uint32_t *left; /* relative to the tree's root; a leaf points to itself */
    float *val;     /* leaf value; 0 in a split */
    uint16_t slot_feat[MAX_SLOTS];
    float slot_nan[MAX_SLOTS];
    struct wide_tree *wide; /* NULL when the wide walk does not apply */
    struct rank_tree *rank; /* NULL when the rank walk does not apply */
    enum walk { WALK_SCALAR, WALK_WIDE, WALK_RANK } walk; /* the one evaluation takes */
    struct rank_cuts *cuts; /* per slot, with rank */
};

/* ---- loading ---------------------------------------------------------- */

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

static uint32_t float_key(float v)
{
    uint32_t b;
    v += 0.0f; /* -0 becomes +0 */
    memcpy(&b, &v, sizeof b);
    return b & 0x80000000u ? ~b : b | 0x80000000u;
}

static int is_leaf(uint64_t node) { return (uint32_t)(node >> 32) == LEAF_KEY; }

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

/* How many of a slot's split values key reaches (is at least): the
 * rank, 0..RANK_CUTS, as the walk's fill computes it lane by lane. */
static uint32_t rank_of(const struct rank_cuts *c, uint32_t key)
{
    uint32_t j = 0;
    for (int L = 0; L < 8; L++)
        j = 2 * j + (c->lv[RANK_LEVEL(L) + j] <= key);
    return j;
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

/* ---- evaluation ------------------------------------------------------- */

struct scratch {
    uint32_t tab[SCRATCH_KEYS];            /* key at slot * block + row */
    uint8_t rtab[SCRATCH_KEYS] __attribute__((aligned(64))); /* the rank walk's: rank there */
    float margin[MAX_CLASSES * MAX_BLOCK]; /* class * block + row */
};

/* Row r of a block: x + r * nfeat, or x + pix[r] * nfeat when rows are
 * picked by index. */
static const float *row_at(const float *x, const uint32_t *pix, size_t nfeat, int r)
{
    return x + (pix ? (size_t)pix[r] : (size_t)r) * nfeat;
}

/* Fills the slot table for rows [0, nrows); rows up to the next multiple
 * of GROUP are zero so whole groups can walk without a tail loop. */
static void fill_table(const struct forest *f, const float *x, const uint32_t *pix, size_t nfeat,
                       int nrows, uint32_t *tab)
{
    /* padded for the wide walk's 16 lanes too (a multiple of GROUP) */
    int padded = (nrows + WIDE_LANES - 1) / WIDE_LANES * WIDE_LANES;
    for (int s = 0; s < f->nslots; s++) {
        float nan_as = f->slot_nan[s];
        uint32_t *dst = tab + (size_t)s * (size_t)f->block;
        for (int r = 0; r < nrows; r++) {
            float v = row_at(x, pix, nfeat, r)[f->slot_feat[s]];
            dst[r] = float_key(isnan(v) ? nan_as : v);
        }
        for (int r = nrows; r < padded; r++)
            dst[r] = 0;
    }
    /* A forest of single leaves still reads (and ignores) slot 0. */
    if (f->nslots == 0)
        memset(tab, 0, (size_t)padded * sizeof *tab);
}

/* Whether the block's rows (picked by pix, else consecutive) lie close
 * enough together for a gather's 32-bit index from the lowest of them,
 * which *lo receives (0 for consecutive rows). */
static int rows_gatherable(const struct forest *f, const uint32_t *pix, size_t nfeat, int nrows,
                           uint32_t *lo)
{
    uint32_t l = 0, h = 0;
    for (int r = 0; pix && r < nrows; r++) {
        l = r == 0 || pix[r] < l ? pix[r] : l;
        h = r == 0 || pix[r] > h ? pix[r] : h;
    }
    *lo = l;
    return (uint64_t)(pix ? h - l : (uint32_t)nrows - 1) * nfeat + (uint64_t)f->nfeatures <= INT32_MAX;
}

/* The gather offsets of rows r..r+15 (the live ones) from row lo. */
__attribute__((target("avx512f"), always_inline)) static inline __m512i
rows_index(const uint32_t *pix, int r, __mmask16 live, uint32_t lo, size_t nfeat)
{
    const __m512i lane = _mm512_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15);
    __m512i at = pix ? _mm512_sub_epi32(_mm512_maskz_loadu_epi32(live, pix + r), _mm512_set1_epi32((int)lo))
                     : _mm512_add_epi32(lane, _mm512_set1_epi32(r));
    return _mm512_maskz_mov_epi32(live, _mm512_mullo_epi32(at, _mm512_set1_epi32((int)nfeat)));
}

/* Slot s's keys of 16 rows gathered at offsets at from base: NaN replaced
 * by the slot's infinity, -0 made +0, the float turned into its key. */
__attribute__((target("avx512f"), always_inline)) static inline __m512i
slot_keys(const struct forest *f, const float *base, __m512i at, __mmask16 live, int s)
{
    const __m512i sign = _mm512_set1_epi32((int)0x80000000u);
    __m512 v = _mm512_mask_i32gather_ps(_mm512_setzero_ps(), live, at, base + f->slot_feat[s], 4);
    v = _mm512_mask_blend_ps(_mm512_cmp_ps_mask(v, v, _CMP_UNORD_Q), v, _mm512_set1_ps(f->slot_nan[s]));
    v = _mm512_add_ps(v, _mm512_setzero_ps()); /* -0 becomes +0 */
    __m512i b = _mm512_castps_si512(v);
    __mmask16 neg = _mm512_test_epi32_mask(b, sign);
    return _mm512_mask_blend_epi32(neg, _mm512_or_si512(b, sign), _mm512_xor_si512(b, _mm512_set1_epi32(-1)));
}

/* fill_table for the wide walk: 16 rows of a slot gathered at once, NaN
 * replaced and turned into keys in registers; lanes past nrows hold 0.
 * Picked rows are gathered by their offsets from the block's first one,
 * which must fit the gather's 32-bit index: a block whose rows lie
 * further apart is filled by fill_table. */
__attribute__((target("avx512f"))) static void wide_fill_table(const struct forest *f,
                                                              const float *x, const uint32_t *pix,
                                                              size_t nfeat, int nrows, uint32_t *tab)
{
    uint32_t lo;
    if (!rows_gatherable(f, pix, nfeat, nrows, &lo)) {
        fill_table(f, x, pix, nfeat, nrows, tab);
        return;
    }
    const float *base = x + (size_t)lo * nfeat;
    for (int r = 0; r < nrows; r += WIDE_LANES) {
        int left = nrows - r;
        __mmask16 live = left >= WIDE_LANES ? (__mmask16)0xffff : (__mmask16)((1u << left) - 1);
        __m512i at = rows_index(pix, r, live, lo, nfeat);
        for (int s = 0; s < f->nslots; s++)
            _mm512_storeu_si512(tab + (size_t)s * (size_t)f->block + r,
                                _mm512_maskz_mov_epi32(live, slot_keys(f, base, at, live, s)));
    }
    if (f->nslots == 0)
        memset(tab, 0, (size_t)(nrows + WIDE_LANES - 1) / WIDE_LANES * WIDE_LANES * sizeof *tab);
}

/* One group of GROUP rows through one tree.  Kept out of line so that the
 * compiler addresses row j of the group as a constant displacement from
 * one base pointer instead of keeping GROUP row indices in registers. */
__attribute__((noinline)) static void walk_group(const uint64_t *node, const uint32_t *left,
                                                 const float *val, int depth, const uint32_t *xr,
                                                 float *m)
{
    /* Every row starts at the root, so its step needs no node load; a
     * single-leaf tree stays at its root as any leaf does. */
    uint32_t i[GROUP];
    const uint64_t root = node[0];
#pragma GCC unroll 8
    for (int j = 0; j < GROUP; j++)
        i[j] = left[0] + ((xr + j)[(uint32_t)root] >= (uint32_t)(root >> 32));
    for (int d = 1; d < depth; d++) {
#pragma GCC unroll 8
        for (int j = 0; j < GROUP; j++) {
            uint64_t n = node[i[j]];
            i[j] = left[i[j]] + ((xr + j)[(uint32_t)n] >= (uint32_t)(n >> 32));
        }
    }
#pragma GCC unroll 8
    for (int j = 0; j < GROUP; j++)
        m[j] += val[i[j]];
}

/* Adds tree t's leaf values for the rows of a filled table. */
static void walk_tree(const struct forest *f, const struct tree *t, const uint32_t *tab,
                      int nrows, float *margin)
{
    const size_t b = t->first;
    float *m = margin + (size_t)t->cls * MAX_BLOCK;
    for (int r = 0; r < nrows; r += GROUP)
        walk_group(f->node + b, f->left + b, f->val + b, t->depth, tab + r, m + r);
}

/* Tree w for `groups` registers of 16 rows from row r of a filled table,
 * interleaved so their gathers overlap.  Inlined with depth and groups
 * constant where they are (wide_walk), so the positions stay in registers
 * and every level's branches fold away. */
__attribute__((target("avx512f"), always_inline)) static inline void
wide_chunk(const struct wide_tree *w, const int depth, const uint32_t *tab, int r, const int groups,
           float *m)
{
    const __m512i lane = _mm512_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15);
    const __m512i one = _mm512_set1_epi32(1);
    {
        __m512i p[WIDE_GROUPS];
#pragma GCC unroll 8
        for (int g = 0; g < WIDE_GROUPS; g++)
            p[g] = _mm512_setzero_si512();
        /* Levels 0..3 hold 1, 2, 4 and 8 nodes: their inputs are the same row
         * offsets for all lanes, so plain loads and blends on the bits of
         * the position replace the gather (16 loads each); the deeper
         * levels gather. */
        int d = 0;
#pragma GCC unroll 4
        for (; d < depth && d < 4; d++) {
            const uint32_t *off = w->off + 16 * d;
            const __m512i key = _mm512_load_si512(w->key + 16 * d);
#pragma GCC unroll 8
            for (int g = 0; g < groups; g++) {
                const uint32_t *base = tab + r + WIDE_LANES * g;
                __m512i x = _mm512_loadu_si512(base + off[0]);
                if (d == 3) {
                    __mmask16 b0 = _mm512_test_epi32_mask(p[g], one);
                    __mmask16 b1 = _mm512_test_epi32_mask(p[g], _mm512_set1_epi32(2));
                    __mmask16 b2 = _mm512_test_epi32_mask(p[g], _mm512_set1_epi32(4));
                    __m512i a0 = _mm512_mask_blend_epi32(b0, x, _mm512_loadu_si512(base + off[1]));
                    __m512i a1 = _mm512_mask_blend_epi32(b0, _mm512_loadu_si512(base + off[2]),
                                                         _mm512_loadu_si512(base + off[3]));
                    __m512i a2 = _mm512_mask_blend_epi32(b0, _mm512_loadu_si512(base + off[4]),
                                                         _mm512_loadu_si512(base + off[5]));
                    __m512i a3 = _mm512_mask_blend_epi32(b0, _mm512_loadu_si512(base + off[6]),
                                                         _mm512_loadu_si512(base + off[7]));
                    x = _mm512_mask_blend_epi32(b2, _mm512_mask_blend_epi32(b1, a0, a1),
                                                _mm512_mask_blend_epi32(b1, a2, a3));
                } else if (d >= 1) {
                    __mmask16 b0 = _mm512_test_epi32_mask(p[g], one);
                    __m512i x1 = _mm512_loadu_si512(base + off[1]);
                    if (d == 2) {
                        __m512i x2 = _mm512_loadu_si512(base + off[2]);
                        __m512i x3 = _mm512_loadu_si512(base + off[3]);
                        __mmask16 b1 = _mm512_test_epi32_mask(p[g], _mm512_set1_epi32(2));
                        x = _mm512_mask_blend_epi32(b0, x, x1);
                        x = _mm512_mask_blend_epi32(b1, x, _mm512_mask_blend_epi32(b0, x2, x3));
                    } else {
                        x = _mm512_mask_blend_epi32(b0, x, x1);
                    }
                }
                __m512i k = _mm512_permutexvar_epi32(p[g], key);
                __mmask16 right = _mm512_cmpge_epu32_mask(x, k);
                __m512i twice = _mm512_add_epi32(p[g], p[g]);
                p[g] = _mm512_mask_add_epi32(twice, right, twice, one);
            }
        }
#pragma GCC unroll 2
        for (; d < depth; d++) {
            __m512i off, key;
            if (d < 5) {
                off = _mm512_load_si512(w->off + 16 * d);
                key = _mm512_load_si512(w->key + 16 * d);
            } else {
                off = _mm512_load_si512(w->off + 80);
                key = _mm512_load_si512(w->key + 80);
            }
            const __m512i off_hi = _mm512_load_si512(w->off + 96);
            const __m512i key_hi = _mm512_load_si512(w->key + 96);
#pragma GCC unroll 8
            for (int g = 0; g < groups; g++) {
                __m512i o = d < 5 ? _mm512_permutexvar_epi32(p[g], off)
                                  : _mm512_permutex2var_epi32(off, p[g], off_hi);
                __m512i k = d < 5 ? _mm512_permutexvar_epi32(p[g], key)
                                  : _mm512_permutex2var_epi32(key, p[g], key_hi);
                __m512i x = _mm512_i32gather_epi32(_mm512_add_epi32(o, lane),
                                                   (const void *)(tab + r + WIDE_LANES * g), 4);
                __mmask16 right = _mm512_cmpge_epu32_mask(x, k);
                __m512i twice = _mm512_add_epi32(p[g], p[g]);
                p[g] = _mm512_mask_add_epi32(twice, right, twice, one);
            }
        }
        const __m512 v0 = _mm512_load_ps(w->val), v1 = _mm512_load_ps(w->val + 16);
        const __m512 v2 = _mm512_load_ps(w->val + 32), v3 = _mm512_load_ps(w->val + 48);
#pragma GCC unroll 8
        for (int g = 0; g < groups; g++) {
            __m512 lo = _mm512_permutex2var_ps(v0, p[g], v1);
            __m512 hi = _mm512_permutex2var_ps(v2, p[g], v3);
            __mmask16 upper = _mm512_test_epi32_mask(p[g], _mm512_set1_epi32(32));
            __m512 leaf = _mm512_mask_blend_ps(upper, lo, hi);
            float *mg = m + r + WIDE_LANES * g;
            _mm512_storeu_ps(mg, _mm512_add_ps(_mm512_loadu_ps(mg), leaf));
        }
    }
}

/* Tree w for the rows [0, nrows) of a filled table.  Depth 6 (what a
 * depth-6 model's trees mostly are) gets its own copies: WIDE_GROUPS
 * registers at a time while the rows last, whose independent chains hide
 * the gathers' latency, then up to four. */
__attribute__((target("avx512f"))) static void wide_walk(const struct wide_tree *w, int depth,
                                                         const uint32_t *tab, int nrows,
                                                         float *m)
{
    int r = 0;
    if (depth == WIDE_DEPTH)
        for (; r + WIDE_GROUPS * WIDE_LANES <= nrows; r += WIDE_GROUPS * WIDE_LANES)
            wide_chunk(w, WIDE_DEPTH, tab, r, WIDE_GROUPS, m);
    for (; r < nrows; r += 4 * WIDE_LANES) {
        int groups = (nrows - r + WIDE_LANES - 1) / WIDE_LANES;
        if (groups > 4)
            groups = 4;
        if (depth == WIDE_DEPTH && groups == 4)
            wide_chunk(w, WIDE_DEPTH, tab, r, 4, m);
        else if (depth == WIDE_DEPTH && groups == 3)
            wide_chunk(w, WIDE_DEPTH, tab, r, 3, m);
        else if (depth == WIDE_DEPTH && groups == 2)
            wide_chunk(w, WIDE_DEPTH, tab, r, 2, m);
        else if (depth == WIDE_DEPTH)
            wide_chunk(w, WIDE_DEPTH, tab, r, 1, m);
        else
            wide_chunk(w, depth, tab, r, groups, m);
    }
}

/* ---- the rank walk ----------------------------------------------------
 * A slot's inputs become ranks among its split values (one byte: at most
 * RANK_CUTS values), and a node's split the rank of its own value, so that
 * x >= split exactly when rank(x) >= rank(split).  A register then holds
 * 64 rows, and every level's input comes from plain loads of the rank
 * table blended by the bits of the position (the last level from 32),
 * where the wide walk gathers: the gathers' latency is what bounds it.
 * Same leaves, same order, so the sums are the same floats. */
#define RANK_TARGET __attribute__((target("avx512f,avx512bw,avx512vbmi")))

/* rank_of for 16 keys of each of n slots at once: each level of a slot's
 * search tree is a permute of one to eight registers by the position so
 * far.  The n searches are independent chains, interleaved so that one's
 * latency hides behind the others'. */
RANK_TARGET __attribute__((always_inline)) static inline void rank16(const struct rank_cuts *const *c, __m512i *key,
                                                                     const int n)
{
    const __m512i one = _mm512_set1_epi32(1), b5 = _mm512_set1_epi32(32), b6 = _mm512_set1_epi32(64);
    __m512i j[RANK_CHAINS];
#pragma GCC unroll 4
    for (int i = 0; i < n; i++)
        j[i] = _mm512_setzero_si512();
#pragma GCC unroll 8
    for (int L = 0; L < 8; L++) {
#pragma GCC unroll 4
        for (int i = 0; i < n; i++) {
            const uint32_t *lv = c[i]->lv;
            __m512i t;
            if (L < 5) {
                t = _mm512_permutexvar_epi32(j[i], _mm512_load_si512(lv + 16 * L));
            } else if (L == 5) {
                t = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 80), j[i], _mm512_load_si512(lv + 96));
            } else if (L == 6) {
                __m512i a = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 112), j[i], _mm512_load_si512(lv + 128));
                __m512i b = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 144), j[i], _mm512_load_si512(lv + 160));
                t = _mm512_mask_blend_epi32(_mm512_test_epi32_mask(j[i], b5), a, b);
            } else {
                __mmask16 h5 = _mm512_test_epi32_mask(j[i], b5), h6 = _mm512_test_epi32_mask(j[i], b6);
                __m512i a0 = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 176), j[i], _mm512_load_si512(lv + 192));
                __m512i a1 = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 208), j[i], _mm512_load_si512(lv + 224));
                __m512i a2 = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 240), j[i], _mm512_load_si512(lv + 256));
                __m512i a3 = _mm512_permutex2var_epi32(_mm512_load_si512(lv + 272), j[i], _mm512_load_si512(lv + 288));
                t = _mm512_mask_blend_epi32(h6, _mm512_mask_blend_epi32(h5, a0, a1),
                                            _mm512_mask_blend_epi32(h5, a2, a3));
            }
            __mmask16 le = _mm512_cmple_epu32_mask(t, key[i]);
            __m512i twice = _mm512_add_epi32(j[i], j[i]);
            j[i] = _mm512_mask_add_epi32(twice, le, twice, one);
        }
    }
#pragma GCC unroll 4
    for (int i = 0; i < n; i++)
        key[i] = j[i];
}

/* Ranks of 16 rows (gather offsets at, live lanes) for slots [s0, s0 + n)
 * into the rank table at row r. */
RANK_TARGET __attribute__((always_inline)) static inline void rank_slots(const struct forest *f, const float *base,
                                                                         __m512i at, __mmask16 live, int s0,
                                                                         const int n, int r, uint8_t *rt)
{
    const struct rank_cuts *c[RANK_CHAINS];
    __m512i key[RANK_CHAINS];
#pragma GCC unroll 4
    for (int i = 0; i < n; i++) {
        key[i] = slot_keys(f, base, at, live, s0 + i);
        c[i] = &f->cuts[s0 + i];
    }
    rank16(c, key, n);
#pragma GCC unroll 4
    for (int i = 0; i < n; i++)
        _mm_storeu_si128((__m128i *)(rt + (size_t)(s0 + i) * (size_t)f->block + (size_t)r), _mm512_cvtepi32_epi8(key[i]));
}

/* The rank table of rows [0, nrows) at slot * block + row; up to the next
 * multiple of 16 the rank of +0, then zero up to the next multiple of
 * RANK_LANES (rows the walk takes along and nothing reads).  Rows picked by index are gathered as in
 * wide_fill_table, and rows too far apart for its 32-bit index go through
 * fill_table's keys and rank_of. */
RANK_TARGET static void rank_fill_table(const struct forest *f, const float *x, const uint32_t *pix,
                                        size_t nfeat, int nrows, uint32_t *keys, uint8_t *rt)
{
    const size_t block = (size_t)f->block;
    const int padded = (nrows + RANK_LANES - 1) / RANK_LANES * RANK_LANES;
    const int lanes = (nrows + WIDE_LANES - 1) / WIDE_LANES * WIDE_LANES;
    uint32_t lo;
    if (!rows_gatherable(f, pix, nfeat, nrows, &lo)) {
        fill_table(f, x, pix, nfeat, nrows, keys);
        for (int s = 0; s < f->nslots; s++)
            for (int r = 0; r < lanes; r++)
                rt[(size_t)s * block + (size_t)r] = (uint8_t)rank_of(&f->cuts[s], keys[(size_t)s * block + (size_t)r]);
    } else {
        const float *base = x + (size_t)lo * nfeat;
        /* rows outer: a group's lines stay in L1 for all its slots */
        for (int r = 0; r < nrows; r += WIDE_LANES) {
            int left = nrows - r;
            __mmask16 live = left >= WIDE_LANES ? (__mmask16)0xffff : (__mmask16)((1u << left) - 1);
            __m512i at = rows_index(pix, r, live, lo, nfeat);
            int s = 0;
            for (; s + RANK_CHAINS <= f->nslots; s += RANK_CHAINS)
                rank_slots(f, base, at, live, s, RANK_CHAINS, r, rt);
            for (; s < f->nslots; s++)
                rank_slots(f, base, at, live, s, 1, r, rt);
        }
    }
    for (int s = 0; s < f->nslots; s++)
        memset(rt + (size_t)s * block + (size_t)lanes, 0, (size_t)(padded - lanes));
}

/* A level's input for 64 rows: the rank of the slot of node p of the level,
 * for each row's position p, as a tree of blends on p's bits (b[k] = bit
 * k) over the level's 2^d loads. */
RANK_TARGET __attribute__((always_inline)) static inline __m512i rsel1(const uint8_t *t, const uint32_t *o, int r, const __mmask64 *b)
{
    (void)b;
    return _mm512_loadu_si512(t + o[0] + r);
}
#define RSEL(name, half, prev, bit)                                                                  \
    RANK_TARGET __attribute__((always_inline)) static inline __m512i name(const uint8_t *t, const uint32_t *o, int r, \
                                                                           const __mmask64 *b)             \
    {                                                                                                \
        return _mm512_mask_blend_epi8(b[bit], prev(t, o, r, b), prev(t, o + half, r, b));            \
    }
RSEL(rsel2, 1, rsel1, 0)
RSEL(rsel4, 2, rsel2, 1)
RSEL(rsel8, 4, rsel4, 2)
RSEL(rsel16, 8, rsel8, 3)
RSEL(rsel32, 16, rsel16, 4)

/* Tree w for `groups` registers of 64 rows from row r of the rank table;
 * inlined with groups constant (rank_walk). */
RANK_TARGET __attribute__((always_inline)) static inline void rank_chunk(const struct rank_tree *w, const uint8_t *tab,
                                                                         int r, const int groups, float *m)
{
    const __m512i one = _mm512_set1_epi8(1);
    __m512i p[RANK_GROUPS];
#pragma GCC unroll 4
    for (int g = 0; g < RANK_GROUPS; g++)
        p[g] = _mm512_setzero_si512();
#pragma GCC unroll 6
    for (int d = 0; d < RANK_DEPTH; d++) {
        const __m512i key = _mm512_load_si512(w->key[d]);
        const uint32_t *off = w->off + (1 << d) - 1;
#pragma GCC unroll 4
        for (int g = 0; g < groups; g++) {
            __mmask64 bit[5];
#pragma GCC unroll 5
            for (int k = 0; k < d && k < 5; k++)
                bit[k] = _mm512_test_epi8_mask(p[g], _mm512_set1_epi8((char)(1 << k)));
            const int rr = r + RANK_LANES * g;
            __m512i x = d == 0 ? rsel1(tab, off, rr, bit)
                      : d == 1 ? rsel2(tab, off, rr, bit)
                      : d == 2 ? rsel4(tab, off, rr, bit)
                      : d == 3 ? rsel8(tab, off, rr, bit)
                      : d == 4 ? rsel16(tab, off, rr, bit)
                               : rsel32(tab, off, rr, bit);
            __mmask64 right = _mm512_cmpge_epu8_mask(x, _mm512_permutexvar_epi8(p[g], key));
            __m512i twice = _mm512_add_epi8(p[g], p[g]);
            p[g] = _mm512_mask_add_epi8(twice, right, twice, one);
        }
    }
    const __m512 v0 = _mm512_load_ps(w->val), v1 = _mm512_load_ps(w->val + 16);
    const __m512 v2 = _mm512_load_ps(w->val + 32), v3 = _mm512_load_ps(w->val + 48);
    const __m512i upper = _mm512_set1_epi32(32);
#pragma GCC unroll 4
    for (int g = 0; g < groups; g++) {
        /* the immediates spelled out: unrolling the loop is not guaranteed */
        const __m128i quarter[4] = {_mm512_extracti32x4_epi32(p[g], 0), _mm512_extracti32x4_epi32(p[g], 1),
                                    _mm512_extracti32x4_epi32(p[g], 2), _mm512_extracti32x4_epi32(p[g], 3)};
#pragma GCC unroll 4
        for (int q = 0; q < 4; q++) {
            __m512i idx = _mm512_cvtepu8_epi32(quarter[q]);
            __m512 leaf = _mm512_mask_blend_ps(_mm512_test_epi32_mask(idx, upper),
                                               _mm512_permutex2var_ps(v0, idx, v1),
                                               _mm512_permutex2var_ps(v2, idx, v3));
            float *mg = m + r + RANK_LANES * g + WIDE_LANES * q;
            _mm512_storeu_ps(mg, _mm512_add_ps(_mm512_loadu_ps(mg), leaf));
        }
    }
}

/* Tree w for the rows [0, nrows <= block) of a filled rank table, up to
 * RANK_GROUPS registers at a time: their chains overlap. */
RANK_TARGET static void rank_walk(const struct rank_tree *w, const uint8_t *tab, int nrows, float *m)
{
    for (int r = 0; r < nrows; r += RANK_GROUPS * RANK_LANES) {
        int g = (nrows - r + RANK_LANES - 1) / RANK_LANES;
        if (g >= 4)
            rank_chunk(w, tab, r, 4, m);
        else if (g == 3)
            rank_chunk(w, tab, r, 3, m);
        else if (g == 2)
            rank_chunk(w, tab, r, 2, m);
        else
            rank_chunk(w, tab, r, 1, m);
    }
}

/* Probabilities of rows [0, nrows <= block) into prob[row * nclasses + k],
 * softmax exactly as xgboost::common::Softmax: max in float, expf of the
 * difference in float, their sum in double, each divided by the sum cast
 * to float. */
static void block_probs(const struct forest *f, const float *x, const uint32_t *pix, size_t nfeat,
                        int nrows, struct scratch *s, float *prob)
{
    int K = f->nclasses;
    if (f->walk == WALK_RANK)
        rank_fill_table(f, x, pix, nfeat, nrows, s->tab, s->rtab);
    else if (f->walk == WALK_WIDE)
        wide_fill_table(f, x, pix, nfeat, nrows, s->tab);
    else
        fill_table(f, x, pix, nfeat, nrows, s->tab);
    for (int k = 0; k < K; k++)
        for (int r = 0; r < MAX_BLOCK; r++)
            s->margin[k * MAX_BLOCK + r] = f->base_score;
    if (f->walk == WALK_RANK)
        for (int t = 0; t < f->ntrees; t++)
            rank_walk(&f->rank[t], s->rtab, nrows, s->margin + (size_t)f->trees[t].cls * MAX_BLOCK);
    else if (f->walk == WALK_WIDE)
        for (int t = 0; t < f->ntrees; t++)
            wide_walk(&f->wide[t], f->trees[t].depth, s->tab, nrows,
                      s->margin + (size_t)f->trees[t].cls * MAX_BLOCK);
    else
        for (int t = 0; t < f->ntrees; t++)
            walk_tree(f, &f->trees[t], s->tab, nrows, s->margin);
    for (int r = 0; r < nrows; r++) {
        float *p = prob + (size_t)r * (size_t)K;
        float wmax = s->margin[r];
        for (int k = 1; k < K; k++)
            wmax = fmaxf(s->margin[k * MAX_BLOCK + r], wmax);
        double wsum = 0.0;
        for (int k = 0; k < K; k++) {
            p[k] = expf(s->margin[k * MAX_BLOCK + r] - wmax);
            wsum += p[k];
        }
        for (int k = 0; k < K; k++)
            p[k] /= (float)wsum;
    }
}

void forest_predict(const struct forest *f, const float *x, size_t n, int nfeat, float *prob)
{
    size_t K = (size_t)f->nclasses;
    if (nfeat < f->nfeatures || nfeat < 0) {
        for (size_t i = 0; i < n * K; i++)
            prob[i] = NAN;
        return;
    }
    struct scratch s;
    for (size_t r = 0; r < n; r += (size_t)f->block) {
        int nrows = n - r < (size_t)f->block ? (int)(n - r) : f->block;
        block_probs(f, x + r * (size_t)nfeat, NULL, (size_t)nfeat, nrows, &s, prob + r * K);
    }
}

/* Class and confidence of the rows of one block, into cls[0..nrows). */
static void block_classify(const struct forest *f, const float *x, const uint32_t *pix,
                           size_t nfeat, int nrows, struct scratch *s, uint8_t *cls, float *conf)
{
    int K = f->nclasses;
    float prob[MAX_BLOCK * MAX_CLASSES];
    block_probs(f, x, pix, nfeat, nrows, s, prob);
    for (int i = 0; i < nrows; i++) {
        const float *p = prob + i * K;
        int best = 0;
        for (int k = 1; k < K; k++)
            if (p[k] > p[best])
                best = k;
        cls[i] = (uint8_t)best;
        conf[i] = p[best];
    }
}

struct job {
    const struct forest *f;
    const float *x;
    size_t n, nfeat;
    uint8_t *cls;
    float *conf;
};

static void *job_run(void *arg)
{
    const struct job *j = arg;
    const struct forest *f = j->f;
    struct scratch s;
    for (size_t r = 0; r < j->n; r += (size_t)f->block) {
        int nrows = j->n - r < (size_t)f->block ? (int)(j->n - r) : f->block;
        block_classify(f, j->x + r * j->nfeat, NULL, j->nfeat, nrows, &s, j->cls + r, j->conf + r);
    }
    return NULL;
}

int forest_classify_at(const struct forest *f, const float *x, int nfeat, const uint32_t *pix,
                       size_t n, uint8_t *cls, float *conf, struct err *e)
{
    if (nfeat < f->nfeatures || nfeat < 0)
        return err_set(e, ST_EINVAL, "forest_classify_at: %d features given, the model uses %d",
                       nfeat, f->nfeatures);
    struct scratch s;
    for (size_t r = 0; r < n; r += (size_t)f->block) {
        int nrows = n - r < (size_t)f->block ? (int)(n - r) : f->block;
        block_classify(f, x, pix + r, (size_t)nfeat, nrows, &s, cls + r, conf + r);
    }
    return ST_OK;
}

int forest_classify(const struct forest *f, const float *x, size_t n, int nfeat, int threads,
                    uint8_t *cls, float *conf, struct err *e)
{
    if (nfeat < f->nfeatures || nfeat < 0)
        return err_set(e, ST_EINVAL, "forest_classify: %d features given, the model uses %d",
                       nfeat, f->nfeatures);
    size_t blocks = (n + (size_t)f->block - 1) / (size_t)f->block;
    size_t nt = threads < 1 ? 1 : threads > MAX_THREADS ? MAX_THREADS : (size_t)threads;
    if (nt > blocks)
        nt = blocks ? blocks : 1;
    struct job jobs[MAX_THREADS];
    pthread_t tid[MAX_THREADS];
    /* Whole blocks per thread, so a thread's last block is the only short one. */
    for (size_t t = 0; t < nt; t++) {
        size_t b0 = blocks * t / nt, b1 = blocks * (t + 1) / nt;
        size_t r0 = b0 * (size_t)f->block, r1 = b1 * (size_t)f->block;
        if (r1 > n)
            r1 = n;
        jobs[t] = (struct job){f, x + r0 * (size_t)nfeat, r1 - r0, (size_t)nfeat, cls + r0,
                               conf + r0};
    }
    if (nt == 1) {
        job_run(&jobs[0]);
        return ST_OK;
    }
    size_t started = 0;
    int rc = ST_OK;
    for (; started < nt; started++) {
        int err = pthread_create(&tid[started], NULL, job_run, &jobs[started]);
        if (err != 0) {
            rc = err_set(e, ST_ELIB, "forest_classify: cannot start thread %zu of %zu (error %d)",
                         started + 1, nt, err);
            break;
        }
    }
    for (size_t t = 0; t < started; t++)
        pthread_join(tid[t], NULL);
    return rc;
}
