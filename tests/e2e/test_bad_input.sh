#!/bin/sh
# The bad-input table (README.md, tests/e2e/bad_input.tsv): every kind of bad
# input with its exact message and exit status, run by bad_input.py on a
# copy of the log tests' tiny trained demo.
set -eu
BUILD=${STATION_BUILD:-build}
. tests/e2e/log_fixture.sh
exec "${STATION_PYTHON:-/usr/bin/python3}" tests/e2e/bad_input.py "$BUILD" "$fixture"
