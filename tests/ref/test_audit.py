#!/usr/bin/python3
"""The audit's numbers, report and CSV against independent computations.

Part 1 drives tests/tools/auditcalc (station/audit_stats on records whose
times this script chooses: 12 days, one of them with a raised reject rate)
and recomputes every figure here: days and shifts with Python's datetime;
the p-chart with the textbook formula p-bar +- 3 sqrt(p-bar (1 - p-bar) / n)
(Montgomery, Introduction to Statistical Quality Control, from memory);
the Pareto with collections.Counter; the false-reject interval with
scipy.stats.binomtest(k, n).proportion_ci(method="exact") (scipy 1.10.1);
Cohen's kappa with sklearn.metrics.cohen_kappa_score (scikit-learn 1.2.1).

Part 2 fills a real log through core/log (tests/tools/auditlog) and runs
`station audit stats --json`, `export` and `report`: the counts against
what the tool says it wrote; the CSV read back with Python's csv module
(RFC 4180 quoting of commas, quotes and line breaks in comments); the HTML
parsed with html.parser and each SVG with xml.etree (well-formed, nothing
fetched from outside), each thumbnail decoded from its data URI with PIL and
compared with PIL's own box downscale of the overlay evidence file; and
`audit view` rendered headless (SDL_VIDEODRIVER=dummy), its screenshot
compared pixel for pixel with the evidence files."""
import base64
import collections
import csv
import datetime
import io
import json
import math
import os
import random
import re
import subprocess
import sys
import tempfile
import warnings
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
from PIL import Image
from scipy.stats import binomtest
from sklearn.metrics import cohen_kappa_score

from refcheck import BUILD, check, status, tool

STATION = os.path.join(BUILD, "station")
TOL = 1e-12
CAUTION = ("station aids, and does not replace, qualified inspection and the site's own "
           "quality procedures")
REASONS = [("max_area", "scratch", ""), ("max_area", "scratch", "rim"), ("max_count", "pit", ""),
           ("max_total", "stain", "face"), ("too_dark", "image", "")]
DISPS = ["none", "confirmed", "false-reject", "rework", "other"]


def close(a, b, tol=TOL):
    return a is not None and b is not None and abs(a - b) <= tol


def parse_utc(s):
    return datetime.datetime.fromisoformat(s.replace("Z", "+00:00"))


def subgroup_keys(utc, starts, offset_min):
    t = parse_utc(utc) + datetime.timedelta(minutes=offset_min)
    day = t.date()
    if t.hour < starts[0]:
        shift_key = (day - datetime.timedelta(days=1), len(starts) - 1)
    else:
        shift_key = (day, max(i for i, h in enumerate(starts) if h <= t.hour))
    return day.isoformat(), (shift_key[0].isoformat(), shift_key[1])


def expected(recs, starts, offset_min, by_shift):
    """Every figure of audit_stats_json, computed here."""
    days = collections.defaultdict(collections.Counter)
    shifts = collections.defaultdict(collections.Counter)
    pareto = collections.Counter()
    for r in recs:
        d, s = subgroup_keys(r["utc"], starts, offset_min)
        days[d][r["verdict"]] += 1
        shifts[s][r["verdict"]] += 1
        if r["verdict"] != "PASS":
            for x in r["reasons"]:
                pareto[(x["rule"], x["class"], x.get("zone", ""))] += 1
    groups = shifts if by_shift else days
    keys = sorted(groups)
    n = [sum(groups[k].values()) for k in keys]
    dd = [n_i - groups[k]["PASS"] for k, n_i in zip(keys, n)]
    pbar = sum(dd) / sum(n)
    points = []
    for k, n_i, d_i in zip(keys, n, dd):
        h = 3 * math.sqrt(pbar * (1 - pbar) / n_i)
        lcl, ucl = max(0.0, pbar - h), min(1.0, pbar + h)
        p = d_i / n_i
        points.append({"n": n_i, "rejects": d_i, "p": p, "lcl": lcl, "ucl": ucl,
                       "outside": 1 if p > ucl else -1 if p < lcl else 0})
    rejects = [r for r in recs if r["verdict"] != "PASS"]
    disp = collections.Counter(r.get("disp", "none") for r in rejects)
    k = disp["false-reject"]
    audited = k + disp["confirmed"] + disp["rework"]
    call = {"false-reject": 0, "confirmed": 1, "rework": 1}
    pairs = [(int(r["verdict"] != "PASS"), call[r["disp"]]) for r in recs
             if r.get("disp") in call]
    return {"days": {d: days[d] for d in days}, "shifts": shifts, "pbar": pbar,
            "points": points, "pareto": pareto, "rejects": len(rejects), "disp": disp,
            "k": k, "audited": audited, "pairs": pairs}


