"""The station's filter bank computed with OpenCV from Python, timed.

The same families, sigmas (truncation 4 sigma), Gabor frequencies and
orientations as the recipe's [features] section, with BORDER_REFLECT
(OpenCV's name for scipy's 'reflect'): the way a practitioner would write
the bank in Python.  Prints one JSON line: median/min/max ms per frame.
usage: opencv_bank.py RECIPE W H THREADS REPEAT
"""
import configparser
import json
import sys
import time

import cv2
import numpy as np

ini = configparser.ConfigParser(inline_comment_prefixes=(";", "#"))
ini.read(sys.argv[1])
spec = ini["features"]
families = set(spec["families"].split())
sigmas = [float(v) for v in spec["sigmas"].split()]
freqs = [float(v) for v in spec.get("gabor_frequencies", "").split()] if "gabor" in families else []
orients = int(spec.get("gabor_orientations", "4"))
w, h, threads, repeat = map(int, sys.argv[2:6])
cv2.setNumThreads(threads)
B = cv2.BORDER_REFLECT
rng = np.random.default_rng(1)
frame = rng.integers(0, 256, (h, w, 3), dtype=np.uint8)


def gauss_kernels(s):
    r = int(4 * s + 0.5)
    x = np.arange(-r, r + 1, dtype=np.float64)
    g = np.exp(-x * x / (2 * s * s))
    g /= g.sum()
    g1 = -x / (s * s) * g
    g2 = (x * x / s ** 4 - 1 / (s * s)) * g
    return [k.astype(np.float32) for k in (g, g1, g2)]


def gabor(f, t):
    b = 1.0
    sig = 1 / np.pi * np.sqrt(np.log(2) / 2) * (2 ** b + 1) / (2 ** b - 1) / f
    r = int(np.ceil(max(abs(3 * sig * np.cos(t)), abs(3 * sig * np.sin(t)), 1)))
    y, x = np.mgrid[-r:r + 1, -r:r + 1]
    rot = x * np.cos(t) + y * np.sin(t)
    env = np.exp(-0.5 * (x * x + y * y) / sig ** 2) / (2 * np.pi * sig * sig)
    return (env * np.cos(2 * np.pi * f * rot)).astype(np.float32), \
           (env * np.sin(2 * np.pi * f * rot)).astype(np.float32)


kernels = {s: gauss_kernels(s) for s in sigmas}
gabors = [gabor(f, k * np.pi / orients) for f in freqs for k in range(orients)]


def bank(img):
    rgb = img.astype(np.float32) / 255
    grey = cv2.cvtColor(rgb, cv2.COLOR_RGB2GRAY)
    out = [rgb[..., 0], rgb[..., 1], rgb[..., 2]]
    dx = cv2.Sobel(grey, cv2.CV_32F, 1, 0, borderType=B)
    dy = cv2.Sobel(grey, cv2.CV_32F, 0, 1, borderType=B)
    for s, (g, g1, g2) in kernels.items():
        sm = cv2.sepFilter2D(grey, -1, g, g, borderType=B)
        gx = cv2.sepFilter2D(grey, -1, g1, g, borderType=B)
        gy = cv2.sepFilter2D(grey, -1, g, g1, borderType=B)
        gxx = cv2.sepFilter2D(grey, -1, g2, g, borderType=B)
        gyy = cv2.sepFilter2D(grey, -1, g, g2, borderType=B)
        hy, hx = np.gradient(sm)
        hyy, hyx = np.gradient(hy)
        _, hxx = np.gradient(hx)
        tr, det = hxx + hyy, np.sqrt((hxx - hyy) ** 2 + 4 * hyx * hyx)
        sxx = cv2.sepFilter2D(dx * dx, -1, g, g, borderType=B)
        sxy = cv2.sepFilter2D(dx * dy, -1, g, g, borderType=B)
        syy = cv2.sepFilter2D(dy * dy, -1, g, g, borderType=B)
        st, sd = sxx + syy, np.sqrt((sxx - syy) ** 2 + 4 * sxy * sxy)
        sq = cv2.sepFilter2D(grey * grey, -1, g, g, borderType=B)
        out += [sm, np.sqrt(gx * gx + gy * gy), gxx + gyy, (tr + det) / 2, (tr - det) / 2,
                (st + sd) / 2, (st - sd) / 2, np.sqrt(np.maximum(sq - sm * sm, 0))]
    for re, im in gabors:
        a = cv2.filter2D(grey, -1, re, borderType=B)
        b = cv2.filter2D(grey, -1, im, borderType=B)
        out.append(np.sqrt(a * a + b * b))
    return np.stack(out, axis=-1)   # pixel-major, as the classifier takes it


bank(frame)  # warm-up
times = []
for _ in range(repeat):
    t0 = time.perf_counter()
    f = bank(frame)
    times.append((time.perf_counter() - t0) * 1e3)
times.sort()
print(json.dumps({"width": w, "height": h, "threads": threads, "features": f.shape[-1],
                  "median": times[len(times) // 2], "min": times[0], "max": times[-1]}))
