"""The Python peer of the whole inspection, timed: what a practitioner writes.

Features: the first block of a VGG16-style network in torch (two 3x3
convolutions 3->64->64, each followed by ReLU, padding 1; random weights from
a fixed seed, as the speed does not depend on them), giving 64 features per
pixel, pixel-major as XGBoost takes them.  Classifier: XGBoost with 200 trees
(4 classes x 50 rounds, depth 6, multi:softprob), trained once on a sample
of the same frame's pixels against its true classes, then
Booster.inplace_predict on every pixel of the frame.  Prints one JSON line:
median/min/max ms per frame of the features, the prediction and both.
usage: peer_pipeline.py FRAME.png TRUTH.png THREADS REPEAT
"""
import json
import sys
import time

import numpy as np
import torch
import xgboost as xgb
from PIL import Image

frame_path, truth_path = sys.argv[1], sys.argv[2]
threads, repeat = int(sys.argv[3]), int(sys.argv[4])
torch.set_num_threads(threads)
torch.manual_seed(1)
frame = np.asarray(Image.open(frame_path).convert("RGB"))
truth = np.asarray(Image.open(truth_path)).astype(np.int64)
h, w = truth.shape
block1 = torch.nn.Sequential(
    torch.nn.Conv2d(3, 64, 3, padding=1), torch.nn.ReLU(inplace=True),
    torch.nn.Conv2d(64, 64, 3, padding=1), torch.nn.ReLU(inplace=True)).eval()


def features(img):
    x = torch.from_numpy(np.array(img)).permute(2, 0, 1).unsqueeze(0).float() / 255.0
    with torch.no_grad():
        y = block1(x)
    return y[0].permute(1, 2, 0).reshape(-1, 64).numpy()


# 200 trees: 4 classes (the demo's defect classes folded into the last) x 50
labels = np.minimum(truth.reshape(-1), 3)
rng = np.random.default_rng(1)
f = features(frame)
pick = rng.choice(f.shape[0], size=min(20000, f.shape[0]), replace=False)
booster = xgb.train({"objective": "multi:softprob", "num_class": 4, "max_depth": 6, "eta": 0.3,
                     "tree_method": "hist", "nthread": threads, "seed": 1},
                    xgb.DMatrix(f[pick], label=labels[pick]), num_boost_round=50)
ntrees = len(booster.get_dump())
booster.set_param({"nthread": threads})
booster.inplace_predict(f)  # warm-up
t_feat, t_pred, t_all = [], [], []
for _ in range(repeat):
    t0 = time.perf_counter()
    f = features(frame)
    t1 = time.perf_counter()
    p = booster.inplace_predict(f)
    cls = p.argmax(axis=1)
    t2 = time.perf_counter()
    t_feat.append((t1 - t0) * 1e3)
    t_pred.append((t2 - t1) * 1e3)
    t_all.append((t2 - t0) * 1e3)


def stat(v):
    v = sorted(v)
    return {"median": float(np.median(v)), "min": v[0], "max": v[-1]}


print(json.dumps({"width": w, "height": h, "threads": threads, "repeat": repeat, "trees": ntrees,
                  "features": 64, "cnn": stat(t_feat), "xgboost": stat(t_pred),
                  "total": stat(t_all), "background_share": float((cls == 0).mean())}))
