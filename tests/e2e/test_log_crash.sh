#!/bin/sh
# Crash safety of the inspection log: a tiny demo gives a trained recipe,
# then log_crash.py kills the writer 30 times and checks what is left.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
out="$BUILD/e2e-log-crash"
rm -rf "$out"
"$BUILD/station" demo --out "$out" --seed 5 --train 4 --test 3 --shifted 0 2>"$out.log" || {
    tail -5 "$out.log"
    echo "FAIL demo for the crash test"
    exit 1
}
# PASS evidence too, for every other PASS
printf '\n[evidence]\npass = every 2\n' >>"$out/ostrel-cap38.ini"
exec "$PYTHON" tests/e2e/log_crash.py "$BUILD/station" "$out/ostrel-cap38.ini" "$out"/test/images/*.png
