"""Zones that follow the part: painted maps and zone_map_contains against
scikit-image drawings of the same shapes in the frame.

References: scikit-image 0.19 skimage.draw.polygon (rectangles and polygons,
pixel centres inside, even-odd), skimage.draw.ellipse (circles and rings:
a circle in mm is an axis-aligned ellipse in pixels when sx != sy),
skimage.measure.points_in_poly (polygons, pixel centres in part mm),
skimage.transform.warp with order=0 (a mask resampled by nearest pixel), and
numpy.rot90 (a part turned half a turn carries its zones with it).  The pose
is the one part_locate reports (held to regionprops by test_part.py).
Tolerance: the two may disagree only on pixels whose centre lies on or next
to a zone boundary (a pixel of skimage.segmentation.find_boundaries
mode="thick" of the reference map), and on at most 1% of the zone pixels.
"""
import atexit
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from skimage.draw import disk, ellipse, polygon
from skimage.measure import points_in_poly
from skimage.segmentation import find_boundaries
from skimage.transform import ProjectiveTransform, warp

from refcheck import check, status, tool

ZT = tool("zonetool")
NONE = 255
TMP = tempfile.mkdtemp()
atexit.register(shutil.rmtree, TMP, True)

# an L with a foot, 21 x 13 mask pixels, asymmetric under any turn
MASK = np.zeros((13, 21), np.uint8)
MASK[1:12, 2:7] = 255
MASK[8:12, 2:19] = 255
MASK[3, 15] = 255
MASK_PATH = os.path.join(TMP, "logo.png")
Image.fromarray(MASK).save(MASK_PATH)

ZONES = [
    {"name": "bore", "shape": "circle", "cx": 1.0, "cy": -0.5, "r_out": 2.5},
    {"name": "seal", "shape": "ring", "cx": 0.5, "cy": 0.3, "r_in": 3.0, "r_out": 4.6},
    {"name": "tab", "shape": "rect", "cx": 5.0, "cy": 1.0, "w": 4.0, "h": 2.2, "angle_deg": 25},
    {"name": "notch", "shape": "polygon",
     "pts": [[-7, -5], [-1, -6], [-2, -3.5], [-4.5, -3.8], [-3, -1], [-7.5, -1.5]]},
    {"name": "logo", "shape": "mask", "cx": -4.0, "cy": 3.0, "angle_deg": -35,
     "mask_path": MASK_PATH, "mask_mm_per_px": 0.3},
]


def keyhole(h, w, phi, cy, cx):
    m = np.zeros((h, w), bool)
    rr, cc = disk((cy, cx), 22, shape=m.shape)
    m[rr, cc] = True
    c, s = math.cos(phi), math.sin(phi)
    corners = [(0, -5), (55, -5), (55, 5), (0, 5)]
    rr, cc = polygon([cy + u * s + v * c for u, v in corners],
                     [cx + u * c - v * s for u, v in corners], shape=m.shape)
    m[rr, cc] = True
    return m


def run(part, zones, sx, sy):
    h, w = part.shape
    d = tempfile.mkdtemp(dir=TMP)
    spec = os.path.join(d, "spec.json")
    json.dump({"sx": sx, "sy": sy, "zones": zones}, open(spec, "w"))
    raw = os.path.join(d, "cm.raw")
    part.astype(np.uint8).tofile(raw)
    out = subprocess.run([ZT, "zones", spec, str(w), str(h), raw, d], check=True,
                         capture_output=True, text=True).stdout.split()
    pose = dict(zip(["cx", "cy", "angle"], map(float, out[3:6])))
    paint = np.fromfile(os.path.join(d, "paint.raw"), np.uint8).reshape(h, w)
    cont = np.fromfile(os.path.join(d, "contains.raw"), np.uint8).reshape(h, w)
    return pose, paint, cont


class Pose:
    def __init__(self, p, sx, sy):
        self.cx, self.cy, self.a, self.sx, self.sy = p["cx"], p["cy"], p["angle"], sx, sy

    def to_px(self, u, v):
        c, s = math.cos(self.a), math.sin(self.a)
        return (self.cx + (u * c - v * s) / self.sx, self.cy + (u * s + v * c) / self.sy)

    def to_mm(self, x, y):
        c, s = math.cos(self.a), math.sin(self.a)
        a, b = (x - self.cx) * self.sx, (y - self.cy) * self.sy
        return a * c + b * s, -a * s + b * c


def turned(z, p, q):
    t = math.radians(z.get("angle_deg", 0))
    return (z["cx"] + p * math.cos(t) - q * math.sin(t), z["cy"] + p * math.sin(t) + q * math.cos(t))


