/* syscall() and SYS_arch_prctl, for the AMX permission */
#define _DEFAULT_SOURCE
#include "convk.h"

#include <cpuid.h>
#include <immintrin.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/syscall.h>
#include <unistd.h>

/* The direct kernel: 6 pixels x 64 output channels held in 24 registers,
 * one broadcast per pixel and input channel against 4 weight vectors, over
 * every tap; a row's remainder in 4 pixels, then one at a time.  Input
 * channels go in blocks of CONVK_CI_BLOCK (convk.h), the accumulators going
 * back to the output between blocks.  Pixels
 * x0.. of the output row; k->rows holds one input row per kernel row,
 * zero-bordered by the caller.  Named accumulators, not an array, so the
 * compiler keeps them all in registers. */
#define KX 6
#define ACC4(q, o)                                                                                                  \
    __m512 q##0 = first ? z0 : _mm512_loadu_ps(o), q##1 = first ? z1 : _mm512_loadu_ps((o) + 16),                  \
           q##2 = first ? z2 : _mm512_loadu_ps((o) + 32), q##3 = first ? z3 : _mm512_loadu_ps((o) + 48)
#define FMA4(q, v)                                                                                                  \
    do {                                                                                                            \
        q##0 = _mm512_fmadd_ps(v, w0, q##0);                                                                        \
        q##1 = _mm512_fmadd_ps(v, w1, q##1);                                                                        \
        q##2 = _mm512_fmadd_ps(v, w2, q##2);                                                                        \
        q##3 = _mm512_fmadd_ps(v, w3, q##3);                                                                        \
    } while (0)
