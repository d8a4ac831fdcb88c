"""Flat-field correction (calib/flat.c, core/flatfield.c) against numpy and
scipy: a radial vignetting falloff rendered here with numpy, the gain map
against scipy.ndimage.gaussian_filter of the mean white frame, the dark
offset, the correction formula, and the non-uniformity after correction."""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from scipy import ndimage

sys.path.insert(0, os.path.dirname(__file__))
from refcheck import BUILD, check, status, tool  # noqa: E402

STATION = os.path.join(BUILD, "station")
W, H = 161, 121          # odd and not square
SIGMA = 4.0
DARK = 12.0
rng = np.random.default_rng(6)


def falloff(w, h, depth):
    """Radial vignetting: 1 at the centre, 1 - depth in the corners
    (a quadratic falloff, common practice for a lens and ring light, no source)."""
    y, x = np.mgrid[0:h, 0:w]
    r2 = ((x - (w - 1) / 2) ** 2 + (y - (h - 1) / 2) ** 2) / (((w - 1) / 2) ** 2 + ((h - 1) / 2) ** 2)
    return 1.0 - depth * r2


def frame(level, shade, tint=(1.0, 0.97, 0.93), noise=2.0):
    base = DARK + level * shade[..., None] * np.array(tint)
    return np.clip(np.rint(base + rng.normal(0, noise, base.shape)), 0, 255).astype(np.uint8)


def save(img, path):
    Image.fromarray(img).save(path)
    return path


def nonuniformity(rgb):
    """Our stated definition, computed independently: smoothed grey over the
    frame less a 5% margin per side, (max - min) / mean."""
    g = rgb[..., 0] * 0.299 + rgb[..., 1] * 0.587 + rgb[..., 2] * 0.114
    g = ndimage.gaussian_filter(g.astype(np.float64), SIGMA, mode="reflect", truncate=4)
    my, mx = int(0.05 * H), int(0.05 * W)
    c = g[my:H - my, mx:W - mx]
    return (c.max() - c.min()) / c.mean()


def read_flat(path):
    """Reads the documented file format: a JSON line, then float32 maps."""
    raw = open(path, "rb").read()
    nl = raw.index(b"\n")
    head = json.loads(raw[:nl])
    data = np.frombuffer(raw[nl + 1:], dtype="<f4")
    n = head["width"] * head["height"] * 3
    gain = data[:n].reshape(head["height"], head["width"], 3)
    off = data[n:2 * n].reshape(head["height"], head["width"], 3) if head["offset"] else None
    return head, gain, off


