#!/bin/sh
# The audit verbs on a small log, then what `audit verify` must catch: one
# byte changed in a record, in a disposition and in an evidence file (the
# attacker has file access: Python's sqlite3 drops the triggers first), a
# newer schema refused, an older one upgraded, UPDATE and DELETE refused.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-log-audit"
fresh
S="$BUILD/station"
db="$out/log/station.db"
fail() { echo "FAIL $*"; exit 1; }
sqlx() { "$PYTHON" -c 'import sqlite3,sys; c=sqlite3.connect(sys.argv[1]); c.executescript(sys.argv[2]); c.commit()' "$db" "$1"; }
expect_rc() { want=$1; shift; set +e; "$@" >"$out/last.out" 2>"$out/last.err"; rc=$?; set -e
    [ "$rc" = "$want" ] || { cat "$out/last.err"; fail "$* exit $rc, want $want"; }; }

expect_rc 1 "$S" inspect "$recipe" "$images"/*.png "$images"/*.png --log "$db" --station qa-2 \
    --operator op-9 --serial SN-77
n=$(wc -l <"$out/last.out")
[ "$n" = 6 ] || fail "inspect printed $n lines, want 6"
grep -q '"log_seq":6' "$out/last.out" || fail "the sixth verdict carries no log_seq 6"

expect_rc 0 "$S" audit list --log "$db" --json --rejects
rejects=$(wc -l <"$out/last.out")
[ "$rejects" -ge 2 ] || fail "only $rejects rejects listed"
r1=$(sed -n 1p "$out/last.out" | sed 's/^{"seq":\([0-9]*\),.*/\1/')
r2=$(sed -n 2p "$out/last.out" | sed 's/^{"seq":\([0-9]*\),.*/\1/')
grep -q '"station":"qa-2","operator":"op-9","serial":"SN-77"' "$out/last.out" || fail "ids not recorded"
expect_rc 0 "$S" audit show "$r1" --log "$db" --json
grep -q '"kind":"frame"' "$out/last.out" || fail "show names no frame evidence"
# --view without a display says so and still shows the record
set +e; env -u DISPLAY -u WAYLAND_DISPLAY "$S" audit show "$r1" --log "$db" --view >"$out/last.out" 2>"$out/last.err"; rc=$?; set -e
[ "$rc" = 0 ] && grep -q "no display" "$out/last.err" && grep -q "evidence" "$out/last.err" ||
    fail "show --view without a display: exit $rc, $(cat "$out/last.err")"
expect_rc 0 "$S" audit dispose "$r1" --log "$db" --auditor aud-1 --as false-reject --comment "light reflex"
expect_rc 0 "$S" audit dispose "$r2" --log "$db" --auditor aud-1 --as confirmed --comment "deep pit"
expect_rc 4 "$S" audit dispose 2 --log "$db" --as confirmed
expect_rc 4 "$S" audit dispose 2 --log "$db" --auditor aud-1 --as maybe
expect_rc 3 "$S" audit show 99 --log "$db"
grep -q "no record 99" "$out/last.err" || fail "show 99: $(cat "$out/last.err")"
expect_rc 0 "$S" audit list --log "$db" --json --disposition false-reject
[ "$(wc -l <"$out/last.out")" = 1 ] || fail "--disposition false-reject"
expect_rc 0 "$S" audit list --log "$db" --json --rejects --disposition none
[ "$(wc -l <"$out/last.out")" = $((rejects - 2)) ] || fail "--disposition none"
expect_rc 0 "$S" audit verify --log "$db"
"$PYTHON" -c 'import sys; sys.path.insert(0, "tests/e2e"); import logcheck; b = logcheck.problems(sys.argv[1]); assert not b, b' "$db"

# the frame evidence is the inspected file's pixels exactly (read back by PIL)
"$PYTHON" - "$db" "$images" <<'PY'
import glob, os, sqlite3, sys
import numpy as np
from PIL import Image
db, images = sys.argv[1:]
files = sorted(glob.glob(os.path.join(images, "*.png")))
con = sqlite3.connect(db)
rows = con.execute("SELECT record_seq, name FROM evidence WHERE kind = 'frame'").fetchall()
assert rows, "no frame evidence"
for seq, name in rows:
    got = np.asarray(Image.open(os.path.join(os.path.dirname(db), "evidence", name)).convert("RGB"))
    want = np.asarray(Image.open(files[(seq - 1) % len(files)]).convert("RGB"))
    assert got.shape == want.shape and (got == want).all(), "record %d: frame evidence differs" % seq
PY

