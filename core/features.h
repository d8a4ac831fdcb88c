/* features: the fixed filter bank that turns a frame into per-pixel features.
 *
 * A feat_spec (from the recipe) selects filter families and scales; the
 * feature list is the fixed product of the two, in a documented order, so a
 * model trained on one spec is only valid for that spec (feat_count and
 * feat_name give the list; the model metadata stores the names).
 *
 * Input preparation: the RGB frame becomes float planes in [0,1]
 * (byte / 255); a 1-channel frame gives R = G = B = grey.  When
 * spec.normalise is set, all planes are divided by the part's brightness
 * level and multiplied by 0.5, so a part under dimmer or brighter light gives
 * the same features.  The level is the median grey value of the pixels
 * brighter than the frame's mean grey (numpy.median: the mean of the two
 * middle values for an even count), floored at 1/255; a uniform frame, which
 * has no pixel above its mean, uses its mean.  Grey = 0.299 R + 0.587 G +
 * 0.114 B.  Every filter except the colour channels works on the grey plane I.
 * Borders: reflection that repeats the edge pixel (d c b a | a b c d), which
 * is scipy.ndimage's mode 'reflect'.
 *
 * Definitions, per sigma s (what tests/ref/test_features.py checks):
 *   G_s      sampled Gaussian exp(-x^2 / (2 s^2)) normalised to sum 1, radius
 *            (int)(4 s + 0.5), applied separably: gauss = G_s * I ==
 *            scipy.ndimage.gaussian_filter(I, s, mode='reflect', truncate=4).
 *            The first and second derivative kernels are scipy's
 *            (_gaussian_kernel1d orders 1 and 2), same radius.
 *   gradient sqrt(Ix^2 + Iy^2), Ix = dG_s/dx * I (smoothing in y) and alike:
 *            scipy.ndimage.gaussian_gradient_magnitude.
 *   laplace  Ixx + Iyy with second-derivative kernels:
 *            scipy.ndimage.gaussian_laplace.  Because the truncated kernel's
 *            second derivative does not sum to exactly 0, a uniform image of
 *            value c gives the small constant 2 c sum(k2), as scipy does.
 *   hessian  H = numpy.gradient twice of G_s * I (central differences
 *            inside, one-sided first differences at the borders, 0 along a
 *            side of length 1), eigenvalues (a+c)/2 +- sqrt(4 b^2 + (a-c)^2)/2
 *            of [[a b][b c]], hi then lo: skimage 0.19
 *            hessian_matrix(I, s, mode='reflect', order='rc') with
 *            hessian_matrix_eigvals.
 *   structure  Sobel derivatives Dx, Dy (scipy.ndimage.sobel: [-1 0 1] along
 *            the axis times [1 2 1] across, unnormalised), the products
 *            Dx^2, Dx Dy, Dy^2 smoothed by G_s, eigenvalues as above, hi then
 *            lo: skimage structure_tensor(I, s, mode='reflect', order='rc')
 *            with structure_tensor_eigenvalues.
 *   localstd sqrt(max(0, G_s*(J^2) - (G_s*J)^2)) with J = I - mean(I); the
 *            variance does not change with the shift, which only keeps the
 *            float32 difference from cancelling (a uniform image gives 0).
 * Gabor, per frequency f and orientation theta = k pi / n (k = 0..n-1):
 *   the magnitude |I * g| of the complex kernel
 *   skimage.filters.gabor_kernel(f, theta, bandwidth=1, n_stds=3, offset=0)
 *   (isotropic envelope sigma = 0.5622 / f on skimage's square grid; see
 *   filters.h), as sqrt(real^2 + imag^2) of scipy.ndimage.convolve with
 *   the real and imaginary parts, mode 'reflect'.  Orientation pi - theta
 *   uses the conjugate of theta's kx (its response then comes from theta's
 *   passes); skimage's own kernel for it differs by rounding only.
 *
 * Feature order and names (feat_name):
 *   colour_r colour_g colour_b                               FEAT_COLOUR
 *   then for each sigma in spec order, the selected ones of
 *   gauss_sS gradient_sS laplace_sS hessian_hi_sS hessian_lo_sS
 *   structure_hi_sS structure_lo_sS localstd_sS
 *   then for each frequency, each orientation: gabor_fF_tT  FEAT_GABOR
 *   with S, F printed by %g and T = theta in degrees by %g ("gauss_s2",
 *   "hessian_hi_s4", "gabor_f0.25_t45").
 *
 * A feat_ctx owns all scratch buffers for one frame size so that per-frame
 * work allocates nothing (planar float planes, about 45 of w x h for the
 * default spec); with a network, a cnnfeat context as well; it is not shared between threads, but feat_compute itself
 * splits rows over spec.threads worker threads (started per call; one that
 * cannot start has its rows done by the caller). */
