"""part_locate against skimage.measure.regionprops, and the half-turn rule.

References: scikit-image 0.19 measure.regionprops (centroid, orientation,
major_axis_length, minor_axis_length: 4 sqrt of the eigenvalues of the
inertia tensor), shapes drawn with skimage.draw (ellipse, polygon, disk);
scipy.stats.skew for the sign of the third moment along the axis.
Conventions: regionprops' orientation o is the angle from the row axis to
the major axis, so the axis direction is (col, row) = (sin o, cos o) and our
angle (from +x towards +y) is pi/2 - o, equal modulo a half turn.
"""
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.stats import skew
from skimage.draw import disk, ellipse, polygon
from skimage.measure import regionprops

from refcheck import check, status, tool

ZT = tool("zonetool")


def locate(mask, sx, sy, orient=1):
    h, w = mask.shape
    with tempfile.TemporaryDirectory() as d:
        raw = os.path.join(d, "cm.raw")
        (mask.astype(np.uint8) * 2).tofile(raw)   # any class but 0 is the part
        out = subprocess.run([ZT, "part", str(w), str(h), repr(sx), repr(sy), str(orient), raw],
                             check=True, capture_output=True, text=True).stdout.split()
    keys = ["found", "pixels", "area", "cx", "cy", "angle", "iso", "major", "minor", "x0", "y0",
            "x1", "y1", "gap"]
    return dict(zip(keys, map(float, out)))


def axis_diff(a, b):
    """Difference of two axis angles modulo a half turn, in [0, pi/2]."""
    d = (a - b) % math.pi
    return min(d, math.pi - d)


def rotated_poly(cy, cx, corners, phi):
    """Corners (u, v) in px turned by phi (from +x towards +y) about (cx, cy)."""
    c, s = math.cos(phi), math.sin(phi)
    rows = [cy + u * s + v * c for u, v in corners]
    cols = [cx + u * c - v * s for u, v in corners]
    return np.array(rows), np.array(cols)


def compare(name, mask, scale):
    got = locate(mask, scale, scale)
    p = regionprops(mask.astype(np.uint8))[0]
    cy, cx = p.centroid
    ok = (abs(got["cx"] - cx) < 1e-9 and abs(got["cy"] - cy) < 1e-9
          and got["pixels"] == p.area and abs(got["area"] - p.area * scale * scale) < 1e-9
          and abs(got["major"] - p.major_axis_length * scale) < 1e-9 * max(1, p.major_axis_length)
          and abs(got["minor"] - p.minor_axis_length * scale) < 1e-9 * max(1, p.major_axis_length)
          and not got["iso"]
          and axis_diff(got["angle"], math.pi / 2 - p.orientation) < 1e-9)
    check(f"{name}: centroid, axes, orientation = regionprops (1e-9)", ok,
          f"ours {got} ref c=({cx},{cy}) o={p.orientation} "
          f"maj={p.major_axis_length} min={p.minor_axis_length}")


# rotated ellipses and rectangles on odd frames, square pixels at two scales
for i, rot in enumerate([0.0, 0.4, 1.1, 2.0, -0.7, 2.9]):
    h, w = (113, 157) if i % 2 else (97, 131)
    m = np.zeros((h, w), bool)
    rr, cc = ellipse(h / 2 + 3.3, w / 2 - 5.6, 14, 37, shape=m.shape, rotation=rot)
    m[rr, cc] = True
    compare(f"ellipse rotation {rot} on {w}x{h}", m, 0.17 if i % 2 else 1.0)
for phi in [0.25, 1.0, 2.2, -1.3]:
    m = np.zeros((121, 143), bool)
    rr, cc = polygon(*rotated_poly(60.2, 70.7, [(-30, -11), (30, -11), (30, 11), (-30, 11)], phi),
                     shape=m.shape)
    m[rr, cc] = True
    compare(f"rectangle 60x22 px turned {phi} rad", m, 0.05)

# non-square pixels, hand-checked: a diagonal of 31 pixels with sx = 1, sy = 2
# mm has var(x) = var(y)/4 = cov/2 = (31^2 - 1)/12 = 80, so the axis is
# along (1, 2): angle atan(2); major = 4 sqrt(80 + 320) = 80 mm, minor 0
m = np.zeros((41, 45), bool)
for k in range(31):
    m[5 + k, 7 + k] = True
