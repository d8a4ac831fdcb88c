#!/bin/sh
# A small end-to-end run that the sanitizer build runs too: a tiny demo
# (train, evaluate, inspect), then inspect on a truncated file.  Checks exit
# statuses and that every line of output is a verdict; the figures are the
# business of test_demo.sh.
set -eu
BUILD=${STATION_BUILD:-build}
out="$BUILD/e2e-smoke"
rm -rf "$out"
"$BUILD/station" demo --out "$out" --seed 3 --train 4 --test 2 --shifted 1 2>"$out.log" || {
    tail -5 "$out.log"
    echo "FAIL smoke demo"
    exit 1
}
head -c 300 "$out/test/images/part-0004.png" >"$out/cut.png"
set +e
"$BUILD/station" inspect "$out/ostrel-cap38.ini" "$out/test/images/part-0004.png" "$out/cut.png" \
    >"$out/inspect.jsonl" 2>"$out/inspect.log"
rc=$?
set -e
[ "$rc" = 2 ] || { echo "FAIL inspect exit status $rc, want 2 (a NO_VERDICT)"; exit 1; }
[ "$(wc -l <"$out/inspect.jsonl")" = 2 ] || { echo "FAIL inspect printed $(wc -l <"$out/inspect.jsonl") lines"; exit 1; }
grep -q '"image":"[^"]*cut.png","verdict":"NO_VERDICT"' "$out/inspect.jsonl" || {
    echo "FAIL the truncated file is not NO_VERDICT"
    exit 1
}
echo "ok   smoke: demo, inspect, truncated file NO_VERDICT (exit 2)"
# The demo's log read by the audit's numbers: the page holds one thumbnail
# per reject the log lists, the CSV one row per record.
log="$out/log/station.db"
"$BUILD/station" audit stats --log "$log" --json >"$out/stats.json" 2>"$out/audit.log" &&
    "$BUILD/station" audit report --log "$log" --out "$out/audit.html" 2>>"$out/audit.log" &&
    "$BUILD/station" audit export --log "$log" --out "$out/records.csv" 2>>"$out/audit.log" || {
    tail -3 "$out/audit.log"
    echo "FAIL audit stats, report or export on the demo's log"
    exit 1
}
records=$(grep -o '"records":[0-9]*' "$out/stats.json" | head -n 1 | cut -d: -f2)   # the total's, before each station's
"$BUILD/station" audit list --log "$log" --json >"$out/list.jsonl"
rejects=$(grep -c -v '"verdict":"PASS"' "$out/list.jsonl" || true)
thumbs=$(grep -o 'src="data:image/png;base64,' "$out/audit.html" | wc -l)
rows=$(wc -l <"$out/records.csv")
[ "$records" -ge 1 ] && [ "$records" = "$(wc -l <"$out/list.jsonl")" ] && [ "$thumbs" = "$rejects" ] &&
    [ "$rows" = $((records + 1)) ] || {
    echo "FAIL audit on the demo's log: $records records, $rejects rejects, $thumbs thumbnails, $rows CSV lines"
    exit 1
}
echo "ok   smoke: audit stats, report ($thumbs thumbnails) and export ($records records) of the demo's log"