#ifndef ST_FEATURES_H
#define ST_FEATURES_H

#include <stddef.h>

#include "cnnfeat.h"
#include "image.h"

enum feat_family {
    FEAT_COLOUR = 1u << 0,    /* R, G, B after normalisation: 3 features */
    FEAT_GAUSS = 1u << 1,     /* G_s * I, per sigma */
    FEAT_GRADIENT = 1u << 2,  /* |grad G_s * I| via Gaussian derivatives, per sigma */
    FEAT_LAPLACE = 1u << 3,   /* (d2/dx2 + d2/dy2) G_s * I, per sigma */
    FEAT_HESSIAN = 1u << 4,   /* 2 eigenvalues of the Hessian of G_s * I, per sigma */
    FEAT_STRUCTURE = 1u << 5, /* 2 eigenvalues of the structure tensor, per sigma */
    FEAT_LOCALSTD = 1u << 6,  /* sqrt(max(0, G_s*(J^2) - (G_s*J)^2)), per sigma */
    FEAT_GABOR = 1u << 7      /* |Gabor response| per frequency and orientation */
};

#define FEAT_MAX_SIGMAS 4
#define FEAT_MAX_GABOR_FREQS 3
#define FEAT_MAX_ORIENT 8
#define FEAT_MAX_THREADS 64

struct feat_spec {
    unsigned families;                        /* OR of enum feat_family, not 0 */
    int nsigmas;                              /* 1..FEAT_MAX_SIGMAS when a per-sigma family is on */
    double sigmas[FEAT_MAX_SIGMAS];           /* each in [0.5, 16], distinct */
    int gabor_orientations;                   /* 1..FEAT_MAX_ORIENT, theta = k*pi/n */
    int ngabor_freqs;                         /* 1..FEAT_MAX_GABOR_FREQS with FEAT_GABOR */
    double gabor_freqs[FEAT_MAX_GABOR_FREQS]; /* cycles per pixel, in [0.01, 0.5], distinct */
    int normalise;                            /* 1: divide by the part's brightness level; 0 or 1 */
    int threads;                              /* 1..FEAT_MAX_THREADS */
    /* A cut network (core/cnnfeat.h): its features follow the bank's, and
     * families may then be 0 (no bank). */
    struct cnnfeat_spec cnn;
};

/* Fills spec with the demo default: all families, sigmas 1 2 4, Gabor at
 * 4 orientations and frequencies 0.1 and 0.25, normalise on, 2 threads
 * (35 features). */
void feat_spec_default(struct feat_spec *spec);
/* ST_OK, or ST_EINVAL / ST_ERANGE naming the offending field.  Fields of
 * families that are off are not looked at. */
int feat_spec_check(const struct feat_spec *spec, struct err *e);

/* Number of features the spec yields (-1 for a spec feat_spec_check
 * refuses), and the name of feature k: ST_OK, ST_EINVAL for a bad spec,
 * ST_ERANGE when k is out of range or buf is too small. */
int feat_count(const struct feat_spec *spec);
int feat_name(const struct feat_spec *spec, int k, char *buf, size_t len);

struct feat_ctx;
struct feat_ctx *feat_ctx_new(const struct feat_spec *spec, int w, int h, struct err *e);
void feat_ctx_free(struct feat_ctx *ctx);

/* Computes all features of img (1 or 3 channels, size as given to
 * feat_ctx_new) into out (w, h, n = feat_count). */
int feat_compute(struct feat_ctx *ctx, const struct image *img, struct fstack *out, struct err *e);

/* Pixels [x0, x1) x [y0, y1) of the frame. */
struct feat_box {
    int x0, y0, x1, y1;
};
/* feat_compute for the pixels of box only: there out holds the same bits
 * feat_compute writes (the borders still reflect at the frame's edges, and
 * the brightness level and mean grey are still the whole frame's); the rest
 * of out is left as it was.  Work falls with the box's area plus a margin
 * of the largest kernel radius.  ST_EINVAL for an empty box or one that
 * leaves the frame. */
int feat_compute_box(struct feat_ctx *ctx, const struct image *img, const struct feat_box *box,
                     struct fstack *out, struct err *e);

/* Vector arithmetic the filter passes do per pixel of the frame (each
 * half-kernel tap is one add and one multiply-add, a symmetric kernel's
 * centre one multiply), for the benchmark's floor: the element-wise steps
 * (magnitudes, eigenvalues) come on top. */
double feat_pass_ops(const struct feat_ctx *ctx);

#endif
