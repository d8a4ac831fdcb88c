#!/bin/sh
# The signed log end to end: station inspect makes the key (0600) beside the
# log; PyNaCl (check_sign.py) verifies every signature with the public key it
# derives from the key file itself; `audit verify` prints that key and
# passes with it given (as hex and as a file), fails with another key and on
# a copy rewritten wholesale with another key (hashes recomputed, a FAIL
# turned PASS), naming record 1; a key file others may read is refused; the
# audit report shows the key.
set -eu
BUILD=${STATION_BUILD:-build}
PYTHON=${STATION_PYTHON:-/usr/bin/python3}
. tests/e2e/log_fixture.sh
out="$BUILD/e2e-log-sign"
fresh
S="$BUILD/station"
db="$out/log/station.db"
fail() { echo "FAIL $*"; exit 1; }
set +e
"$S" inspect "$recipe" "$images"/*.png --log "$db" >"$out/inspect.jsonl" 2>"$out/inspect.log"
rc=$?
set -e
[ "$rc" -le 2 ] || fail "inspect exit $rc: $(tail -n 3 "$out/inspect.log")"
grep -q '"verdict":"FAIL"' "$out/inspect.jsonl" || fail "the fixture gave no FAIL to rewrite"
[ "$(stat -c %a "$db.key")" = 600 ] || fail "key file mode $(stat -c %a "$db.key"), want 600"
pk=$("$PYTHON" tests/e2e/check_sign.py check "$db" "$db.key") || fail "PyNaCl check: $pk"
echo "ok   PyNaCl verifies every signature with the key derived from the key file ($pk)"

"$S" audit verify --log "$db" >"$out/v.json" 2>"$out/v.log" || fail "verify: $(cat "$out/v.log")"
grep -q "public key $pk (as stored in the log)" "$out/v.log" || fail "key not printed: $(cat "$out/v.log")"
grep -q "\"public_key\":\"$pk\"" "$out/v.json" || fail "key not in the JSON: $(cat "$out/v.json")"
"$S" audit verify --log "$db" --public-key "$pk" >/dev/null 2>"$out/v.log" ||
    fail "verify with the key: $(cat "$out/v.log")"
echo "  $pk  " >"$out/station.pub"
"$S" audit verify --log "$db" --public-key "$out/station.pub" >/dev/null 2>"$out/v.log" ||
    fail "verify with the key file: $(cat "$out/v.log")"
echo "ok   audit verify prints the key and passes with it given as hex and as a file"

other=$("$PYTHON" tests/e2e/check_sign.py otherkey)
set +e
"$S" audit verify --log "$db" --public-key "$other" >"$out/w.json" 2>"$out/w.log"
rc=$?
set -e
[ "$rc" = 1 ] || fail "verify with another key exit $rc, want 1"
grep -q '"chain":"record","seq":1' "$out/w.json" || fail "wrong key: $(cat "$out/w.json")"
echo "ok   another public key fails at record 1: $(head -n 1 "$out/w.log" | cut -c1-120)"

mkdir -p "$out/copy"
cp "$db" "$out/copy/station.db"
cp -r "$out/log/evidence" "$out/copy/"
forged=$("$PYTHON" tests/e2e/check_sign.py forge "$out/copy/station.db")
"$S" audit verify --log "$out/copy/station.db" >/dev/null 2>"$out/f.log" ||
    fail "the forged copy should agree with itself: $(cat "$out/f.log")"
set +e
"$S" audit verify --log "$out/copy/station.db" --public-key "$pk" >"$out/f.json" 2>"$out/f.log"
rc=$?
set -e
[ "$rc" = 1 ] || fail "forged copy against the station's key exit $rc, want 1"
grep -q '"chain":"record","seq":1' "$out/f.json" || fail "forged: $(cat "$out/f.json")"
grep -q "signature does not verify" "$out/f.json" || fail "forged: $(cat "$out/f.json")"
echo "ok   a copy rewritten wholesale (FAIL made PASS, hashes recomputed, signed with $(echo "$forged" | cut -c1-16)...) fails against the station's key at record 1"

"$S" audit report --log "$db" --out "$out/report.html" 2>"$out/r.log" || fail "report: $(cat "$out/r.log")"
grep -q "$pk" "$out/report.html" || fail "the report does not show the public key"
echo "ok   the audit report shows the public key"

chmod 644 "$db.key"
set +e
"$S" inspect "$recipe" "$images/part-0004.png" --log "$db" >"$out/m.jsonl" 2>"$out/m.log"
rc=$?
set -e
[ "$rc" != 0 ] || fail "inspect with a readable key file succeeded"
grep -q "mode 0644" "$out/m.log" || fail "no mode message: $(cat "$out/m.log")"
grep -q "PASS" "$out/m.jsonl" && fail "a verdict shown with the key refused"
echo "ok   a key file others may read is refused (exit $rc): $(grep -m1 'mode 0644' "$out/m.log" | cut -c1-140)"
