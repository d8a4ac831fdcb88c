"""A lighting falloff on the demo's test parts, with and without the flat field.

The falloff (30% from a point off the frame's centre, as a ring light
mounted off axis gives; common practice, no source) is applied to the
demo's test frames with numpy, and white-target frames under the same
falloff are rendered with numpy.  `station calibrate flat` builds the flat
field from the white frames; a copy of the demo recipe names it under
[lighting].  Against the station's own verdicts on the untouched frames
(the reference the falloff must not move), with the flat field: every
verdict the same and the stain area per frame within 1.5 mm2; without it:
the falloff reads as stain somewhere (more than 10 mm2 of extra stain) or
changes a verdict — so the check could fail either way.
"""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref"))
from refcheck import check, status  # noqa: E402

station, out = sys.argv[1], sys.argv[2]
recipe = os.path.join(out, "ostrel-cap38.ini")
images = sorted(os.path.join(out, "test", "images", f)
                for f in os.listdir(os.path.join(out, "test", "images")))[:12]


def inspect(rec, paths):
    r = subprocess.run([station, "inspect", rec, *paths], capture_output=True, text=True)
    return [json.loads(l) for l in r.stdout.splitlines()]


def stain(line):
    return sum(g["area_mm2"] for g in line.get("regions", []) if g["class"] == "stain")


h, w = np.asarray(Image.open(images[0])).shape[:2]
y, x = np.mgrid[0:h, 0:w]
r2 = (x - 0.25 * w) ** 2 + (y - 0.3 * h) ** 2
shade = 1.0 - 0.3 * r2 / r2.max()
rng = np.random.default_rng(38)
with tempfile.TemporaryDirectory() as d:
    fallen = []
    for p in images:
        a = np.asarray(Image.open(p).convert("RGB"), np.float64)
        q = os.path.join(d, os.path.basename(p))
        Image.fromarray(np.clip(np.rint(a * shade[..., None]), 0, 255).astype(np.uint8)).save(q)
        fallen.append(q)
    whites = []
    for i in range(3):
        wf = 200 * shade[..., None] * np.ones(3) + rng.normal(0, 2, (h, w, 3))
        q = os.path.join(d, "white%d.png" % i)
        Image.fromarray(np.clip(np.rint(wf), 0, 255).astype(np.uint8)).save(q)
        whites.append(q)
    flat = os.path.join(out, "bench.flat")
    run = subprocess.run([station, "calibrate", "flat", "--white", *whites, "--out", flat],
                         capture_output=True, text=True)
    check("calibrate flat on the falloff", run.returncode == 0, run.stderr)
    rep = json.loads(run.stdout) if run.returncode == 0 else {}
    print("non-uniformity of the white frames: %.1f%% before, %.2f%% after"
          % (100 * rep.get("nonuniformity_before", 0), 100 * rep.get("nonuniformity_after", 0)))
    flat_recipe = os.path.join(out, "ostrel-cap38-flat.ini")
    with open(recipe) as f, open(flat_recipe, "w") as g:
        g.write(f.read() + "\n[lighting]\nflat_field = bench.flat\n")
    ref = inspect(recipe, images)
    bare = inspect(recipe, fallen)
    fixed = inspect(flat_recipe, fallen)
    check("every frame judged three times", len(ref) == len(bare) == len(fixed) == len(images))
    for a, b, c in zip(ref, bare, fixed):
        print("%-14s untouched %-10s %6.2f mm2 stain | falloff %-10s %6.2f | flat field %-10s %6.2f"
              % (os.path.basename(a["image"]), a["verdict"], stain(a), b["verdict"], stain(b),
                 c["verdict"], stain(c)))
    check("with the flat field every verdict is the untouched frame's",
          all(a["verdict"] == c["verdict"] for a, c in zip(ref, fixed)))
    worst = max(abs(stain(a) - stain(c)) for a, c in zip(ref, fixed))
    check("with the flat field stain area within 1.5 mm2 of the untouched frame's", worst <= 1.5, worst)
    extra = max(stain(b) - stain(a) for a, b in zip(ref, bare))
    changed = sum(a["verdict"] != b["verdict"] for a, b in zip(ref, bare))
    print("without the flat field: %d verdicts changed, up to %.1f mm2 of extra stain" % (changed, extra))
    check("without the flat field the falloff reads as stain or moves a verdict",
          extra > 10 or changed > 0, (extra, changed))
sys.exit(status())
