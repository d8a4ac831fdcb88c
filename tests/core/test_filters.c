/* Unit tests of core/filters: every form of a pass (one row, a pair, many
 * rows at once; AVX-512, AVX2 or portable, whichever this CPU runs) gives
 * the bits of the order filters.h documents: the centre product, then one
 * fused multiply-add per tap j = 1..r of the pre-added (or pre-subtracted)
 * pair.  The reference is ISO C's fmaf (IEEE 754 fusedMultiplyAdd, one
 * rounding) applied in that order, value by value; the values themselves
 * are held to scipy in tests/ref/test_features.py. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "core/filters.h"

#define MAXR 32
#define MAXW 83
#define MAXROWS 19
#define NSRC (2 * MAXR + MAXROWS)

static uint32_t lcg(uint32_t *s)
{
    *s = *s * 1664525u + 1013904223u;
    return *s >> 8;
}

/* Values of both signs and many exponents, so rounding differences show. */
static float value(uint32_t *s)
{
    float m = (float)(lcg(s) % 2000001u) / 1000000.0f - 1.0f;
    return ldexpf(m, (int)(lcg(s) % 9u) - 4);
}

static float ref(const float *const *src, const float *k, int r, int x, int anti)
{
    float acc = (anti ? 0.0f : k[0]) * src[r][x];
    for (int j = 1; j <= r; j++) {
        float a = src[r - j][x], b = src[r + j][x];
        acc = fmaf(k[j], anti ? b - a : b + a, acc);
    }
    return acc;
}

static void check_row(const float *got, const float *const *src, const float *k, int r, int w, int anti,
                      const char *what)
{
    for (int x = 0; x < w; x++) {
        float want = ref(src, k, r, x, anti);
        if (memcmp(&got[x], &want, sizeof want) != 0)
            fail_msg("%s r=%d w=%d x=%d: %.9g, the fmaf chain gives %.9g", what, r, w, x, got[x], want);
    }
}

static void poison(float os[MAXROWS][MAXW], float oa[MAXROWS][MAXW])
{
    memset(os, 0xff, sizeof(float[MAXROWS][MAXW]));   /* all bits set: a NaN */
    memset(oa, 0xff, sizeof(float[MAXROWS][MAXW]));
}

static void test_passes_match_fma_chain(void **state)
{
    (void)state;
    static float rows[NSRC][MAXW], os[MAXROWS][MAXW], oa[MAXROWS][MAXW];
    float ks[MAXR + 1], ka[MAXR + 1];
    const float *src[NSRC];
    float *po[MAXROWS], *pa[MAXROWS];
    uint32_t seed = 7;
    const int radii[] = {1, 2, 4, 5, 8, 17, 32};
    const int widths[] = {1, 7, 15, 16, 17, 33, 64, 65, 83};
    for (size_t ri = 0; ri < sizeof radii / sizeof radii[0]; ri++) {
        int r = radii[ri];
        for (int j = 0; j <= r; j++) {
            ks[j] = value(&seed);
            ka[j] = value(&seed);
        }
        for (size_t wi = 0; wi < sizeof widths / sizeof widths[0]; wi++) {
            int w = widths[wi];
            for (int t = 0; t < NSRC; t++) {
                for (int x = 0; x < w; x++)
                    rows[t][x] = value(&seed);
                src[t] = rows[t];
            }
            for (int i = 0; i < MAXROWS; i++) {
                po[i] = os[i];
                pa[i] = oa[i];
            }
            /* every output starts as NaN before each call, so a pass that
             * leaves a value unwritten cannot pass on an earlier call's */
            poison(os, oa);
            filt_sym(src, ks, r, w, os[0]);
            check_row(os[0], src, ks, r, w, 0, "filt_sym");
            filt_anti(src, ka, r, w, oa[0]);
            check_row(oa[0], src, ka, r, w, 1, "filt_anti");
            poison(os, oa);
            filt_pair(src, ks, ka, r, w, os[0], oa[0]);
            check_row(os[0], src, ks, r, w, 0, "filt_pair (symmetric)");
            check_row(oa[0], src, ka, r, w, 1, "filt_pair (antisymmetric)");
            /* row counts around the groups the wide form takes */
            for (int nr = 1; nr <= MAXROWS; nr += 3) {
                poison(os, oa);
                filt_rows(src, ks, ka, r, w, nr, po, pa);
                for (int i = 0; i < nr; i++) {
                    check_row(os[i], src + i, ks, r, w, 0, "filt_rows (pair, symmetric)");
                    check_row(oa[i], src + i, ka, r, w, 1, "filt_rows (pair, antisymmetric)");
                }
                poison(os, oa);
                filt_rows(src, ks, NULL, r, w, nr, po, NULL);
                for (int i = 0; i < nr; i++)
                    check_row(os[i], src + i, ks, r, w, 0, "filt_rows (symmetric)");
                poison(os, oa);
                filt_rows(src, NULL, ka, r, w, nr, NULL, pa);
                for (int i = 0; i < nr; i++)
                    check_row(oa[i], src + i, ka, r, w, 1, "filt_rows (antisymmetric)");
            }
        }
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_passes_match_fma_chain),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
