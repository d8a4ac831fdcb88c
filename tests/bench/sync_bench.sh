#!/bin/sh
# Forwarding to the central database (station sync): records per second by
# batch size, and the catch-up time of a station that was offline for
# SYNC_OFFLINE (default 10 000) inspections, against a throwaway PostgreSQL
# cluster on a Unix socket (tests/e2e/pgcluster.sh).  The local log is
# tests/tools/auditlog's mix (70% PASS, 22% FAIL, 8% NO VERDICT, reasons
# JSON, two thirds of the rejects disposed, a verification every 100
# records, a frame and an overlay PNG for every reject).  One log is
# forwarded under several station ids, so each figure starts from an empty
# central chain.  Every sync but --quick first rechecks each held link (the
# catch-up's 1000 held, the whole log's none).  Figures, not a test.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
OFFLINE=${SYNC_OFFLINE:-10000}
ONLINE=${SYNC_ONLINE:-1000}
REPEAT=${SYNC_REPEAT:-3}
. tests/e2e/pgcluster.sh
S="$BUILD/station"
out="$BUILD/bench-sync"
rm -rf "$out"
mkdir -p "$out/pg" "$out/share"
pgcluster_start "$out/pg"
trap pgcluster_cleanup EXIT
log="$out/local.db"
field() { "$PYTHON" -c 'import json, sys; o = json.loads(sys.stdin.readline()); print(eval(sys.argv[1], {}, o))' "$1"; }

echo "sync bench: $ONLINE records forwarded while online" >&2
"$BUILD/tests/tools/auditlog" "$log" "$ONLINE" 1 --station bench-S --evidence --verify-every 100 \
    >/dev/null
for r in $(seq "$REPEAT"); do
    "$S" sync --to "$PGCLUSTER_URI" --log "$log" --station "offline-$r" --json >/dev/null 2>&1
done
echo "sync bench: $OFFLINE inspections while offline" >&2
"$BUILD/tests/tools/auditlog" "$log" "$OFFLINE" 2 --station bench-S --evidence --verify-every 100 \
    >/dev/null

echo
echo "Forwarding to PostgreSQL $("$PGCLUSTER_BIN/postgres" --version | sed 's/^postgres (PostgreSQL) \([^ ]*\).*/\1/') over a Unix socket"
echo "(one log: $((ONLINE + OFFLINE)) records, reject evidence rows, dispositions, verifications)"
printf '%-44s %10s %10s %12s\n' "run" "records" "seconds" "records/s"
catch=""
for r in $(seq "$REPEAT"); do
    j=$("$S" sync --to "$PGCLUSTER_URI" --log "$log" --station "offline-$r" --json 2>/dev/null)
    n=$(echo "$j" | field 'records["forwarded"]')
    s=$(echo "$j" | field 'round(seconds, 2)')
    printf '%-44s %10s %10s %12s\n' "catch-up after $OFFLINE offline, try $r" "$n" "$s" \
        "$(echo "$j" | field 'round(records_per_s)')"
    catch="$catch $s"
done
for b in 50 500 2000; do
    j=$("$S" sync --to "$PGCLUSTER_URI" --log "$log" --station "batch-$b" --batch "$b" --json 2>/dev/null)
    printf '%-44s %10s %10s %12s\n' "whole log from empty, batch $b" \
        "$(echo "$j" | field 'records["forwarded"]')" "$(echo "$j" | field 'round(seconds, 2)')" \
        "$(echo "$j" | field 'round(records_per_s)')"
done
j=$("$S" sync --to "$PGCLUSTER_URI" --log "$log" --station copy --evidence-to "$out/share" --json \
    2>/dev/null)
printf '%-44s %10s %10s %12s\n' "whole log, evidence files copied ($(echo "$j" | field 'evidence_copied'))" \
    "$(echo "$j" | field 'records["forwarded"]')" "$(echo "$j" | field 'round(seconds, 2)')" \
    "$(echo "$j" | field 'round(records_per_s)')"
# a sync compares every held link with the local log first (the default)
j=$("$S" sync --to "$PGCLUSTER_URI" --log "$log" --station batch-500 --json 2>/dev/null)
printf '%-44s %10s %10s %12s\n' "nothing new: recheck of every held link" \
    "$(echo "$j" | field 'rechecked')" "$(echo "$j" | field 'round(seconds, 2)')" "-"
j=$("$S" sync --to "$PGCLUSTER_URI" --log "$log" --station batch-500 --quick --json 2>/dev/null)
printf '%-44s %10s %10s %12s\n' "nothing new, --quick (the last links only)" \
    "$(echo "$j" | field 'rechecked')" "$(echo "$j" | field 'round(seconds, 2)')" "-"
median=$(echo "$catch" | tr ' ' '\n' | sed '/^$/d' | sort -n | sed -n "$(((REPEAT + 1) / 2))p")
echo "catch-up of a station offline for $OFFLINE inspections: median $median s of $REPEAT"
