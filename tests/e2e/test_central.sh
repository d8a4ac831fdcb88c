#!/bin/sh
# The audit verbs on the central PostgreSQL database (tests/e2e/pgcluster.sh:
# a throwaway cluster on a Unix socket, the password only in a PGPASSFILE),
# filled by `station sync` from three local logs on two lines:
# - `audit stats --json` centrally equals, station by station and in total,
#   the figures check_central.py computes from the local SQLite files alone;
# - list and export filtered by station, line and recipe select exactly the
#   rows psycopg2 selects from the central tables;
# - show and view need --station when several stations are held and say
#   which are; evidence is found under --evidence DIR (SHA-256 checked by
#   hashlib, view's picture by PIL) and reported as not available without it;
# - verify checks every station's chains with that station's own public key
#   (the local log's, read by sqlite3), and catches a central row altered
#   through psycopg2 with the triggers dropped, naming station and record;
# - dispose on the central database is refused and writes nothing.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/pgcluster.sh
S="$BUILD/station"
FILL="$BUILD/tests/tools/auditlog"
out="$BUILD/e2e-central"
rm -rf "$out"
mkdir -p "$out/pg" "$out/share"
fail() { echo "FAIL $*"; exit 1; }
pgcluster_start "$out/pg"
trap pgcluster_cleanup EXIT
CHECK="$PYTHON tests/e2e/check_central.py"
C="$PGCLUSTER_CONNINFO"
pyq() { "$PYTHON" -c 'import psycopg2, sys
c = psycopg2.connect(sys.argv[1]); cur = c.cursor(); cur.execute(sys.argv[2], sys.argv[3:])
print(cur.fetchone()[0])' "$C" "$@"; }
expect_rc() { want=$1; shift; set +e; "$@" >"$out/last.out" 2>"$out/last.err"; rc=$?; set -e
    [ "$rc" = "$want" ] || { cat "$out/last.err"; fail "$* exit $rc, want $want"; }; }

# three stations: A has two recipes, B keeps evidence and verifies masters
"$FILL" "$out/A.db" 300 21 --station bench-A >/dev/null
"$FILL" "$out/A.db" 120 22 --station bench-A --recipe ostrel-cap52 >/dev/null
"$FILL" "$out/B.db" 200 23 --station bench-B --evidence --verify-every 50 >/dev/null
"$FILL" "$out/C.db" 150 24 --station bench-C --recipe ostrel-cap52 >/dev/null
expect_rc 0 "$S" sync --to "$PGCLUSTER_URI" --log "$out/A.db" --line line-1
expect_rc 0 "$S" sync --to "$PGCLUSTER_URI" --log "$out/B.db" --line line-1 --evidence-to "$out/share"
expect_rc 0 "$S" sync --to "$C" --log "$out/C.db" --line line-2
[ "$(pyq 'SELECT count(*) FROM records')" = 770 ] || fail "the central database holds $(pyq 'SELECT count(*) FROM records') records, want 770"

# stats: every station's figures and the total against the local logs
expect_rc 0 "$S" audit stats --log "$PGCLUSTER_URI" --json
cp "$out/last.out" "$out/stats.json"
$CHECK stats "$out/stats.json" "$out/A.db=bench-A" "$out/B.db=bench-B" "$out/C.db=bench-C"
# the stations' figures are each local log's own (the same program, another back-end)
for x in A B C; do
    expect_rc 0 "$S" audit stats --log "$out/$x.db" --json
    "$PYTHON" -c 'import json, sys
central = {s["station"]: s for s in json.load(open(sys.argv[1]))["stations"]}
local = json.load(open(sys.argv[2]))
(s,) = local["stations"]
c = central[s["station"]]
for k in ("records", "verdicts", "rejects", "first", "last"):
    assert c[k] == s[k], (k, c[k], s[k])
assert c["audit"]["dispositions"] == local["audit"]["dispositions"]
assert s["line"] == "" and c["line"] in ("line-1", "line-2")' "$out/stats.json" "$out/last.out" ||
        fail "station bench-$x: central figures differ from its local log's"
done
expect_rc 0 "$S" audit stats --log "$PGCLUSTER_URI" --line line-1
grep -q "per station:" "$out/last.err" && grep -q "^  bench-A " "$out/last.err" &&
    grep -q "^  bench-B " "$out/last.err" && ! grep -q "^  bench-C " "$out/last.err" &&
    grep -q "^  total " "$out/last.err" && grep -q "qualified inspection" "$out/last.err" ||
    fail "stats --line line-1 text: $(cat "$out/last.err")"
echo "ok   stats text: line-1's two stations side by side with their total, and the caution"

# list and export: filters by station, line and recipe, against psycopg2
for f in "" "--station bench-B" "--line line-1" "--recipe ostrel-cap52" \
    "--line line-1 --recipe ostrel-cap52" "--line line-2 --station bench-C"; do
    # shellcheck disable=SC2086
    expect_rc 0 "$S" audit list --log "$PGCLUSTER_URI" --json $f
    cp "$out/last.out" "$out/list.jsonl"
    # shellcheck disable=SC2086
    $CHECK select "$C" "$out/list.jsonl" $f
done
for f in "--line line-2" "--station bench-A --recipe ostrel-cap52" "--recipe ostrel-cap38"; do
    # shellcheck disable=SC2086
    expect_rc 0 "$S" audit export --log "$PGCLUSTER_URI" --out "$out/export.csv" $f
    # shellcheck disable=SC2086
    $CHECK select "$C" "$out/export.csv" $f
done
expect_rc 0 "$S" audit list --log "$PGCLUSTER_URI" --json --line line-9
[ ! -s "$out/last.out" ] || fail "a line no station is on selected records"
# a station the central database does not hold is named as such, not an empty list
for verb in list stats "export --out -"; do
    # shellcheck disable=SC2086 # the verb and its options, split on purpose
    expect_rc 3 "$S" audit $verb --log "$PGCLUSTER_URI" --station bench-Z
    grep -q "no station bench-Z (held: bench-A, bench-B, bench-C)" "$out/last.err" ||
        fail "$verb --station bench-Z: $(cat "$out/last.err")"
done
# a local log knows no line: refused, not an empty selection
expect_rc 3 "$S" audit list --log "$out/A.db" --line line-1
grep -q "a local log has no production line" "$out/last.err" ||
    fail "list --line on a local log: $(cat "$out/last.err")"

# show: one station needed, evidence under --evidence
expect_rc 3 "$S" audit show 5 --log "$PGCLUSTER_URI"
grep -q "holds 3 stations (bench-A, bench-B, bench-C)" "$out/last.err" && grep -q -- "--station" "$out/last.err" ||
    fail "show without --station: $(cat "$out/last.err")"
expect_rc 3 "$S" audit show 5 --log "$PGCLUSTER_URI" --station bench-Z
grep -q "no station bench-Z (held: bench-A, bench-B, bench-C)" "$out/last.err" ||
    fail "show --station bench-Z: $(cat "$out/last.err")"
seq=$(pyq "SELECT min(record_seq) FROM evidence WHERE station = 'bench-B'")
expect_rc 0 "$S" audit show "$seq" --log "$PGCLUSTER_URI" --station bench-B --evidence "$out/share" --json
cp "$out/last.out" "$out/show.json"
"$PYTHON" -c 'import hashlib, json, sys
import psycopg2
j = json.load(open(sys.argv[1]))
cur = psycopg2.connect(sys.argv[2]).cursor()
cur.execute("SELECT hash FROM records WHERE station = %s AND seq = %s", ("bench-B", j["seq"]))
assert j["hash"] == cur.fetchone()[0] and j["log_station"] == "bench-B" and j["line"] == "line-1", j
assert len(j["evidence"]) == 2
for v in j["evidence"]:
    assert v["path"].startswith(sys.argv[3] + "/bench-B/"), v["path"]
    assert hashlib.sha256(open(v["path"], "rb").read()).hexdigest() == v["sha256"], v' \
    "$out/last.out" "$C" "$out/share" || fail "show bench-B $seq: $(cat "$out/last.out")"
expect_rc 0 "$S" audit show "$seq" --log "$PGCLUSTER_URI" --station bench-B
grep -q "not available here" "$out/last.err" || fail "show without --evidence: $(cat "$out/last.err")"
echo "ok   show: needs --station among 3 stations, finds bench-B's evidence under --evidence (SHA-256 by hashlib), says not available without it"
# view: the same record's frame drawn headless equals the copied file (PIL)
frame=$(sed -n 's/.*"kind":"frame","name":"[^"]*","path":"\([^"]*\)".*/\1/p' "$out/show.json")
expect_rc 0 env SDL_VIDEODRIVER=dummy "$S" audit view "$seq" --log "$PGCLUSTER_URI" --station bench-B \
    --evidence "$out/share" --mode frame --screenshot "$out/view.png"
"$PYTHON" -c 'import sys
import numpy as np
from PIL import Image
a, b = (np.asarray(Image.open(p).convert("RGB")) for p in sys.argv[1:])
assert a.shape == b.shape and (a == b).all()' "$out/view.png" "$frame" || fail "view's screenshot is not the frame $frame"
expect_rc 3 env SDL_VIDEODRIVER=dummy "$S" audit view "$seq" --log "$PGCLUSTER_URI" --station bench-B \
    --screenshot "$out/view.png"
grep -q "not available here" "$out/last.err" || fail "view without --evidence: $(cat "$out/last.err")"
echo "ok   view: bench-B's frame from --evidence drawn headless equals the file pixel for pixel (PIL); without --evidence, not available"

# verify: every station with its own key
expect_rc 0 "$S" audit verify --log "$PGCLUSTER_URI" --evidence "$out/share"
"$PYTHON" -c 'import json, sqlite3, sys
import psycopg2
lines = [json.loads(l) for l in open(sys.argv[1])]
assert [l["station"] for l in lines] == ["bench-A", "bench-B", "bench-C"], lines
cur = psycopg2.connect(sys.argv[2]).cursor()
for l in lines:
    pk = sqlite3.connect(sys.argv[3] + "/" + l["station"][-1] + ".db").execute(
        "SELECT value FROM meta WHERE key = %s" % chr(39) + "public_key" + chr(39)).fetchone()[0]
    cur.execute("SELECT count(*) FROM records WHERE station = %s", (l["station"],))
    assert l["ok"] and l["public_key"] == pk and l["records"] == cur.fetchone()[0], l
    assert l["signed"] > l["records"] and l["evidence_unavailable"] == 0, l
b = lines[1]
cur.execute("SELECT count(*) FROM evidence WHERE station = %s", ("bench-B",))
assert b["evidence_files"] == cur.fetchone()[0] > 0, b' "$out/last.out" "$C" "$out" ||
    fail "verify: $(cat "$out/last.out")"
grep -q "3 stations verified" "$out/last.err" || fail "verify's closing line: $(cat "$out/last.err")"
expect_rc 0 "$S" audit verify --log "$PGCLUSTER_URI" --station bench-B
grep -q '"evidence_unavailable":[1-9]' "$out/last.out" && grep -q '"ok":true' "$out/last.out" ||
    fail "verify without --evidence: $(cat "$out/last.out")"
keyB=$(sed -n 's/.*"public_key":"\([0-9a-f]*\)".*/\1/p' "$out/last.out")
expect_rc 4 "$S" audit verify --log "$PGCLUSTER_URI" --public-key "$keyB"
grep -q "holds 3 stations, each signed with its own key: --public-key needs" "$out/last.err" ||
    fail "verify --public-key without --station: $(cat "$out/last.err")"
expect_rc 1 "$S" audit verify --log "$PGCLUSTER_URI" --station bench-A --public-key "$keyB"
grep -q '"chain":"record","seq":1,' "$out/last.out" || fail "bench-A against bench-B's key: $(cat "$out/last.out")"
echo "ok   verify: each station's chains, evidence files and signatures against its own key (the local log's); another station's key fails at record 1"

# a central row altered by someone who dropped the triggers
"$PYTHON" -c 'import psycopg2, sys
c = psycopg2.connect(sys.argv[1]); cur = c.cursor()
cur.execute("SELECT tgname FROM pg_trigger WHERE tgrelid = %s::regclass AND NOT tgisinternal", ("records",))
for (t,) in cur.fetchall():
    cur.execute("DROP TRIGGER %s ON records" % t)
cur.execute("UPDATE records SET serial = %s WHERE station = %s AND seq = 17", ("SN-FORGED", "bench-C"))
assert cur.rowcount == 1
c.commit()' "$C"
expect_rc 1 "$S" audit verify --log "$PGCLUSTER_URI"
"$PYTHON" -c 'import json, sys
a, b, c = [json.loads(l) for l in open(sys.argv[1])]
assert a["ok"] and b["ok"], (a, b)
assert not c["ok"] and c["station"] == "bench-C" and c["chain"] == "record" and c["seq"] == 17, c
assert "content does not match its hash" in c["what"], c' "$out/last.out" ||
    fail "verify after the change: $(cat "$out/last.out")"
grep -q "station bench-C: BROKEN at record 17" "$out/last.err" || fail "verify's sentence: $(cat "$out/last.err")"
echo "ok   verify: a central record changed with the triggers dropped is found, station bench-C record 17; the other stations still verify"

# dispose: the central database is read-only
before=$(pyq "SELECT count(*) FROM dispositions")
expect_rc 3 "$S" audit dispose 3 --log "$PGCLUSTER_URI" --auditor aud-1 --as confirmed
grep -q "read-only" "$out/last.err" && grep -q "station's own log" "$out/last.err" ||
    fail "dispose on central: $(cat "$out/last.err")"
[ "$(pyq "SELECT count(*) FROM dispositions")" = "$before" ] || fail "dispose wrote centrally"
echo "ok   dispose on the central database is refused (made in the station's own log) and writes nothing"

# report: the stations side by side
expect_rc 0 "$S" audit report --log "$PGCLUSTER_URI" --out "$out/report.html" --evidence "$out/share"
"$PYTHON" -c 'import html.parser, sys
import psycopg2
class P(html.parser.HTMLParser):
    def __init__(s):
        super().__init__(); s.h2 = s.cell = None; s.rows = []; s.section = ""
    def handle_starttag(s, t, a):
        if t == "h2": s.h2 = ""
        if t == "tr" and s.section == "Stations": s.rows.append([])
        if t == "td": s.cell = ""
    def handle_endtag(s, t):
        if t == "h2": s.section, s.h2 = s.h2, None
        if t == "td" and s.rows and s.section == "Stations": s.rows[-1].append(s.cell)
        if t == "td": s.cell = None
    def handle_data(s, d):
        if s.h2 is not None: s.h2 += d
        if s.cell is not None: s.cell += d
p = P(); p.feed(open(sys.argv[1]).read())
rows = [r for r in p.rows if r]
cur = psycopg2.connect(sys.argv[2]).cursor()
cur.execute("SELECT s.station, s.line, count(*), count(*) FILTER (WHERE verdict <> %s)"
            " FROM records r JOIN stations s USING (station) GROUP BY s.station, s.line"
            " ORDER BY s.station", ("PASS",))
want = [[st, ln, str(n), str(rj)] for st, ln, n, rj in cur.fetchall()]
got = [[r[0], r[1], r[2], r[6]] for r in rows]
total = ["total", "-", str(sum(int(w[2]) for w in want)), str(sum(int(w[3]) for w in want))]
assert got == want + [total], (got, want)' "$out/report.html" "$C" ||
    fail "the report's stations table"
echo "ok   report: the stations table (records, rejects per station and the total) equals psycopg2's counts"
expect_rc 0 "$S" audit report --log "$PGCLUSTER_URI" --station bench-B --thumbs 5 --out "$out/b.html" \
    --evidence "$out/share"
[ "$(grep -o 'src="data:image/png;base64,' "$out/b.html" | wc -l)" = 5 ] || fail "bench-B's report with --evidence: not 5 thumbnails"
expect_rc 0 "$S" audit report --log "$PGCLUSTER_URI" --station bench-B --thumbs 5 --out "$out/b.html"
[ "$(grep -c 'evidence not available here' "$out/b.html")" = 5 ] && ! grep -q 'data:image/png' "$out/b.html" ||
    fail "bench-B's report without --evidence: $(grep -c 'not available' "$out/b.html") notes"
echo "ok   report: bench-B's newest rejects as thumbnails from --evidence, each noted not available without it"