#define STORE4(q, dst)                                                                                              \
    do {                                                                                                            \
        _mm512_storeu_ps((dst), _mm512_min_ps(_mm512_max_ps(q##0, lo), hi));                                        \
        _mm512_storeu_ps((dst) + 16, _mm512_min_ps(_mm512_max_ps(q##1, lo), hi));                                   \
        _mm512_storeu_ps((dst) + 32, _mm512_min_ps(_mm512_max_ps(q##2, lo), hi));                                   \
        _mm512_storeu_ps((dst) + 48, _mm512_min_ps(_mm512_max_ps(q##3, lo), hi));                                   \
    } while (0)

struct dblock {
    const float *const *rows; /* per kernel row: its input pixels, from output pixel 0's first tap */
    int cin, cout, os;        /* os: floats between output pixels */
    const struct onnx_op *op;
    int ci0, nci, first, last;
};

/* The pixels of a kernel: each one's accumulator name and its offset in
 * pixels, so that one body serves the 6-, 4- and 1-pixel kernels with
 * named accumulators. */
#define PIXELS_6(X) X(a, 0) X(b, 1) X(c, 2) X(d, 3) X(e, 4) X(f, 5)
#define PIXELS_4(X) X(a, 0) X(b, 1) X(c, 2) X(d, 3)
#define PIXELS_1(X) X(a, 0)
#define PIX_OUT(q, p) float *o##q = o + cb + (p) * os;
#define PIX_ACC(q, p) ACC4(q, o##q);
#define PIX_FMA(q, p)                                                                                               \
    {                                                                                                               \
        __m512 v = _mm512_set1_ps(x[(p) * cin]);                                                                      \
        FMA4(q, v);                                                                                                 \
    }
#define PIX_STORE(q, p) STORE4(q, o##q);
#define DIRECT_KERNEL(name, PIXELS)                                                                                 \
    __attribute__((target("avx512f"))) static void name(const struct dblock *k, int x0, int cb, float *o)          \
    {                                                                                                               \
        const struct onnx_op *op = k->op;                                                                           \
        int cin = k->cin, cout = k->cout, os = k->os, first = k->first;                                             \
        __m512 z0 = _mm512_loadu_ps(op->b + cb), z1 = _mm512_loadu_ps(op->b + cb + 16);                             \
        __m512 z2 = _mm512_loadu_ps(op->b + cb + 32), z3 = _mm512_loadu_ps(op->b + cb + 48);                        \
        PIXELS(PIX_OUT)                                                                                             \
        PIXELS(PIX_ACC)                                                                                             \
        for (int ky = 0; ky < op->kh; ky++)                                                                         \
            for (int kx = 0; kx < op->kw; kx++) {                                                                   \
                const float *x = k->rows[ky] + ((size_t)x0 + (size_t)kx * op->dw) * cin + k->ci0;                   \
                const float *wt = op->w + ((size_t)(ky * op->kw + kx) * cin + k->ci0) * cout + cb;                  \
                for (int ci = 0; ci < k->nci; ci++, wt += cout, x++) {                                              \
                    __m512 w0 = _mm512_loadu_ps(wt), w1 = _mm512_loadu_ps(wt + 16);                                 \
                    __m512 w2 = _mm512_loadu_ps(wt + 32), w3 = _mm512_loadu_ps(wt + 48);                            \
                    PIXELS(PIX_FMA)                                                                                 \
                }                                                                                                   \
            }                                                                                                       \
        __m512 lo = _mm512_set1_ps(k->last ? op->lo : -INFINITY), hi = _mm512_set1_ps(k->last ? op->hi : INFINITY); \
        PIXELS(PIX_STORE)                                                                                           \
    }

DIRECT_KERNEL(direct_6, PIXELS_6)
/* Four pixels: a row's remainder of 4 or 5 (640 = 6 x 106 + 4). */
DIRECT_KERNEL(direct_4, PIXELS_4)
DIRECT_KERNEL(direct_1, PIXELS_1)

void convk_run_direct(const float *const *rows, int cin, int cout, const struct onnx_op *op, int w, float *o, int os)
{
    struct dblock k = {.rows = rows, .cin = cin, .cout = cout, .os = os, .op = op};
    for (int cb = 0; cb < cout; cb += 64)
        for (k.ci0 = 0; k.ci0 < cin; k.ci0 += CONVK_CI_BLOCK) {
            k.nci = cin - k.ci0 < CONVK_CI_BLOCK ? cin - k.ci0 : CONVK_CI_BLOCK;
            k.first = k.ci0 == 0;
            k.last = k.ci0 + k.nci == cin;
            int x0 = 0;
            for (; x0 + KX <= w; x0 += KX)
                direct_6(&k, x0, cb, o + (size_t)x0 * os);
            if (x0 + 4 <= w) {
                direct_4(&k, x0, cb, o + (size_t)x0 * os);
                x0 += 4;
            }
            for (; x0 < w; x0++)
                direct_1(&k, x0, cb, o + (size_t)x0 * os);
        }
}

/* ---- bfloat16 on AMX tiles ---------------------------------------------
 * Tiles 0-3 hold a 32 pixel x 32 channel float32 block of the output (2 x 2
 * tiles of 16 x 16), tiles 4-5 two 16-pixel rows of 32 input channels,
 * tiles 6-7 the weights of 32 input channels for 2 x 16 output channels in
 * the pair-interleaved layout TDPBF16PS wants (16 rows of channel pairs, 16
 * outputs x 2).  Each step over a tap and 32 input channels is 4 tile loads
 * and 4 TDPBF16PS. */
struct amx_cfg {
    uint8_t palette, start;
    uint8_t reserved[14];
    uint16_t colsb[16];
    uint8_t rows[16];
};

int convk_has_amx(void)
{
    unsigned a, b, c, d;
    if (!__get_cpuid_count(7, 0, &a, &b, &c, &d) || !(d & (1u << 22)) || !(d & (1u << 24)))
        return 0;
    /* Linux hands out the tile state only on request: ARCH_REQ_XCOMP_PERM, XFEATURE_XTILEDATA */
    return syscall(SYS_arch_prctl, 0x1023, 18) == 0;
}

uint16_t convk_bf16(float f)
{
    uint32_t u;
    memcpy(&u, &f, sizeof u);
    u += 0x7fffu + ((u >> 16) & 1u); /* round to nearest, ties to even */
    return (uint16_t)(u >> 16);
}

/* 16 at a time: convk_bf16's integer steps; the count done */
__attribute__((target("avx512f"))) static size_t round_bf16_512(const float *src, float *dst, size_t n)
{
    size_t i = 0;
    const __m512i half = _mm512_set1_epi32(0x7fff), one = _mm512_set1_epi32(1), top = _mm512_set1_epi32(-65536);
    for (; i + 16 <= n; i += 16) {
        __m512i u = _mm512_loadu_si512((const void *)(src + i));
        u = _mm512_add_epi32(u, _mm512_add_epi32(half, _mm512_and_si512(_mm512_srli_epi32(u, 16), one)));
        _mm512_storeu_si512((void *)(dst + i), _mm512_and_si512(u, top));
    }
    return i;
}

void convk_round_bf16(const float *src, float *dst, size_t n)
{
    for (size_t i = __builtin_cpu_supports("avx512f") ? round_bf16_512(src, dst, n) : 0; i < n; i++) {
        uint32_t u = (uint32_t)convk_bf16(src[i]) << 16;
        memcpy(&dst[i], &u, sizeof u);
    }
}

__attribute__((target("avx512f,avx512bf16"))) void convk_convert_bf16(const float *src, uint16_t *dst, size_t n)
{
    size_t i = 0;
    for (; i + 32 <= n; i += 32) {
        __m512bh v = _mm512_cvtne2ps_pbh(_mm512_loadu_ps(src + i + 16), _mm512_loadu_ps(src + i));
        _mm512_storeu_si512((void *)(dst + i), (__m512i)v);
    }
    for (; i < n; i++)
        dst[i] = convk_bf16(src[i]);
}

/* [tap][32-channel block][16-output block][16 pairs][16 outputs][2] over
 * k channels per tap, zero from k up to kp (a multiple of 32): kp = k = cin
 * for a convolution, taps 1 and k the patch size for an RGB stem. */
uint16_t *convk_pack_amx(const struct onnx_op *op, int taps, int k, int kp)
{
    int nkb = kp / 32, ncb = op->cout / 16;
    uint16_t *w = malloc((size_t)taps * kp * op->cout * sizeof *w);
    if (!w)
        return NULL;
    for (int t = 0; t < taps; t++)
        for (int kb = 0; kb < nkb; kb++)
            for (int cb = 0; cb < ncb; cb++)
                for (int r = 0; r < 16; r++)
                    for (int co = 0; co < 16; co++)
                        for (int e = 0; e < 2; e++) {
                            int c = kb * 32 + 2 * r + e;
                            w[((((size_t)t * nkb + kb) * ncb + cb) * 16 + r) * 32 + co * 2 + e] =
                                c < k ? convk_bf16(op->w[((size_t)t * k + c) * op->cout + cb * 16 + co]) : 0;
                        }
    return w;
}

__attribute__((target("amx-tile"))) void convk_begin_amx(void)
{
    struct amx_cfg cfg;
    memset(&cfg, 0, sizeof cfg);
    cfg.palette = 1;
    for (int t = 0; t < 8; t++) {
        cfg.colsb[t] = 64;
        cfg.rows[t] = 16;
    }
    /* GCC 12's _tile_loadconfig tells the compiler it reads 8 bytes only, so
     * without this the other 56 are dead stores to it */
    __asm__ volatile("" : : "r"(&cfg) : "memory");
    _tile_loadconfig(&cfg);
}

__attribute__((target("amx-tile"))) void convk_end_amx(void)
{
    _tile_release();
}

/* One output row: 32-pixel blocks (the last one shifted left
 * to end at the row's end, recomputing a few pixels), 32 outputs at a time. */
__attribute__((target("avx512f,amx-tile,amx-bf16"))) void convk_run_amx(const uint16_t *const *rows,
                                                                const uint16_t *wq, int cin, int cout,
                                                                const struct onnx_op *op, int w, float *o, int os)
{
    int nkb = cin / 32, ncb = cout / 16;
    size_t xs = (size_t)cin * sizeof **rows, ob = (size_t)os * sizeof *o;
    for (int x0 = 0; x0 < w; x0 += 32) {
        int xb = x0 + 32 <= w ? x0 : w - 32;
        for (int cb = 0; cb < ncb; cb += 2) {
            _tile_zero(0);
            _tile_zero(1);
            _tile_zero(2);
            _tile_zero(3);
            for (int ky = 0; ky < op->kh; ky++)
                for (int kx = 0; kx < op->kw; kx++) {
                    const uint16_t *a = rows[ky] + ((size_t)xb + (size_t)kx * op->dw) * cin;
                    const uint16_t *b = wq + (((size_t)(ky * op->kw + kx) * nkb) * ncb + cb) * 512;
                    for (int kb = 0; kb < nkb; kb++, a += 32, b += (size_t)ncb * 512) {
                        _tile_loadd(4, a, xs);
                        _tile_loadd(5, a + 16 * (size_t)cin, xs);
                        _tile_loadd(6, b, 64);
                        _tile_loadd(7, b + 512, 64);
                        _tile_dpbf16ps(0, 4, 6);
                        _tile_dpbf16ps(1, 4, 7);
                        _tile_dpbf16ps(2, 5, 6);
                        _tile_dpbf16ps(3, 5, 7);
                    }
                }
            float *c = o + (size_t)xb * os + cb * 16;
            _tile_stored(0, c, ob);
            _tile_stored(1, c + 16, ob);
            _tile_stored(2, c + 16 * (size_t)os, ob);
            _tile_stored(3, c + 16 * (size_t)os + 16, ob);
        }
    }
    __m512 lo = _mm512_set1_ps(op->lo), hi = _mm512_set1_ps(op->hi);
    for (int p = 0; p < w; p++)
        for (int co = 0; co < cout; co += 16) {
            float *v = o + (size_t)p * os + co;
            __m512 r = _mm512_add_ps(_mm512_loadu_ps(v), _mm512_loadu_ps(op->b + co));
            _mm512_storeu_ps(v, _mm512_min_ps(_mm512_max_ps(r, lo), hi));
        }
}

