#!/bin/sh
# A recipe with a cut network as its features trains, evaluates and
# inspects, agrees with the filter bank on the clear classes, and refuses a
# changed network file (checked by check_cnn.py).
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
"$PYTHON" tests/e2e/check_cnn.py "$BUILD/station" "$BUILD/tests/tools" "$BUILD/e2e-cnn" recipes/ostrel-cap38.ini
