"""`station verify` on the demo's output: the demo recipe's two master parts
(a good cap, and the cap least over a tolerance, chosen by the demo from its
test parts) must each get the verdict the recipe expects.  The expected
verdicts come from the ground truth the simulated bench renders, judged by
the same tolerances (station/cmd_demo.c).  The demo only picks masters the
station judged right on that run, so this part shows the wiring (recipe,
inspector, comparison) on real frames again; the failure paths: a recipe copy whose fail master is the
good part, and one whose master image is missing, must fail the
verification (exit 1), never pass it.
"""
import json
import os
import subprocess
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref"))
from refcheck import check, status  # noqa: E402

station, out = sys.argv[1], sys.argv[2]
recipe = os.path.join(out, "ostrel-cap38.ini")


def verify(rec, *extra):
    r = subprocess.run([station, "verify", rec, *extra], capture_output=True, text=True)
    return r.returncode, [json.loads(l) for l in r.stdout.splitlines()], r.stderr


rc, lines, err = verify(recipe)
check("verify on the demo exits 0", rc == 0, err)
check("one line per master and a summary", len(lines) == 3, lines)
masters = {l["master"]: l for l in lines[:-1]}
check("the good master passes", masters.get("good", {}).get("verdict") == "PASS", masters.get("good"))
check("the master just over tolerance fails", masters.get("over", {}).get("verdict") == "FAIL",
      masters.get("over"))
check("summary says passed, 2 of 2", lines[-1:] and lines[-1].get("verification") == "passed"
      and lines[-1].get("matched") == 2, lines[-1:])

text = open(recipe).read()
swapped = os.path.join(out, "verify-swapped.ini")
open(swapped, "w").write(text.replace("image = masters/over.png", "image = masters/good.png"))
rc, lines, err = verify(swapped)
check("a fail master that passes fails the verification (exit 1)", rc == 1, (rc, err))
check("its line says no match", any(l.get("master") == "over" and l.get("match") is False
                                     for l in lines), lines)
check("summary says failed", lines[-1:] and lines[-1].get("verification") == "failed", lines[-1:])

missing = os.path.join(out, "verify-missing.ini")
open(missing, "w").write(text.replace("image = masters/good.png", "image = masters/gone.png"))
rc, lines, err = verify(missing)
check("a missing master image fails the verification (exit 1)", rc == 1, (rc, err))
check("the missing master is NO_VERDICT", any(l.get("master") == "good" and l.get("verdict") ==
                                              "NO_VERDICT" for l in lines), lines)
sys.exit(status())
