#!/bin/sh
# Runs every test program and reference check; prints one closing line
# "check: N passed, M failed, K skipped" that CI reads.  Logs go to
# $BUILD/test-logs/.  A test that exits 77 could not run here (the automake
# convention): it is counted as skipped with the first line it printed, and
# does not fail the run.
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
SAN=${SAN:-0}
logs="$BUILD/test-logs"
mkdir -p "$logs"
pass=0
fail=0
skip=0
failed=""
run_one() {
    name=$1
    shift
    log="$logs/$(echo "$name" | tr '/' '_').log"
    "$@" >"$log" 2>&1
    rc=$?
    if [ "$rc" = 0 ]; then
        pass=$((pass + 1))
        echo "ok    $name"
    elif [ "$rc" = 77 ]; then
        skip=$((skip + 1))
        echo "skip  $name: $(grep -m1 SKIP "$log")"
    else
        fail=$((fail + 1))
        failed="$failed $name"
        echo "FAIL  $name (log: $log)"
        tail -n 20 "$log" | sed 's/^/      /'
    fi
}
export STATION_BUILD="$BUILD" STATION_PYTHON="$PYTHON"
# Tests never touch the user's own default inspection log: every default
# path ($XDG_DATA_HOME/station/...) lands in a folder of this run.
case "$BUILD" in
/*) XDG_DATA_HOME="$BUILD/test-xdg" ;;
*) XDG_DATA_HOME="$(pwd)/$BUILD/test-xdg" ;;
esac
export XDG_DATA_HOME
rm -rf "$XDG_DATA_HOME"
if [ "$SAN" = 1 ]; then
    export ASAN_OPTIONS="detect_leaks=1:abort_on_error=0:halt_on_error=1"
    export LSAN_OPTIONS="suppressions=$(pwd)/tests/lsan.supp:print_suppressions=0"
    export UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1"
fi
for t in $(find "$BUILD/tests" -type f -name 'test_*' ! -name '*.o' ! -name '*.d' | sort); do
    run_one "${t#$BUILD/}" "$t"
done
# The sanitizer build runs the unit tests and the small end-to-end run; the
# reference checks and the full demo compare figures, which the plain build
# already covers.
if [ "$SAN" = 1 ]; then
    run_one tests/e2e/test_smoke.sh sh tests/e2e/test_smoke.sh
    echo
    [ -n "$failed" ] && echo "failed:$failed"
    echo "check: $pass passed, $fail failed, $skip skipped"
    [ "$fail" = 0 ]
    exit $?
fi
for s in tests/ref/test_*.py; do
    [ -e "$s" ] || continue
    run_one "$s" "$PYTHON" "$s"
done
for s in tests/e2e/test_*.sh; do
    [ -e "$s" ] || continue
    run_one "$s" sh "$s"
done
# The operator screen once more through a real X server (Xvfb), beside the
# offscreen driver the unit test uses alone.
if command -v xvfb-run >/dev/null 2>&1; then
    run_one tests/station/test_screen-xvfb xvfb-run -a env SCREEN_TEST_DRIVER=x11 \
        "$BUILD/tests/station/test_screen"
fi
echo
[ -n "$failed" ] && echo "failed:$failed"
echo "check: $pass passed, $fail failed, $skip skipped"
[ "$fail" = 0 ]
