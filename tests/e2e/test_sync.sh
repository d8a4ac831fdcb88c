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
# - a station id that is not one folder name (../esc) and a central database
#   as --log are refused before anything is written;
# - two syncs of one station at once: their forwarded counts sum to the log;
# - a record altered in a local log after it was forwarded is refused (exit
#   5) naming station and record: in the middle, rehashed, by the default
#   recheck; the last one under --quick by the server (the re-sent anchor);
#   one not yet forwarded, rehashed, by the client's link check;
# - the central purges not those of the local log (one fewer, one renamed);
# - the server's own triggers refuse a broken link, a changed copy, a gap,
#   evidence for a held record, UPDATE, DELETE, TRUNCATE and a station row's
#   key changed, from a client that is not the station (psycopg2);
# - another log forwarded under a held station id is refused by its key;
# - a station forwards under a role that may only read, insert and set its
#   own line and key (the roles README.md advises);
# - station run --sync-to forwards in the background, the server down at
#   first, and inspection goes on meanwhile; with the server stalled
#   (SIGSTOP) in the middle, station run still quits within 10 s of its last
#   inspection; a forwarded record altered in its log is reported refused,
#   not as a server not reached.
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
trap pgcluster_cleanup EXIT
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

# a station id is a folder of the evidence copies: it must stay one name
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/B.db" --station ../esc --evidence-to "$out/share" \
    >/dev/null 2>"$out/esc.log"
rc1=$?
"$S" sync --to "$PGCLUSTER_URI" --log "$PGCLUSTER_URI" >/dev/null 2>"$out/logpg.log"
rc2=$?
"$S" run recipes/ostrel-cap38.ini --sync-line line-9 --headless >/dev/null 2>"$out/syncline.log"
rc3=$?
set -e
[ "$rc1" = 4 ] && grep -q "'../esc': a station id is" "$out/esc.log" ||
    fail "--station ../esc: exit $rc1: $(cat "$out/esc.log")"
[ ! -e "$out/esc" ] || fail "--station ../esc wrote outside the shared folder"
[ "$(pgcluster_psql "SELECT to_regclass('records') IS NULL")" = t ] ||
    fail "a refused station id touched the central database"
[ "$rc2" = 4 ] && grep -q "the central database is --to" "$out/logpg.log" ||
    fail "--log CONNINFO: exit $rc2: $(cat "$out/logpg.log")"
[ "$rc3" = 4 ] && grep -q "need --sync-to" "$out/syncline.log" ||
    fail "--sync-line without --sync-to: exit $rc3: $(cat "$out/syncline.log")"
echo "ok   --station ../esc, a database as --log and --sync-line without --sync-to are refused"

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

