#!/bin/sh
# make soak: the live loop on the simulated bench, headless, for
# SOAK_INSPECTIONS inspections (default 100000; not part of make check).
#
# The recipe is the tiny demo's with its scale made 3x coarser, for
# 160x120 frames, and its tolerances opened ("none") so the bench's parts
# PASS: every inspection is logged, every 10th PASS keeps evidence, and the
# evidence budget (SOAK_BUDGET_MB, default 20) purges the oldest, so the
# disk never fills however long it runs (rejects' evidence is never purged
# until audited, so a reject-heavy soak would stop at its budget by design).
# Trigger auto at --fps 0: one inspection per part, as fast as inspected.
#
# Watched from outside through /proc/PID: RSS (VmRSS) and open file
# descriptors at the first inspection, every SOAK_EVERY inspections
# (default 10000) and at the end.  Fails when RSS at the end exceeds the
# RSS after warm-up (the first SOAK_EVERY) by more than SOAK_RSS_MARGIN_KB
# (default 8192: common practice for allocator noise, no source), when the
# descriptors at the end differ from those at the first inspection, or when
# a verdict is lost: the JSON lines with log_seq must number exactly the
# log's records, and `station audit verify` must pass.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
N=${SOAK_INSPECTIONS:-100000}
EVERY=${SOAK_EVERY:-10000}
MARGIN=${SOAK_RSS_MARGIN_KB:-8192}
BUDGET=${SOAK_BUDGET_MB:-20}
. tests/e2e/log_fixture.sh
out="$BUILD/soak"
rm -rf "$out"
mkdir -p "$out"
cp "$fixture"/ostrel-cap38.* "$out"/
recipe="$out/ostrel-cap38.ini"
sed -i '/^\[verification\]/,$d' "$recipe"
sed -i -E 's/^mm_per_px_(x|y) = .*/mm_per_px_\1 = 0.51/; s/^(max_[a-z_0-9]+) = .*/\1 = none/; /^grade = /d' \
    "$recipe"
printf '\n[evidence]\npass = every 10\n' >>"$recipe"
S="$BUILD/station"
args="--source bench:seed=7 --headless --trigger auto --fps 0 --size 160x120 --evidence-budget $BUDGET"
fail() { echo "FAIL soak: $*"; exit 1; }

# the rate, from a short run, for the estimate
t0=$(date +%s%N)
# shellcheck disable=SC2086
"$S" run "$recipe" $args --inspections 50 --log "$out/rate/log.db" </dev/null >/dev/null 2>&1 ||
    fail "the rate run failed"
t1=$(date +%s%N)
awk -v n="$N" -v ns=$((t1 - t0)) 'BEGIN { r = 50 / (ns / 1e9);
    printf "soak: %d inspections at about %.1f per second: expect about %.0f minutes\n", n, r, n / r / 60 }'

db="$out/log/station.db"
# shellcheck disable=SC2086
"$S" run "$recipe" $args --inspections "$N" --log "$db" </dev/null >"$out/out.jsonl" 2>"$out/err" &
pid=$!
probe() {
    rss=$(sed -n 's/^VmRSS:[[:space:]]*\([0-9]*\).*/\1/p' "/proc/$pid/status" 2>/dev/null || echo 0)
    fds=$(ls "/proc/$pid/fd" 2>/dev/null | wc -l)
}
done_n=0 next=1 rss0="" fds0="" rss_warm="" start=$(date +%s)
while kill -0 "$pid" 2>/dev/null; do
    sleep 2
    done_n=$(grep -c '"log_seq"' "$out/out.jsonl" || true)
    probe
    [ "$done_n" -gt 0 ] && [ -n "$rss" ] && [ "$rss" != 0 ] || continue
    last_rss=$rss last_fds=$fds
    if [ "$done_n" -ge "$next" ]; then
        printf 'soak: %7d inspections  %5d s  RSS %6d kB  fds %d\n' "$done_n" \
            $(($(date +%s) - start)) "$rss" "$fds"
        [ -n "$rss0" ] || { rss0=$rss; fds0=$fds; }
        [ "$next" -gt 1 ] && [ -z "$rss_warm" ] && rss_warm=$rss
        next=$((done_n / EVERY * EVERY + EVERY))
    fi
done
wait "$pid" || true
[ -n "$rss0" ] || fail "never saw the station run: $(tail -n 3 "$out/err")"
rss_warm=${rss_warm:-$rss0}
seen=$(grep -c '"log_seq"' "$out/out.jsonl" || true)
count_py='import sqlite3, sys
print(sqlite3.connect(sys.argv[1]).execute("SELECT count(*) FROM records").fetchone()[0])'
records=$("$PYTHON" -c "$count_py" "$db")
halts=$(grep -c '"event":"halted"' "$out/out.jsonl" || true)
printf 'soak: end: %d inspections shown with log_seq, %d records in the log, %d halts; RSS %d kB at the first inspection, %d kB after warm-up, %d kB at the last probe; fds %d -> %d\n' \
    "$seen" "$records" "$halts" "$rss0" "$rss_warm" "$last_rss" "$fds0" "$last_fds"
"$S" audit verify --log "$db" >"$out/verify.json" 2>"$out/verify.log" ||
    fail "audit verify: $(cat "$out/verify.log")"
echo "soak: $(tail -n 1 "$out/verify.log")"
[ "$seen" = "$N" ] || fail "$seen inspections recorded, asked for $N"
[ "$seen" = "$records" ] || fail "$seen verdicts shown with log_seq but $records records: a verdict lost"
[ "$last_fds" = "$fds0" ] || fail "open descriptors grew from $fds0 to $last_fds"
[ "$last_rss" -le $((rss_warm + MARGIN)) ] ||
    fail "RSS grew from $rss_warm kB after warm-up to $last_rss kB (margin $MARGIN kB)"
echo "ok   soak: $N inspections, RSS and descriptors flat, no verdict lost"
