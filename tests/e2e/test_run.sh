#!/bin/sh
# End to end: the live station (station run) on the tiny demo recipe the log
# tests share: replay against station inspect, the automatic trigger on the
# simulated bench, camera lost, the log failing and coming back, and a
# windowed run under SDL's offscreen driver.  The checks: check_run.py.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-run"
fresh
exec "$PYTHON" tests/e2e/check_run.py "$BUILD/station" "$recipe" "$images" "$out/checks"
