#!/bin/sh
# End to end: station capture on the simulated bench (no model needed), the
# checks in check_capture.py.  The windowed run's snapshot stays in
# $BUILD/e2e-capture/capture-screen.png for the README's walkthrough.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
out="$BUILD/e2e-capture"
rm -rf "$out"
mkdir -p "$out"
exec "$PYTHON" tests/e2e/check_capture.py "$BUILD/station" recipes/ostrel-cap38.ini "$out"
