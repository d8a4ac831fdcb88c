/* forestlayout: the in-memory form of a loaded forest, shared by the
 * loader (forest.c) and the walks (forestwalk.c); not for use outside
 * the forest module, whose contract is forest.h.
 *
 * Layout.  Each tree is relabelled breadth-first so that the two children
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
 * their inputs are plain loads blended by lane).  It visits the same
 * leaves as the walk above, so the sums are the same floats added in the
 * same order.  The rank walk (forestwalk.c) goes further the same way. */
#ifndef ST_FORESTLAYOUT_H
#define ST_FORESTLAYOUT_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

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

/* A float as an unsigned key that orders as the floats do (-0 as +0). */
static inline uint32_t float_key(float v)
{
    uint32_t b;
    v += 0.0f; /* -0 becomes +0 */
    memcpy(&b, &v, sizeof b);
    return b & 0x80000000u ? ~b : b | 0x80000000u;
}

static inline int is_leaf(uint64_t node) { return (uint32_t)(node >> 32) == LEAF_KEY; }

/* How many of a slot's split values key reaches (is at least): the
 * rank, 0..RANK_CUTS, as the walk's fill computes it lane by lane. */
static inline uint32_t rank_of(const struct rank_cuts *c, uint32_t key)
{
    uint32_t j = 0;
    for (int L = 0; L < 8; L++)
        j = 2 * j + (c->lv[RANK_LEVEL(L) + j] <= key);
    return j;
}

#endif