def compare(name, got, want, recs, tol=TOL):
    """tol: the CLI prints 6 significant digits, the tool 17."""
    v = got["verdicts"]
    c = collections.Counter(r["verdict"] for r in recs)
    check(f"{name}: verdict counts", (v["PASS"], v["FAIL"], v["NO_VERDICT"]) ==
          (c["PASS"], c["FAIL"], c["NO_VERDICT"]), f"{v} vs {dict(c)}")
    gd = {d["day"]: collections.Counter({k: x for k, x in d["verdicts"].items() if x})
          for d in got["days"]}
    check(f"{name}: {len(gd)} days, counts per day (datetime)", gd == want["days"])
    gs = {(s["day"], s["shift"]): collections.Counter({k: x for k, x in s["verdicts"].items() if x})
          for s in got["shifts"]}
    check(f"{name}: {len(gs)} shifts, counts per shift (datetime)", gs == dict(want["shifts"]))
    pc = got["pchart"]
    check(f"{name}: p-chart centre line", close(pc["pbar"], want["pbar"], tol),
          f"{pc['pbar']} vs {want['pbar']}")
    ok = len(pc["points"]) == len(want["points"])
    for g, w in zip(pc["points"], want["points"]):
        ok = ok and g["n"] == w["n"] and g["rejects"] == w["rejects"] and g["outside"] == w["outside"]
        ok = ok and all(close(g[k], w[k], tol) for k in ("p", "lcl", "ucl"))
    check(f"{name}: {len(pc['points'])} p-chart points, limits and outside flags", ok)
    outside = [p["label"] for p in pc["points"] if p["outside"]]
    check(f"{name}: outside list {outside}", pc["outside"] == outside)
    gp = [((r["rule"], r["class"], r["zone"]), r["count"]) for r in got["pareto"]]
    wp = sorted(want["pareto"].items(), key=lambda kv: (-kv[1], kv[0]))
    check(f"{name}: Pareto order and counts (Counter)", gp == wp, f"{gp} vs {wp}")
    total = sum(want["pareto"].values())
    cum = np.cumsum([c for _, c in wp]) / total if total else []
    check(f"{name}: Pareto cumulative shares",
          all(close(r["cumulative"], c, tol) for r, c in zip(got["pareto"], cum)))
    au = got["audit"]
    check(f"{name}: rejects and dispositions", au["rejects"] == want["rejects"] and
          all(au["dispositions"][d] == want["disp"][d] for d in DISPS))
    fr = au["false_reject"]
    ci = binomtest(want["k"], want["audited"]).proportion_ci(method="exact")
    check(f"{name}: false rejects {fr['false_rejects']}/{fr['audited']} interval "
          f"== scipy binomtest exact [{ci.low:.5f}, {ci.high:.5f}]",
          fr["false_rejects"] == want["k"] and fr["audited"] == want["audited"] and
          close(fr["ci95"][0], ci.low, max(tol, 1e-11)) and close(fr["ci95"][1], ci.high, max(tol, 1e-11)),
          str(fr))
    a = [s for s, _ in want["pairs"]]
    b = [x for _, x in want["pairs"]]
    kappa = cohen_kappa_score(a, b)
    check(f"{name}: kappa {au['kappa']['value']} == sklearn cohen_kappa_score {kappa:.6f}",
          close(au["kappa"]["value"], kappa, tol))
    t = np.zeros((2, 2), dtype=int)
    for s, x in want["pairs"]:
        t[s][x] += 1
    check(f"{name}: kappa table", au["kappa"]["table"] == t.tolist(),
          f"{au['kappa']['table']} vs {t.tolist()}")


