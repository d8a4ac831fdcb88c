"""Independent checks of the audit verbs on the central database
(tests/e2e/test_central.sh).

  check_central.py stats STATS.json LOG.db=STATION ...
      `audit stats --json` over the central database against figures
      computed here, with Python's sqlite3 alone, from each station's local
      log: every station's counts, and their sum for the total.
  check_central.py select CONNINFO OUT [--station S] [--line L] [--recipe R]
      the (station, seq) rows of `audit list --json` (OUT.jsonl) or
      `audit export` (OUT.csv) against the same selection made by psycopg2
      on the central tables.

The definitions are the audit's (DEVELOPERS.md, "The audit's numbers"): a
reject is any verdict but PASS; dispositions count the latest one of each
reject; the false-reject rate is false-reject / (confirmed + rework +
false-reject); kappa's table crosses the station's call with the auditor's
over disposed records; shifts start at 6, 14 and 22 UTC and hours before 6
belong to the previous day's 22:00 shift.  Exit 1 with the first difference.
"""
import collections
import csv
import datetime
import json
import sqlite3
import sys

DISPS = ["none", "confirmed", "false-reject", "rework", "other"]
SHIFTS = [6, 14, 22]


def fail(msg):
    print("FAIL " + msg)
    sys.exit(1)


def close(a, b):
    """The JSON line prints reals with 6 significant digits (station/cli.c)."""
    return abs(a - b) <= 5e-6 * abs(b)


def local_figures(db):
    """The figures of one local log, from its tables only."""
    con = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    latest = dict(con.execute(
        "SELECT record_seq, disposition FROM dispositions d WHERE dseq ="
        " (SELECT MAX(dseq) FROM dispositions x WHERE x.record_seq = d.record_seq)"))
    f = {"records": 0, "verdicts": collections.Counter(), "rejects": 0,
         "dispositions": collections.Counter(), "pareto": collections.Counter(),
         "days": collections.defaultdict(collections.Counter),
         "shifts": collections.defaultdict(collections.Counter),
         "agree": collections.Counter()}
    for seq, utc, verdict, reasons in con.execute(
            "SELECT seq, utc, verdict, reasons FROM records ORDER BY seq"):
        f["records"] += 1
        f["verdicts"][verdict] += 1
        t = datetime.datetime.strptime(utc[:19], "%Y-%m-%dT%H:%M:%S")
        f["days"][t.strftime("%Y-%m-%d")][verdict] += 1
        starts = [h for h in SHIFTS if h <= t.hour]
        if starts:
            label = "%s %02d:00" % (t.strftime("%Y-%m-%d"), starts[-1])
        else:
            label = "%s %02d:00" % ((t - datetime.timedelta(days=1)).strftime("%Y-%m-%d"),
                                    SHIFTS[-1])
        f["shifts"][label][verdict] += 1
        disp = latest.get(seq, "none")
        reject = verdict != "PASS"
        if reject:
            f["rejects"] += 1
            f["dispositions"][disp] += 1
            for r in json.loads(reasons):
                f["pareto"][(r["rule"], r.get("class") or "", r.get("zone") or "")] += 1
        call = {"false-reject": 0, "confirmed": 1, "rework": 1}.get(disp)
        if call is not None:
            f["agree"][(int(reject), call)] += 1
    return f


def add(total, f):
    total["records"] += f["records"]
    total["rejects"] += f["rejects"]
    for k in ("verdicts", "dispositions", "pareto", "agree"):
        total[k].update(f[k])
    for k in ("days", "shifts"):
        for label, c in f[k].items():
            total[k][label].update(c)


def verdicts(c):
    return {v: c.get(v, 0) for v in ("PASS", "FAIL", "NO_VERDICT")}


def compare_summary(what, got, f):
    """The figures a per-station entry and the total both carry."""
    audit = got["audit"]
    checks = [
        ("records", got["records"], f["records"]),
        ("verdicts", got["verdicts"], verdicts(f["verdicts"])),
        ("dispositions of rejects", audit["dispositions"],
         {d: f["dispositions"].get(d, 0) for d in DISPS}),
    ]
    k = f["dispositions"]["false-reject"]
    n = k + f["dispositions"]["confirmed"] + f["dispositions"]["rework"]
    fr = audit["false_reject"]
    checks.append(("false rejects", (fr["false_rejects"], fr["audited"]), (k, n)))
    if n and not close(fr["rate"], k / n):
        fail("%s: false-reject rate %r, the local logs give %r" % (what, fr["rate"], k / n))
    table = [[f["agree"][(0, 0)], f["agree"][(0, 1)]], [f["agree"][(1, 0)], f["agree"][(1, 1)]]]
    checks.append(("kappa table", audit["kappa"]["table"], table))
    for name, a, b in checks:
        if a != b:
            fail("%s: %s is %s, the local logs give %s" % (what, name, a, b))