# append-only: the triggers refuse
for stmt in "UPDATE records SET verdict = 'PASS'" "DELETE FROM records" \
    "UPDATE dispositions SET comment = ''" "DELETE FROM dispositions"; do
    if sqlx "$stmt" 2>"$out/sql.err"; then fail "'$stmt' was allowed"; fi
    grep -q "append-only" "$out/sql.err" || fail "'$stmt': $(cat "$out/sql.err")"
done

cp "$db" "$db.orig"
restore() { cp "$db.orig" "$db"; }
# one byte of a record in the middle
sqlx "DROP TRIGGER records_no_update; UPDATE records SET serial = 'SN-78' WHERE seq = 3"
expect_rc 1 "$S" audit verify --log "$db"
grep -q '"chain":"record","seq":3,"torn":false' "$out/last.out" || fail "record tamper: $(cat "$out/last.out")"
grep -q "damage or tampering in the middle" "$out/last.err" || fail "middle not told"
restore
# the last record: told apart as a break at the last link
sqlx "DROP TRIGGER records_no_update; UPDATE records SET reasons = '[]' WHERE seq = 6"
expect_rc 1 "$S" audit verify --log "$db"
grep -q '"chain":"record","seq":6,"torn":true' "$out/last.out" || fail "last-record break: $(cat "$out/last.out")"
restore
# one byte of a disposition
sqlx "DROP TRIGGER dispositions_no_update; UPDATE dispositions SET auditor = 'aud-2' WHERE dseq = 1"
expect_rc 1 "$S" audit verify --log "$db"
grep -q '"chain":"disposition","seq":1' "$out/last.out" || fail "disposition tamper: $(cat "$out/last.out")"
restore
expect_rc 0 "$S" audit verify --log "$db"
# one byte of an evidence file
ev=$(ls "$out"/log/evidence/*/$(printf %08d "$r2")-overlay.png)
cp "$ev" "$out/ev.orig"
printf 'Z' | dd of="$ev" bs=1 seek=100 conv=notrunc 2>/dev/null
expect_rc 1 "$S" audit verify --log "$db"
grep -q "\"chain\":\"evidence\",\"seq\":$r2" "$out/last.out" || fail "evidence tamper: $(cat "$out/last.out")"
grep -q "SHA-256" "$out/last.out" || fail "evidence tamper does not say what differs"
cp "$out/ev.orig" "$ev"
rm "$ev"
expect_rc 1 "$S" audit verify --log "$db"
grep -q "evidence file missing" "$out/last.out" || fail "missing evidence: $(cat "$out/last.out")"
cp "$out/ev.orig" "$ev"

# schema: newer refused by reader and writer, older upgraded step by step
sqlx "PRAGMA user_version = 7"
expect_rc 3 "$S" audit list --log "$db"
grep -q "log schema 7 is newer than this program's" "$out/last.err" || fail "newer: $(cat "$out/last.err")"
expect_rc 3 "$S" inspect "$recipe" "$images/part-0004.png" --log "$db"
restore
sqlx "DROP TRIGGER purged_no_update; DROP TRIGGER purged_no_delete; DROP TABLE evidence_purged; DROP TABLE verifications; DROP TABLE meta; ALTER TABLE records DROP COLUMN sig; ALTER TABLE dispositions DROP COLUMN sig; PRAGMA user_version = 1"
expect_rc 3 "$S" audit verify --log "$db"
grep -q "older" "$out/last.err" || fail "older, read-only: $(cat "$out/last.err")"
expect_rc 0 "$S" audit dispose 3 --log "$db" --auditor aud-1 --as rework
expect_rc 0 "$S" audit verify --log "$db"
"$PYTHON" -c 'import sqlite3,sys; c=sqlite3.connect(sys.argv[1]); v=c.execute("PRAGMA user_version").fetchone()[0]; assert v == 4, v; c.execute("SELECT count(*) FROM evidence_purged"); c.execute("SELECT count(*) FROM verifications"); c.execute("SELECT count(*) FROM meta")' "$db"
# an evidence budget with only unaudited rejects left: inspection stops
expect_rc 2 "$S" inspect "$recipe" "$images"/*.png "$images"/*.png --log "$out/budget/log.db" \
    --evidence-budget 1.5
grep -q "evidence budget full" "$out/last.err" || fail "budget: $(tail -2 "$out/last.err")"
grep -q "inspection stopped" "$out/last.err" || fail "budget: no stop"
tail -1 "$out/last.out" | grep -q '"verdict":"NO_VERDICT"' || fail "budget: last verdict not NO_VERDICT"
echo "ok   audit: list/show/dispose, append-only, tamper of a record, a disposition and an evidence file caught, schema newer refused and older upgraded, evidence budget full stops inspection"
