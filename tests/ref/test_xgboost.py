#!/usr/bin/python3
"""core/forest and core/booster against Python XGBoost (reference: python3-xgboost 1.7.4).

1. A model trained in Python (xgb.train, multi:softprob, hist, 30 rounds,
   depth 6, 5 classes, inputs with NaN, -0.0 and values equal to split
   conditions) is saved as JSON; our forest evaluator and our C booster
   (XGBoosterPredictFromDense) must give Booster.inplace_predict's and
   Booster.predict(DMatrix(missing=nan))'s probabilities to 1e-6.
2. A model trained by our booster_train (saved as JSON and as UBJSON) and
   loaded in Python must give the same probabilities from Python, from our
   forest and from our C booster, to 1e-6.
3. Early stopping: booster_train with early_stop 4 on noise labels keeps the
   round xgb.train(early_stopping_rounds=4) reports as best_iteration + 1,
   with the same validation loss (to 1e-6, the metric is printed with 6
   significant digits by XGBoost) and exactly that many rounds of trees.
The tolerance 1e-6 is the contract of core/forest.h; in practice both sides
sum the same floats in the same order and agree exactly."""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import xgboost as xgb

from refcheck import check, status, tool
TOOL = tool("forestdump")
TOL = 1e-6



def tool(*args):
    r = subprocess.run([TOOL] + [str(a) for a in args], capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError(f"forestdump {args[0]} failed ({r.returncode}): {r.stderr.strip()}")
    return r.stdout


def data(rng, n, nfeat, nclasses, nan_frac):
    x = rng.normal(size=(n, nfeat)).astype(np.float32)
    w = rng.normal(size=(nfeat, nclasses))
    y = np.argmax(x @ w + rng.normal(scale=0.7, size=(n, nclasses)), axis=1).astype(np.float32)
    x[rng.random(x.shape) < nan_frac] = np.nan
    return x, y


def split_conditions(model_path):
    with open(model_path) as fp:
        trees = json.load(fp)["learner"]["gradient_booster"]["model"]["trees"]
    out = []
    for t in trees:
        for i, c in enumerate(t["split_conditions"]):
            if t["left_children"][i] != -1:
                out.append((t["split_indices"][i], c))
    return out


def edge_rows(rng, x, model_path):
    """Test rows whose features sit exactly on split conditions, or are -0.0."""
    conds = split_conditions(model_path)
    e = x.copy()
    for r in range(e.shape[0]):
        for _ in range(4):
            f, c = conds[rng.integers(len(conds))]
            e[r, f] = np.float32(c)
    e[rng.random(e.shape) < 0.05] = np.float32(-0.0)
    return e


def maxdiff(a, b):
    return float(np.max(np.abs(a.astype(np.float64) - b.astype(np.float64))))


def forest_probs(tmp, model, x, nclasses):
    xp = os.path.join(tmp, "in.f32")
    op = os.path.join(tmp, "p.f32")
    x.astype("<f4").tofile(xp)
    tool("forest", model, xp, x.shape[1], op)
    return np.fromfile(op, dtype="<f4").reshape(x.shape[0], nclasses)


def booster_probs(tmp, model, x, nclasses):
    xp = os.path.join(tmp, "in.f32")
    op = os.path.join(tmp, "b.f32")
    x.astype("<f4").tofile(xp)
    tool("booster", model, xp, x.shape[1], nclasses, op)
    return np.fromfile(op, dtype="<f4").reshape(x.shape[0], nclasses)


def python_model(tmp):
    rng = np.random.default_rng(314159)
    nfeat, k = 11, 5
    x, y = data(rng, 3001, nfeat, k, 0.08)
    params = {"objective": "multi:softprob", "num_class": k, "tree_method": "hist",
              "max_depth": 6, "eta": 0.3, "seed": 3, "nthread": 1, "verbosity": 0}
    bst = xgb.train(params, xgb.DMatrix(x, label=y, missing=np.nan), num_boost_round=30)
    model = os.path.join(tmp, "py.json")
    bst.save_model(model)
    xt, _ = data(rng, 997, nfeat, k, 0.1)
    xt = np.vstack([xt, edge_rows(rng, xt[:301], model)])
    ref_inplace = bst.inplace_predict(xt, missing=np.nan)
    ref_dmatrix = bst.predict(xgb.DMatrix(xt, missing=np.nan))
    ours = forest_probs(tmp, model, xt, k)
    theirs = booster_probs(tmp, model, xt, k)
    d = maxdiff(ours, ref_inplace)
    check("python model: forest vs Booster.inplace_predict", d <= TOL, f"max |dp| {d:g}")
    d = maxdiff(ours, ref_dmatrix)
    check("python model: forest vs Booster.predict(DMatrix)", d <= TOL, f"max |dp| {d:g}")
    d = maxdiff(theirs, ref_inplace)
    check("python model: C booster_predict vs Booster.inplace_predict", d <= TOL,
          f"max |dp| {d:g}")


def c_model(tmp):
    rng = np.random.default_rng(271828)
    nfeat, k = 9, 4
    x, y = data(rng, 2500, nfeat, k, 0.05)
    xv, yv = data(rng, 700, nfeat, k, 0.05)
    files = {}
    for name, arr in (("x", x), ("y", y), ("xv", xv), ("yv", yv)):
        files[name] = os.path.join(tmp, name + ".f32")
        arr.astype("<f4").tofile(files[name])
    xt, _ = data(rng, 1003, nfeat, k, 0.1)
    for ext in ("json", "ubj"):
        model = os.path.join(tmp, "c." + ext)
        out = tool("train", model, k, nfeat, files["x"], files["y"], files["xv"], files["yv"],
                   25, 5, 0.25, 11, 1, 0)
        best = int(out.split()[1])
        bst = xgb.Booster(model_file=model)
        check(f"C model (.{ext}): Python sees {best} rounds", bst.num_boosted_rounds() == best,
              f"{bst.num_boosted_rounds()} rounds")
        ref = bst.inplace_predict(xt, missing=np.nan)
        theirs = booster_probs(tmp, model, xt, k)
        d = maxdiff(theirs, ref)
        check(f"C model (.{ext}): C booster_predict vs Python inplace_predict", d <= TOL,
              f"max |dp| {d:g}")
        if ext == "json":
            ours = forest_probs(tmp, model, xt, k)
            d = maxdiff(ours, ref)
            check("C model (.json): forest vs Python inplace_predict", d <= TOL, f"max |dp| {d:g}")


def early_stopping(tmp):
    rng = np.random.default_rng(161803)
    nfeat, k = 6, 3
    x = rng.normal(size=(1500, nfeat)).astype(np.float32)
    y = rng.integers(0, k, size=1500).astype(np.float32)
    xv = rng.normal(size=(500, nfeat)).astype(np.float32)
    yv = rng.integers(0, k, size=500).astype(np.float32)
    paths = []
    for name, arr in (("ex", x), ("ey", y), ("exv", xv), ("eyv", yv)):
        paths.append(os.path.join(tmp, name + ".f32"))
        arr.astype("<f4").tofile(paths[-1])
    model = os.path.join(tmp, "early.json")
    out = tool("train", model, k, nfeat, *paths, 60, 4, 0.3, 5, 1, 4).split()
    best, loss = int(out[1]), float(out[3])
    params = {"objective": "multi:softprob", "num_class": k, "tree_method": "hist",
              "max_depth": 4, "eta": 0.3, "seed": 5, "nthread": 1, "verbosity": 0,
              "eval_metric": "mlogloss"}
    bst = xgb.train(params, xgb.DMatrix(x, label=y), num_boost_round=60,
                    evals=[(xgb.DMatrix(xv, label=yv), "val")], early_stopping_rounds=4,
                    verbose_eval=False)
    check("early stopping: stopped before 60 rounds", best < 60, f"best round {best}")
    check("early stopping: best round as xgb.train", best == bst.best_iteration + 1,
          f"ours {best}, xgb.train best_iteration + 1 = {bst.best_iteration + 1}")
    check("early stopping: best loss as xgb.train", abs(loss - bst.best_score) <= TOL,
          f"ours {loss}, xgb.train {bst.best_score}")
    kept = xgb.Booster(model_file=model)
    check("early stopping: model cut to the best round", kept.num_boosted_rounds() == best,
          f"{kept.num_boosted_rounds()} rounds kept")


def main():
    if not os.access(TOOL, os.X_OK):
        print(f"FAIL  {TOOL} not built")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        for case in (python_model, c_model, early_stopping):
            try:
                case(tmp)
            except (RuntimeError, OSError, ValueError) as err:
                check(case.__name__, False, str(err))
    return status()


if __name__ == "__main__":
    sys.exit(main())
