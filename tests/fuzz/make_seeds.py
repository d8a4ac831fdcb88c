#!/usr/bin/python3
"""Writes the fuzzers' seed corpora, tests/fuzz/corpus/TARGET/: a few small
valid inputs per parser, made with outside tools where there is one (PIL
for PNGs, XGBoost's own save_model for the trees), so the seeds are what
the station meets, not what our writers make.  Run once and commit the
output; the fuzzers never write here (run.sh keeps its working corpus in
BUILD/fuzz/corpus/).  Usage: /usr/bin/python3 tests/fuzz/make_seeds.py"""
import hashlib
import io
import json
import os
import struct

import numpy as np
import xgboost as xgb
from PIL import Image

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))


def put(target, name, data):
    d = os.path.join(HERE, "corpus", target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data if isinstance(data, bytes) else data.encode())


def png(img, **kw):
    b = io.BytesIO()
    img.save(b, "PNG", **kw)
    return b.getvalue()


rng = np.random.default_rng(7)
# PNG: the colour types and depths pngio.h names, small and odd-sized
put("png", "rgb8-5x3.png", png(Image.fromarray(rng.integers(0, 256, (3, 5, 3), dtype=np.uint8))))
put("png", "rgba8-4x3.png", png(Image.fromarray(rng.integers(0, 256, (3, 4, 4), dtype=np.uint8))))
put("png", "grey8-labels-7x2.png", png(Image.fromarray(rng.integers(0, 5, (2, 7), dtype=np.uint8))))
put("png", "grey16-3x3.png", png(Image.fromarray(rng.integers(0, 65536, (3, 3), dtype=np.uint16))))
put("png", "grey1-9x2.png", png(Image.fromarray(rng.integers(0, 2, (2, 9), dtype=np.uint8) > 0)))
pal = Image.fromarray(np.array([[0, 1, 2], [3, 4, 255]], dtype=np.uint8), "P")
pal.putpalette([v for i in range(256) for v in (i, 255 - i, i // 2)])
put("png", "palette-labels-3x2.png", png(pal, bits=4))
put("png", "la8-2x2.png", png(Image.fromarray(rng.integers(0, 256, (2, 2, 2), dtype=np.uint8), "LA")))

# recipes: the demo recipe, and one with every optional section
demo = open(os.path.join(ROOT, "recipes", "ostrel-cap38.ini")).read()
put("recipe", "ostrel-cap38.ini", demo)
put("recipe", "all-sections.ini", demo.replace("[scale]\n", "[scale]\n", 1) + """
[zone logo]
shape = mask
mask = logo.png
mask_mm_per_px = 0.1
centre = 1 2
angle = 30

[zone window]
shape = polygon
points = 0 0 4 0 4 3 1 5

[tolerance pit in logo]
max_count = 1

[evidence]
pass = every 10

[lighting]
flat_field = bench.flat

[verification]
interval_hours = 8

[master good]
image = masters/good.png
expect = pass

[master over]
image = masters/over.png
expect = fail

[camera]
width = 640
height = 480
fps = 30
exposure = 120
gain = 4
white_balance_k = 5000
focus = 20
power_line = 50
required = exposure focus
""")
put("recipe", "calibrated.ini", demo.replace("mm_per_px_x = 0.17\nmm_per_px_y = 0.17\n",
                                             "calibration = cal.json\n"))

# calibration files (README.md "Calibration file"), with and without a lens
cal = {"format": 1, "camera": "demo-bench", "width": 480, "height": 360,
       "created": "2026-12-01T08:00:00Z", "valid_days": 30, "mm_per_px_x": 0.17,
       "mm_per_px_y": 0.17, "image_to_plane": [0.17, 0, 0, 0, 0.17, 0, 0, 0, 1],
       "tilt_deg": 0,
       "reprojection": {"rms_px": 0.1, "worst_px": 0.2, "rms_mm": 0.017, "worst_mm": 0.034},
       "board": {"cols": 9, "rows": 6, "square_mm": 5, "views": 1}}
put("calfile", "plain.json", json.dumps(cal))
cal["lens"] = {"fx": 800.5, "fy": 801.0, "cx": 240.2, "cy": 180.1, "k1": -0.12, "k2": 0.03,
               "rms_px": 0.2}
cal["board"]["views"] = 5
put("calfile", "lens.json", json.dumps(cal, indent=1))

# XGBoost trees: multi:softprob, 3 classes, 2 rounds, depth 2, 4 features
x = rng.normal(size=(120, 4)).astype(np.float32)
y = (x[:, 0] > 0).astype(int) + (x[:, 2] > 0.5).astype(int)
x[::7, 1] = np.nan
bst = xgb.train({"objective": "multi:softprob", "num_class": 3, "max_depth": 2, "eta": 0.3,
                 "seed": 1, "nthread": 1}, xgb.DMatrix(x, label=y), num_boost_round=2)
tmp = os.path.join(HERE, "corpus", "tmp-model.json")
os.makedirs(os.path.dirname(tmp), exist_ok=True)
bst.save_model(tmp)
model = open(tmp, "rb").read()
os.remove(tmp)
put("forest", "softprob-3x2.json", model)

# model metadata, as model_meta_save writes it (format 2, and a format 1)
meta = {"format": 2, "product": "ostrel-cap38", "recipe_version": 1,
        "model_sha256": hashlib.sha256(model).hexdigest(),
        "features_sha256": hashlib.sha256(b"r\ng\nb").hexdigest(), "features": 4,
        "classes": ["background", "surface", "scratch"],
        "training_samples": {"background": {"pixels": 2000, "images": 3},
                             "surface": {"pixels": 1800, "images": 3},
                             "scratch": {"pixels": 120, "images": 2}},
        "best_round": 2, "depth": 2, "validation_mlogloss": 0.41,
        "trained_utc": "2026-12-01T08:00:00Z",
        "references": {"sharpness": 88.5, "part_area_mm2": 1134.1, "frames": 3}}
put("modelmeta", "format2.meta.json", json.dumps(meta))
del meta["references"]
meta["format"] = 1
put("modelmeta", "format1.meta.json", json.dumps(meta, indent=2))


# flat fields (core/flatfield.h), 3x2, with and without offsets
def flat(w, h, with_offset):
    gain = np.linspace(0.9, 1.2, w * h * 3).astype("<f4").tobytes()
    off = np.full(w * h * 3, 3.5, "<f4").tobytes() if with_offset else b""
    hdr = {"format": "station-flat-field", "version": 1, "width": w, "height": h, "channels": 3,
           "offset": with_offset, "sigma": 4.0, "white_frames": 8, "dark_frames": 4 if with_offset else 0,
           "nonuniformity_before": 0.25, "nonuniformity_after": 0.01,
           "created": "2026-12-01T08:00:00Z",
           "data_sha256": hashlib.sha256(gain + off).hexdigest()}
    return json.dumps(hdr, sort_keys=True, separators=(",", ":")).encode() + b"\n" + gain + off


put("flatfield", "gain-3x2.flat", flat(3, 2, False))
put("flatfield", "gain-offset-2x2.flat", flat(2, 2, True))

# log records as stored: verdict byte, then utc, reasons, regions, camera
reasons = [{"rule": "max_area", "class": "scratch", "zone": "rim", "region": 3, "value": 2.9,
            "limit": 2.5, "limit_kind": "max", "unit": "mm2", "text": "scratch 2.9 mm\u00b2 > 2.5"}]
regions = [{"id": 3, "class": "scratch", "zone": "rim", "area_mm2": 2.9, "length_mm": 4.1,
            "counted": True}]
put("logrecord", "fail.txt", "\x01" + "\n".join([
    "2026-12-01T08:15:02.125Z", json.dumps(reasons), json.dumps(regions),
    json.dumps({"device": "/dev/video0", "exposure": 120})]))
put("logrecord", "pass.txt", "\x00" + "\n".join(["2026-12-01T23:59:59+01:00", "[]", "[]"]))
put("logrecord", "noverdict.txt", "\x02" + "\n".join([
    "2026-11-30T05:00:00", json.dumps([{"rule": "too_dark", "value": 20, "limit": 40}]), "[]"]))

# ONNX: the ONNX project's own conformance models (Debian's libonnx-testdata,
# Apache-2.0) of the operators core/onnx.c supports
ONNX_TESTS = "/usr/share/libonnx-testdata/data/node"
for name in ["test_conv_with_strides_padding", "test_relu", "test_maxpool_2d_default",
             "test_averagepool_2d_default", "test_batchnorm_example", "test_add",
             "test_concat_2d_axis_0", "test_clip", "test_identity"]:
    p = os.path.join(ONNX_TESTS, name, "model.onnx")
    if os.path.exists(p):
        put("onnx", name[5:] + ".onnx", open(p, "rb").read())