def reference(zones, pose, shape):
    h, w = shape
    ref = np.full(shape, NONE, np.uint8)
    for k, z in enumerate(zones):
        m = np.zeros(shape, bool)
        if z["shape"] in ("circle", "ring"):
            x, y = pose.to_px(z["cx"], z["cy"])
            rr, cc = ellipse(y, x, z["r_out"] / pose.sy, z["r_out"] / pose.sx, shape=shape)
            m[rr, cc] = True
            if z["shape"] == "ring":
                rr, cc = ellipse(y, x, z["r_in"] / pose.sy, z["r_in"] / pose.sx, shape=shape)
                m[rr, cc] = False
        elif z["shape"] in ("rect", "polygon"):
            pts = z["pts"] if z["shape"] == "polygon" else [
                turned(z, p * z["w"] / 2, q * z["h"] / 2) for p, q in
                [(-1, -1), (1, -1), (1, 1), (-1, 1)]]
            xy = [pose.to_px(u, v) for u, v in pts]
            rr, cc = polygon([y for _, y in xy], [x for x, _ in xy], shape=shape)
            m[rr, cc] = True
        else:
            # frame pixel -> mask (col, row) with pixel centres at integers:
            # col = p / s + w / 2 - 1/2, an affine map composed numerically
            s = z["mask_mm_per_px"]
            mh, mw = MASK.shape
            t = math.radians(z["angle_deg"])

            def fwd(x, y):
                u, v = pose.to_mm(x, y)
                a, b = u - z["cx"], v - z["cy"]
                p, q = a * math.cos(t) + b * math.sin(t), -a * math.sin(t) + b * math.cos(t)
                return p / s + mw / 2 - 0.5, q / s + mh / 2 - 0.5

            o, ex, ey = np.array(fwd(0, 0)), np.array(fwd(1, 0)), np.array(fwd(0, 1))
            mat = np.array([[ex[0] - o[0], ey[0] - o[0], o[0]], [ex[1] - o[1], ey[1] - o[1], o[1]],
                            [0, 0, 1]])
            m = warp(MASK > 0, ProjectiveTransform(matrix=mat), output_shape=shape, order=0,
                     cval=0, preserve_range=True) > 0.5
        ref[(ref == NONE) & m] = k
    return ref


def agree(name, ours, ref):
    bad = ours != ref
    near = find_boundaries(ref.astype(np.int32), mode="thick", connectivity=2)
    zone_px = max(1, int((ref != NONE).sum()))
    ok = not (bad & ~near).any() and bad.sum() <= 0.01 * zone_px and (ref != NONE).any()
    check(f"{name}: {bad.sum()} of {zone_px} zone pixels differ, all on a boundary", ok,
          f"{(bad & ~near).sum()} off the boundary")


for phi, sx, sy, size in [(0.4, 0.2, 0.2, (151, 173)), (2.5, 0.2, 0.2, (139, 167)),
                          (-1.2, 0.2, 0.25, (141, 163)), (3.05, 0.17, 0.17, (160, 181))]:
    h, w = size
    part = keyhole(h, w, phi, h / 2 + 2.3, w / 2 - 1.7)
    p, paint, cont = run(part, ZONES, sx, sy)
    pose = Pose(p, sx, sy)
    ref = reference(ZONES, pose, part.shape)
    tag = f"pose {phi} rad, {sx}x{sy} mm/px, {w}x{h}"
    agree(f"painted map vs skimage.draw / warp, {tag}", paint, ref)
    agree(f"zone_map_contains per pixel vs skimage.draw / warp, {tag}", cont, ref)
    check(f"painted map = zone_map_contains except boundaries, {tag}",
          not ((paint != cont) & ~find_boundaries(ref.astype(np.int32), mode="thick",
                                                   connectivity=2)).any())
    present = set(np.unique(paint)) - {NONE}
    check(f"every zone present in the painted map, {tag}", present == set(range(len(ZONES))),
          str(present))
    # the polygon by points_in_poly on the pixel centres in part mm
    ys, xs = np.mgrid[0:h, 0:w]
    u, v = pose.to_mm(xs.ravel().astype(float), ys.ravel().astype(float))
    inside = points_in_poly(np.column_stack([u, v]), np.array(ZONES[3]["pts"])).reshape(h, w)
    # where an earlier zone owns the pixel the polygon cannot show: compare elsewhere
    diff = ((cont == 3) != inside) & (cont >= 3)
    check(f"polygon zone vs measure.points_in_poly on pixel centres, {tag}",
          not (diff & ~find_boundaries(ref.astype(np.int32), mode="thick", connectivity=2)).any()
          and inside.any(), f"{diff.sum()} differ")
    # zones follow the part: turn the frame half a turn, the map turns with it
    p2, paint2, _ = run(np.rot90(part, 2), ZONES, sx, sy)
    turned_ref = np.rot90(paint, 2)
    bad = paint2 != turned_ref
    check(f"part turned half a turn (numpy.rot90): zone map turns with it, {tag}",
          not (bad & ~find_boundaries(turned_ref.astype(np.int32), mode="thick",
                                      connectivity=2)).any(), f"{bad.sum()} differ")

# a self-intersecting outline (a bow tie) is read with the even-odd rule,
# like skimage.draw.polygon
bow = [{"name": "bow", "shape": "polygon", "pts": [[-6, -4], [6, 4], [6, -4], [-6, 4]]}]
part = keyhole(141, 163, 0.8, 72.5, 80.5)
p, paint, cont = run(part, bow, 0.2, 0.2)
agree("bow-tie polygon, even-odd, vs skimage.draw.polygon", paint,
      reference(bow, Pose(p, 0.2, 0.2), part.shape))
# no part: nothing is painted
p, paint, cont = run(np.zeros((31, 29), bool), ZONES, 0.2, 0.2)
check("no part found: every pixel outside every zone", (paint == NONE).all())
sys.exit(status())
