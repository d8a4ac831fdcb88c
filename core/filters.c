#include "filters.h"

#include <math.h>
#include <string.h>

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

FILT_HOT void filt_pair(const float *const *src, const float *ks, const float *ka, int r, int w, float *os,
                        float *oa)
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

FILT_HOT void filt_sym(const float *const *src, const float *k, int r, int w, float *out)
{
    filt_run(src, k, r, w, out, 0);
}

FILT_HOT void filt_anti(const float *const *src, const float *k, int r, int w, float *out)
{
    filt_run(src, k, r, w, out, 1);
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
