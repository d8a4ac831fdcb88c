#!/bin/sh
# station sync against a real PostgreSQL server (tests/e2e/pgcluster.sh, a
# throwaway cluster on a Unix socket, password only in a PGPASSFILE):
# - a password in the URI or keyword string is refused, and never echoed;
# - three station processes forward at once; every central table equals its
#   local log row for row and the central chains recompute
#   (check_sync.py: psycopg2 and sqlite3, hashlib over the canonical form);
#   evidence copies hold their recorded SHA-256; a second sync sends nothing;
# - the server is killed in the middle of a sync: the sync fails saying so,
#   the central copy holds whole batches only, and after a restart the next
#   sync completes with nothing lost or doubled;
# - a record altered in a local log after it was forwarded is refused: by the
#   server, naming station and record, when its hash was recomputed (the
#   re-sent anchor), and by --recheck when only its content changed;
# - the server's own triggers refuse a broken link, a changed copy, a gap,
#   UPDATE and DELETE from a client that is not the station (psycopg2);
# - another log forwarded under a held station id is refused by its key;
# - station run --sync-to forwards in the background, the server down at
#   first, and inspection goes on meanwhile.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/pgcluster.sh
S="$BUILD/station"
FILL="$BUILD/tests/tools/auditlog"
out="$BUILD/e2e-sync"
rm -rf "$out"
mkdir -p "$out/pg" "$out/share"
fail() { echo "FAIL $*"; exit 1; }
pgcluster_start "$out/pg"
trap pgcluster_stop EXIT
CHECK="$PYTHON tests/e2e/check_sync.py"
# one value from a local log, through Python's sqlite3
sq() { "$PYTHON" -c 'import sqlite3, sys; print(sqlite3.connect(sys.argv[1]).execute(sys.argv[2]).fetchone()[0])' "$@"; }

# three local logs; B keeps evidence under a budget, so it has purges
"$FILL" "$out/A.db" 700 11 --station bench-A --verify-every 60 >/dev/null
"$FILL" "$out/B.db" 300 12 --station bench-B --evidence --budget-kib 4000 --verify-every 40 \
    >/dev/null
"$FILL" "$out/C.db" 500 13 --station bench-C >/dev/null
[ "$(sq "$out/B.db" 'SELECT count(*) FROM evidence_purged')" -gt 0 ] ||
    fail "the fixture log B has no purges to forward"

# credentials never on the command line
pwuri=$(printf '%s' "$PGCLUSTER_URI" | sed 's|://station_test@|://station_test:hunter2secret@|')
set +e
"$S" sync --to "$pwuri" --log "$out/A.db" >"$out/pw.out" 2>"$out/pw.log"
rc1=$?
"$S" sync --to "$PGCLUSTER_CONNINFO password=hunter2secret" --log "$out/A.db" >>"$out/pw.out" \
    2>>"$out/pw.log"
rc2=$?
set -e
[ "$rc1" = 4 ] && [ "$rc2" = 4 ] || fail "a password on the command line: exit $rc1 and $rc2, want 4"
[ "$(grep -c 'carries a password' "$out/pw.log")" = 2 ] || fail "no refusal: $(cat "$out/pw.log")"
grep -q PGPASSFILE "$out/pw.log" || fail "the refusal does not say where passwords go"
! grep -q hunter2secret "$out/pw.log" "$out/pw.out" || fail "the password was echoed"
[ "$(pgcluster_psql "SELECT to_regclass('records') IS NULL")" = t ] ||
    fail "a refused sync touched the central database"
echo "ok   a password in the URI or the keyword string is refused and not echoed"

# three stations at once, small batches so their transactions interleave
"$S" sync --to "$PGCLUSTER_URI" --log "$out/A.db" --line line-1 --batch 50 --json \
    >"$out/A.json" 2>"$out/A.log" &
pa=$!
"$S" sync --to "$PGCLUSTER_URI" --log "$out/B.db" --line line-1 --batch 50 --json \
    --evidence-to "$out/share" >"$out/B.json" 2>"$out/B.log" &
pb=$!
"$S" sync --to "$PGCLUSTER_CONNINFO" --log "$out/C.db" --line line-2 --batch 50 --json \
    >"$out/C.json" 2>"$out/C.log" &