def check_stats(path, logs):
    got = json.load(open(path))
    stations = {s["station"]: s for s in got["stations"]}
    total = {"records": 0, "verdicts": collections.Counter(), "rejects": 0,
             "dispositions": collections.Counter(), "pareto": collections.Counter(),
             "days": collections.defaultdict(collections.Counter),
             "shifts": collections.defaultdict(collections.Counter),
             "agree": collections.Counter()}
    if sorted(stations) != sorted(s for _, s in logs):
        fail("stats: stations %s, want %s" % (sorted(stations), sorted(s for _, s in logs)))
    for db, station in logs:
        f = local_figures(db)
        entry = stations[station]
        compare_summary("station " + station, entry, f)
        if entry["rejects"] != f["rejects"]:
            fail("station %s: rejects %d, local %d" % (station, entry["rejects"], f["rejects"]))
        if not close(entry["reject_rate"], f["rejects"] / f["records"]):
            fail("station %s: reject rate %r" % (station, entry["reject_rate"]))
        add(total, f)
    compare_summary("total", got, total)
    if got["audit"]["rejects"] != total["rejects"]:
        fail("total rejects %d, sum %d" % (got["audit"]["rejects"], total["rejects"]))
    pareto = {(r["rule"], r["class"], r["zone"]): r["count"] for r in got["pareto"]}
    if pareto != dict(total["pareto"]):
        fail("pareto %s, sum %s" % (pareto, dict(total["pareto"])))
    for key in ("days", "shifts"):
        g = {b["label"]: b["verdicts"] for b in got[key]}
        want = {label: verdicts(c) for label, c in total[key].items()}
        if g != want:
            fail("%s %s, sum %s" % (key, g, want))
    pbar = got["pchart"]["pbar"]
    if not close(pbar, total["rejects"] / total["records"]):
        fail("p-chart centre line %r, sum gives %r" % (pbar, total["rejects"] / total["records"]))
    print("ok   stats: %d stations, %d records, %d rejects, %d Pareto rows, kappa table %s:"
          " every station and the total equal the local logs' sum" %
          (len(logs), total["records"], total["rejects"], len(pareto),
           got["audit"]["kappa"]["table"]))


def check_select(conninfo, out, opts):
    import psycopg2
    sql = ("SELECT r.station, r.seq FROM records r JOIN stations s ON s.station = r.station"
           " WHERE true")
    params = []
    for opt, col in (("--station", "r.station"), ("--line", "s.line"),
                     ("--recipe", "r.recipe_id")):
        if opt in opts:
            sql += " AND %s = %%s" % col
            params.append(opts[opts.index(opt) + 1])
    sql += ' ORDER BY r.station COLLATE "C", r.seq'
    con = psycopg2.connect(conninfo)
    cur = con.cursor()
    cur.execute(sql, params)
    want = [(s, int(q)) for s, q in cur.fetchall()]
    if out.endswith(".csv"):
        rows = list(csv.DictReader(open(out, newline="", encoding="utf-8")))
        got = [(r["log_station"], int(r["seq"])) for r in rows]
    else:
        got = [(j["log_station"], j["seq"]) for j in map(json.loads, open(out))]
    if got != want:
        fail("%s %s: %d rows, psycopg2 selects %d (first difference %s)" % (
            out, " ".join(opts), len(got), len(want),
            next(((a, b) for a, b in zip(got, want) if a != b), "in length")))
    if not want:
        fail("%s %s: the selection is empty, a weak check" % (out, " ".join(opts)))
    print("ok   %s %s: the same %d rows as psycopg2's query" % (
        "export" if out.endswith(".csv") else "list", " ".join(opts) or "(all)", len(got)))


def main():
    if len(sys.argv) >= 4 and sys.argv[1] == "stats":
        check_stats(sys.argv[2], [a.rsplit("=", 1) for a in sys.argv[3:]])
    elif len(sys.argv) >= 4 and sys.argv[1] == "select":
        check_select(sys.argv[2], sys.argv[3], sys.argv[4:])
    else:
        fail(__doc__)


main()
