#!/bin/sh
# make bench: the live station on the simulated bench, 2 cores: preview
# frame rate and trigger-to-verdict latency at 640x480 and 1280x960, and the
# CPU an idle station (empty bench) uses.  Figures, not a test.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
demo="$BUILD/bench-demo"
if [ -f "$demo/ostrel-cap38.model.json" ]; then
    recipe="$demo/ostrel-cap38.ini"
else
    . tests/e2e/log_fixture.sh
    recipe="$fixture/ostrel-cap38.ini"
fi
# the bench measures the loop, not verification: a copy without masters
out="$BUILD/bench-live"
rm -rf "$out"
mkdir -p "$out"
cp "$(dirname "$recipe")"/ostrel-cap38.* "$out"/
sed -i '/^\[verification\]/,$d' "$out/ostrel-cap38.ini"
exec "$PYTHON" tests/bench/live_bench.py "$BUILD/station" "$out/ostrel-cap38.ini" "$out" \
    "${LIVE_SECONDS:-8}"
