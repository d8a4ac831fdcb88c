"""The coarse option's effect on the demo's test set: IoU per class (station
evaluate) and verdicts (station inspect, against a copy of the demo's log so
the masters' verification counts) with the recipe as it is and with
[classifier] coarse on.  Prints one JSON line; figures, not a test.
usage: coarse_effect.py BUILD RECIPE COARSE_RECIPE DEMO_DIR"""
import glob
import json
import os
import shutil
import subprocess
import sys
import tempfile

build, exact, coarse, demo = sys.argv[1:5]
station = os.path.join(build, "station")
images = sorted(glob.glob(os.path.join(demo, "test", "images", "*.png")))


def evaluate(recipe):
    out = subprocess.run([station, "evaluate", recipe, "--data", os.path.join(demo, "test"), "--json"],
                         check=True, capture_output=True, text=True).stdout
    d = json.loads(out)
    return {"pixel_accuracy": d["pixel_accuracy"], "mean_iou": d["mean_iou"], "iou": d["iou"]}


def verdicts(recipe, scratch):
    # the log folder whole: the signing key lies beside the database
    logdir = os.path.join(scratch, os.path.basename(recipe))
    shutil.copytree(os.path.join(demo, "log"), logdir)
    log = os.path.join(logdir, "station.db")
    run = subprocess.run([station, "inspect", recipe, *images, "--log", log, "--station", "demo-bench"],
                         capture_output=True, text=True)
    if run.returncode not in (0, 1, 2):
        sys.exit(f"coarse_effect: station inspect {recipe} failed: {run.stderr.strip()}")
    lines = [json.loads(l) for l in run.stdout.splitlines() if l.startswith("{")]
    return {d["image"]: d["verdict"] for d in lines}


with tempfile.TemporaryDirectory() as scratch:
    va, vb = verdicts(exact, scratch), verdicts(coarse, scratch)
same = sum(va[k] == vb.get(k) for k in va)
counts = {v: list(va.values()).count(v) for v in sorted(set(va.values()))}
print(json.dumps({"exact": evaluate(exact), "coarse": evaluate(coarse), "images": len(va),
                  "same_verdict": same, "verdicts": counts}))
