#include "filters.h"

#include <math.h>
#include <string.h>

#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#include <immintrin.h>
#define FILT_WIDE 1
#endif

static const double filt_pi = 3.14159265358979323846;

int filt_reflect(int i, int n)
{
    int period = 2 * n;
    i %= period;
    if (i < 0)
        i += period;
    return i < n ? i : period - 1 - i;
}

void filt_pad_row(const float *row, int w, int r, float *pad)
{
    memcpy(pad + r, row, (size_t)w * sizeof *row);
    for (int i = 1; i <= r; i++) {
        pad[r - i] = row[filt_reflect(-i, w)];
        pad[r + w - 1 + i] = row[filt_reflect(w - 1 + i, w)];
    }
}

void filt_sources_row(const float *pad, int rpad, int r, const float **src)
{
    for (int t = 0; t <= 2 * r; t++)
        src[t] = pad + (rpad - r) + t;
}

void filt_sources_col(const float *plane, int w, int h, int y, int r, const float **src)
{
    for (int t = 0; t <= 2 * r; t++)
        src[t] = plane + (size_t)filt_reflect(y - r + t, h) * (size_t)w;
}

/* The tap loops live in functions of their own because GCC trusts restrict
 * on parameters (kept through inlining) but not on block-scope pointers;
 * without it the loops fall back to a scalar path.  Four taps per sweep cut
 * the loads and stores of out.  anti is a literal at every call, so the
 * inlined branch folds away. */
#define FILT_TAPS static inline __attribute__((always_inline))

FILT_TAPS float tap(float a, float b, int anti)
{
    return anti ? b - a : b + a;
}

FILT_TAPS void taps4(float *restrict out, const float *restrict a1, const float *restrict b1,
                     const float *restrict a2, const float *restrict b2, const float *restrict a3,
                     const float *restrict b3, const float *restrict a4, const float *restrict b4,
                     const float *k, int w, int anti)
{
    const float k1 = k[0], k2 = k[1], k3 = k[2], k4 = k[3];
    for (int x = 0; x < w; x++)
        out[x] = fmaf(k4, tap(a4[x], b4[x], anti),
                      fmaf(k3, tap(a3[x], b3[x], anti),
                           fmaf(k2, tap(a2[x], b2[x], anti), fmaf(k1, tap(a1[x], b1[x], anti), out[x]))));
}

FILT_TAPS void taps1(float *restrict out, const float *restrict a, const float *restrict b, float k, int w,
                     int anti)
{
    for (int x = 0; x < w; x++)
        out[x] = fmaf(k, tap(a[x], b[x], anti), out[x]);
}

FILT_TAPS void taps_centre(float *restrict out, const float *restrict c, float k, int w)
{
    for (int x = 0; x < w; x++)
        out[x] = k * c[x];
}

FILT_TAPS void filt_run(const float *const *src, const float *k, int r, int w, float *out, int anti)
{
    /* an antisymmetric kernel has no centre tap: k[0] is ignored, as documented */
    taps_centre(out, src[r], anti ? 0.0f : k[0], w);
    int j = 1;
    for (; j + 3 <= r; j += 4)
        taps4(out, src[r - j], src[r + j], src[r - j - 1], src[r + j + 1], src[r - j - 2], src[r + j + 2],
              src[r - j - 3], src[r + j + 3], k + j, w, anti);
    for (; j <= r; j++)
        taps1(out, src[r - j], src[r + j], k[j], w, anti);
}

/* Both parts of a complex (or value-and-derivative) kernel share every
 * load: out_s += ks (a + b), out_a += ka (b - a). */
FILT_TAPS void taps_pair4(float *restrict os, float *restrict oa, const float *restrict a1,
                          const float *restrict b1, const float *restrict a2, const float *restrict b2,
                          const float *restrict a3, const float *restrict b3, const float *restrict a4,
                          const float *restrict b4, const float *ks, const float *ka, int w)
{
    const float s1 = ks[0], s2 = ks[1], s3 = ks[2], s4 = ks[3];
    const float d1 = ka[0], d2 = ka[1], d3 = ka[2], d4 = ka[3];
    for (int x = 0; x < w; x++) {
        os[x] = fmaf(s4, b4[x] + a4[x], fmaf(s3, b3[x] + a3[x], fmaf(s2, b2[x] + a2[x], fmaf(s1, b1[x] + a1[x], os[x]))));
        oa[x] = fmaf(d4, b4[x] - a4[x], fmaf(d3, b3[x] - a3[x], fmaf(d2, b2[x] - a2[x], fmaf(d1, b1[x] - a1[x], oa[x]))));
    }
}

