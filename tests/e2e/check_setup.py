"""End-to-end checks of recipe setup: `station recipe show`, `recipe save`
and the version and model checks at start, `train --split` and `evaluate
--split`.

usage: check_setup.py STATION RECIPE FIXTURE OUT

References outside the code under test: Python's configparser reading the
recipe file (what `recipe show` must state), hashlib (file hashes, the
content hash with the version value left out, the held-out split by name:
core/dataset.h's rule written again here), sqlite3 reading the log's
records, and numpy/PIL counting labelled pixels per class in the masks (what
the model metadata must report for the images trained on)."""
import configparser
import glob
import hashlib
import json
import os
import re
import shutil
import sqlite3
import subprocess
import sys

import numpy as np
from PIL import Image

STATION, RECIPE, FIXTURE, OUT = sys.argv[1:5]
ENV = dict(os.environ, LC_ALL="C")


def fail(msg):
    print("FAIL " + msg)
    sys.exit(1)


def run(args):
    p = subprocess.run([STATION] + args, stdin=subprocess.DEVNULL, capture_output=True, text=True,
                       timeout=300, env=ENV)
    return p.returncode, p.stdout, p.stderr


def sha_file(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def read_ini(path):
    c = configparser.ConfigParser(inline_comment_prefixes=(";",), interpolation=None)
    c.read(path)
    return c


def none_or(v):
    return None if v is None or v.strip() == "none" else float(v)


def check_show():
    rc, out, err = run(["recipe", "show", RECIPE, "--json"])
    if rc != 0:
        fail("recipe show --json: exit %d %s" % (rc, err))
    s = json.loads(out)
    ini = read_ini(RECIPE)
    if s["product"] != ini["product"]["id"] or s["version"] != int(ini["product"]["version"]):
        fail("product/version %s %s, the file says %s %s" % (s["product"], s["version"],
                                                            ini["product"]["id"],
                                                            ini["product"]["version"]))
    coarse = ini["classifier"].get("coarse", "no") == "yes"   # recipes/README.md: off by default
    if s["classifier"]["coarse"] != coarse:
        fail("classifier coarse %s, the file says %s" % (s["classifier"]["coarse"], coarse))
    classes = [sec.split(" ", 1)[1] for sec in ini.sections() if sec.startswith("class ")]
    if [c["name"] for c in s["classes"]] != classes:
        fail("classes %s, the file lists %s" % ([c["name"] for c in s["classes"]], classes))
    for c in s["classes"]:
        sec = ini["class " + c["name"]]
        if c["colour"] != sec["colour"].lower() or c["defect"] != (sec["defect"] == "yes"):
            fail("class %s: %s, the file says %s" % (c["name"], c, dict(sec)))
    zones = [sec.split(" ", 1)[1] for sec in ini.sections() if sec.startswith("zone ")]
    if [z["name"] for z in s["zones"]] != zones:
        fail("zones %s, the file lists %s" % ([z["name"] for z in s["zones"]], zones))
    for z in s["zones"]:
        sec = ini["zone " + z["name"]]
        if sec["shape"] == "ring":
            r_in, r_out = map(float, sec["radii"].split())
            if (z["r_in_mm"], z["r_out_mm"]) != (r_in, r_out) or "%g to %g mm" % (r_in, r_out) \
                    not in z["text"]:
                fail("zone %s: %s, the file says radii %s" % (z["name"], z, sec["radii"]))
    keys = ["min_area_mm2", "max_area_mm2", "max_total_mm2", "max_count", "max_length_mm"]
    want = []
    for sec in ini.sections():
        m = re.fullmatch(r"tolerance (\S+)(?: in (\S+))?", sec)
        if not m:
            continue
        cls, zone = m.groups()
        own, base = ini[sec], ini["tolerance " + cls]
        lim = {}
        for k in keys:   # a zone's own section restates only what differs (recipes/README.md)
            v = own.get(k, base.get(k))
            lim[k] = none_or(v)
        want.append(((cls, zone), lim))
    got = {(t["class"], t["zone"]): t for t in s["tolerances"]}
    if set(k for k, _ in want) != set(got):
        fail("tolerances for %s, the file has %s" % (sorted(got, key=str), [k for k, _ in want]))
    for k, lim in want:
        t = got[k]
        for key, v in lim.items():
            if (t[key] is None) != (v is None) or (v is not None and abs(t[key] - v) > 1e-12):
                fail("tolerance %s %s: %s, the file says %s" % (k, key, t[key], v))
        if lim["max_count"] is not None:
            n = int(lim["max_count"])
            if "at most %d region%s" % (n, "" if n == 1 else "s") not in t["text"]:
                fail("tolerance %s text %r does not state max_count %d" % (k, t["text"], n))
        if lim["max_area_mm2"] is not None and "none larger than %g mm²" % lim["max_area_mm2"] \
                not in t["text"]:
            fail("tolerance %s text %r does not state max_area_mm2" % (k, t["text"]))
    model = os.path.join(os.path.dirname(RECIPE), ini["classifier"]["model"])
    with open(model + ".meta.json") as f:
        meta = json.load(f)
    m = s["model"]
    if m["check"] != "ok" or m["sha256"] != sha_file(model) or \
            m["training_samples"] != meta["training_samples"]:
        fail("model section %s, metadata %s, file hash %s" % (m, meta["training_samples"],
                                                              sha_file(model)))
    if s["hashes"]["file_sha256"] != sha_file(RECIPE):
        fail("file SHA-256 %s, hashlib says %s" % (s["hashes"]["file_sha256"], sha_file(RECIPE)))
    rc, text, err = run(["recipe", "show", RECIPE])
    for t in s["tolerances"]:
        if t["text"] not in text:
            fail("the text form lacks %r" % t["text"])
    for needle in [m["sha256"], "version %s" % ini["product"]["version"], "trained"]:
        if needle not in text:
            fail("the text form lacks %r" % needle)
    print("ok   recipe show: product, version, %d classes with colours, %d zones, %d tolerances "
          "(inherited limits included) as configparser reads the file; model hash and training "
          "data as stored" % (len(classes), len(zones), len(want)))


def content_hash(path):
    """The file with the value of [product] version left out (core/recipever.h)."""
    with open(path, "rb") as f:
        data = f.read()
    m = re.search(rb"(?ms)^\[product\].*?^[ \t]*version[ \t]*=[ \t]*(\d+)", data)
    return hashlib.sha256(data[:m.start(1)] + data[m.end(1):]).hexdigest()


def save(path):
    rc, out, err = run(["recipe", "save", path])
    if rc != 0:
        fail("recipe save: exit %d %s" % (rc, err))
    return json.loads(out)


def records(db):
    with sqlite3.connect(db) as c:
        return c.execute("SELECT recipe_version, recipe_sha256, model_sha256 FROM records "
                         "ORDER BY seq").fetchall()


def edit(path, section, key, value):
    with open(path) as f:
        text = f.read()
    new, n = re.subn(r"(?ms)(^\[%s\]\n(?:[^\[].*?\n)*?)%s = [^\n]*" % (re.escape(section), key),
                     r"\g<1>%s = %s" % (key, value), text, count=1)
    if n != 1:
        fail("test cannot edit [%s] %s" % (section, key))
    with open(path, "w") as f:
        f.write(new)


def check_versions():
    folder = os.path.join(OUT, "versions")
    os.makedirs(folder)
    for f in glob.glob(os.path.join(os.path.dirname(RECIPE), "ostrel-cap38.*")):
        shutil.copy(f, folder)
    rec = os.path.join(folder, "ostrel-cap38.ini")
    side = rec + ".version.json"
    images = sorted(glob.glob(os.path.join(FIXTURE, "test", "images", "*.png")))[:1]
    db = os.path.join(OUT, "versions.db")
    first = save(rec)
    with open(side) as f:
        s = json.load(f)
    if first["changed"] or first["version"] != 1 or s["content_sha256"] != content_hash(rec):
        fail("first save %s, record %s, content hash %s" % (first, s, content_hash(rec)))
    before = open(rec, "rb").read()
    again = save(rec)
    if again["changed"] or again["version"] != 1 or open(rec, "rb").read() != before:
        fail("saving unchanged content: %s, or the file changed" % again)
    # a tolerance-only edit: refused until saved, then version 2 and the model still valid
    edit(rec, "tolerance scratch in rim", "max_count", "2")
    rc, out, err = run(["inspect", rec] + images + ["--log", db])
    if rc != 3 or rec not in err or "recipe save" not in err or "version 1" not in err:
        fail("an unsaved edit: exit %d, %s" % (rc, err[-300:]))
    second = save(rec)
    lines_before = before.decode().splitlines()
    lines_after = open(rec).read().splitlines()
    diff = [(a, b) for a, b in zip(lines_before, lines_after) if a != b]
    if not second["changed"] or second["version"] != 2 or len(lines_before) != len(lines_after) \
            or [b for _, b in diff] != ["version = 2", "max_count = 2"]:
        fail("saving the edit: %s, lines changed %s" % (second, diff))
    rc, out, err = run(["inspect", rec] + images + ["--log", db])
    if rc not in (0, 1, 2):
        fail("a tolerance-only edit should keep the model: exit %d %s" % (rc, err[-300:]))
    got = records(db)
    if not got or got[-1][0] != 2 or got[-1][1] != sha_file(rec):
        fail("log record names %s, want version 2 and the file's SHA-256" % (got[-1:],))
    # a change the trees depend on: the model is refused, naming both files and the difference
    edit(rec, "classifier", "depth", "5")
    third = save(rec)
    rc, out, err = run(["inspect", rec] + images + ["--log", db])
    model = os.path.join(folder, "ostrel-cap38.model.json")
    if third["version"] != 3 or rc != 3 or model not in err or rec not in err or \
            "depth 6" not in err or "depth 5" not in err:
        fail("a model trained for depth 6 under a recipe of depth 5: version %s, exit %d, %s"
             % (third["version"], rc, err[-400:]))
    rc, out, err2 = run(["run", rec, "--headless", "--source", "bench", "--frames", "3",
                         "--log", db])
    if rc != 3 or "depth 5" not in err2:
        fail("station run with the foreign model: exit %d %s" % (rc, err2[-300:]))
    print("ok   versions: first save records, unchanged content keeps version 1, an unsaved edit "
          "is refused, a tolerance edit becomes version 2 with the model still valid (log record "
          "version 2, file hash as hashlib), a depth edit refuses the model in inspect and run: "
          + err.strip().splitlines()[-1][:160])


def held_out(stem, share):
    """core/dataset.h: first 8 bytes of SHA-256(stem), big-endian, over 2^64."""
    return int.from_bytes(hashlib.sha256(stem.encode()).digest()[:8], "big") / 2 ** 64 < share


def check_split():
    data, poisoned = os.path.join(OUT, "data"), os.path.join(OUT, "poisoned")
    for d in (data, poisoned):
        for sub in ("images", "labels"):
            os.makedirs(os.path.join(d, sub))
            for part in ("train", "test"):
                for f in glob.glob(os.path.join(FIXTURE, part, sub, "*.png")):
                    name = part + "-" + os.path.basename(f)
                    shutil.copy(f, os.path.join(d, sub, name))
    stems = sorted(os.path.basename(f)[:-4] for f in glob.glob(os.path.join(data, "labels", "*")))
    share = next(s for s in (0.3, 0.4, 0.5, 0.6)
                 if 0 < sum(held_out(t, s) for t in stems) < len(stems) - 1)
    held = [t for t in stems if held_out(t, share)]
    kept = [t for t in stems if t not in held]
    for t in held:   # unreadable: training fails if it reads any of them
        for sub in ("images", "labels"):
            with open(os.path.join(poisoned, sub, t + ".png"), "wb") as f:
                f.write(b"not a png")
    # a small classifier: the split is under test, not the model
    small = os.path.join(OUT, "small.ini")
    shutil.copy(RECIPE, small)
    edit(small, "classifier", "rounds", "4")
    edit(small, "classifier", "samples_per_class", "300")
    edit(small, "features", "families", "colour gauss gradient")
    edit(small, "features", "sigmas", "1 2")
    edit(small, "classifier", "model", "small.model.json")
    rc, out, err = run(["train", small, "--data", poisoned, "--split", str(share)])
    if rc != 0:
        fail("train --split %g with the held-out images unreadable: exit %d %s"
             % (share, rc, err[-300:]))
    with open(os.path.join(OUT, "small.model.json.meta.json")) as f:
        meta = json.load(f)
    classes = meta["classes"]
    counts = np.zeros(len(classes), dtype=np.int64)
    images = np.zeros(len(classes), dtype=np.int64)
    for t in kept:
        lab = np.asarray(Image.open(os.path.join(data, "labels", t + ".png")))
        for c in range(len(classes)):
            n = int((lab == c).sum())
            counts[c] += n
            images[c] += n > 0
    for c, name in enumerate(classes):
        ts = meta["training_samples"][name]
        if ts["labelled"] != counts[c] or ts["images"] != images[c]:
            fail("class %s: metadata says %d labelled pixels in %d images, the %d training masks "
                 "hold %d in %d" % (name, ts["labelled"], ts["images"], len(kept), counts[c],
                                    images[c]))
    # the thin-class warning (station/train.h: under 300 labelled pixels or 3 images)
    ini = read_ini(small)
    for c, name in enumerate(classes):
        thin = ini["class " + name]["defect"] == "yes" and (counts[c] < 300 or images[c] < 3)
        if thin != ("warning: defect class '%s'" % name in err):
            fail("class %s (%d pixels in %d images): warning %s, want %s"
                 % (name, counts[c], images[c], not thin, thin))
    if abs(meta["holdout_fraction"] - share) > 1e-12 or "held out of training: %d of %d" % (
            len(held), len(stems)) not in err:
        fail("holdout %s, report %s" % (meta["holdout_fraction"], err[-300:]))
    rc, out, err = run(["evaluate", small, "--data", data, "--split", str(share), "--json",
                        "--sheets", "none"])
    if rc != 0 or [i["image"] for i in json.loads(out)["images"]] != held:
        fail("evaluate --split: exit %d, images %s, want the held-out %s (%s)"
             % (rc, out[:200], held, err[-200:]))
    rc, out, err = run(["evaluate", small, "--data", data, "--split", "0.9", "--sheets", "none"])
    if rc != 3 or "split" not in err:
        fail("evaluate with another share than trained: exit %d %s" % (rc, err[-200:]))
    print("ok   split %g: %d of %d images held out by name (hashlib), never read in training "
          "(unreadable there), labelled pixels per class in the metadata = numpy's count over "
          "the %d training masks, thin defect classes warned of; evaluate --split measures exactly "
          "the held-out ones"
          % (share, len(held), len(stems), len(kept)))


os.makedirs(OUT, exist_ok=True)
check_show()
check_versions()
check_split()