got = locate(m, 1.0, 2.0)
check("diagonal line, sx=1 sy=2: angle atan(2), major 80 mm, minor 0 (by hand)",
      axis_diff(got["angle"], math.atan(2)) < 1e-12 and abs(got["major"] - 80) < 1e-9
      and abs(got["minor"]) < 1e-6, str(got))
# a 20 x 10 px block at 0.1 x 0.3 mm: var x = (20^2-1)/12 * 0.01, var y =
# (10^2-1)/12 * 0.09, so the major axis is along y (angle +-pi/2)
m = np.zeros((31, 37), bool)
m[9:19, 6:26] = True
got = locate(m, 0.1, 0.3)
check("20x10 px block, sx=0.1 sy=0.3: major along y, axes 4 sqrt(var) (by hand)",
      axis_diff(got["angle"], math.pi / 2) < 1e-12
      and abs(got["major"] - 4 * math.sqrt(99 / 12 * 0.09)) < 1e-9
      and abs(got["minor"] - 4 * math.sqrt(399 / 12 * 0.01)) < 1e-9
      and abs(got["area"] - 200 * 0.03) < 1e-12, str(got))
check("20x10 px block: bbox and border gap (numpy bounds)",
      (got["x0"], got["y0"], got["x1"], got["y1"], got["gap"]) == (6, 9, 25, 18, 6), str(got))


def keyhole(h, w, phi, cy, cx):
    """A disk with a stem: its third moment along the axis is not zero."""
    m = np.zeros((h, w), bool)
    rr, cc = disk((cy, cx), 16, shape=m.shape)
    m[rr, cc] = True
    rr, cc = polygon(*rotated_poly(cy, cx, [(0, -4), (42, -4), (42, 4), (0, 4)], phi),
                     shape=m.shape)
    m[rr, cc] = True
    return m


for phi in [0.3, 1.9, -2.4, 3.0]:
    m = keyhole(129, 151, phi, 61.4, 70.2)
    a = locate(m, 0.2, 0.2)
    b = locate(np.rot90(m, 2), 0.2, 0.2)
    d = (a["angle"] - b["angle"]) % (2 * math.pi)
    check(f"keyhole at {phi} rad and turned half a turn: angles pi apart (1e-9)",
          abs(d - math.pi) < 1e-9 and abs(b["cx"] - (150 - a["cx"])) < 1e-9, f"{a} {b}")
    ys, xs = np.nonzero(m)
    proj = ((xs - a["cx"]) * math.cos(a["angle"]) + (ys - a["cy"]) * math.sin(a["angle"])) * 0.2
    check(f"keyhole at {phi} rad: +u points to the stem, skew of u > 0 (scipy.stats.skew)",
          skew(proj) > 0.1 and axis_diff(a["angle"], phi) < 0.05
          and math.cos(a["angle"] - phi) > 0, f"skew {skew(proj)} angle {a['angle']}")
    f = locate(m, 0.2, 0.2, orient=0)
    check(f"keyhole at {phi} rad, fixed orientation: angle 0", f["angle"] == 0.0, str(f))

# round parts: a disk is isotropic (angle 0); an ellipse with axes 30:27
# (eigenvalue ratio 0.81, under the 0.9 threshold) is not
m = np.zeros((101, 103), bool)
rr, cc = disk((50.3, 51.6), 30, shape=m.shape)
m[rr, cc] = True
got = locate(m, 0.1, 0.1)
check("disk: isotropic, angle 0", got["iso"] == 1 and got["angle"] == 0, str(got))
m = np.zeros((101, 103), bool)
rr, cc = ellipse(50, 51, 27, 30, shape=m.shape, rotation=0.6)
m[rr, cc] = True
compare("ellipse 30:27 (not round enough to be isotropic)", m, 0.1)
got = locate(np.zeros((9, 11), bool), 0.1, 0.1)
check("empty map: not found", got["found"] == 0 and got["pixels"] == 0, str(got))
sys.exit(status())
