#!/bin/sh
# Injected faults on the log: the LD_PRELOAD shim tests/faultio fails the
# N-th write or sync to the log's folder (database, WAL, evidence), for every
# N from 1 to the number of such calls a clean run makes — `station inspect`
# of two of the fixture's parts (a FAIL with evidence, a PASS) onto a log
# that already holds one record,
# then `station run --headless` on the simulated bench.  After each run
# (check_faults.py, reading the log with Python's own sqlite3, hashlib and
# PyNaCl): PRAGMA integrity_check, chain and signatures intact, and
# `station audit verify` passes; no PASS shown without its record; every
# log_seq shown is in the log with the verdict shown; a failure the station
# saw ends the run with NO_VERDICT (log_failed) and exit status 2, or the
# "halted" event for station run.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
SHIM="$(pwd)/$BUILD/tests/faultio/libfaultio.so"
[ -f "$SHIM" ] || { echo "SKIP no $SHIM (make test-programs)"; exit 77; }
out="$BUILD/e2e-log-faults"
S="$BUILD/station"
if [ "${1:-}" = one ]; then
    # a run of the enumeration below, started by xargs: the fixture is made
    recipe="$out/ostrel-cap38.ini"
    images="$BUILD/e2e-log-fixture/test/images"
else
    . tests/e2e/log_fixture.sh
    fresh
    mkdir -p "$out/template/log"
    "$S" inspect "$recipe" "$images/part-0005.png" --log "$out/template/log/station.db" \
        >/dev/null 2>"$out/template.log" || { echo "FAIL template log"; exit 1; }
fi
# an ASan build wants its runtime first; the shim goes after it
export ASAN_OPTIONS="${ASAN_OPTIONS:-}:verify_asan_link_order=0"
fail() { echo "FAIL $*"; exit 1; }

# one run of KIND (inspect / run) with the N-th call failing (0: none) in $out/KIND-N
one() {
    kind=$1 n=$2 d="$runs/$1-$2"
    rm -rf "$d"
    cp -a "$out/template/." "$d"
    set -- FAULTIO_DIR="$(realpath "$d/log")" FAULTIO_AT="$n" FAULTIO_REPORT="$d/shim" LD_PRELOAD="$SHIM"
    set +e
    if [ "$kind" = inspect ]; then
        env "$@" "$S" inspect "$recipe" "$images/part-0004.png" "$images/part-0005.png" \
            --log "$d/log/station.db" \
            >"$d/out.jsonl" 2>"$d/err"
    else
        env "$@" "$S" run "$recipe" --source bench:seed=3 --headless --trigger auto --fps 0 \
            --inspections 1 --log "$d/log/station.db" </dev/null >"$d/out.jsonl" 2>"$d/err"
    fi
    echo $? >"$d/rc"
    "$S" audit verify --log "$d/log/station.db" >"$d/verify.json" 2>"$d/verify.err"
    echo $? >"$d/verify.rc"
    set -e
}
if [ "${1:-}" = one ]; then
    runs=$4
    one "$2" "$3"
    exit 0
fi
export STATION_BUILD="$BUILD"
# the runs' logs on a tmpfs when there is one: a real fsync per call would
# make the enumeration take minutes; what is checked is what each call's
# failure does, not the disk.  Kept when a check fails.
runs=$(mktemp -d "$([ -w /dev/shm ] && echo /dev/shm || echo "$out")/station-faults.XXXXXX")
for kind in inspect run; do
    one "$kind" 0
    calls=$(sed -n 's/^calls=//p' "$runs/$kind-0/shim")
    [ "${calls:-0}" -gt 0 ] || fail "$kind: the shim counted no calls"
    # two at a time: the runs are independent, each in its own folder
    # (a placeholder no mktemp name can hold: -I N also replaced an N in "$runs")
    seq 1 "$calls" | xargs -P 2 -I @N@ sh tests/e2e/test_log_faults.sh one "$kind" @N@ "$runs"
    echo "$kind: $calls calls in the clean run, each failed once"
done
"$PYTHON" tests/e2e/check_faults.py "$runs" || fail "kept for a look: $runs"
rm -rf "$runs"