pc=$!
for p in "$pa:A" "$pb:B" "$pc:C"; do
    wait "${p%%:*}" || fail "sync of ${p#*:}: $(cat "$out/${p#*:}.log")"
done
for x in A B C; do
    $CHECK compare "$PGCLUSTER_URI" "bench-$x" "$out/$x.db" || fail "central copy of $x"
done
grep -q '"records":{"local":700,"held_before":0,"forwarded":700,"behind":700}' "$out/A.json" ||
    fail "A's report: $(cat "$out/A.json")"
grep -q 'records       forwarded 700; the central copy was 700 behind' "$out/A.log" ||
    fail "A's text: $(cat "$out/A.log")"
[ "$(pgcluster_psql "SELECT string_agg(station || '=' || line, ',' ORDER BY station) FROM stations")" \
    = "bench-A=line-1,bench-B=line-1,bench-C=line-2" ] || fail "station rows"
[ "$(pgcluster_psql "SELECT public_key FROM stations WHERE station = 'bench-A'")" = \
    "$(sq "$out/A.db" "SELECT value FROM meta WHERE key = 'public_key'")" ] ||
    fail "A's public key not held"
ncopied=$($CHECK evidence "$PGCLUSTER_URI" bench-B "$out/share") || fail "evidence copies: $ncopied"
# both back-ends' log_purges_get give the same purges (the central one sorted by time, record, name)
"$BUILD/tests/tools/logpurges" "$out/B.db" | LC_ALL=C sort -k3,3 -k2,2n -k1,1 >"$out/purges.local" &&
    "$BUILD/tests/tools/logpurges" "$PGCLUSTER_URI" bench-B >"$out/purges.central" ||
    fail "logpurges"
[ -s "$out/purges.local" ] && cmp -s "$out/purges.local" "$out/purges.central" ||
    fail "central purges differ from B's: $(diff "$out/purges.local" "$out/purges.central" | head -3)"
echo "ok   three stations forwarded at once: central rows equal each local log, chains recompute," \
    "$ncopied evidence copies hold their SHA-256"

"$S" sync --to "$PGCLUSTER_URI" --log "$out/A.db" --json >"$out/A2.json" 2>"$out/A2.log"
grep -q '"records":{"local":700,"held_before":700,"forwarded":0,"behind":0}' "$out/A2.json" ||
    fail "a second sync: $(cat "$out/A2.json")"
echo "ok   a second sync forwards nothing"

# the server killed in the middle of a sync
"$FILL" "$out/A.db" 4000 21 --station bench-A --verify-every 60 >/dev/null
"$S" sync --to "$PGCLUSTER_URI" --log "$out/A.db" --batch 5 >"$out/cut.json" 2>"$out/cut.log" &
pcut=$!
i=0
while [ "$(pgcluster_psql "SELECT count(*) FROM records WHERE station = 'bench-A'")" -lt 900 ]; do
    i=$((i + 1))
    [ "$i" -lt 300 ] || fail "the sync to be cut never got going: $(cat "$out/cut.log")"
    sleep 0.05
done
pgcluster_kill
set +e
wait "$pcut"
rc=$?
set -e
[ "$rc" = 3 ] || fail "the cut sync: exit $rc, want 3: $(cat "$out/cut.log")"
grep -q 'central database' "$out/cut.log" || fail "the cut is not reported: $(cat "$out/cut.log")"
pgcluster_resume
held=$(pgcluster_psql "SELECT count(*) FROM records WHERE station = 'bench-A'")
[ "$held" -lt 4700 ] || fail "the cut came after the sync ended ($held records held)"
[ $(((held - 700) % 5)) = 0 ] || fail "$held records held after the cut: not whole batches of 5"
"$S" sync --to "$PGCLUSTER_URI" --log "$out/A.db" --json >"$out/resume.json" 2>"$out/resume.log" ||
    fail "sync after the restart: $(cat "$out/resume.log")"
grep -q "\"records\":{\"local\":4700,\"held_before\":$held,\"forwarded\":$((4700 - held))," \
    "$out/resume.json" || fail "the resumed sync: $(cat "$out/resume.json")"
$CHECK compare "$PGCLUSTER_URI" bench-A "$out/A.db" || fail "central copy of A after the cut"
echo "ok   server killed mid-sync at $held of 4700 records (whole batches only); after the" \
    "restart nothing is lost or doubled"

# a forwarded record altered in the local log
last=$(sq "$out/C.db" 'SELECT max(seq) FROM records')
held_hash=$(pgcluster_psql "SELECT hash FROM records WHERE station = 'bench-C' AND seq = $last")
$CHECK tamper "$out/C.db" "$last" rehash >/dev/null
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" >"$out/alt.json" 2>"$out/alt.log"
rc=$?
set -e
[ "$rc" = 3 ] || fail "sync of an altered log: exit $rc, want 3"
grep -q "station bench-C record $last differs from the central copy (held $held_hash" \
    "$out/alt.log" || fail "the server's refusal: $(cat "$out/alt.log")"
[ "$(pgcluster_psql "SELECT hash FROM records WHERE station = 'bench-C' AND seq = $last")" = \
    "$held_hash" ] || fail "the central copy changed"
echo "ok   a forwarded record altered (hash recomputed) is refused by the server:" \
    "$(grep -o "station bench-C record $last differs[^(]*" "$out/alt.log")"
$CHECK tamper "$out/C.db" 123 content >/dev/null
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" --recheck >"$out/re.json" 2>"$out/re.log"
rc=$?
set -e
[ "$rc" = 3 ] || fail "--recheck of an altered log: exit $rc, want 3"
grep -q "station bench-C: LOG .*: record 123 does not match its hash" "$out/re.log" ||
    fail "--recheck: $(cat "$out/re.log")"
echo "ok   --recheck finds a forwarded record altered in the middle (record 123)"

$CHECK bypass "$PGCLUSTER_URI" bench-A || fail "server-side enforcement"
echo "ok   the server refuses a broken link, a changed copy, a gap, UPDATE and DELETE from psycopg2"

set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" --station bench-A >/dev/null 2>"$out/key.log"
rc=$?
set -e
[ "$rc" = 3 ] || fail "another log as bench-A: exit $rc, want 3"
grep -q "station bench-A is held with another signing key" "$out/key.log" ||
    fail "another log as bench-A: $(cat "$out/key.log")"
echo "ok   another station's log forwarded as bench-A is refused (another signing key)"

# the live station forwarding in the background: the server down at first
# (sync_failed, inspection goes on), then up (synced)
base="$out"
out="$base/live"
. tests/e2e/log_fixture.sh
fresh
pgcluster_stop
"$S" run "$recipe" --headless --source "replay:$images" --loop --trigger continuous --fps 5 \
    --inspections 30 --log "$out/live.db" --station bench-L --sync-to "$PGCLUSTER_URI" \
    --sync-every 0.5 --sync-line line-3 </dev/null >"$out/run.jsonl" 2>"$out/run.log" &
prun=$!
i=0
until grep -q '"event":"sync_failed"' "$out/run.jsonl" 2>/dev/null; do
    i=$((i + 1))
    [ "$i" -lt 200 ] || fail "no sync_failed event with the server down: $(tail -n 3 "$out/run.log")"
    sleep 0.05
done
pgcluster_resume
set +e
wait "$prun"
rc=$?
set -e
[ "$rc" -le 2 ] || fail "station run with --sync-to: exit $rc: $(tail -n 3 "$out/run.log")"
n=$(grep -c '"log_seq"' "$out/run.jsonl")
[ "$n" = 30 ] || fail "$n inspections with the forwarding failing, want 30"
grep -q '"event":"synced","records":[1-9]' "$out/run.jsonl" ||
    fail "no synced event once the server was up: $(grep event "$out/run.jsonl" | tail -n 3)"
"$S" sync --to "$PGCLUSTER_URI" --log "$out/live.db" --station bench-L >/dev/null 2>"$out/final.log" ||
    fail "final sync: $(cat "$out/final.log")"
$CHECK compare "$PGCLUSTER_URI" bench-L "$out/live.db" || fail "central copy of the live log"
[ "$(pgcluster_psql "SELECT line FROM stations WHERE station = 'bench-L'")" = line-3 ] ||
    fail "the live station's line"
echo "ok   station run --sync-to: 30 inspections while the server was down, forwarded in the" \
    "background once it was up ($(grep -c '"event":"sync_failed"' "$out/run.jsonl") failed tries)"
