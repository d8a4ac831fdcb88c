#!/bin/sh
# The audit verbs on the central database against the same verbs on a local
# log: one tests/tools/auditlog log of CENTRAL_RECORDS (default 10 000)
# records is forwarded by `station sync` under three station ids to a
# throwaway PostgreSQL cluster on a Unix socket (tests/e2e/pgcluster.sh),
# then `audit stats --json`, `audit verify` and `audit export` are timed on
# the local file, on one station of the central database and on all three.
# Median of CENTRAL_REPEAT (default 3) runs, wall time.  Figures, not a test.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
N=${CENTRAL_RECORDS:-10000}
REPEAT=${CENTRAL_REPEAT:-3}
. tests/e2e/pgcluster.sh
S="$BUILD/station"
out="$BUILD/bench-central"
rm -rf "$out"
mkdir -p "$out/pg"
pgcluster_start "$out/pg"
trap pgcluster_cleanup EXIT
log="$out/local.db"
echo "central bench: a local log of $N records, forwarded as three stations" >&2
"$BUILD/tests/tools/auditlog" "$log" "$N" 3 --station bench-1 --verify-every 100 >/dev/null
for s in bench-1 bench-2 bench-3; do
    "$S" sync --to "$PGCLUSTER_URI" --log "$log" --station "$s" --line line-1 >/dev/null 2>&1
done

# the median wall time of REPEAT runs of the command, in seconds
median() {
    for r in $(seq "$REPEAT"); do
        t0=$(date +%s.%N)
        "$@" >/dev/null 2>&1 || { echo "FAIL $*" >&2; exit 1; }
        t1=$(date +%s.%N)
        echo "$t0 $t1"
    done | "$PYTHON" -c 'import statistics, sys
print("%.3f" % statistics.median(float(b) - float(a) for a, b in (l.split() for l in sys.stdin)))'
}
row() {
    what=$1 records=$2
    shift 2
    s=$(median "$@")
    printf '%-40s %9s %9s %11s\n' "$what" "$records" "$s" \
        "$("$PYTHON" -c 'import sys; print(round(int(sys.argv[1]) / float(sys.argv[2])))' "$records" "$s")"
}

echo
echo "The audit verbs, local SQLite log against PostgreSQL $("$PGCLUSTER_BIN/postgres" --version |
    sed 's/^postgres (PostgreSQL) \([^ ]*\).*/\1/') over a Unix socket (median of $REPEAT)"
printf '%-40s %9s %9s %11s\n' "run" "records" "seconds" "records/s"
U="$PGCLUSTER_URI"
row "stats --json, local log" "$N" "$S" audit stats --log "$log" --json
row "stats --json, central, one station" "$N" "$S" audit stats --log "$U" --station bench-2 --json
row "stats --json, central, three stations" $((3 * N)) "$S" audit stats --log "$U" --json
row "verify, local log" "$N" "$S" audit verify --log "$log"
row "verify, central, one station" "$N" "$S" audit verify --log "$U" --station bench-2
row "verify, central, three stations" $((3 * N)) "$S" audit verify --log "$U"
row "export, local log" "$N" "$S" audit export --log "$log" --out "$out/l.csv"
row "export, central, three stations" $((3 * N)) "$S" audit export --log "$U" --out "$out/c.csv"
