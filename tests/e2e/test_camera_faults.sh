#!/bin/sh
# Camera faults (stall, short buffers, random bytes, unplug mid-stream)
# through the emulated camera: check_camera_faults.py says what is checked.
# Needs root and unshare -m (skipped, 77, otherwise).
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
[ -f "$BUILD/tests/emucam/libv4l-emucam.so" ] || { echo "SKIP no emulated camera (make test-programs)"; exit 77; }
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-camera-faults"
fresh
exec "$PYTHON" tests/e2e/check_camera_faults.py "$BUILD/station" "$recipe" "$(realpath "$out")"
