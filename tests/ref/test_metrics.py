#!/usr/bin/python3
"""core/metrics against scikit-learn (reference: scikit-learn 1.2.1).

Runs $STATION_BUILD/tests/tools/confusion on seeded random truth/prediction
maps with unlabelled (255) truth pixels and compares with
sklearn.metrics.confusion_matrix, jaccard_score and accuracy_score on the
labelled pixels, then checks the worked examples of jaccard_score's
docstring.  Counts must match exactly; ratios to 1e-12 (both sides divide
the same integers in double precision)."""
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
from sklearn.metrics import accuracy_score, confusion_matrix, jaccard_score

from refcheck import check, status, tool
TOOL = tool("confusion")
TOL = 1e-12



def run_tool(tmp, n, pairs, mask=None):
    args = [TOOL, str(n)]
    if mask is not None:
        args += ["--defects", "".join("1" if m else "0" for m in mask)]
    for i, (t, p) in enumerate(pairs):
        tp = os.path.join(tmp, f"t{i}.raw")
        pp = os.path.join(tmp, f"p{i}.raw")
        np.asarray(t, dtype=np.uint8).tofile(tp)
        np.asarray(p, dtype=np.uint8).tofile(pp)
        args += [tp, pp]
    r = subprocess.run(args, capture_output=True, text=True)
    return r


def close(a, b):
    return a is not None and abs(a - b) <= TOL


def random_case(tmp):
    # Two "images" of odd sizes accumulated into one matrix.  Class 3 appears
    # only in the prediction (IoU 0, but present); class 4 appears nowhere
    # (absent: null from the tool; sklearn's zero_division gives 0 there, so
    # it is left out of sklearn's average by hand).
    rng = np.random.default_rng(20240607)
    n = 5
    pairs = []
    for h, w in ((37, 23), (19, 41)):
        t = rng.choice([0, 1, 2], size=h * w, p=[0.5, 0.3, 0.2]).astype(np.uint8)
        p = t.copy()
        flip = rng.random(t.size) < 0.3
        p[flip] = rng.choice([0, 1, 2, 3], size=int(flip.sum()))
        t[rng.random(t.size) < 0.15] = 255
        pairs.append((t, p))
    mask = [0, 0, 1, 1, 1]
    r = run_tool(tmp, n, pairs, mask)
    check("random: tool exits 0", r.returncode == 0, r.stderr)
    if r.returncode:
        return
    got = json.loads(r.stdout)
    t = np.concatenate([a for a, _ in pairs])
    p = np.concatenate([b for _, b in pairs])
    keep = t != 255
    yt, yp = t[keep], p[keep]
    labels = list(range(n))
    # reference: sklearn.metrics.confusion_matrix(labels=range(n)), rows = truth
    cm = confusion_matrix(yt, yp, labels=labels)
    check("random: confusion matrix == sklearn confusion_matrix",
          np.array_equal(np.array(got["confusion"]), cm), f"{got['confusion']} vs {cm.tolist()}")
    check("random: pixels == labelled pixel count", got["pixels"] == int(keep.sum()),
          f"{got['pixels']} vs {int(keep.sum())}")
    # reference: sklearn.metrics.accuracy_score on the labelled pixels
    acc = accuracy_score(yt, yp)
    check("random: accuracy == sklearn accuracy_score", close(got["accuracy"], acc),
          f"{got['accuracy']} vs {acc}")
    # reference: sklearn.metrics.jaccard_score(average=None, labels=range(n))
    jac = jaccard_score(yt, yp, average=None, labels=labels, zero_division=0)
    present = [k for k in labels if (yt == k).any() or (yp == k).any()]
    check("random: present classes are 0..3", present == [0, 1, 2, 3], str(present))
    for k in labels:
        if k in present:
            check(f"random: iou[{k}] == sklearn jaccard_score", close(got["iou"][k], jac[k]),
                  f"{got['iou'][k]} vs {jac[k]}")
        else:
            check(f"random: iou[{k}] is null (absent class)", got["iou"][k] is None,
                  str(got["iou"][k]))
    # reference: jaccard_score(average='macro', labels=present) = mean over present classes
    mean = jaccard_score(yt, yp, average="macro", labels=present)
    check("random: mean_iou == sklearn macro jaccard over present classes",
          close(got["mean_iou"], mean), f"{got['mean_iou']} vs {mean}")
    dpresent = [k for k in present if mask[k]]
    dmean = jaccard_score(yt, yp, average="macro", labels=dpresent)
    check("random: mean_iou_defects == sklearn macro jaccard over present defect classes",
          close(got["mean_iou_defects"], dmean), f"{got['mean_iou_defects']} vs {dmean}")


def docstring_cases(tmp):
    # Multiclass example of sklearn.metrics.jaccard_score's docstring
    # (scikit-learn 1.2.1): y_true = [0, 1, 2, 2], y_pred = [0, 2, 1, 2]
    # -> average=None gives array([1. , 0. , 0.33...]).
    r = run_tool(tmp, 3, [([0, 1, 2, 2], [0, 2, 1, 2])])
    got = json.loads(r.stdout) if r.returncode == 0 else {"iou": [None] * 3}
    check("docstring multiclass: iou == [1, 0, 1/3]",
          all(close(g, e) for g, e in zip(got["iou"], [1.0, 0.0, 1.0 / 3.0])), str(got["iou"]))
    # Binary example of the same docstring: y_true[0] = [0, 1, 1],
    # y_pred[0] = [1, 1, 1] -> jaccard_score (pos_label=1) = 0.6666...,
    # the IoU of class 1.
    r = run_tool(tmp, 2, [([0, 1, 1], [1, 1, 1])])
    got = json.loads(r.stdout) if r.returncode == 0 else {"iou": [None] * 2}
    check("docstring binary: iou[1] == 2/3", close(got["iou"][1], 2.0 / 3.0), str(got["iou"]))


def error_cases(tmp):
    # A prediction outside 0..n-1 on a labelled pixel is refused (exit 3);
    # the same value under truth 255 is ignored.
    r = run_tool(tmp, 3, [([0, 1, 2], [0, 3, 2])])
    check("prediction 3 with 3 classes is refused",
          r.returncode == 3 and "prediction 3" in r.stderr,
          f"rc {r.returncode}: {r.stderr.strip()}")
    r = run_tool(tmp, 3, [([0, 255, 2], [0, 200, 2])])
    ok = r.returncode == 0 and json.loads(r.stdout)["pixels"] == 2
    check("prediction 200 under truth 255 is skipped", ok, f"rc {r.returncode}: {r.stdout}")


def main():
    if not os.access(TOOL, os.X_OK):
        print(f"FAIL  {TOOL} not built")
        return 1
    with tempfile.TemporaryDirectory() as tmp:
        random_case(tmp)
        docstring_cases(tmp)
        error_cases(tmp)
    return status()


if __name__ == "__main__":
    sys.exit(main())
