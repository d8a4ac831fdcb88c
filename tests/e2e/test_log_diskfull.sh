#!/bin/sh
# A full disk under the log: on a 3 MB tmpfs (mounted here, as root) the
# writer must report the failure as NO_VERDICT (rule log_failed), stop, show
# no PASS it could not record, and lose nothing committed before.  Checked
# with the independent reader logcheck.py and with `audit verify`.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
if [ "$(id -u)" != 0 ]; then
    echo "skipped: needs root (mounts a small tmpfs)"
    exit 0
fi
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-log-diskfull"
[ -d "$out/small" ] && umount "$out/small" 2>/dev/null || true
fresh
S="$BUILD/station"
small="$out/small"
mkdir -p "$small"
mount -t tmpfs -o size=3m tmpfs "$small"
trap 'umount "$small"' EXIT
db="$small/station.db"
fail() { echo "FAIL $*"; exit 1; }
# every PASS keeps evidence too, so the disk fills whatever the verdicts
printf '\n[evidence]\npass = all\n' >>"$recipe"
"$S" inspect "$recipe" "$images/part-0004.png" --log "$db" >"$out/first.jsonl" 2>"$out/first.log" || true
grep -q '"log_seq":1' "$out/first.jsonl" || fail "first record not committed: $(tail -2 "$out/first.log")"
set +e
"$S" inspect "$recipe" "$images"/*.png "$images"/*.png "$images"/*.png "$images"/*.png \
    --log "$db" >"$out/full.jsonl" 2>"$out/full.log"
rc=$?
set -e
[ "$rc" = 2 ] || fail "inspect on a full disk exit $rc, want 2 (NO_VERDICT)"
grep -q "inspection stopped" "$out/full.log" || fail "no stop message: $(tail -3 "$out/full.log")"
"$PYTHON" - "$db" "$out/first.jsonl" "$out/full.jsonl" <<'PY'
import json, sys
sys.path.insert(0, "tests/e2e")
import logcheck
db, first, full = sys.argv[1:]
lines = [json.loads(l) for f in (first, full) for l in open(f)]
last = lines[-1]
assert last["verdict"] == "NO_VERDICT", last["verdict"]
assert any(r["rule"] == "log_failed" for r in last["reasons"]), last["reasons"]
assert "log_seq" not in last
msg = [r for r in last["reasons"] if r["rule"] == "log_failed"][0]["message"]
assert "No space left on device" in msg or "full" in msg, msg
for o in lines[:-1]:
    assert "log_seq" in o, "a verdict before the failure was not recorded: %s" % o
committed = {o["log_seq"] for o in lines[:-1]}
assert len(committed) >= 2, committed
present = logcheck.seqs(db)
assert committed <= present, committed - present
bad = logcheck.problems(db, db.rsplit("/", 1)[0] + "/evidence")
assert not bad, bad
print("ok   disk full: %d records committed before the disk filled are all there and verify;"
      " the next verdict is NO_VERDICT (%s), and inspection stopped" % (len(committed), msg))
PY
"$S" audit verify --log "$db" >"$out/verify.json" 2>"$out/verify.log" || fail "audit verify on the full disk: $(cat "$out/verify.log")"
echo "ok   audit verify on the full disk: $(cat "$out/verify.log")"
