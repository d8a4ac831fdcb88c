"""Connected defect regions and their measurements against outside references.

References (Debian's packages): scipy 1.10 ndimage.label (the default cross
structure for 4-connectivity, ones((3, 3)) for 8) and the worked example in
its docstring; OpenCV 4.6 connectedComponentsWithStats (connectivity 4 and
8); scikit-image 0.19 measure.regionprops (area, bbox, centroid,
orientation, feret_diameter_max, moments_central) and the primitives
feret_diameter_max is built from (morphology.convex_hull_image,
measure.find_contours); scipy.spatial.ConvexHull for the minimum width.
The gap merging is checked against a brute-force evaluation of the gap as
core/regions.h defines it, over every pixel pair.
"""
import math
import os
import subprocess
import sys
import tempfile

import cv2
import numpy as np
from scipy import ndimage
from scipy.spatial import ConvexHull
from skimage.measure import find_contours, regionprops
from skimage.morphology import convex_hull_image

from refcheck import check, status, tool as tool_path

tool = tool_path("regionsdump")
NCLASSES = 5


def run(cm, defects, conn, sx=0.1, sy=0.2, gap=0.0):
    """Our regions (one dict per region) and label map."""
    with tempfile.TemporaryDirectory() as d:
        raw, labs = os.path.join(d, "cm.raw"), os.path.join(d, "labels.raw")
        np.ascontiguousarray(cm, np.uint8).tofile(raw)
        h, w = cm.shape
        out = subprocess.run([tool, str(w), str(h), str(NCLASSES), ",".join(map(str, defects)),
                              str(conn), repr(sx), repr(sy), repr(gap), raw, labs],
                             check=True, capture_output=True, text=True).stdout
        labels = np.fromfile(labs, np.int32).reshape(h, w)
    keys = ("id cls zone pixels x0 y0 x1 y1 cx cy area length width orientation "
            "fragments").split()
    rows = []
    for line in out.splitlines():
        v = line.split()
        rows.append({k: (float(x) if "." in x or "e" in x or "n" in x else int(x))
                     for k, x in zip(keys, v)})
    return rows, labels


def same_partition(ours, ref):
    """Two label maps (background < 0 in ours, 0 in ref) split the pixels
    the same way; returns the map from our index to the reference label."""
    if not np.array_equal(ours >= 0, ref > 0):
        return None
    pairs = np.unique(np.stack([ours[ours >= 0], ref[ref > 0]]), axis=1)
    n_ours, n_ref = len(np.unique(ours[ours >= 0])), len(np.unique(ref[ref > 0]))
    if not (pairs.shape[1] == n_ours == n_ref):
        return None
    return dict(zip(pairs[0].tolist(), pairs[1].tolist()))


def scipy_labels(cm, defects, conn):
    """One label map over every defect class, and the labels' class."""
    structure = np.ones((3, 3)) if conn == 8 else None
    out, off = np.zeros(cm.shape, np.int64), 0
    for c in sorted(defects):
        lab, n = ndimage.label(cm == c, structure=structure)
        out[lab > 0] = lab[lab > 0] + off
        off += n
    return out


def opencv_stats(cm, defects, conn):
    """Label map, and per label (area, x0, y0, x1, y1, cx, cy), from OpenCV."""
    out, stats, off = np.zeros(cm.shape, np.int64), {}, 0
    for c in sorted(defects):
        n, lab, st, cen = cv2.connectedComponentsWithStats((cm == c).astype(np.uint8),
                                                           connectivity=conn, ltype=cv2.CV_32S)
        for k in range(1, n):
            x, y, w, h, a = st[k]
            stats[k + off] = (a, x, y, x + w - 1, y + h - 1, cen[k][0], cen[k][1])
        out[lab > 0] = lab[lab > 0] + off
        off += n - 1
    return out, stats


