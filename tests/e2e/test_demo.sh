#!/bin/sh
# End to end: the demo on a fixed seed, then the subcommands on its output.
# The figures are checked by check_demo.py.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
out="$BUILD/e2e-demo"
rm -rf "$out"
"$BUILD/station" demo --out "$out" --seed 11
# inspection below logs to the station's default log: keep it in the run's
# folder, and verify the masters there first, as a shift starts
export XDG_DATA_HOME="$out/xdg"
"$BUILD/station" verify "$out/ostrel-cap38.ini" >/dev/null
"$PYTHON" tests/e2e/check_demo.py "$BUILD/station" "$out"
"$PYTHON" tests/e2e/check_flat.py "$BUILD/station" "$out"
"$PYTHON" tests/e2e/check_verify.py "$BUILD/station" "$out"
exec "$PYTHON" tests/e2e/check_degraded.py "$BUILD/station" "$out"
