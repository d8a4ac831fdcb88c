/* forest: evaluation of a loaded forest (forest.h: forest_predict,
 * forest_classify, forest_classify_at) by the walk forest_use_walk chose:
 * scalar, wide (AVX-512) or rank (AVX-512 BW and VBMI). */
#include "forest.h"

#include <math.h>
#include <pthread.h>
#include <string.h>

#include <immintrin.h>

#include "forestlayout.h"

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