def check_labelling(name, cm, defects):
    for conn in (8, 4):
        ours, labels = run(cm, defects, conn)
        # scipy: same partition, order, pixel counts, boxes, centroids
        ref = scipy_labels(cm, defects, conn)
        m = same_partition(labels, ref)
        check(f"{name}, {conn}-conn: same regions as scipy.ndimage.label ({len(ours)})",
              m is not None, f"{len(ours)} regions vs {ref.max()}")
        if m is None:
            continue
        props = {p.label: p for p in regionprops(ref)}
        bad = []
        for g in ours:
            p = props[m[g["id"] - 1]]
            r0, c0, r1, c1 = p.bbox
            cy, cx = p.centroid
            exp = (int(cm[r0:r1, c0:c1][p.image][0]), p.area, c0, r0, c1 - 1, r1 - 1)
            got = (g["cls"], g["pixels"], g["x0"], g["y0"], g["x1"], g["y1"])
            if got != exp or abs(g["cx"] - cx) > 1e-9 or abs(g["cy"] - cy) > 1e-9 or \
                    abs(g["area"] - p.area * 0.1 * 0.2) > 1e-12:
                bad.append((g, exp))
        check(f"{name}, {conn}-conn: class, pixels, bbox, centroid (1e-9 px), mm2 vs regionprops",
              not bad, bad[:2])
        # our order: by class, then raster order of first pixel
        first = [(g["cls"], np.flatnonzero(labels.ravel() == g["id"] - 1)[0]) for g in ours]
        check(f"{name}, {conn}-conn: ordered by class then first pixel, id = index + 1",
              first == sorted(first) and [g["id"] for g in ours] == list(range(1, len(ours) + 1)))
        # OpenCV: same partition and statistics
        cvlab, st = opencv_stats(cm, defects, conn)
        mc = same_partition(labels, cvlab)
        ok = mc is not None and all(
            (g["pixels"], g["x0"], g["y0"], g["x1"], g["y1"]) == tuple(st[mc[g["id"] - 1]][:5])
            and abs(g["cx"] - st[mc[g["id"] - 1]][5]) < 1e-9
            and abs(g["cy"] - st[mc[g["id"] - 1]][6]) < 1e-9 for g in ours)
        check(f"{name}, {conn}-conn: partition, area, bbox, centroid vs "
              f"cv2.connectedComponentsWithStats", ok)


rng = np.random.default_rng(20261201)
# odd-size maps: blobs from thresholded smoothed noise, so regions touch
# diagonally (where 4- and 8-connectivity differ) and classes abut
noise = ndimage.gaussian_filter(rng.standard_normal((61, 47)), 1.5)
cm = np.digitize(noise, [-0.25, -0.05, 0.1, 0.3]).astype(np.uint8)
cm[5, 5] = cm[6, 6] = 2   # a diagonal pair: one region in 8, two in 4
check_labelling("smoothed noise 61x47", cm, [2, 3, 4])
check_labelling("salt noise 37x29 (many 1-pixel regions)",
                (rng.random((29, 37)) < 0.2).astype(np.uint8) * 3, [3])
border = np.zeros((23, 31), np.uint8)
border[0, :] = border[-1, :] = border[:, 0] = border[:, -1] = 2
border[0, 0] = border[-1, -1] = 4   # corners of another class, touching two borders
border[5:9, 0:3] = 3                # a region on the left border
border[11, 30] = 3                  # a 1-pixel region on the right border
check_labelling("regions on every border 31x23", border, [2, 3, 4])
check_labelling("whole frame one region 13x7", np.full((7, 13), 2, np.uint8), [2])
check_labelling("one row 1x40", (rng.random((1, 40)) < 0.5).astype(np.uint8) * 2, [2])
check_labelling("one column 33x1", (rng.random((33, 1)) < 0.5).astype(np.uint8) * 2, [2])
check_labelling("single pixel map", np.full((1, 1), 2, np.uint8), [2])
empty, _ = run(np.zeros((9, 11), np.uint8), [2], 8)
check("empty map: no region", empty == [])

# The worked example of scipy.ndimage.label's docstring (scipy 1.10): 4
# features with the default cross structure, 2 with s = ones((3, 3)); the
# label arrays are the docstring's, which number features as we do (+1).
a = np.array([[0, 0, 1, 1, 0, 0],
              [0, 0, 0, 1, 0, 0],
              [1, 1, 0, 0, 1, 0],
              [0, 0, 0, 1, 0, 0]], np.uint8)
doc4 = np.array([[0, 0, 1, 1, 0, 0],
                 [0, 0, 0, 1, 0, 0],
                 [2, 2, 0, 0, 3, 0],
                 [0, 0, 0, 4, 0, 0]])
doc8 = np.array([[0, 0, 1, 1, 0, 0],
                 [0, 0, 0, 1, 0, 0],
                 [2, 2, 0, 0, 1, 0],
                 [0, 0, 0, 1, 0, 0]])
for conn, doc, n in ((4, doc4, 4), (8, doc8, 2)):
    ours, labels = run(a, [1], conn)
    check(f"scipy label docstring, {conn}-conn: {n} features, the docstring's labels",
          len(ours) == n and np.array_equal(labels + 1, doc), labels + 1)


