#!/usr/bin/python3
"""Reference check of the filter bank (core/features.c, via tests/tools/featdump).

Every feature plane of a few seeded, odd-sized frames is compared with the
float64 reference built from scipy.ndimage and skimage 0.19 exactly as
core/features.h defines it.  Tolerance: max |ours - ref| <= 1e-4 * (range of
the reference plane) + 1e-6, i.e. float32 accumulation error, far below any
definitional difference (a wrong border rule, kernel radius or grid shows up
at 1e-2 or more).  The feature names and their count must equal the list the
header documents."""
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy import ndimage as ndi
from skimage.feature import (hessian_matrix, hessian_matrix_eigvals,
                             structure_tensor, structure_tensor_eigenvalues)
from skimage.filters import gabor_kernel

import refcheck
TOOL = refcheck.tool("featdump")
REL_TOL = 1e-4
ABS_TOL = 1e-6
FAMILIES = ["colour", "gauss", "gradient", "laplace", "hessian", "structure", "localstd", "gabor"]


def check(ok, what):
    refcheck.check(what, ok)


def make_frame(seed, h, w, c):
    """Smooth shapes, an edge, a bright blob and noise: every filter sees structure."""
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    planes = []
    for ch in range(c):
        p = (90 + 50 * np.sin(xx / (2.3 + ch) + yy / 4.1) + 45 * (xx + 0.5 * yy > 0.6 * w)
             + 70 * np.exp(-((xx - 0.3 * w) ** 2 + (yy - 0.6 * h) ** 2) / (0.02 * w * h))
             + rng.normal(0, 12, (h, w)))
        planes.append(p)
    return np.clip(np.rint(np.stack(planes, axis=-1)), 0, 255).astype(np.uint8)


def tag(v):
    return "%g" % v


def reference(frame, families, sigmas, orient, freqs, normalise):
    """Returns (names, planes, level) in the documented feature order."""
    f = frame.astype(np.float64) / 255.0
    rgb = [f[..., 0]] * 3 if f.shape[2] == 1 else [f[..., i] for i in range(3)]
    grey = 0.299 * rgb[0] + 0.587 * rgb[1] + 0.114 * rgb[2]
    level = 1.0
    if normalise:
        bright = grey[grey > grey.mean()]
        level = max(np.median(bright) if bright.size else grey.mean(), 1.0 / 255.0)
        rgb = [p * (0.5 / level) for p in rgb]
        grey = grey * (0.5 / level)
    names, planes = [], []

    def add(name, plane):
        names.append(name)
        planes.append(plane)

    if "colour" in families:
        for ch, p in zip("rgb", rgb):
            add("colour_" + ch, p)
    for s in sigmas:
        st = "_s" + tag(s)
        g = ndi.gaussian_filter(grey, s, mode="reflect", truncate=4.0)
        if "gauss" in families:
            add("gauss" + st, g)
        if "gradient" in families:
            add("gradient" + st, ndi.gaussian_gradient_magnitude(grey, s, mode="reflect", truncate=4.0))
        if "laplace" in families:
            add("laplace" + st, ndi.gaussian_laplace(grey, s, mode="reflect", truncate=4.0))
        if "hessian" in families:
            ev = hessian_matrix_eigvals(hessian_matrix(grey, s, mode="reflect", order="rc"))
            add("hessian_hi" + st, ev[0])
            add("hessian_lo" + st, ev[1])
        if "structure" in families:
            ev = structure_tensor_eigenvalues(structure_tensor(grey, s, mode="reflect", order="rc"))
            add("structure_hi" + st, ev[0])
            add("structure_lo" + st, ev[1])
        if "localstd" in families:
            g2 = ndi.gaussian_filter(grey * grey, s, mode="reflect", truncate=4.0)
            add("localstd" + st, np.sqrt(np.maximum(0.0, g2 - g * g)))
    if "gabor" in families:
        for fr in freqs:
            for k in range(orient):
                kern = gabor_kernel(fr, theta=k * np.pi / orient, bandwidth=1, n_stds=3, offset=0)
                re = ndi.convolve(grey, kern.real, mode="reflect")
                im = ndi.convolve(grey, kern.imag, mode="reflect")
                add("gabor_f%s_t%s" % (tag(fr), tag(k * 180.0 / orient)), np.hypot(re, im))
    return names, planes, level


