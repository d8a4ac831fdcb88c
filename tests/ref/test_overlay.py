"""The inspection picture: outlines, ids, zone outlines and the banner.

References: scikit-image 0.19 skimage.segmentation.find_boundaries
(mode="inner", connectivity 1: the region pixels with a 4-neighbour outside
the region) for region and zone outlines; scipy.ndimage.label and
skimage.measure.regionprops for the regions handed to the overlay;
skimage.draw for the zone map; the input frame itself for what must stay
untouched.  Also writes example pictures of simulated demo parts to
$STATION_BUILD/overlay-examples/ for people to look at (not compared).
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from scipy import ndimage
from skimage.draw import disk, polygon
from skimage.measure import regionprops
from skimage.segmentation import find_boundaries

from refcheck import BUILD, check, status, tool

ZT = tool("zonetool")
CLASSES = [
    {"name": "background", "defect": False, "rgb": [26, 26, 26]},
    {"name": "surface", "defect": False, "rgb": [60, 140, 80]},
    {"name": "scratch", "defect": True, "rgb": [224, 192, 32], "min_area_mm2": 0.05},
    {"name": "pit", "defect": True, "rgb": [208, 48, 48], "min_area_mm2": 0.0},
    {"name": "stain", "defect": True, "rgb": [48, 112, 224], "min_area_mm2": 0.0},
]
# written in core/palette.h and core/overlay.h: Okabe & Ito (2008) bluish green, vermilion and
# yellow, black text
PASS_RGB, FAIL_RGB, NONE_RGB, TEXT_RGB, ZONE_RGB = (0, 158, 115), (213, 94, 0), (240, 228, 66), \
    (0, 0, 0), (0, 220, 220)


def wcag_contrast(a, b):
    """WCAG 2.1 contrast ratio (definitions of relative luminance and contrast ratio)."""
    def lum(rgb):
        c = [v / 255 for v in rgb]
        c = [v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4 for v in c]
        return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]
    hi, lo = sorted((lum(a), lum(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


for bg in (PASS_RGB, FAIL_RGB, NONE_RGB):
    ratio = wcag_contrast(bg, TEXT_RGB)
    check(f"banner text on {bg}: WCAG 2.1 contrast {ratio:.1f}:1 >= 4.5:1 (level AA)", ratio >= 4.5)
FAIL = {"verdict": 1, "reasons": [
    {"rule": "max_area", "cls": 4, "measured": 1.27, "limit": 0.8, "unit": "mm2"},
    {"rule": "max_count", "cls": 3, "measured": 3, "limit": 2, "unit": "count"}]}
PASS = {"verdict": 0, "reasons": []}
NOVERDICT = {"verdict": 2, "reasons": [
    {"rule": "too_dark", "cls": -1, "measured": 31, "limit": 40, "unit": "level"}]}


def scale_for(w):
    """overlay_text_scale as documented in overlay.h."""
    return 1 if w < 240 else max(2, w // 400)


def regions_of(cm):
    """Regions in class order, then raster order of first pixel (as regions.h)."""
    lab = np.full(cm.shape, -1, np.int32)
    regs = []
    for c in range(2, len(CLASSES)):
        lc, n = ndimage.label(cm == c, structure=np.ones((3, 3)))
        first = ndimage.minimum(np.arange(lc.size).reshape(lc.shape), lc, range(1, n + 1))
        props = sorted(regionprops(lc), key=lambda p: first[p.label - 1])
        for p in props:
            lab[lc == p.label] = len(regs)
            r0, c0, r1, c1 = p.bbox
            regs.append({"cls": c, "area_mm2": p.area * 0.01, "x0": c0, "y0": r0, "x1": c1 - 1,
                         "y1": r1 - 1})
    return lab, regs


def overlay(frame, cm, lab, regs, zones, judgement, d):
    json.dump({"classes": CLASSES, "regions": regs, "judgement": judgement},
              open(os.path.join(d, "spec.json"), "w"))
    Image.fromarray(frame).save(os.path.join(d, "frame.png"))
    cm.astype(np.uint8).tofile(os.path.join(d, "cm.raw"))
    lab.astype(np.int32).tofile(os.path.join(d, "lab.raw"))
    zpath = "-"
    if zones is not None:
        zpath = os.path.join(d, "zones.raw")
        zones.astype(np.uint8).tofile(zpath)
    out_png = os.path.join(d, "out.png")
    top = int(subprocess.run([ZT, "overlay", os.path.join(d, "spec.json"),
                              os.path.join(d, "frame.png"), os.path.join(d, "cm.raw"),
                              os.path.join(d, "lab.raw"), zpath, out_png],
                             check=True, capture_output=True, text=True).stdout)
    return np.asarray(Image.open(out_png).convert("RGB")), top


def colour_is(img, rgb):
    return (img == np.array(rgb, np.uint8)).all(axis=2)


def scene(h, w):
    """A grey frame (120..150, never a class colour) and a class map with a
    part and defects spaced apart, one of them touching the frame border and
    one a single pixel (under the scratch's minimum area: no id)."""
    yy, xx = np.mgrid[0:h, 0:w]
    frame = np.repeat((120 + (xx * 7 + yy * 3) % 31)[:, :, None], 3, axis=2).astype(np.uint8)
    cm = np.zeros((h, w), np.uint8)
    rr, cc = disk((h / 2, w / 2), min(h, w) * 0.45, shape=cm.shape)
    cm[rr, cc] = 1
    cm[20:31, 30:52] = 4                         # stain block
    cm[24:27, 36:46] = 1                         # with a hole
    for k in range(25):                          # a diagonal scratch, 2 px wide
        cm[70 + k, 40 + k: 42 + k] = 2
    rr, cc = disk((112, 150), 6, shape=cm.shape)  # a pit
    cm[rr, cc] = 3
    cm[60:66, 170:174] = 3                       # a pit
    cm[60:66, w - 3:w] = 3                       # and one touching the right border
    cm[40, 120] = 2                              # one pixel
    cm[130:134, 60:64] = 4
    cm[132:136, 64:68] = 4                       # touches the block above diagonally
    return frame, cm


tmp = tempfile.TemporaryDirectory()
h, w = 157, 211
frame, cm = scene(h, w)
lab, regs = regions_of(cm)
out, top = overlay(frame, cm, lab, regs, None, FAIL, tmp.name)
s = scale_for(w)
check("picture is the banner above the whole frame", out.shape == (h + top, w, 3) and top > 0,
      str(out.shape))
body = out[top:]
for i, g in enumerate(regs):
    rgb = CLASSES[g["cls"]]["rgb"]
    y0, y1, x0, x1 = max(0, g["y0"] - 1), g["y1"] + 2, max(0, g["x0"] - 1), g["x1"] + 2
    ours = colour_is(body[y0:y1, x0:x1], rgb)
    ref = find_boundaries(lab == i, mode="inner")[y0:y1, x0:x1]
    check(f"region {i + 1} ({CLASSES[g['cls']]['name']}, bbox {g['x0']},{g['y0']}): outline = "
          f"find_boundaries(mode='inner')", (ours == ref).all() and ref.any(),
          f"{(ours != ref).sum()} pixels differ")
    # the id: a dark box just right of the bounding box (or left where the frame ends)
    bw = (6 * len(str(i + 1)) - 1) * s + 2 * s
    x = g["x1"] + 2 if g["x1"] + 2 + bw <= w else g["x0"] - 2 - bw
    box = body[g["y0"]:g["y0"] + 9 * s, max(0, x):x + bw]
    counts = g["area_mm2"] >= CLASSES[g["cls"]]["min_area_mm2"]
    dark, ink = colour_is(box, (16, 16, 16)).sum(), colour_is(box, rgb).sum()
    check(f"region {i + 1}: id {'drawn' if counts else 'not drawn (does not count)'} beside it",
          (dark > 0 and ink > 0) if counts else dark == 0, f"dark {dark} ink {ink}")
# Neighbouring defects keep readable ids: two pits one above the other, 3 px
# apart, would put their ids on the same rows; each id box must stand apart
# (the dark boxes are separate 4-connected components: scipy.ndimage.label).
cm2 = np.zeros((h, w), np.uint8)
cm2[20:140, 20:190] = 1
cm2[50:54, 100:104] = 3
cm2[57:61, 101:105] = 3
lab2, regs2 = regions_of(cm2)
out2, top2 = overlay(frame, cm2, lab2, regs2, None, FAIL, tmp.name)
boxes, nboxes = ndimage.label(colour_is(out2[top2:], (16, 16, 16)))
check("ids of two pits 3 px apart do not overlap (two separate id boxes)",
      len(regs2) == 2 and nboxes == 2, f"{len(regs2)} regions, {nboxes} id boxes")
# tinted, not painted: a region's inside keeps the frame showing through
inner = (lab >= 0) & ~find_boundaries(lab + 1, mode="inner")
tint = body[inner].astype(int)
check("region insides are tinted, frame still visible (no class colour, not the frame)",
      inner.any() and not any(colour_is(body, c["rgb"])[inner].any() for c in CLASSES[2:])
      and (tint != frame[inner]).any(axis=1).all())

# zone outlines from a zone map drawn with skimage.draw, no regions
zmap = np.full((h, w), 255, np.uint8)
rr, cc = polygon([30, 40, 120, 100], [60, 170, 150, 40], shape=zmap.shape)
zmap[rr, cc] = 1
rr, cc = disk((80, 100), 22, shape=zmap.shape)
zmap[rr, cc] = 0
zmap[140:, 150:] = 2                                # a zone reaching the frame corner
none = np.full((h, w), -1, np.int32)
out, top = overlay(frame, np.where(cm == 1, 1, 0), none, [], zmap, PASS, tmp.name)
ref = find_boundaries(np.where(zmap == 255, 0, zmap.astype(int) + 1), mode="inner")
ours = colour_is(out[top:], ZONE_RGB)
check("zone outlines = find_boundaries(mode='inner') of the zone map", (ours == ref).all(),
      f"{(ours != ref).sum()} differ of {ref.sum()}")
check("outside the outlines the frame is untouched (no defect classes)",
      (out[top:][~ref] == frame[~ref]).all())

# the banner: its colour tells the verdict; three lines of black text
for name, j, bg, word in [("PASS", PASS, PASS_RGB, "PASS"), ("FAIL", FAIL, FAIL_RGB, "FAIL"),
                          ("NO_VERDICT", NOVERDICT, NONE_RGB, "NO VERDICT")]:
    for fw, fh in [(211, 157), (480, 53), (1280, 61)]:   # the banner depends on the width only
        f2 = np.full((fh, fw, 3), 128, np.uint8)
        c2 = np.zeros((fh, fw), np.uint8)
        out, top = overlay(f2, c2, np.full((fh, fw), -1, np.int32), [], None, j, tmp.name)
        s = scale_for(fw)
        ban = out[:top]
        is_bg, is_text = colour_is(ban, bg), colour_is(ban, TEXT_RGB)
        rows = np.flatnonzero(is_text.any(axis=1))
        bands = np.split(rows, np.flatnonzero(np.diff(rows) > 1) + 1) if rows.size else []
        cols = np.flatnonzero(is_text[bands[0]].any(axis=0)) if bands else np.array([0])
        ok = ((is_bg | is_text).all() and is_bg.mean() > 0.6 and len(bands) >= 3
              and len(bands[0]) == 14 * s and all(len(b) in (7 * s, 8 * s) for b in bands[1:]) and cols[-1] - cols[0] + 1 == (6 * len(word) - 1) * 2 * s
              and (out[top:] == 128).all())
        check(f"{name} banner at {fw}x{fh}: its colour, {len(bands)} text lines, verdict word "
              f"{(6 * len(word) - 1) * 2 * s} px wide, frame below untouched", ok,
              f"bands {[len(b) for b in bands]} cols {cols[0]}..{cols[-1]} bg {is_bg.mean():.2f}")
    if name == "FAIL":
        fail_reason = is_text[bands[1]].sum()
    if name == "NO_VERDICT":
        check("the reason line differs between FAIL and NO VERDICT",
              is_text[bands[1]].sum() != fail_reason)

# pictures of simulated demo parts for people to look at
ex = os.path.join(BUILD, "overlay-examples")
os.makedirs(ex, exist_ok=True)
for fw, fh in [(480, 360), (1280, 960)]:
    d = os.path.join(ex, f"{fw}x{fh}")
    subprocess.run([tool("simrender"), "5", "1", str(fw), str(fh), d], check=True,
                   capture_output=True)
    frame = np.asarray(Image.open(os.path.join(d, "images", "part_00000.png")).convert("RGB"))
    cm = np.asarray(Image.open(os.path.join(d, "labels", "part_00000.png")))
    mm = 0.17 * 480 / fw
    spec = os.path.join(d, "zones.json")
    json.dump({"sx": mm, "sy": mm, "zones": [
        {"name": "bore-rim", "shape": "ring", "cx": 0, "cy": 0, "r_in": 4.0, "r_out": 6.5},
        {"name": "seal-face", "shape": "ring", "cx": 0, "cy": 0, "r_in": 14.5, "r_out": 18.0}]},
        open(spec, "w"))
    cm.astype(np.uint8).tofile(os.path.join(d, "cm.raw"))
    subprocess.run([ZT, "zones", spec, str(fw), str(fh), os.path.join(d, "cm.raw"), d],
                   check=True, capture_output=True)
    zm = np.fromfile(os.path.join(d, "paint.raw"), np.uint8).reshape(fh, fw)
    lab, regs = regions_of(cm)
    for c in CLASSES[2:]:
        c["min_area_mm2"] = 0.1
    out, top = overlay(frame, cm, lab, regs, zm, FAIL, d)
    Image.fromarray(out).save(os.path.join(ex, f"overlay-{fw}x{fh}.png"))
print("example pictures:", ex)
sys.exit(status())
