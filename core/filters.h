/* filters: separable 1-D correlation primitives for the filter bank.
 *
 * A separable 2-D filter is a row pass followed by a column pass, and both
 * passes run through the same two functions.  The source of a pass is an
 * array of 2r+1 pointers where src[r + j][x] is the sample at offset +j from
 * output position x: a row pass points into one padded row
 * (filt_sources_row), a column pass points at whole image rows with the row
 * index already reflected (filt_sources_col).  The inner loops then run over
 * contiguous x, which the compiler vectorises, and the border costs one
 * reflection per padded sample or per row pointer instead of a branch per tap.
 *
 * Kernels are half kernels k[0..r]: k[j] is the weight at offset +j, and the
 * weight at -j is k[j] (filt_sym) or -k[j] (filt_anti).  Every kernel of the
 * bank is one of the two, so the half form also halves the multiplies.
 * Border rule everywhere: scipy.ndimage mode 'reflect' (d c b a | a b c d),
 * periodic with period 2n, so radii larger than the image are fine. */
#ifndef ST_FILTERS_H
#define ST_FILTERS_H

/* The hot loops get O3, sqrt without errno (so it vectorises; no caller
 * reads errno) and AVX2 / AVX-512 clones chosen at load time, so
 * the binary still runs on any x86-64 while using the wide units it finds. */
#if defined(__x86_64__) && defined(__GNUC__) && !defined(__clang__)
#define FILT_HOT __attribute__((optimize("O3", "no-math-errno"), target_clones("arch=x86-64-v4", "arch=x86-64-v3", "default")))
#else
#define FILT_HOT
#endif

/* Index in [0, n) that position i maps to under reflection; n >= 1. */
int filt_reflect(int i, int n);

/* pad[0 .. w+2r) = row extended by r reflected samples on each side. */
void filt_pad_row(const float *row, int w, int r, float *pad);

/* src[0 .. 2r] for a row pass of radius r over a row padded by rpad >= r. */
void filt_sources_row(const float *pad, int rpad, int r, const float **src);

/* src[0 .. 2r] = the rows y-r .. y+r of a w x h plane, reflected. */
void filt_sources_col(const float *plane, int w, int h, int y, int r, const float **src);

/* out[x] = k[0] src[r][x] + sum_j k[j] (src[r+j][x] + src[r-j][x]) */
void filt_sym(const float *const *src, const float *k, int r, int w, float *out);
/* out[x] = sum_j k[j] (src[r+j][x] - src[r-j][x]) */
void filt_anti(const float *const *src, const float *k, int r, int w, float *out);

/* filt_sym(src, ks) into os and filt_anti(src, ka) into oa in one sweep,
 * sharing the loads (the same values as the two calls). */
void filt_pair(const float *const *src, const float *ks, const float *ka, int r, int w, float *os, float *oa);

/* The passes of nrows consecutive output rows at once: src holds 2r + nrows
 * sources and output row i is the single-row pass over src + i, written to
 * os[i] (symmetric, ks) and oa[i] (antisymmetric, ka); os or oa may be NULL,
 * not both.  The same bits as the single-row calls, faster for a column
 * pass, whose sources are then read once per group of rows. */
void filt_rows(const float *const *src, const float *ks, const float *ka, int r, int w, int nrows,
               float *const *os, float *const *oa);

/* Gaussian radius as scipy.ndimage.gaussian_filter with truncate=4:
 * (int)(4 sigma + 0.5). */
int filt_gauss_radius(double sigma);

/* Half kernels of radius r for correlation, as scipy builds them
 * (scipy.ndimage._filters._gaussian_kernel1d, applied reversed, i.e. as a
 * convolution):
 *   phi(x) = exp(-x^2 / (2 sigma^2)) / sum_{|t|<=r} exp(-t^2 / (2 sigma^2))
 *   k0[j] = phi(j)                                 symmetric, smoothing
 *   k1[j] = j / sigma^2 * phi(j)                   antisymmetric, d/dx
 *   k2[j] = (j^2 / sigma^4 - 1 / sigma^2) phi(j)   symmetric, d2/dx2
 * Any of k0, k1, k2 may be NULL. */
void filt_gauss_kernels(double sigma, int r, float *k0, float *k1, float *k2);

/* Gabor kernel of skimage.filters.gabor_kernel(freq, theta, bandwidth=1,
 * n_stds=3, offset=0).  With bandwidth 1 the envelope is isotropic,
 *   s = (1/pi) sqrt(ln 2 / 2) (2^1 + 1) / (2^1 - 1) / freq,
 * so the 2-D kernel g(x, y) = exp(-(x^2+y^2) / (2 s^2)) / (2 pi s^2)
 *   * exp(2 pi i freq (x cos theta + y sin theta))
 * is the outer product kx(x) ky(y) of
 *   kx(x) = exp(-x^2 / (2 s^2)) exp(2 pi i freq cos(theta) x) / (2 pi s^2)
 *   ky(y) = exp(-y^2 / (2 s^2)) exp(2 pi i freq sin(theta) y)
 * on skimage's square grid |x|, |y| <= r,
 *   r = ceil(max(|3 s cos theta|, |3 s sin theta|, 1)).
 * Real parts are symmetric, imaginary parts antisymmetric, so each comes as
 * a half kernel of radius r.  A cos or sin of theta below 1e-12 counts as 0,
 * so kx is exactly real at theta = pi/2 as ky is at 0. */
int filt_gabor_radius(double freq, double theta);
void filt_gabor_kernels(double freq, double theta, int r, float *xre, float *xim, float *yre, float *yim);

#endif