def main():
    shade = falloff(W, H, 0.30)
    check("rendered falloff is 30% in the corners", abs(shade.min() - 0.70) < 1e-9, shade.min())
    with tempfile.TemporaryDirectory() as d:
        whites = [save(frame(190, shade), os.path.join(d, "white%d.png" % i)) for i in range(4)]
        darks = [save(frame(0, shade, noise=1.5), os.path.join(d, "dark%d.png" % i)) for i in range(3)]
        flat = os.path.join(d, "bench.flat")
        run = subprocess.run([STATION, "calibrate", "flat", "--white", *whites, "--dark", *darks,
                              "--out", flat, "--sigma", str(SIGMA)], capture_output=True, text=True)
        check("calibrate flat exits 0", run.returncode == 0, run.stderr)
        if run.returncode:
            return status()
        report = json.loads(run.stdout)
        head, gain, off = read_flat(flat)
        check("header format and version", head["format"] == "station-flat-field" and head["version"] == 1)

        # reference: scipy's Gaussian of the mean frames, gain = mean / field per channel
        wm = np.mean([np.asarray(Image.open(p), np.float64) for p in whites], axis=0)
        dm = np.mean([np.asarray(Image.open(p), np.float64) for p in darks], axis=0)
        ws = np.stack([ndimage.gaussian_filter(wm[..., c], SIGMA, mode="reflect", truncate=4)
                       for c in range(3)], -1)
        ds = np.stack([ndimage.gaussian_filter(dm[..., c], SIGMA, mode="reflect", truncate=4)
                       for c in range(3)], -1)
        field = ws - ds
        ref_gain = field.mean(axis=(0, 1)) / field
        err = np.abs(gain / ref_gain - 1).max()
        check("gain map = scipy gaussian_filter reference (rel 1e-4)", err < 1e-4, err)
        err = np.abs(off - ds).max()
        check("dark offset = scipy gaussian_filter of the mean dark (1e-3)", err < 1e-3, err)
        check("dark offset near the rendered dark level", abs(off.mean() - DARK) < 0.5, off.mean())

        # an independent white frame, corrected by the station
        fresh = save(frame(190, shade), os.path.join(d, "fresh.png"))
        fixed = os.path.join(d, "fixed.png")
        run = subprocess.run([tool("flatapply"), flat, fresh, fixed], capture_output=True, text=True)
        check("flatapply exits 0", run.returncode == 0, run.stderr)
        src = np.asarray(Image.open(fresh), np.float64)
        out = np.asarray(Image.open(fixed))
        ref = np.clip(np.floor((src - off) * gain + 0.5), 0, 255)
        ref = np.where((src - off) * gain < 0, 0, ref)
        diff = np.abs(out.astype(int) - ref.astype(int))
        # float32 products may round the other way at exact halves
        check("correction = clamp(round((in - offset) * gain)) (numpy)", diff.max() <= 1 and
              (diff > 0).mean() < 1e-3, (diff.max(), (diff > 0).mean()))
        before, after = nonuniformity(src), nonuniformity(out)
        print("non-uniformity before %.2f%%, after %.2f%% (fresh white frame)" % (100 * before, 100 * after))
        # the 5% margin leaves the darkest corners out: the 30% falloff reads
        # as what the noiseless rendering gives over the same region
        clean = nonuniformity(DARK + 190 * shade[..., None] * np.array([1.0, 0.97, 0.93]))
        check("falloff before = noiseless rendering's (within 0.01)", abs(before - clean) < 0.01,
              (before, clean))
        check("falloff reads as non-uniform before (> 20%)", before > 0.20, before)
        check("corrected within 2% non-uniformity", after < 0.02, after)
        check("reported before matches scipy (1e-3)",
              abs(report["nonuniformity_before"] - nonuniformity(np.rint(wm))) < 1e-3,
              (report["nonuniformity_before"], nonuniformity(np.rint(wm))))
        check("reported after within 2%", report["nonuniformity_after"] < 0.02, report)

        # bad input: one line naming the file
        bad = os.path.join(d, "bad.flat")
        raw = open(flat, "rb").read()
        open(bad, "wb").write(raw[:-7])
        run = subprocess.run([tool("flatapply"), bad, fresh, fixed], capture_output=True, text=True)
        check("truncated flat field refused naming the file",
              run.returncode == 3 and bad in run.stderr and "float32" in run.stderr, run.stderr)
        open(bad, "wb").write(raw[:-4] + b"\x00\x00\x80\x7f")
        run = subprocess.run([tool("flatapply"), bad, fresh, fixed], capture_output=True, text=True)
        check("damaged data refused by its hash", run.returncode == 3 and "data_sha256" in run.stderr,
              run.stderr)
        small = save(frame(190, falloff(W - 2, H, 0.3)), os.path.join(d, "small.png"))
        run = subprocess.run([tool("flatapply"), flat, small, fixed], capture_output=True, text=True)
        check("frame of another size refused", run.returncode == 3 and "161x121" in run.stderr, run.stderr)
        sat = save(np.full((H, W, 3), 255, np.uint8), os.path.join(d, "sat.png"))
        run = subprocess.run([STATION, "calibrate", "flat", "--white", sat, "--out", bad],
                             capture_output=True, text=True)
        check("saturated white frame refused naming it", run.returncode == 3 and sat in run.stderr
              and "saturated" in run.stderr, run.stderr)
        dark = save(np.full((H, W, 3), 3, np.uint8), os.path.join(d, "off.png"))
        run = subprocess.run([STATION, "calibrate", "flat", "--white", dark, "--out", bad],
                             capture_output=True, text=True)
        check("white frame with the light off refused", run.returncode == 3 and "light off" in run.stderr,
              run.stderr)
        run = subprocess.run([STATION, "calibrate", "flat", "--out", bad], capture_output=True, text=True)
        check("no white frames is a usage error (4)", run.returncode == 4, run.returncode)
    return status()


if __name__ == "__main__":
    sys.exit(main())