FILT_HOT static void pair_clones(const float *const *src, const float *ks, const float *ka, int r, int w,
                                 float *os, float *oa)
{
    taps_centre(os, src[r], ks[0], w);
    taps_centre(oa, src[r], 0.0f, w);
    int j = 1;
    for (; j + 3 <= r; j += 4)
        taps_pair4(os, oa, src[r - j], src[r + j], src[r - j - 1], src[r + j + 1], src[r - j - 2], src[r + j + 2],
                   src[r - j - 3], src[r + j + 3], ks + j, ka + j, w);
    for (; j <= r; j++) {
        taps1(os, src[r - j], src[r + j], ks[j], w, 0);
        taps1(oa, src[r - j], src[r + j], ka[j], w, 1);
    }
}

FILT_HOT static void sym_clones(const float *const *src, const float *k, int r, int w, float *out)
{
    filt_run(src, k, r, w, out, 0);
}

FILT_HOT static void anti_clones(const float *const *src, const float *k, int r, int w, float *out)
{
    filt_run(src, k, r, w, out, 1);
}

#ifdef FILT_WIDE
/* The AVX-512 form keeps the outputs of 64 columns in registers through all
 * taps, so a tap costs two loads, an add and an FMA per vector and no load
 * and store of the output: the loops above stream the output through
 * memory once per four taps, and a column pass's sources of radius 32 then
 * compete with it for the cache.  The arithmetic is theirs in their order
 * (centre product, then the taps j = 1..r each as one FMA of the pre-added
 * pair), so every output has the same bits on every path. */
#define WIDE_VECS 4

__attribute__((target("avx512f"), always_inline)) static inline void
wide_chunk(const float *const *src, const float *ks, const float *ka, int r, int x, __mmask16 m, const int nv,
           float *os, float *oa)
{
    __m512 s[WIDE_VECS], a[WIDE_VECS];
    const float *c = src[r] + x;
    const __m512 k0 = _mm512_set1_ps(os ? ks[0] : 0.0f), zero = _mm512_setzero_ps();
#pragma GCC unroll 4
    for (int v = 0; v < nv; v++) {
        __m512 cv = _mm512_maskz_loadu_ps(m, c + 16 * v);
        s[v] = _mm512_mul_ps(k0, cv);
        a[v] = _mm512_mul_ps(zero, cv); /* the antisymmetric pass's centre: 0 * c, signed zero and all */
    }
    for (int j = 1; j <= r; j++) {
        const float *lo = src[r - j] + x, *hi = src[r + j] + x;
        const __m512 kj = _mm512_set1_ps(os ? ks[j] : 0.0f), kd = _mm512_set1_ps(oa ? ka[j] : 0.0f);
#pragma GCC unroll 4
        for (int v = 0; v < nv; v++) {
            __m512 l = _mm512_maskz_loadu_ps(m, lo + 16 * v), h = _mm512_maskz_loadu_ps(m, hi + 16 * v);
            if (os)
                s[v] = _mm512_fmadd_ps(kj, _mm512_add_ps(h, l), s[v]);
            if (oa)
                a[v] = _mm512_fmadd_ps(kd, _mm512_sub_ps(h, l), a[v]);
        }
    }
#pragma GCC unroll 4
    for (int v = 0; v < nv; v++) {
        if (os)
            _mm512_mask_storeu_ps(os + x + 16 * v, m, s[v]);
        if (oa)
            _mm512_mask_storeu_ps(oa + x + 16 * v, m, a[v]);
    }
}

/* Inlined per output set, so the tests on os and oa fold away. */
__attribute__((target("avx512f"), always_inline)) static inline void
wide_run(const float *const *src, const float *ks, const float *ka, int r, int w, float *os, float *oa)
{
    int x = 0;
    for (; x + 16 * WIDE_VECS <= w; x += 16 * WIDE_VECS)
        wide_chunk(src, ks, ka, r, x, (__mmask16)0xffff, WIDE_VECS, os, oa);
    for (; x + 16 <= w; x += 16)
        wide_chunk(src, ks, ka, r, x, (__mmask16)0xffff, 1, os, oa);
    if (x < w)
        wide_chunk(src, ks, ka, r, x, (__mmask16)((1u << (w - x)) - 1), 1, os, oa);
}

__attribute__((target("avx512f"))) static void wide_sym(const float *const *src, const float *k, int r, int w,
                                                        float *out)
{
    wide_run(src, k, NULL, r, w, out, NULL);
}

__attribute__((target("avx512f"))) static void wide_anti(const float *const *src, const float *k, int r, int w,
                                                         float *out)
{
    wide_run(src, NULL, k, r, w, NULL, out);
}

