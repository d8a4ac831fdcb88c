"""The labelling tool's fill (station/label_doc.h) against scikit-image.

Reference: scikit-image 0.19 segmentation.flood(image, seed_point,
tolerance=..., connectivity=1): the 4-connected region of pixels whose value
lies within seed +- tolerance.  Our fill compares colours by the largest
channel difference, so the reference floods the image of that difference
d = max_c |img_c - seed_c| (the seed's d is 0, so flood keeps d <= tol);
on a grey picture (R = G = B) the reference is flood on the grey values
themselves, with no rewriting of the criterion.  Pictures: odd sizes, smooth
blobs plus noise and a hard-edged patch, fixed seeds.
"""
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from skimage.segmentation import flood

from refcheck import check, status, tool as tool_path

tool = tool_path("labelfill")


def ours(img, x, y, tol):
    with tempfile.TemporaryDirectory() as d:
        png, raw = os.path.join(d, "p.png"), os.path.join(d, "m.raw")
        Image.fromarray(img).save(png)
        out = subprocess.run([tool, png, str(x), str(y), str(tol), raw], check=True,
                             capture_output=True, text=True).stdout
        m = np.fromfile(raw, np.uint8).reshape(img.shape[:2]).astype(bool)
    return m, int(out)


def picture(rng, h, w, grey):
    yy, xx = np.mgrid[0:h, 0:w]
    base = np.zeros((h, w, 3))
    for _ in range(5):
        cy, cx, s = rng.uniform(0, h), rng.uniform(0, w), rng.uniform(4, 14)
        base += rng.uniform(-90, 90, 3) * np.exp(-((yy - cy) ** 2 + (xx - cx) ** 2) / (2 * s * s))[..., None]
    base += 128 + rng.normal(0, 3, (h, w, 3))
    base[h // 3: h // 3 + 9, w // 4: w // 4 + 13] = (210, 60, 30)   # a stain-like patch
    if grey:
        base[..., 1] = base[..., 2] = base[..., 0]
    return np.clip(np.rint(base), 0, 255).astype(np.uint8)


def main():
    rng = np.random.default_rng(38)
    cases = 0
    for h, w, grey in ((61, 97, False), (45, 33, True), (80, 123, False)):
        img = picture(rng, h, w, grey)
        seeds = [(w // 4 + 5, h // 3 + 4)] + [(int(rng.integers(w)), int(rng.integers(h))) for _ in range(3)]
        for x, y in seeds:
            for tol in (0, 6, 20, 60):
                got, n = ours(img, x, y, tol)
                if grey:
                    ref = flood(img[..., 0].astype(np.int16), (y, x), tolerance=tol, connectivity=1)
                else:
                    d = np.abs(img.astype(np.int16) - img[y, x].astype(np.int16)).max(axis=2)
                    ref = flood(d, (y, x), tolerance=tol, connectivity=1)
                check(f"fill {w}x{h}{' grey' if grey else ''} from ({x},{y}) tol {tol}: "
                      f"{ref.sum()} px", np.array_equal(got, ref) and n == ref.sum(),
                      f"ours {got.sum()} (count {n}), {np.sum(got != ref)} pixels differ")
                cases += 1
    # the patch alone: a fill from inside it finds exactly its 9 x 13 pixels
    img = picture(rng, 61, 97, False)
    got, n = ours(img, 97 // 4 + 2, 61 // 3 + 2, 10)
    check("the patch is filled exactly", n == 9 * 13 and got[20:29, 24:37].all(), f"{n} px")
    print(f"{cases} fills compared")
    return status()


if __name__ == "__main__":
    sys.exit(main())
