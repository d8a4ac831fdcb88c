"""The signed log checked and forged with PyNaCl (python3-nacl, libsodium's
Python binding), none of the station's code.

  check_sign.py check DB KEYFILE   the key file is libsodium's secret key
      (32-byte seed then the public key, libsodium documentation), the
      public key PyNaCl derives from the seed is the one the log stores, and
      every signed link verifies (logcheck.sig_problems); prints the key.
  check_sign.py forge DB           rewrites DB wholesale as someone without
      the key would: the first FAIL becomes PASS, every hash after it is
      recomputed (logcheck's canonical form), every link and the signing
      start are signed with a new key stored in the log; prints that key.
  check_sign.py otherkey           a fresh public key, hex."""
import hashlib
import sqlite3
import sys

import nacl.signing

sys.path.insert(0, "tests/e2e")
import logcheck  # noqa: E402


def check(db, keyfile):
    sk = open(keyfile, "rb").read()
    assert len(sk) == 64, len(sk)
    derived = nacl.signing.SigningKey(sk[:32]).verify_key.encode().hex()
    assert derived == sk[32:].hex(), "the key file's public half is not its seed's"
    con = logcheck.connect(db)
    stored, start, _ = logcheck.signing(con)
    assert stored == derived, (stored, derived)
    n = con.execute("SELECT count(*) FROM records WHERE sig IS NOT NULL").fetchone()[0]
    bad = logcheck.sig_problems(con, derived)
    assert not bad, bad
    assert n >= 1 and start["record"] == 1, (n, start)
    print(derived)


def forge(db):
    key = nacl.signing.SigningKey.generate()
    pk = key.verify_key.encode().hex()
    con = sqlite3.connect(db)
    con.row_factory = sqlite3.Row
    con.executescript("DROP TRIGGER records_no_update; DROP TRIGGER meta_no_update;")
    flip = con.execute("SELECT min(seq) FROM records WHERE verdict = 'FAIL'").fetchone()[0]
    assert flip, "no FAIL record to rewrite"
    prev = logcheck.GENESIS
    for row in con.execute("SELECT * FROM records ORDER BY seq").fetchall():
        r = dict(row)
        if r["seq"] == flip:
            r["verdict"] = "PASS"
        ev = con.execute("SELECT * FROM evidence WHERE record_seq = ? ORDER BY kind <> 'frame',"
                         " kind", (r["seq"],)).fetchall()
        extra = ["evidence=" + logcheck.esc("%s %s %s %d" % (e["kind"], e["name"], e["sha256"],
                                                             e["bytes"])) for e in ev]
        h = hashlib.sha256(logcheck.canon("station-log record 1", logcheck.REC_FIELDS, r, extra,
                                          prev).encode()).hexdigest()
        sig = key.sign(h.encode()).signature.hex()
        con.execute("UPDATE records SET verdict = ?, prev_hash = ?, hash = ?, sig = ? WHERE seq = ?",
                    (r["verdict"], prev, h, sig, r["seq"]))
        prev = h
    _, start, _ = logcheck.signing(con)
    statement = ("station-log signing 1\npublic_key=%s\nrecord=%d\ndisposition=%d\n"
                 "verification=%d\n" % (pk, start["record"], start["disposition"],
                                        start["verification"]))
    con.execute("UPDATE meta SET value = ? WHERE key = 'public_key'", (pk,))
    con.execute("UPDATE meta SET value = ? WHERE key = 'signing_sig'",
                (key.sign(statement.encode()).signature.hex(),))
    con.commit()
    con.close()
    print(pk)


if __name__ == "__main__":
    if sys.argv[1] == "check":
        check(sys.argv[2], sys.argv[3])
    elif sys.argv[1] == "forge":
        forge(sys.argv[2])
    else:
        print(nacl.signing.SigningKey.generate().verify_key.encode().hex())