__attribute__((target("avx512f"))) static void wide_pair(const float *const *src, const float *ks,
                                                         const float *ka, int r, int w, float *os, float *oa)
{
    wide_run(src, ks, ka, r, w, os, oa);
}

/* ROWS output rows of one pass, 16 columns at a time: the sources of those
 * columns (2r + ROWS lines of 64 bytes) stay in L1 for every tap of every
 * row, where a row at a time across the width reloads each source line
 * from L2 for each output row.
 *
 * Tap j of output row i pairs sources r + i - j and r + i + j, so from one
 * tap to the next the ROWS low sources slide down by one row and the ROWS
 * high ones up by one: both windows live in registers as rings, and a tap
 * of all ROWS outputs loads two vectors (the rows entering the windows)
 * instead of 2 ROWS.  Blocks of ROWS taps bring the rings back to the same
 * register names, so every ring index below is a constant after
 * unrolling; the taps past the last whole block load their pairs.  Per
 * output the arithmetic is the single-row pass's (centre product, then
 * taps j = 1..r, each one FMA of the pre-added pair), so the bits are too. */
#define ROWS 8
/* Prefetch distance in floats: two chunks on. */
#define ROWS_AHEAD 32

__attribute__((target("avx512f"), always_inline)) static inline __m512 rows_pair(__m512 h, __m512 l, int anti)
{
    return anti ? _mm512_sub_ps(h, l) : _mm512_add_ps(h, l);
}

__attribute__((target("avx512f"), always_inline)) static inline void
rows_chunk(const float *const *src, const float *k, int r, int x, __mmask16 m, int anti, float *const *o)
{
    __m512 acc[ROWS], lo[ROWS], hi[ROWS];
    const __m512 k0 = _mm512_set1_ps(anti ? 0.0f : k[0]);
    /* the lines two chunks on: a source row's lines are 2 KB and more apart
     * and the hardware does not follow 2r + ROWS such streams */
    for (int t = 0; t < 2 * r + ROWS; t++)
        _mm_prefetch((const char *)(src[t] + x + ROWS_AHEAD), _MM_HINT_T0);
#pragma GCC unroll 8
    for (int i = 0; i < ROWS; i++)
        acc[i] = _mm512_mul_ps(k0, _mm512_maskz_loadu_ps(m, src[r + i] + x));
    int j = 1;
    if (r >= ROWS) {
        /* before tap j: lo[i] = source r - j + i, hi[i] = source r + j + i */
#pragma GCC unroll 8
        for (int i = 1; i < ROWS; i++)
            lo[i] = _mm512_maskz_loadu_ps(m, src[r - 1 + i] + x);
#pragma GCC unroll 8
        for (int i = 0; i < ROWS - 1; i++)
            hi[i] = _mm512_maskz_loadu_ps(m, src[r + 1 + i] + x);
        for (; j + ROWS - 1 <= r; j += ROWS) {
            const float *const *sl = src + (r - j), *const *sh = src + (r + j);
#pragma GCC unroll 8
            for (int u = 0; u < ROWS; u++) {
                /* tap j + u: output i reads sl[i - u] and sh[i + u] */
                lo[(ROWS - u) % ROWS] = _mm512_maskz_loadu_ps(m, sl[-u] + x);
                hi[(u + ROWS - 1) % ROWS] = _mm512_maskz_loadu_ps(m, sh[u + ROWS - 1] + x);
                const __m512 kj = _mm512_set1_ps(k[j + u]);
#pragma GCC unroll 8
                for (int i = 0; i < ROWS; i++)
                    acc[i] = _mm512_fmadd_ps(kj, rows_pair(hi[(u + i) % ROWS], lo[(i - u + ROWS) % ROWS], anti),
                                             acc[i]);
            }
        }
    }
    for (; j <= r; j++) {
        const __m512 kj = _mm512_set1_ps(k[j]);
#pragma GCC unroll 8
        for (int i = 0; i < ROWS; i++) {
            __m512 l = _mm512_maskz_loadu_ps(m, src[r + i - j] + x), h = _mm512_maskz_loadu_ps(m, src[r + i + j] + x);
            acc[i] = _mm512_fmadd_ps(kj, rows_pair(h, l, anti), acc[i]);
        }
    }
#pragma GCC unroll 8
    for (int i = 0; i < ROWS; i++)
        _mm512_mask_storeu_ps(o[i] + x, m, acc[i]);
}

__attribute__((target("avx512f"), always_inline)) static inline void
rows_run(const float *const *src, const float *k, int r, int w, int anti, float *const *o)
{
    int x = 0;
    for (; x + 16 <= w; x += 16)
        rows_chunk(src, k, r, x, (__mmask16)0xffff, anti, o);
    if (x < w)
        rows_chunk(src, k, r, x, (__mmask16)((1u << (w - x)) - 1), anti, o);
}