def run_case(label, tmp, frame, families, sigmas, orient, freqs, normalise, threads):
    h, w, c = frame.shape
    raw = os.path.join(tmp, label + ".raw")
    out = os.path.join(tmp, label + ".f32")
    frame.tofile(raw)
    args = [TOOL, ",".join(families), ",".join(tag(s) for s in sigmas) or "-", str(orient),
            ",".join(tag(f) for f in freqs) or "-", str(normalise), str(threads), raw, str(w), str(h), str(c), out]
    res = subprocess.run(args, capture_output=True, text=True)
    if res.returncode != 0:
        check(False, "%s: featdump failed: %s" % (label, res.stderr.strip()))
        return
    got_names = res.stdout.split()
    names, planes, level = reference(frame, families, sigmas, orient, freqs, normalise)
    # reference: the feature order and names documented in core/features.h
    check(got_names == names, "%s: %d feature names in documented order" % (label, len(names)))
    stack = np.fromfile(out, dtype=np.float32)
    if stack.size != h * w * len(names) or got_names != names:
        check(False, "%s: stack holds %d floats, %d expected" % (label, stack.size, h * w * len(names)))
        return
    stack = stack.reshape(h, w, len(names)).astype(np.float64)
    worst = 0.0
    for k, (name, ref) in enumerate(zip(names, planes)):
        err = np.abs(stack[..., k] - ref).max()
        tol = REL_TOL * np.ptp(ref) + ABS_TOL
        worst = max(worst, err / tol)
        if err > tol:
            yx = np.unravel_index(np.abs(stack[..., k] - ref).argmax(), ref.shape)
            check(False, "%s: %s max error %.3g > %.3g at (y,x)=%s" % (label, name, err, tol, yx))
    check(worst <= 1.0, "%s: all %d planes within 1e-4 of their range (worst %.2f of tolerance)"
          % (label, len(names), worst))
    if "colour" in families:
        # reference: level = numpy.median of the grey values above the mean, floored at 1/255
        at = np.unravel_index(frame[..., 0].argmax(), frame.shape[:2])
        got = 0.5 * (frame[at][0] / 255.0) / stack[at][0] if normalise else (frame[at][0] / 255.0) / stack[at][0]
        check(abs(got - level) <= 1e-5 * level,
              "%s: brightness level %.6f (reference %.6f)" % (label, got, level))


def main():
    if not os.access(TOOL, os.X_OK):
        print("FAIL featdump not built at " + TOOL)
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        grey = make_frame(11, 29, 37, 1)
        run_case("grey37x29", tmp, grey, FAMILIES, [1, 2, 4], 4, [0.1, 0.25], 1, 2)
        rgb = make_frame(12, 23, 41, 3)
        # sigma 8 has radius 32 > 23 rows: reflection must repeat with period 2n
        run_case("rgb41x23", tmp, rgb, FAMILIES, [1, 2, 4, 8], 3, [0.15, 0.5], 0, 3)
        run_case("rgb41x23_norm", tmp, rgb, FAMILIES, [2], 3, [0.15], 1, 1)
        dim = (make_frame(13, 70, 80, 3) // 4).astype(np.uint8)
        run_case("dim80x70", tmp, dim, FAMILIES, [0.5, 8, 16], 8, [0.25], 1, 2)
        # Gabor radius 29 at f=0.06 exceeds both sides
        run_case("subset", tmp, rgb, ["hessian", "gabor", "localstd"], [1.5, 3], 2, [0.06, 0.3], 1, 2)
    print("test_features: %s" % ("all ok" if refcheck.failures() == 0
                                 else "%d failed" % refcheck.failures()))
    return refcheck.status()


if __name__ == "__main__":
    sys.exit(main())