def make_records(rng):
    """12 days from 2026-11-20, 30-70 parts a day at random seconds; day 7
    rejects at three times the usual rate, so the p-chart must flag it."""
    recs, seq = [], 0
    start = datetime.datetime(2026, 11, 20, tzinfo=datetime.timezone.utc)
    for day in range(12):
        for _ in range(rng.randint(30, 70)):
            seq += 1
            t = start + datetime.timedelta(days=day, seconds=rng.randrange(86400),
                                           milliseconds=rng.randrange(1000))
            p_reject = 0.6 if day == 7 else 0.2
            u = rng.random()
            verdict = "PASS" if u >= p_reject else ("NO_VERDICT" if u < 0.03 else "FAIL")
            reasons = []
            if verdict == "NO_VERDICT":
                reasons = [{"rule": "too_dark", "class": "image"}]
            elif verdict == "FAIL":
                for _ in range(rng.randint(1, 2)):
                    rule, cls, zone = REASONS[min(int(rng.random() ** 2 * 4), 3)]
                    x = {"rule": rule, "class": cls, "measured": 1.0}
                    if zone:
                        x["zone"] = zone
                    reasons.append(x)
            r = {"seq": seq, "utc": t.strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z",
                 "verdict": verdict, "reasons": reasons}
            if rng.random() < (0.7 if verdict != "PASS" else 0.1):
                r["disp"] = rng.choice(DISPS[1:])
            recs.append(r)
    recs.sort(key=lambda r: r["utc"])
    return recs