/* The two parts of a pair in two sweeps: both rings and both sets of
 * outputs would need more than the 32 registers. */
__attribute__((target("avx512f"))) static void rows_wide(const float *const *src, const float *ks,
                                                         const float *ka, int r, int w, float *const *os,
                                                         float *const *oa)
{
    if (os)
        rows_run(src, ks, r, w, 0, os);
    if (oa)
        rows_run(src, ka, r, w, 1, oa);
}

static int filt_has_wide(void)
{
    return __builtin_cpu_supports("avx512f");
}
#else
static int filt_has_wide(void)
{
    return 0;
}
#define wide_sym sym_clones
#define wide_anti anti_clones
#define wide_pair pair_clones
#endif

void filt_sym(const float *const *src, const float *k, int r, int w, float *out)
{
    if (filt_has_wide())
        wide_sym(src, k, r, w, out);
    else
        sym_clones(src, k, r, w, out);
}

void filt_anti(const float *const *src, const float *k, int r, int w, float *out)
{
    if (filt_has_wide())
        wide_anti(src, k, r, w, out);
    else
        anti_clones(src, k, r, w, out);
}

void filt_pair(const float *const *src, const float *ks, const float *ka, int r, int w, float *os, float *oa)
{
    if (filt_has_wide())
        wide_pair(src, ks, ka, r, w, os, oa);
    else
        pair_clones(src, ks, ka, r, w, os, oa);
}

void filt_rows(const float *const *src, const float *ks, const float *ka, int r, int w, int nrows,
               float *const *os, float *const *oa)
{
    int i = 0;
#ifdef FILT_WIDE
    if (filt_has_wide())
        for (; i + ROWS <= nrows; i += ROWS)
            rows_wide(src + i, ks, ka, r, w, os ? os + i : NULL, oa ? oa + i : NULL);
#endif
    for (; i < nrows; i++) {
        if (os && oa)
            filt_pair(src + i, ks, ka, r, w, os[i], oa[i]);
        else if (os)
            filt_sym(src + i, ks, r, w, os[i]);
        else
            filt_anti(src + i, ka, r, w, oa[i]);
    }
}

int filt_gauss_radius(double sigma)
{
    return (int)(4.0 * sigma + 0.5);
}

void filt_gauss_kernels(double sigma, int r, float *k0, float *k1, float *k2)
{
    double s2 = sigma * sigma;
    double sum = 1.0;
    for (int j = 1; j <= r; j++)
        sum += 2.0 * exp(-0.5 / s2 * j * j);
    for (int j = 0; j <= r; j++) {
        double phi = exp(-0.5 / s2 * j * j) / sum;
        if (k0)
            k0[j] = (float)phi;
        if (k1)
            k1[j] = (float)(j / s2 * phi);
        if (k2)
            k2[j] = (float)(((double)j * j / (s2 * s2) - 1.0 / s2) * phi);
    }
}

/* skimage's _sigma_prefactor(1) / freq, evaluated in the same order. */
static double filt_gabor_sigma(double freq)
{
    return 1.0 / filt_pi * sqrt(log(2.0) / 2.0) * (2.0 + 1.0) / (2.0 - 1.0) / freq;
}

/* cos(pi/2) is 6e-17 in doubles; as 0 it makes kx exactly real at pi/2
 * (a change far below float32 resolution) so the caller can skip a pass. */
static double filt_snap(double v)
{
    return fabs(v) < 1e-12 ? 0.0 : v;
}

int filt_gabor_radius(double freq, double theta)
{
    double s = filt_gabor_sigma(freq);
    double m = fmax(fabs(3.0 * s * cos(theta)), fabs(3.0 * s * sin(theta)));
    return (int)ceil(fmax(m, 1.0));
}

void filt_gabor_kernels(double freq, double theta, int r, float *xre, float *xim, float *yre, float *yim)
{
    double s = filt_gabor_sigma(freq);
    double norm = 1.0 / (2.0 * filt_pi * s * s);
    double wx = 2.0 * filt_pi * freq * filt_snap(cos(theta));
    double wy = 2.0 * filt_pi * freq * filt_snap(sin(theta));
    for (int j = 0; j <= r; j++) {
        double env = exp(-0.5 * j * j / (s * s));
        xre[j] = (float)(norm * env * cos(wx * j));
        xim[j] = (float)(norm * env * sin(wx * j));
        yre[j] = (float)(env * cos(wy * j));
        yim[j] = (float)(env * sin(wy * j));
    }
}
