"""`station verify` on the demo's output, and the verification_due gate.

The demo recipe's two master parts (a good cap, and the cap least over a
tolerance, chosen by the demo from its test parts) must each get the verdict
the recipe expects.  The expected verdicts come from the ground truth the
simulated bench renders, judged by the same tolerances (station/cmd_demo.c).
The demo only picks masters the station judged right on that run, so this
part shows the wiring (recipe, inspector, comparison, log) on real frames;
the failure paths show it can fail: a recipe copy whose fail master is the
good part, and one whose master image is missing, fail the verification
(exit 1), never pass it.

The log (its own temporary database, read back with Python's sqlite3):
every run leaves one row in `verifications`; inspection with that log
passes a good part after a passing verification, refuses it
(NO_VERDICT, verification_due) after a failed one, and again when the last
passing verification is older than the recipe's 8 h — the age faked by
adding a row dated 9 h back with Python's sqlite3, which `audit verify`
then reports as a broken verification chain (no sleeping).
"""
import datetime
import json
import os
import sqlite3
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "ref"))
from refcheck import check, status  # noqa: E402

station, out = sys.argv[1], sys.argv[2]
recipe = os.path.join(out, "ostrel-cap38.ini")
good_image = os.path.join(out, "masters", "good.png")


def run(*args):
    r = subprocess.run([station, *args], capture_output=True, text=True)
    return r.returncode, [json.loads(l) for l in r.stdout.splitlines()], r.stderr


def rows(db):
    c = sqlite3.connect(db)
    got = c.execute("SELECT vseq, utc, outcome, masters FROM verifications ORDER BY vseq").fetchall()
    c.close()
    return got


def inspect_good(db):
    rc, lines, err = run("inspect", recipe, good_image, "--log", db)
    return lines[0] if lines else {"verdict": None, "reasons": [], "err": err}


with tempfile.TemporaryDirectory() as d:
    db = os.path.join(d, "station.db")
    check("before any verification a good part is refused (verification_due)",
          [x["rule"] for x in inspect_good(db)["reasons"]] == ["verification_due"])

    rc, lines, err = run("verify", recipe, "--log", db)
    check("verify on the demo exits 0", rc == 0, err)
    check("one line per master and a summary", len(lines) == 3, lines)
    masters = {l["master"]: l for l in lines[:-1]}
    check("the good master passes", masters.get("good", {}).get("verdict") == "PASS", masters.get("good"))
    check("the master just over tolerance fails", masters.get("over", {}).get("verdict") == "FAIL",
          masters.get("over"))
    check("summary says passed, 2 of 2", lines[-1:] and lines[-1].get("verification") == "passed"
          and lines[-1].get("matched") == 2, lines[-1:])
    v = rows(db)
    check("one passing verification logged", len(v) == 1 and v[0][2] == "passed", v)
    check("the log row lists both masters", v and [m["master"] for m in json.loads(v[0][3])] ==
          ["good", "over"], v)
    line = inspect_good(db)
    check("after it the good part passes", line["verdict"] == "PASS", line)

    text = open(recipe).read()
    swapped = os.path.join(out, "verify-swapped.ini")
    open(swapped, "w").write(text.replace("image = masters/over.png", "image = masters/good.png"))
    rc, lines, err = run("verify", swapped, "--log", db)
    check("a fail master that passes fails the verification (exit 1)", rc == 1, (rc, err))
    check("its line says no match", any(l.get("master") == "over" and l.get("match") is False
                                         for l in lines), lines)
    check("summary says failed", lines[-1:] and lines[-1].get("verification") == "failed", lines[-1:])
    v = rows(db)
    check("the failed verification is logged", len(v) == 2 and v[1][2] == "failed", v)
    line = inspect_good(db)
    check("after a failed verification the good part is refused",
          line["verdict"] == "NO_VERDICT" and [x["rule"] for x in line["reasons"]] ==
          ["verification_due"], line)

    missing = os.path.join(out, "verify-missing.ini")
    open(missing, "w").write(text.replace("image = masters/good.png", "image = masters/gone.png"))
    rc, lines, err = run("verify", missing, "--log", db)
    check("a missing master image fails the verification (exit 1)", rc == 1, (rc, err))
    check("the missing master is NO_VERDICT", any(l.get("master") == "good" and l.get("verdict") ==
                                                  "NO_VERDICT" for l in lines), lines)

    rc, lines, err = run("verify", recipe, "--log", db)
    check("verified again: exit 0", rc == 0, err)
    check("and the good part passes again", inspect_good(db)["verdict"] == "PASS")
    rc, _, err = run("audit", "verify", "--log", db)
    check("audit verify accepts the verification chain", rc == 0, err)

    # the last passing verification 9 h old: a row added behind the log's back
    c = sqlite3.connect(db)
    last = c.execute("SELECT * FROM verifications ORDER BY vseq DESC LIMIT 1").fetchone()
    old = (datetime.datetime.now(datetime.timezone.utc) - datetime.timedelta(hours=9))
    row = list(last)
    row[0] = last[0] + 1
    row[1] = old.strftime("%Y-%m-%dT%H:%M:%S.000Z")
    c.execute("INSERT INTO verifications VALUES(%s)" % ",".join("?" * len(row)), row)
    c.commit()
    c.close()
    line = inspect_good(db)
    due = [x for x in line["reasons"] if x["rule"] == "verification_due"]
    check("9 h after the last passing verification the good part is refused",
          line["verdict"] == "NO_VERDICT" and len(due) == 1, line)
    check("the reason measures about 9 h against 8 h", due and abs(due[0]["measured"] - 9) < 0.1
          and due[0]["limit"] == 8 and due[0]["unit"] == "h", due)
    rc, _, err = run("audit", "verify", "--log", db)
    check("audit verify catches the forged verification", rc == 1 and "verification" in err, (rc, err))
sys.exit(status())
