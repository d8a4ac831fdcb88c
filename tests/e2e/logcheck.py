"""An independent reading of a station log, for the end-to-end log tests.

Rebuilds every hash from the canonical form documented in core/logcanon.h
with Python's hashlib (SHA-256, FIPS 180-4) over rows read with Python's own
sqlite3 module, checks PRAGMA integrity_check, and hashes every evidence file
the log names.  None of the station's code is used, so a fault in the
station's chain or verify cannot hide itself here.  Signatures (schema 4)
are checked with PyNaCl (libsodium's Python binding, python3-nacl): each
signed link's signature over its hash's 64 hex characters, and the signed
signing start statement (core/logsign.h)."""
import hashlib
import os
import sqlite3

import nacl.exceptions
import nacl.signing

GENESIS = "0" * 64
REC_FIELDS = ["seq", "utc", "station", "operator", "serial", "recipe_id", "recipe_version",
              "recipe_sha256", "model_sha256", "scale_id", "verdict", "reasons", "regions",
              "camera"]
DISP_FIELDS = ["dseq", "record_seq", "record_hash", "utc", "auditor", "disposition",
               "comment"]


def esc(v):
    return str(v).replace("\\", "\\\\").replace("\n", "\\n").replace("\r", "\\r")


def canon(head, fields, row, extra, prev):
    lines = [head]
    lines += ["%s=%s" % (k, esc("" if row[k] is None else row[k])) for k in fields]
    lines += extra
    lines.append("prev=" + prev)
    return "".join(l + "\n" for l in lines)


def connect(db):
    con = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    con.row_factory = sqlite3.Row
    return con


def signing(con):
    """(public key hex, {chain: first signed seq}, statement signature) or None before schema 4."""
    if not con.execute("SELECT 1 FROM sqlite_master WHERE name = 'meta'").fetchone():
        return None
    meta = dict(con.execute("SELECT key, value FROM meta").fetchall())
    start = {c: int(meta.get("signed_from_" + c, 1)) for c in
             ("record", "disposition", "verification")}
    return meta.get("public_key", ""), start, meta.get("signing_sig", "")


def sig_ok(pk, msg, sig):
    try:
        nacl.signing.VerifyKey(bytes.fromhex(pk)).verify(msg.encode(), bytes.fromhex(sig or ""))
        return True
    except (nacl.exceptions.BadSignatureError, ValueError, TypeError):
        return False


def sig_problems(con, public_key=None):
    """Signatures that do not verify (against public_key, else the stored key)."""
    sg = signing(con)
    if sg is None:
        return []
    stored, start, statement_sig = sg
    pk = public_key or stored
    if not pk:
        return [] if public_key is None else ["no public key in the log"]
    bad = []
    statement = ("station-log signing 1\npublic_key=%s\nrecord=%d\ndisposition=%d\n"
                 "verification=%d\n" % (pk, start["record"], start["disposition"],
                                         start["verification"]))
    if not sig_ok(pk, statement, statement_sig):
        bad.append("signing start statement does not verify")
    for chain, table, key in (("record", "records", "seq"), ("disposition", "dispositions", "dseq"),
                              ("verification", "verifications", "vseq")):
        for row in con.execute("SELECT %s, hash, sig FROM %s WHERE %s >= ? ORDER BY %s"
                               % (key, table, key, key), (start[chain],)):
            if not sig_ok(pk, row[1], row[2]):
                bad.append("%s %d: signature does not verify" % (chain, row[0]))
    return bad


def problems(db, evidence_dir=None, public_key=None):
    """Everything wrong with the log at db, as a list of strings (empty: all good)."""
    evidence_dir = evidence_dir or os.path.join(os.path.dirname(db), "evidence")
    con = connect(db)
    bad = sig_problems(con, public_key)
    ic = con.execute("PRAGMA integrity_check").fetchone()[0]
    if ic != "ok":
        bad.append("integrity_check: %s" % ic)
    purged = {r[0] for r in con.execute("SELECT name FROM evidence_purged")}
    prev, want, hashes = GENESIS, 1, {}
    for row in con.execute("SELECT * FROM records ORDER BY seq"):
        ev = con.execute("SELECT * FROM evidence WHERE record_seq = ? ORDER BY kind <> 'frame',"
                         " kind", (row["seq"],)).fetchall()
        extra = ["evidence=" + esc("%s %s %s %d" % (e["kind"], e["name"], e["sha256"],
                                                    e["bytes"])) for e in ev]
        h = hashlib.sha256(canon("station-log record 1", REC_FIELDS, row, extra,
                                 prev).encode()).hexdigest()
        if row["seq"] != want or row["prev_hash"] != prev or row["hash"] != h:
            bad.append("record %d: chain broken" % row["seq"])
        for e in ev:
            if e["name"] in purged:
                continue
            path = os.path.join(evidence_dir, e["name"])
            if not os.path.exists(path):
                bad.append("record %d: evidence %s missing" % (row["seq"], e["name"]))
                continue
            data = open(path, "rb").read()
            if len(data) != e["bytes"] or hashlib.sha256(data).hexdigest() != e["sha256"]:
                bad.append("record %d: evidence %s differs" % (row["seq"], e["name"]))
        hashes[row["seq"]] = row["hash"]
        prev, want = row["hash"], row["seq"] + 1
    prev, want = GENESIS, 1
    for row in con.execute("SELECT * FROM dispositions ORDER BY dseq"):
        d = dict(row)
        d["record_hash"] = hashes.get(row["record_seq"], "")
        h = hashlib.sha256(canon("station-log disposition 1", DISP_FIELDS, d, [],
                                 prev).encode()).hexdigest()
        if row["dseq"] != want or row["prev_hash"] != prev or row["hash"] != h:
            bad.append("disposition %d: chain broken" % row["dseq"])
        prev, want = row["hash"], row["dseq"] + 1
    con.close()
    return bad


def seqs(db):
    con = connect(db)
    s = {r[0] for r in con.execute("SELECT seq FROM records")}
    con.close()
    return s