def contour_points(mask, sx, sy):
    """The points feret_diameter_max measures (skimage 0.19's own steps: the
    convex hull image, padded, its level-0.5 contour), scaled to mm."""
    hull = np.pad(convex_hull_image(mask), 2)
    pts = np.vstack(find_contours(hull, 0.5, fully_connected="high"))
    return np.column_stack([pts[:, 1] * sx, pts[:, 0] * sy])


def min_width(pts):
    """Narrowest caliper, brute force over scipy ConvexHull's edge directions."""
    hull = pts[ConvexHull(pts).vertices]
    best = math.inf
    for i in range(len(hull)):
        e = hull[(i + 1) % len(hull)] - hull[i]
        d = np.abs(e[0] * (hull[:, 1] - hull[i][1]) - e[1] * (hull[:, 0] - hull[i][0]))
        best = min(best, d.max() / math.hypot(*e))
    return best


def angle_diff(a, b):
    """Distance of two axis angles modulo pi."""
    d = (a - b) % math.pi
    return min(d, math.pi - d)


# Shapes: random blobs of many sizes and elongations, plus thin lines.
shapes = np.zeros((96, 131), np.uint8)
for i in range(60):
    y, x = rng.integers(3, 90), rng.integers(3, 125)
    r0, r1, th = rng.uniform(0.6, 7), rng.uniform(0.6, 3), rng.uniform(0, math.pi)
    yy, xx = np.mgrid[0:96, 0:131]
    u, v = (xx - x) * math.cos(th) + (yy - y) * math.sin(th), -(xx - x) * math.sin(th) + (yy - y) * math.cos(th)
    shapes[(u / r0) ** 2 + (v / r1) ** 2 <= 1] = 2 + i % 3
shapes[90, 5:40] = 2
shapes[10:60, 128] = 3

for sx, sy in ((1.0, 1.0), (0.05, 0.05), (0.04, 0.07)):
    # the ellipses and lines, and the irregular blobs of the noise map
    found = [run(m, [2, 3, 4], 8, sx, sy) for m in (shapes, cm)]
    ours = [(g, labels) for rows, labels in found for g in rows]
    feret_bad, width_bad, orient_bad, n_orient = [], [], [], 0
    for g, labels in ours:
        mask = labels == g["id"] - 1
        p = regionprops(mask.astype(np.uint8))[0]
        sub = mask[p.bbox[0]:p.bbox[2], p.bbox[1]:p.bbox[3]]
        if sx == sy:
            ref_len = p.feret_diameter_max * sx
        else:
            ref_len = max(math.dist(q, r) for q in contour_points(sub, sx, sy)
                          for r in contour_points(sub, sx, sy))
        if abs(g["length"] - ref_len) > 1e-9 * max(1, ref_len):
            feret_bad.append((g["id"], g["pixels"], g["length"], ref_len))
        ref_w = min_width(contour_points(sub, sx, sy))
        if abs(g["width"] - ref_w) > 1e-9 * max(1, ref_w):
            width_bad.append((g["id"], g["pixels"], g["width"], ref_w))
        # orientation: skimage's is from the row axis (+y) turning towards
        # +x; ours from the x axis turning towards +y, so ours = pi/2 -
        # skimage (mod pi) when sx = sy.
        # For sx != sy: the major axis of skimage's central moments scaled
        # to mm (rows by sy, columns by sx).
        mu = p.moments_central
        mrr, mcc, mrc = mu[2, 0] * sy * sy, mu[0, 2] * sx * sx, mu[1, 1] * sx * sy
        if abs(mcc - mrr) <= 1e-6 * (mcc + mrr):
            # isotropic (no major axis), or the case regionprops 0.19
            # answers with +-pi/4 whatever the cross moment
            continue
        n_orient += 1
        ref_o = math.pi / 2 - p.orientation if sx == sy else 0.5 * math.atan2(2 * mrc, mcc - mrr)
        if angle_diff(g["orientation"], ref_o) > 1e-9:
            orient_bad.append((g["id"], g["orientation"], ref_o))
    what = "regionprops feret_diameter_max" if sx == sy else \
        "skimage's convex_hull_image + find_contours scaled to mm, brute-force max"
    check(f"Feret length of {len(ours)} regions, sx={sx} sy={sy}, vs {what} (1e-9 rel)",
          not feret_bad, feret_bad[:3])
    check(f"Feret width of {len(ours)} regions, sx={sx} sy={sy}, vs scipy ConvexHull of the "
          f"same contour, brute force over edges (1e-9 rel)", not width_bad, width_bad[:3])
    what = "pi/2 - regionprops orientation" if sx == sy else "scaled regionprops moments_central"
    check(f"orientation of {n_orient} regions, sx={sx} sy={sy}, vs {what} (1e-9 rad, mod pi)",
          n_orient > 20 and not orient_bad, orient_bad[:3])

