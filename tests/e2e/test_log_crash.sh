#!/bin/sh
# Crash safety of the inspection log: log_crash.py kills the writer 30 times
# and checks what is left.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-log-crash"
fresh
# PASS evidence too, for every other PASS
printf '\n[evidence]\npass = every 2\n' >>"$recipe"
exec "$PYTHON" tests/e2e/log_crash.py "$BUILD/station" "$recipe" "$images"/*.png
