"""Checks every run of test_log_faults.sh (folders KIND-N under OUT): the log
read with Python's sqlite3, hashlib and PyNaCl (logcheck), never the
station's code, against what the station printed.

Rules (issue 10; "durable" as SQLite documents synchronous=FULL in WAL mode:
a commit that returned is on disk):
  - PRAGMA integrity_check ok, chain, evidence and signatures intact
    (logcheck.problems), and `station audit verify` exit 0;
  - no PASS line without log_seq; every log_seq printed is a record in the
    log with the verdict printed;
  - a verdict line without log_seq is NO_VERDICT with rule log_failed; for
    station inspect it is the last line and the exit status is 2 with
    "inspection stopped" on stderr; for station run a "halted" event
    follows it;
  - at most one record more in the log than the station printed (a COMMIT
    whose sync failed may still be in the WAL: the station said NO_VERDICT,
    the log keeps it; never the other way round);
  - when the failure was never seen (no line without log_seq), every
    verdict was recorded and the run ended normally; the calls whose failure
    went unseen are listed (SQLite's checkpoint at close: the WAL still
    holds every commit, and SQLite's own sync of the folder, which it
    ignores and core/log.c repeats)."""
import json
import os
import sqlite3
import sys

sys.path.insert(0, "tests/e2e")
import logcheck  # noqa: E402


def lines(path):
    return [json.loads(l) for l in open(path) if l.strip()]


def check(d, kind):
    db = os.path.join(d, "log", "station.db")
    bad = logcheck.problems(db)
    assert not bad, (d, bad)
    assert open(os.path.join(d, "verify.rc")).read().strip() == "0", \
        (d, open(os.path.join(d, "verify.err")).read())
    rc = int(open(os.path.join(d, "rc")).read())
    err = open(os.path.join(d, "err")).read()
    out = lines(os.path.join(d, "out.jsonl"))
    shim = open(os.path.join(d, "shim")).read() if os.path.exists(os.path.join(d, "shim")) else ""
    con = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    rec = dict(con.execute("SELECT seq, verdict FROM records").fetchall())
    con.close()
    reports = [(i, o) for i, o in enumerate(out) if "verdict" in o]
    shown = 0
    unrecorded = []
    for i, o in reports:
        if "log_seq" in o:
            shown += 1
            assert rec.get(o["log_seq"]) == o["verdict"], (d, o["log_seq"], o["verdict"], rec)
            continue
        assert o["verdict"] == "NO_VERDICT", (d, "a %s shown without a record" % o["verdict"])
        assert any(r.get("rule") == "log_failed" for r in o["reasons"]), (d, o["reasons"])
        unrecorded.append(i)
        if kind == "run":
            assert any(x.get("event") == "halted" for x in out[i + 1:]), (d, "no halted event")
    if kind == "inspect" and unrecorded:
        assert unrecorded == [reports[-1][0]], (d, "inspect went on after a log failure")
        assert rc == 2, (d, rc)
        assert "inspection stopped" in err, (d, err[-300:])
    if not reports:
        # failed before the first inspection (opening the log): an error, said
        assert rc == 3 and "station.db" in err, (d, rc, err[-300:])
    # the template's record + those shown, + at most one committed but reported failed
    extra = len(rec) - 1 - shown
    assert 0 <= extra <= len(unrecorded), (d, len(rec), shown, unrecorded)
    if reports and not unrecorded:
        assert rc in (0, 1), (d, rc, err[-300:])
    seen = "failed=" in shim
    what = ""
    if seen:
        op, path = shim.split("failed=", 1)[1].split()[1:3]
        base = os.path.basename(path)
        what = "%s %s" % (op, "the log's folder" if base == "log" else
                          base if base.startswith("station.db") else "evidence")
    return seen, bool(unrecorded), not reports, extra, what


def main():
    out = sys.argv[1]
    tally, unseen = {}, {}
    for name in sorted(os.listdir(out)):
        kind, _, n = name.partition("-")
        if kind not in ("inspect", "run") or not n.isdigit():
            continue
        seen, halted, at_open, extra, what = check(os.path.join(out, name), kind)
        t = tally.setdefault(kind, {"runs": 0, "fault hit": 0, "halted": 0, "at open": 0,
                                    "unseen": 0, "kept after NO_VERDICT": 0})
        t["runs"] += 1
        t["fault hit"] += seen
        t["halted"] += halted
        t["at open"] += at_open
        t["unseen"] += seen and not halted and not at_open
        if seen and not halted and not at_open:
            unseen.setdefault(kind, set()).add(what)
        t["kept after NO_VERDICT"] += extra
    assert tally.get("inspect") and tally.get("run"), tally
    for kind, t in sorted(tally.items()):
        assert t["halted"] > 0, (kind, "no fault was ever seen by the station", t)
        print("ok   %s: %s" % (kind, ", ".join("%s %d" % kv for kv in t.items())))
        print("     %s: failures the station never saw, every verdict recorded: %s"
              % (kind, "; ".join(sorted(unseen.get(kind, ())))))


main()