# a 16x16 square: 256 pixels, Feret length sqrt(16^2 + 15^2) as regionprops
# gives it (its hull's corners are cut), width 16 (its side)
sq = np.zeros((30, 30), np.uint8)
sq[7:23, 5:21] = 3
ours, _ = run(sq, [3], 8, 1.0, 1.0)
ref = regionprops(sq)[0].feret_diameter_max
check("16x16 square: 256 px, length sqrt(16^2+15^2) = regionprops, width 16",
      len(ours) == 1 and ours[0]["pixels"] == 256 and abs(ours[0]["length"] - math.hypot(16, 15)) < 1e-12
      and abs(ref - math.hypot(16, 15)) < 1e-12 and abs(ours[0]["width"] - 16) < 1e-12, ours)


def gap_reference(cm, defects, conn, sx, sy, gap):
    """Fragments (scipy.ndimage.label) united when some pixel pair is within
    the gap: hypot(max(0, |dx| - 1) sx, max(0, |dy| - 1) sy), brute force."""
    frag = scipy_labels(cm, defects, conn)
    n = frag.max()
    parent = list(range(n + 1))

    def root(i):
        while parent[i] != i:
            i = parent[i]
        return i
    pts = {k: np.argwhere(frag == k) for k in range(1, n + 1)}
    for a in range(1, n + 1):
        for b in range(a + 1, n + 1):
            pa, pb = pts[a], pts[b]
            if cm[tuple(pa[0])] != cm[tuple(pb[0])]:
                continue
            d = np.abs(pa[:, None, :] - pb[None, :, :]) - 1
            d = np.maximum(d, 0) * np.array([sy, sx])
            if (np.hypot(d[..., 0], d[..., 1]) <= gap * (1 + 1e-9)).any():
                ra, rb = root(a), root(b)
                parent[max(ra, rb)] = min(ra, rb)
    out = np.zeros_like(frag)
    for k in range(1, n + 1):
        out[frag == k] = root(k)
    return out, frag


sparse = np.zeros((41, 53), np.uint8)
sparse[rng.random((41, 53)) < 0.06] = 2
sparse[rng.random((41, 53)) < 0.03] = 3
for conn, sx, sy, gap in ((8, 0.1, 0.1, 0.25), (4, 0.1, 0.2, 0.3), (8, 0.05, 0.13, 0.5)):
    ours, labels = run(sparse, [2, 3], conn, sx, sy, gap)
    ref, frag = gap_reference(sparse, [2, 3], conn, sx, sy, gap)
    m = same_partition(labels, ref)
    nfrag = {k: len(np.unique(frag[ref == k])) for k in np.unique(ref[ref > 0])}
    ok = m is not None and all(g["fragments"] == nfrag[m[g["id"] - 1]] and
                               g["pixels"] == (ref == m[g["id"] - 1]).sum() for g in ours)
    check(f"gap merging {conn}-conn, gap {gap} mm, pixel {sx}x{sy}: {frag.max()} fragments into "
          f"{len(ours)} defects as a brute-force pixel-pair search", ok and len(ours) < frag.max())
    # measurements of each merged defect are those of the union of its pixels
    bad = []
    for g in ours:
        mask = labels == g["id"] - 1
        p = regionprops(mask.astype(np.uint8))[0]
        cy, cx = p.centroid
        sub = mask[p.bbox[0]:p.bbox[2], p.bbox[1]:p.bbox[3]]
        pts = contour_points(sub, sx, sy)
        ref_len = max(math.dist(q, r) for q in pts for r in pts)
        if abs(g["cx"] - cx) > 1e-9 or abs(g["cy"] - cy) > 1e-9 or \
                (g["x0"], g["y0"], g["x1"], g["y1"]) != (p.bbox[1], p.bbox[0], p.bbox[3] - 1, p.bbox[2] - 1) or \
                abs(g["length"] - ref_len) > 1e-9 or abs(g["width"] - min_width(pts)) > 1e-9:
            bad.append(g)
    check(f"merged defects {conn}-conn: bbox, centroid (regionprops), length, width of the union",
          not bad, bad[:2])

sys.exit(status())
