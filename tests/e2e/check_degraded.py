"""The degraded-image suite: frames no inspector may trust, made from a demo
part that passes, must each get NO_VERDICT with the gate that explains it.

Each degradation is a plain image operation done here with numpy and
scipy.ndimage (Debian's python3-numpy, python3-scipy), independent of the
station's own code: scaling the light, clipping, a Gaussian blur, moving
or shrinking the part over the bench mat, showing the bench mat alone, and
showing the same frame twice.  Which gate must fire is common practice for
such images (no source); where two gates both describe the image (a half
part is both too small and at the border) the test names the set it
accepts, and always requires NO_VERDICT.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from scipy import ndimage

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref"))
from refcheck import check, status  # noqa: E402

station, out = sys.argv[1], sys.argv[2]
recipe = os.path.join(out, "ostrel-cap38.ini")


def inspect(*paths):
    r = subprocess.run([station, "inspect", recipe, *paths], capture_output=True, text=True)
    return r.returncode, [json.loads(l) for l in r.stdout.splitlines()]


# A part that passes, with the most bench mat around it.
images = sorted(os.path.join(out, "test", "images", f)
                for f in os.listdir(os.path.join(out, "test", "images")))
rc, lines = inspect(*images)
good = [l["image"] for l in lines if l["verdict"] == "PASS"]
check("the demo's test batch has a part that passes", len(good) > 0, [l["verdict"] for l in lines])
if not good:
    sys.exit(status())
src = np.asarray(Image.open(good[0]).convert("RGB")).astype(np.float64)
h, w, _ = src.shape
base = [l for l in lines if l["image"] == good[0]][0]
x0, y0, x1, y1 = base["part"]["bbox"]

# The bench mat without the part: the frame's rows above the part tiled down.
mat_rows = src[: max(y0 - 4, 8)]
mat = np.concatenate([mat_rows] * (h // mat_rows.shape[0] + 1))[:h]


def on_mat(part_img, dx, dy, scale=1.0):
    """The part cut from src (its bounding box grown by 6 px), scaled and
    pasted onto the bench mat with its box's corner moved by (dx, dy)."""
    m = 6
    a, b = max(x0 - m, 0), max(y0 - m, 0)
    crop = part_img[b: y1 + m + 1, a: x1 + m + 1]
    if scale != 1.0:
        crop = ndimage.zoom(crop, (scale, scale, 1), order=1)
    out_img = mat.copy()
    ch, cw = crop.shape[:2]
    tx, ty = a + dx, b + dy
    sx0, sy0 = max(0, -tx), max(0, -ty)
    dx0, dy0 = max(0, tx), max(0, ty)
    dx1, dy1 = min(w, tx + cw), min(h, ty + ch)
    out_img[dy0:dy1, dx0:dx1] = crop[sy0: sy0 + dy1 - dy0, sx0: sx0 + dx1 - dx0]
    return out_img


cases = {
    # name: (image, accepted reasons: at least one must be given)
    "dark": (src * 0.12, {"too_dark", "black"}),
    "over-exposed": (src * 2.6, {"saturated", "too_bright"}),
    "blurred": (ndimage.gaussian_filter(src, (3.0, 3.0, 0)), {"blurred"}),
    "no part": (mat, {"no_part"}),
    "half a part": (on_mat(src, w - 1 - x0 - (x1 - x0) // 2, 0), {"part_at_border", "part_size"}),
    "part at the border": (on_mat(src, -x0, 0), {"part_at_border"}),
    "wrong size": (on_mat(src, 0, 0, 0.75), {"part_size"}),
}
with tempfile.TemporaryDirectory() as d:
    paths = {}
    for name, (img, _) in cases.items():
        p = os.path.join(d, name.replace(" ", "-") + ".png")
        Image.fromarray(np.clip(np.rint(img), 0, 255).astype(np.uint8)).save(p)
        paths[name] = p
    for name, (_, want) in cases.items():
        rc, got = inspect(paths[name])
        g = got[0]
        rules = {x["rule"] for x in g["reasons"]}
        check(f"degraded '{name}': NO_VERDICT for {sorted(want)} (got {g['verdict']} {sorted(rules)})",
              g["verdict"] == "NO_VERDICT" and rules & want and rc == 2, g["reasons"])
    # the same frame twice: the camera froze
    rc, got = inspect(good[0], good[0])
    rules = {x["rule"] for x in got[1]["reasons"]}
    check(f"degraded 'repeated frame': first {got[0]['verdict']}, second NO_VERDICT frozen "
          f"(got {got[1]['verdict']} {sorted(rules)})",
          got[0]["verdict"] == "PASS" and got[1]["verdict"] == "NO_VERDICT" and "frozen" in rules,
          got[1]["reasons"])
    # the untouched part, pasted back where it was, still passes: the
    # operations above, not the pasting, are what the gates see
    p = os.path.join(d, "pasted.png")
    Image.fromarray(np.clip(np.rint(on_mat(src, 0, 0)), 0, 255).astype(np.uint8)).save(p)
    rc, got = inspect(p)
    check(f"control: the part pasted back in place passes (got {got[0]['verdict']})",
          got[0]["verdict"] == "PASS", got[0]["reasons"])
sys.exit(status())
