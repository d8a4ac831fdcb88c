"""Connected defect regions against scipy.ndimage.label and skimage.measure.regionprops.

Reference: scipy 1.10 ndimage.label (structure ones((3,3)) for 8-connectivity,
the default cross for 4), skimage 0.19 measure.regionprops (area, bbox,
centroid).  Area in mm2 = pixel count x 0.1 x 0.2 (the tool's scale).
"""
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy import ndimage
from skimage.measure import regionprops

from refcheck import check, status, tool as tool_path

tool = tool_path("regionsdump")


def reference(cm, defects, conn):
    structure = np.ones((3, 3)) if conn == 8 else None
    rows = []
    for c in sorted(defects):
        lab, n = ndimage.label(cm == c, structure=structure)
        props = regionprops(lab)
        # our order inside a class: raster order of each region's first pixel
        first = {p.label: np.flatnonzero(lab.ravel() == p.label)[0] for p in props}
        for p in sorted(props, key=lambda p: first[p.label]):
            r0, c0, r1, c1 = p.bbox
            cy, cx = p.centroid
            rows.append((c, p.area, c0, r0, c1 - 1, r1 - 1, cx, cy, p.area * 0.1 * 0.2))
    return rows


def run(cm, defects, conn):
    with tempfile.TemporaryDirectory() as d:
        raw = os.path.join(d, "cm.raw")
        cm.astype(np.uint8).tofile(raw)
        h, w = cm.shape
        out = subprocess.run([tool, str(w), str(h), "5", ",".join(map(str, defects)), str(conn),
                              raw], check=True, capture_output=True, text=True).stdout
    return [tuple(float(v) for v in line.split()) for line in out.splitlines()]


rng = np.random.default_rng(20261201)
# an odd-size map: blobs from thresholded smoothed noise, so regions touch
# diagonally (where 4- and 8-connectivity differ) and classes abut
noise = ndimage.gaussian_filter(rng.standard_normal((61, 47)), 1.5)
cm = np.digitize(noise, [-0.25, -0.05, 0.1, 0.3]).astype(np.uint8)
cm[5, 5] = 2
cm[6, 6] = 2   # a diagonal pair: one region in 8, two in 4
for conn in (8, 4):
    ours = run(cm, [2, 3, 4], conn)
    ref = reference(cm, [2, 3, 4], conn)
    check(f"region count, {conn}-connectivity ({len(ref)} regions)", len(ours) == len(ref),
          f"{len(ours)} vs {len(ref)}")
    same = len(ours) == len(ref) and all(
        a[:6] == tuple(float(v) for v in b[:6]) and abs(a[6] - b[6]) < 1e-6
        and abs(a[7] - b[7]) < 1e-6 and abs(a[8] - b[8]) < 1e-9 for a, b in zip(ours, ref))
    check(f"class, area, bbox, centroid (1e-6 px), mm2 of every region, {conn}-connectivity",
          same, f"first ours {ours[:2]} ref {ref[:2]}")

# a 16x16 square counts 256 pixels (the pixel-count area this station reports)
sq = np.zeros((30, 30), np.uint8)
sq[7:23, 5:21] = 3
ours = run(sq, [3], 8)
check("16x16 square has 256 pixels", len(ours) == 1 and ours[0][1] == 256, str(ours))
sys.exit(status())
