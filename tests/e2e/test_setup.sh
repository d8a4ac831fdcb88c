#!/bin/sh
# End to end: setting a recipe up — recipe show against the file it shows,
# recipe versions (save, the station refusing an unsaved edit, a model that
# does not belong to its recipe), and train/evaluate --split, on the tiny
# trained demo recipe the log tests share.  The checks: check_setup.py.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-setup"
fresh
exec "$PYTHON" tests/e2e/check_setup.py "$BUILD/station" "$recipe" "$fixture" "$out/checks"