# two syncs of one station at once: the second waits on the station's row,
# then sees what the first committed; each counts what it inserted
"$FILL" "$out/D.db" 2000 14 --station bench-D --verify-every 50 >/dev/null
"$S" sync --to "$PGCLUSTER_URI" --log "$out/D.db" --batch 50 --json >"$out/D1.json" 2>"$out/D1.log" &
pd1=$!
"$S" sync --to "$PGCLUSTER_URI" --log "$out/D.db" --batch 50 --json >"$out/D2.json" 2>"$out/D2.log" &
pd2=$!
wait "$pd1" || fail "first sync of D: $(cat "$out/D1.log")"
wait "$pd2" || fail "second sync of D: $(cat "$out/D2.log")"
sums=$("$PYTHON" -c 'import json, sys
a, b = (json.load(open(f)) for f in sys.argv[1:])
print(" ".join("%d" % (a[k]["forwarded"] + b[k]["forwarded"])
               for k in ("records", "dispositions", "verifications")))' "$out/D1.json" "$out/D2.json")
want="$(sq "$out/D.db" 'SELECT count(*) FROM records') $(sq "$out/D.db" 'SELECT count(*) FROM dispositions') $(sq "$out/D.db" 'SELECT count(*) FROM verifications')"
[ "$sums" = "$want" ] || fail "two syncs of D forwarded $sums (records dispositions verifications), the log holds $want"
$CHECK compare "$PGCLUSTER_URI" bench-D "$out/D.db" || fail "central copy of D"
echo "ok   two syncs of one station at once: forwarded counts sum to the log ($sums)"

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

# a forwarded record altered in the local log: the last one, rehashed, under
# --quick (only the anchor is checked: the server refuses it)
last=$(sq "$out/C.db" 'SELECT max(seq) FROM records')
held_hash=$(pgcluster_psql "SELECT hash FROM records WHERE station = 'bench-C' AND seq = $last")
cp "$out/C.db" "$out/C0.db"
$CHECK tamper "$out/C.db" "$last" rehash >/dev/null
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" --quick >"$out/alt.json" 2>"$out/alt.log"
rc=$?
set -e
[ "$rc" = 5 ] || fail "sync --quick of an altered log: exit $rc, want 5: $(cat "$out/alt.log")"
grep -q "station bench-C record $last differs from the central copy (held $held_hash" \
    "$out/alt.log" || fail "the server's refusal: $(cat "$out/alt.log")"
[ "$(pgcluster_psql "SELECT hash FROM records WHERE station = 'bench-C' AND seq = $last")" = \
    "$held_hash" ] || fail "the central copy changed"
echo "ok   the last forwarded record altered (hash recomputed) is refused by the server:" \
    "$(grep -o "station bench-C record $last differs[^(]*" "$out/alt.log")"
# one in the middle, rehashed: a plain sync rechecks every held link
cp "$out/C0.db" "$out/C.db"
mid_hash=$(pgcluster_psql "SELECT hash FROM records WHERE station = 'bench-C' AND seq = 123")
$CHECK tamper "$out/C.db" 123 rehash >/dev/null
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" >"$out/re.json" 2>"$out/re.log"
rc=$?
set -e
[ "$rc" = 5 ] || fail "sync of a log altered in the middle: exit $rc, want 5: $(cat "$out/re.log")"
grep -q "station bench-C record 123 differs from the central copy (held $mid_hash, local " \
    "$out/re.log" || fail "the recheck: $(cat "$out/re.log")"
echo "ok   a plain sync finds a forwarded record altered and rehashed in the middle (record 123)"
# one not forwarded yet, rehashed: its successor no longer links to it
"$FILL" "$out/C.db" 20 15 --station bench-C >/dev/null
$CHECK tamper "$out/C.db" $((last + 5)) rehash >/dev/null
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" --quick >"$out/link.json" 2>"$out/link.log"
rc=$?
set -e
[ "$rc" = 5 ] || fail "sync of a log with a broken link: exit $rc, want 5: $(cat "$out/link.log")"
grep -q "station bench-C: LOG .*: record $((last + 6)) does not link to record $((last + 5))" \
    "$out/link.log" || fail "the client's link check: $(cat "$out/link.log")"
[ "$(pgcluster_psql "SELECT max(seq) FROM records WHERE station = 'bench-C'")" = "$last" ] ||
    fail "records after the broken link were forwarded"
echo "ok   a record rehashed before forwarding is refused by the client: its successor does not link"

# the central purges are B's first ones: one fewer locally, or another name, is refused
cp "$out/B.db" "$out/Bx.db"
$CHECK unpurge "$out/Bx.db"
set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/Bx.db" >/dev/null 2>"$out/unpurge.log"
rc=$?
set -e
[ "$rc" = 5 ] && grep -q "but not the local log's purge" "$out/unpurge.log" ||
    fail "a renamed purge: exit $rc: $(cat "$out/unpurge.log")"
echo "ok   a local log whose last purge differs from the central one is refused"

$CHECK bypass "$PGCLUSTER_URI" bench-A || fail "server-side enforcement"
echo "ok   the server refuses a broken link, a changed copy, a gap, late evidence, UPDATE, DELETE," \
    "TRUNCATE and a station row's key changed, from psycopg2"

set +e
"$S" sync --to "$PGCLUSTER_URI" --log "$out/C.db" --station bench-A >/dev/null 2>"$out/key.log"
rc=$?
set -e
[ "$rc" = 5 ] || fail "another log as bench-A: exit $rc, want 5"
grep -q "station bench-A is held with another signing key" "$out/key.log" ||
    fail "another log as bench-A: $(cat "$out/key.log")"
echo "ok   another station's log forwarded as bench-A is refused (another signing key)"

# the roles README.md advises: the schema's owner creates it, a station may
# only read, insert, and set its own line and key
# (the password through psql's stdin and the PGPASSFILE, never a command line)
pw=$(head -n 1 "$PGPASSFILE" | cut -d: -f5)
printf '*:%s:*:station_fwd:%s\n' "$PGCLUSTER_PORT" "$pw" >>"$PGPASSFILE"
printf "CREATE ROLE station_fwd LOGIN PASSWORD '%s';
GRANT SELECT, INSERT ON ALL TABLES IN SCHEMA public TO station_fwd;
GRANT UPDATE (line, public_key, signed_from_record, signed_from_disposition,
              signed_from_verification, statement_sig) ON stations TO station_fwd;\n" "$pw" |
    "$PGCLUSTER_BIN/psql" -X -q -v ON_ERROR_STOP=1 "$PGCLUSTER_CONNINFO" -f - >/dev/null ||
    fail "cannot create the role station_fwd"
unset pw
"$FILL" "$out/E.db" 200 16 --station bench-E >/dev/null
"$S" sync --to "$PGCLUSTER_CONNINFO user=station_fwd" --log "$out/E.db" --line line-2 \
    >/dev/null 2>"$out/role.log" || fail "sync as station_fwd: $(cat "$out/role.log")"
"$S" sync --to "$PGCLUSTER_CONNINFO user=station_fwd" --log "$out/E.db" --line line-3 \
    >/dev/null 2>"$out/role2.log" || fail "second sync as station_fwd: $(cat "$out/role2.log")"
$CHECK compare "$PGCLUSTER_URI" bench-E "$out/E.db" >/dev/null || fail "central copy of E"
set +e
"$PGCLUSTER_BIN/psql" -X -q -At "$PGCLUSTER_CONNINFO user=station_fwd" \
    -c "UPDATE stations SET log_schema = 1" >/dev/null 2>"$out/role3.log"
rc=$?
set -e
[ "$rc" != 0 ] && grep -q "permission denied" "$out/role3.log" ||
    fail "station_fwd may change a station's schema: $(cat "$out/role3.log")"
echo "ok   a station forwards under a role with SELECT, INSERT and UPDATE of its line and key only"

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
grep -q '"event":"sync_failed",.*"refused":false,"retry_s"' "$out/run.jsonl" ||
    fail "a server down is not told from a refusal: $(grep sync_failed "$out/run.jsonl" | head -n 1)"
echo "ok   station run --sync-to: 30 inspections while the server was down, forwarded in the" \
    "background once it was up ($(grep -c '"event":"sync_failed"' "$out/run.jsonl") failed tries)"

# the server stalled in the middle (its processes stopped, as a network gone
# silent looks): inspection goes on and quitting is bounded
"$S" run "$recipe" --headless --source "replay:$images" --loop --trigger continuous --fps 5 \
    --inspections 20 --log "$out/live.db" --station bench-L --sync-to "$PGCLUSTER_URI" \
    --sync-every 0.2 </dev/null >"$out/stall.jsonl" 2>"$out/stall.log" &
prun=$!
i=0
until grep -q '"event":"synced"' "$out/stall.jsonl" 2>/dev/null; do
    i=$((i + 1))
    [ "$i" -lt 300 ] || fail "no synced event before the stall: $(tail -n 3 "$out/stall.log")"
    sleep 0.05
done
pgcluster_pause
# the bound counts from the last inspection: the inspections' own pace is
# not the point (and slow under the sanitizers)
i=0
while [ "$(grep -c '"log_seq"' "$out/stall.jsonl")" -lt 20 ] && kill -0 "$prun" 2>/dev/null &&
    [ "$i" -lt 1200 ]; do
    i=$((i + 1))
    sleep 0.1
done
t0=$(date +%s)
i=0
while kill -0 "$prun" 2>/dev/null && [ "$i" -lt 600 ]; do
    i=$((i + 1))
    sleep 0.1
done
t=$(($(date +%s) - t0))
if kill -0 "$prun" 2>/dev/null; then
    kill "$prun"
    pgcluster_continue
    fail "station run did not quit within 60 s of its last inspection, the server stalled"
fi
pgcluster_continue
set +e
wait "$prun"
rc=$?
set -e
[ "$rc" -le 2 ] || fail "station run with the server stalled: exit $rc: $(tail -n 3 "$out/stall.log")"
n=$(grep -c '"log_seq"' "$out/stall.jsonl")
[ "$n" = 20 ] || fail "$n inspections with the server stalled, want 20"
[ "$t" -le 10 ] || fail "station run took $t s after its last inspection to quit, the server stalled"
echo "ok   the server stalled mid-run: station run did its 20 inspections and quit $t s after the last"

# a refusal is told from a server not reached: the live log altered after
# it was forwarded, the forwarder's first sync rechecks and is refused
$CHECK tamper "$out/live.db" 7 rehash >/dev/null
"$S" run "$recipe" --headless --source "replay:$images" --loop --trigger continuous --fps 5 \
    --inspections 10 --log "$out/live.db" --station bench-L --sync-to "$PGCLUSTER_URI" \
    --sync-every 0.5 </dev/null >"$out/refused.jsonl" 2>"$out/refused.log" ||
    [ $? -le 2 ] || fail "station run with a refused log: $(tail -n 3 "$out/refused.log")"
grep -q '"event":"sync_failed",.*station bench-L record 7 differs from the central copy.*"refused":true' \
    "$out/refused.jsonl" || fail "no refused sync_failed event: $(grep event "$out/refused.jsonl" | head -n 2)"
echo "ok   station run --sync-to with a forwarded record altered: sync_failed says refused, record 7"