def part1(tmp):
    recs = make_records(random.Random(20261201))
    text = "".join(json.dumps(r) + "\n" for r in recs)
    for starts, offset, by_shift in (([6, 14, 22], 0, False), ([6, 14, 22], 90, True),
                                     ([7, 19], -300, False)):
        args = [tool("auditcalc"), "--shifts", ",".join(map(str, starts)), "--offset", str(offset)]
        if by_shift:
            args.append("--by-shift")
        r = subprocess.run(args, input=text, capture_output=True, text=True)
        name = f"calc shifts {starts} offset {offset} by {'shift' if by_shift else 'day'}"
        if r.returncode:
            check(f"{name}: auditcalc exits 0", False, r.stderr)
            continue
        got = json.loads(r.stdout)
        compare(name, got, expected(recs, starts, offset, by_shift), recs)
        if not by_shift and offset == 0:
            check(f"{name}: the day with the raised reject rate is flagged",
                  got["pchart"]["outside"] == ["2026-11-27"], str(got["pchart"]["outside"]))
    # The page from the same records, every reject with one thumbnail.
    png = os.path.join(tmp, "overlay.png")
    Image.fromarray(np.random.default_rng(3).integers(0, 255, (301, 451, 3), dtype=np.uint8)).save(png)
    page = os.path.join(tmp, "calc.html")
    r = subprocess.run([tool("auditcalc"), "--html", page, "--thumb", png], input=text,
                       capture_output=True, text=True)
    check("calc page: auditcalc --html exits 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        html = open(page, encoding="utf-8").read()
        rejects = sum(r["verdict"] != "PASS" for r in recs)
        check_page("calc page", html, rejects, len(json.loads(r.stdout)["pchart"]["points"]))
        check("calc page: the log's name is escaped", "records &lt;from&gt; &quot;stdin&quot;" in html)


class Page(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = collections.Counter()
        self.urls = []
        self.imgs = []

    def handle_starttag(self, tag, attrs):
        self.tags[tag] += 1
        a = dict(attrs)
        for k in ("src", "href", "xlink:href", "data", "action"):
            if k in a:
                self.urls.append(a[k])
        if tag == "img":
            self.imgs.append(a)


def check_page(name, html, nthumbs, npoints):
    p = Page()
    p.feed(html)
    check(f"{name}: one html, head, body", p.tags["html"] == 1 and p.tags["body"] == 1)
    check(f"{name}: no script, link, iframe, object or font",
          not any(p.tags[t] for t in ("script", "link", "iframe", "object", "embed")) and
          "@import" not in html and "@font-face" not in html and "url(" not in html)
    check(f"{name}: every reference is a data URI",
          all(u.startswith("data:image/png;base64,") for u in p.urls), str(p.urls[:3]))
    check(f"{name}: the caution is on the page", CAUTION in html.replace("&#39;", "'"))
    svgs = re.findall(r"<svg.*?</svg>", html, re.S)
    check(f"{name}: two inline SVG charts", len(svgs) == 2, str(len(svgs)))
    try:
        trees = [ET.fromstring(s) for s in svgs]
        ok = True
    except ET.ParseError as err:
        trees, ok = [], str(err)
    check(f"{name}: each SVG is well-formed XML", ok is True, ok)
    if len(trees) == 2:
        circles = [c for c in trees[0].iter("circle")]
        check(f"{name}: p-chart has one point per subgroup ({npoints})", len(circles) == npoints)
        check(f"{name}: Pareto has bars", len(list(trees[1].iter("rect"))) >= 1)
    check(f"{name}: {nthumbs} thumbnails", len(p.imgs) == nthumbs, str(len(p.imgs)))
    return p


def run(*args):
    return subprocess.run([STATION, *args], capture_output=True, text=True)


def part2(tmp):
    db = os.path.join(tmp, "log.db")
    r = subprocess.run([tool("auditlog"), db, "300", "11", "--evidence"], capture_output=True,
                       text=True)
    check("log: auditlog fills 300 records", r.returncode == 0, r.stderr)
    if r.returncode:
        return
    lines = [json.loads(x) for x in r.stdout.splitlines()]
    r = run("audit", "stats", "--log", db, "--json")
    check("stats: exits 0 with one JSON line", r.returncode == 0 and len(r.stdout.splitlines()) == 1,
          r.stderr)
    got = json.loads(r.stdout)
    # The log stamps its own times, so add them from the export to recompute.
    r = run("audit", "export", "--log", db, "--out", os.path.join(tmp, "log.csv"))
    check("export: exits 0", r.returncode == 0, r.stderr)
    raw = open(os.path.join(tmp, "log.csv"), "rb").read()
    rows = list(csv.reader(io.StringIO(raw.decode("utf-8"), newline="")))
    check("export: header and one row per record", len(rows) == 301 and rows[0][0] == "seq",
          str(len(rows)))
    check("export: every row ends in CRLF (RFC 4180)",
          raw.count(b"\r\n") >= 301 and raw.endswith(b"\r\n"))
    head = rows[0]
    col = {k: head.index(k) for k in head}
    ok = True
    tricky = 0
    for line, row in zip(lines, rows[1:]):
        ok = ok and len(row) == len(head) and int(row[col["seq"]]) == line["seq"]
        ok = ok and row[col["verdict"]] == line["verdict"]
        ok = ok and json.loads(row[col["reasons"]]) == line["reasons"]
        ok = ok and (row[col["disposition"]] or "none") == line["disp"]
        ok = ok and row[col["comment"]] == line["comment"]
        tricky += any(c in line["comment"] for c in ",\"\n")
    check(f"export: rows read back equal what was written ({tricky} comments with commas, "
          f"quotes or line breaks)", ok and tricky > 0)
    recs = [dict(line, utc=row[col["utc"]]) for line, row in zip(lines, rows[1:])]
    compare("stats on the log", got, expected(recs, [6, 14, 22], 0, False), recs, 1e-6)

    r = run("audit", "stats", "--log", db)
    check("stats: text on stderr with the caution", r.returncode == 0 and r.stdout == "" and
          "false rejects:" in r.stderr and CAUTION in r.stderr, r.stderr[-300:])
    r = run("audit", "stats", "--log", db, "--json", "--from", "2999-01-01")
    empty = json.loads(r.stdout) if r.returncode == 0 else {}
    check("stats: a period with no records has 0 records and no p-chart",
          empty.get("records") == 0 and empty.get("pchart", 1) is None, r.stdout + r.stderr)

    page = os.path.join(tmp, "report.html")
    r = run("audit", "report", "--log", db, "--out", page, "--thumbs", "20", "--from", "2000-01-01")
    check("report: exits 0", r.returncode == 0, r.stderr)
    if r.returncode == 0:
        html = open(page, encoding="utf-8").read()
        p = check_page("report", html, min(20, got["audit"]["rejects"]),
                       len(got["pchart"]["points"]))
        check("report: names its log and selection", f"Log: {db}, from 2000-01-01<br>" in html)
        overlay = {int(row[col["seq"]]): row[col["overlay"]] for row in rows[1:]}
        seqs = [int(re.search(r"record (\d+)", a["alt"]).group(1)) for a in p.imgs]
        newest = sorted((x["seq"] for x in lines if x["verdict"] != "PASS"), reverse=True)[:20]
        check("report: thumbnails are the newest rejects, newest first", seqs == newest,
              f"{seqs[:5]} vs {newest[:5]}")
        worst = 0.0
        sizes = set()
        for a, seq in zip(p.imgs, seqs):
            img = Image.open(io.BytesIO(base64.b64decode(a["src"].split(",", 1)[1])))
            sizes.add(img.size)
            src = Image.open(os.path.join(tmp, "evidence", overlay[seq])).convert("RGB")
            ref = src.resize(img.size, Image.BOX)
            d = np.abs(np.asarray(img.convert("RGB"), float) - np.asarray(ref, float)).mean()
            worst = max(worst, d)
        check(f"report: thumbnails 192x127 (401x267 downscaled), {sizes}", sizes == {(192, 127)})
        check(f"report: thumbnails match PIL's BOX downscale of the overlay file "
              f"(mean |diff| {worst:.2f} <= 2 levels)", worst <= 2.0)

    view(tmp, db, lines, rows, col)

    # A missing overlay file costs its thumbnail, not the page.
    newest = max(x["seq"] for x in lines if x["verdict"] != "PASS")
    gone = next(r[col["overlay"]] for r in rows[1:] if int(r[col["seq"]]) == newest)
    os.remove(os.path.join(tmp, "evidence", gone))
    r = run("audit", "report", "--log", db, "--out", page, "--thumbs", "5")
    html = open(page, encoding="utf-8").read() if r.returncode == 0 else ""
    check("report: a missing overlay file is noted in its place, the others still shown",
          "overlay file missing or unreadable" in html and html.count("data:image/png") == 4,
          r.stderr)

    r = run("audit", "stats", "--log", os.path.join(tmp, "missing.db"))
    check("stats: a missing log is one line naming it, exit 3",
          r.returncode == 3 and "missing.db" in r.stderr and r.stderr.count("\n") == 1, r.stderr)
    r = run("audit", "stats", "--log", db, "--by", "week")
    check("stats: --by week is a usage error (4)", r.returncode == 4, r.stderr)
    r = run("audit", "stats", "--log", db, "--shifts", "22,6")
    check("stats: descending shifts are a usage error naming them",
          r.returncode == 4 and "22,6" in r.stderr, r.stderr)
    bad = os.path.join(tmp, "no-such-folder", "r.html")
    r = run("audit", "report", "--log", db, "--out", bad)
    check("report: an unwritable output is exit 3 naming it, nothing left behind",
          r.returncode == 3 and "no-such-folder" in r.stderr and not os.path.exists(bad), r.stderr)
    r = run("audit", "export", "--log", db)
    check("export: --out is required (usage, 4)", r.returncode == 4)
    for verb in ("stats", "report", "export"):
        r = run("audit", verb, "--help")
        check(f"{verb} --help: usage on stdout, exit 0", r.returncode == 0 and
              r.stdout.startswith(f"usage: station audit {verb}"))


def view(tmp, db, lines, rows, col):
    """`audit view` rendered once without a display (SDL's dummy driver):
    the screenshot must hold the evidence files pixel for pixel, read by PIL."""
    seq = next(x["seq"] for x in lines if x["verdict"] != "PASS")
    row = next(r for r in rows[1:] if int(r[col["seq"]]) == seq)
    frame = np.asarray(Image.open(os.path.join(tmp, "evidence", row[col["frame"]])).convert("RGB"))
    overlay = np.asarray(Image.open(os.path.join(tmp, "evidence", row[col["overlay"]])).convert("RGB"))
    env = dict(os.environ, SDL_VIDEODRIVER="dummy")
    shot = os.path.join(tmp, "view.png")
    for mode, want in (("side", None), ("overlay", overlay), ("frame", frame)):
        if os.path.exists(shot):
            os.remove(shot)
        r = subprocess.run([STATION, "audit", "view", str(seq), "--log", db, "--mode", mode,
                            "--screenshot", shot], capture_output=True, text=True, env=env,
                           timeout=60)
        if r.returncode or not os.path.exists(shot):
            check(f"view {mode}: renders a screenshot headless", False, r.stderr)
            continue
        got = np.asarray(Image.open(shot).convert("RGB"))
        if want is None:
            w = frame.shape[1]
            ok = (got.shape == (frame.shape[0], 2 * w + 8, 3) and np.array_equal(got[:, :w], frame)
                  and np.array_equal(got[:, w + 8:], overlay) and (got[:, w:w + 8] == 96).all())
            check(f"view side: screenshot {got.shape[1]}x{got.shape[0]} is frame | gap | overlay, "
                  f"pixel for pixel", ok)
        else:
            check(f"view {mode}: screenshot equals the {mode} file", np.array_equal(got, want))
    passed = next(x["seq"] for x in lines if x["verdict"] == "PASS")
    r = subprocess.run([STATION, "audit", "view", str(passed), "--log", db, "--screenshot", shot],
                       capture_output=True, text=True, env=env, timeout=60)
    check("view: a PASS without evidence is exit 3 with one line naming the record",
          r.returncode == 3 and f"record {passed} has no evidence" in r.stderr, r.stderr)
    r = subprocess.run([STATION, "audit", "view", "99999", "--log", db, "--screenshot", shot],
                       capture_output=True, text=True, env=env, timeout=60)
    check("view: an unknown record is exit 3", r.returncode == 3, r.stderr)
    r = subprocess.run([STATION, "audit", "view", str(seq), "--log", db, "--mode", "tiles"],
                       capture_output=True, text=True, env=env, timeout=60)
    check("view: --mode tiles is a usage error (4)", r.returncode == 4, r.stderr)
    r = subprocess.run([STATION, "audit", "view", str(seq), "--log", db], capture_output=True,
                       text=True, env=env, timeout=60)
    check("view: without a display and without --screenshot, exit 3 saying so",
          r.returncode == 3 and "no display" in r.stderr, r.stderr)


def main():
    warnings.simplefilter("ignore", RuntimeWarning)
    with tempfile.TemporaryDirectory() as tmp:
        part1(tmp)
        part2(tmp)
    return status()


if __name__ == "__main__":
    sys.exit(main())
