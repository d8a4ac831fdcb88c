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
