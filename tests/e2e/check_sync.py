"""Independent checks of the central database against the local logs, for
tests/e2e/test_sync.sh.

The central side is read with psycopg2 (Debian's python3-psycopg2, the
PostgreSQL project's usual Python driver), the local log with Python's own
sqlite3 module; neither goes through the station's code.  Chain links are
recomputed from the central copy with the canonical form of core/logcanon.h
as tests/e2e/logcheck.py writes it (SHA-256 from hashlib, FIPS 180-4).

  check_sync.py compare CONNINFO STATION DB    central rows == local rows, central chains intact
  check_sync.py evidence CONNINFO STATION DIR  every copied evidence file has its recorded SHA-256
  check_sync.py tamper DB SEQ content|rehash   alter record SEQ's verdict in the local log
  check_sync.py unpurge DB                     rename the local log's last evidence purge
  check_sync.py bypass CONNINFO STATION        the server itself refuses a broken link, a changed
                                               copy, a gap, evidence for a held record, UPDATE,
                                               DELETE and TRUNCATE, and a station row's key
                                               changed, from any client
"""
import hashlib
import os
import sqlite3
import sys

import psycopg2

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from logcheck import GENESIS, canon, esc  # noqa: E402

REC = ["seq", "utc", "station", "operator", "serial", "recipe_id", "recipe_version",
       "recipe_sha256", "model_sha256", "scale_id", "verdict", "reasons", "regions", "camera",
       "prev_hash", "hash", "sig"]
DISP = ["dseq", "record_seq", "utc", "auditor", "disposition", "comment", "prev_hash", "hash",
        "sig"]
VER = ["vseq", "utc", "station", "recipe_id", "recipe_version", "recipe_sha256", "model_sha256",
       "outcome", "masters", "prev_hash", "hash", "sig"]
REC_CANON = REC[:14]
VER_CANON = ["vseq", "utc", "station", "recipe_id", "recipe_version", "recipe_sha256",
             "model_sha256", "outcome", "masters"]
DISP_CANON = ["dseq", "record_seq", "record_hash", "utc", "auditor", "disposition", "comment"]


def central_cols(cols):
    # the record's own station field is rec_station centrally
    return ", ".join("rec_station" if c == "station" else c for c in cols)


def rows_local(con, table, cols, key):
    return [tuple(r) for r in con.execute("SELECT %s FROM %s ORDER BY %s"
                                          % (", ".join(cols), table, key))]


def rows_central(cur, table, cols, key, station):
    cur.execute("SELECT %s FROM %s WHERE station = %%s ORDER BY %s"
                % (central_cols(cols), table, key), (station,))
    return [tuple(r) for r in cur.fetchall()]


def chain_problems(cur, station):
    """Recompute every central link's hash and link from the central copy alone."""
    bad = []
    cur.execute("SELECT record_seq, kind, name, sha256, bytes FROM evidence WHERE station = %s"
                " ORDER BY record_seq, kind <> 'frame', kind", (station,))
    ev = {}
    for seq, kind, name, sha, nbytes in cur.fetchall():
        ev.setdefault(seq, []).append("evidence=" + esc("%s %s %s %d" % (kind, name, sha, nbytes)))
    cur.execute("SELECT %s FROM records WHERE station = %%s ORDER BY seq"
                % central_cols(REC), (station,))
    prev, want, hashes = GENESIS, 1, {}
    for r in cur.fetchall():
        row = dict(zip(REC, r))
        h = hashlib.sha256(canon("station-log record 1", REC_CANON, row, ev.get(row["seq"], []),
                                 prev).encode()).hexdigest()
        if row["seq"] != want or row["prev_hash"] != prev or row["hash"] != h:
            bad.append("central record %d: chain broken" % row["seq"])
        hashes[row["seq"]] = row["hash"]
        prev, want = row["hash"], row["seq"] + 1
    cur.execute("SELECT %s FROM dispositions WHERE station = %%s ORDER BY dseq"
                % ", ".join(DISP), (station,))
    prev, want = GENESIS, 1
    for r in cur.fetchall():
        row = dict(zip(DISP, r))
        row["record_hash"] = hashes.get(row["record_seq"], "")
        h = hashlib.sha256(canon("station-log disposition 1", DISP_CANON, row, [],
                                 prev).encode()).hexdigest()
        if row["dseq"] != want or row["prev_hash"] != prev or row["hash"] != h:
            bad.append("central disposition %d: chain broken" % row["dseq"])
        prev, want = row["hash"], row["dseq"] + 1
    cur.execute("SELECT %s FROM verifications WHERE station = %%s ORDER BY vseq"
                % central_cols(VER), (station,))
    prev, want = GENESIS, 1
    for r in cur.fetchall():
        row = dict(zip(VER, r))
        h = hashlib.sha256(canon("station-log verification 1", VER_CANON, row, [],
                                 prev).encode()).hexdigest()
        if row["vseq"] != want or row["prev_hash"] != prev or row["hash"] != h:
            bad.append("central verification %d: chain broken" % row["vseq"])
        prev, want = row["hash"], row["vseq"] + 1
    return bad


def compare(conninfo, station, db):
    loc = sqlite3.connect("file:%s?mode=ro" % db, uri=True)
    pg = psycopg2.connect(conninfo)
    cur = pg.cursor()
    bad, counts = [], {}
    for table, cols, key in (("records", REC, "seq"), ("dispositions", DISP, "dseq"),
                             ("verifications", VER, "vseq"),
                             ("evidence", ["record_seq", "kind", "name", "sha256", "bytes"],
                              "record_seq, kind"),
                             ("evidence_purged", ["name", "record_seq", "utc", "reason"], "name")):
        a, b = rows_local(loc, table, cols, key), rows_central(cur, table, cols, key, station)
        counts[table] = (len(a), len(b))
        if a != b:
            diff = [i for i in range(min(len(a), len(b))) if a[i] != b[i]]
            bad.append("%s: local %d rows, central %d, first difference at row %s"
                       % (table, len(a), len(b), diff[0] if diff else min(len(a), len(b))))
    bad += chain_problems(cur, station)
    pg.close()
    loc.close()
    if bad:
        print("\n".join("%s: %s" % (station, b) for b in bad))
        return 1
    print("%s: central equals local (%s), chains recomputed" % (
        station, ", ".join("%s %d" % (t, n[0]) for t, n in counts.items())))
    return 0


def evidence(conninfo, station, folder):
    pg = psycopg2.connect(conninfo)
    cur = pg.cursor()
    # every file not purged must have been copied: the local log still held it
    cur.execute("SELECT name, sha256, bytes FROM evidence e WHERE station = %s AND NOT EXISTS("
                "SELECT 1 FROM evidence_purged p WHERE p.station = e.station AND p.name = e.name)",
                (station,))
    seen, bad = 0, []
    for name, sha, nbytes in cur.fetchall():
        path = os.path.join(folder, station, name)
        if not os.path.exists(path):
            bad.append("%s: not copied" % path)
            continue
        data = open(path, "rb").read()
        seen += 1
        if len(data) != nbytes or hashlib.sha256(data).hexdigest() != sha:
            bad.append("%s differs from its recorded SHA-256" % path)
    pg.close()
    if bad or not seen:
        print("\n".join(bad) or "no evidence copied for %s" % station)
        return 1
    print(seen)
    return 0


def tamper(db, seq, mode):
    con = sqlite3.connect(db)
    con.row_factory = sqlite3.Row
    con.execute("DROP TRIGGER IF EXISTS records_no_update")
    row = dict(con.execute("SELECT * FROM records WHERE seq = ?", (seq,)).fetchone())
    row["verdict"] = "FAIL" if row["verdict"] == "PASS" else "PASS"
    h = row["hash"]
    if mode == "rehash":
        ev = con.execute("SELECT * FROM evidence WHERE record_seq = ? ORDER BY kind <> 'frame',"
                         " kind", (seq,)).fetchall()
        extra = ["evidence=" + esc("%s %s %s %d" % (e["kind"], e["name"], e["sha256"],
                                                    e["bytes"])) for e in ev]
        h = hashlib.sha256(canon("station-log record 1", REC_CANON, row, extra,
                                 row["prev_hash"]).encode()).hexdigest()
    con.execute("UPDATE records SET verdict = ?, hash = ? WHERE seq = ?", (row["verdict"], h, seq))
    con.commit()
    con.close()
    print(h)
    return 0


def unpurge(db):
    con = sqlite3.connect(db)
    con.execute("DROP TRIGGER IF EXISTS purged_no_update")
    con.execute("UPDATE evidence_purged SET name = 'not-' || name"
                " WHERE rowid = (SELECT max(rowid) FROM evidence_purged)")
    con.commit()
    con.close()
    return 0


def refused(cur, sql, args, want):
    try:
        cur.execute(sql, args)
    except psycopg2.Error as ex:
        cur.connection.rollback()
        msg = ex.diag.message_primary or ""
        if want in msg:
            return None
        return "%s: refused for another reason: %s" % (sql.split("(")[0], msg)
    cur.connection.rollback()
    return "%s: accepted, should have been refused (%s)" % (sql.split("(")[0], want)


def bypass(conninfo, station):
    pg = psycopg2.connect(conninfo)
    cur = pg.cursor()
    cur.execute("SELECT %s FROM records WHERE station = %%s ORDER BY seq DESC LIMIT 1"
                % central_cols(REC), (station,))
    last = dict(zip(REC, cur.fetchone()))
    ins = ("INSERT INTO records(station, seq, utc, rec_station, operator, serial, recipe_id,"
           " recipe_version, recipe_sha256, model_sha256, scale_id, verdict, reasons, regions,"
           " camera, prev_hash, hash, sig) VALUES (%s)" % ", ".join(["%s"] * 18))

    def rec(seq, prev, h):
        return [station, seq] + [last[c] for c in REC[1:14]] + [prev, h, last["sig"]]
    n = last["seq"]
    bad = [refused(cur, ins, rec(n + 1, "f" * 64, "a" * 64), "chain link does not match"),
           refused(cur, ins, rec(n, last["prev_hash"], "b" * 64), "differs from the central copy"),
           refused(cur, ins, rec(n + 2, last["hash"], "c" * 64), "arrives before record"),
           refused(cur, "UPDATE records SET verdict = 'PASS' WHERE station = %s", [station],
                   "append-only"),
           refused(cur, "DELETE FROM dispositions WHERE station = %s", [station], "append-only"),
           # evidence lines are part of a held record's hash
           refused(cur, "INSERT INTO evidence VALUES(%s, %s, 'frame', 'late.png', %s, 1)",
                   [station, n, "d" * 64], "arrives without its record"),
           # the signing key, once held, and the rest of a station's row but its line
           refused(cur, "UPDATE stations SET public_key = '' WHERE station = %s", [station],
                   "only its line may change"),
           refused(cur, "UPDATE stations SET log_schema = 1 WHERE station = %s", [station],
                   "only its line may change"),
           refused(cur, "DELETE FROM stations WHERE station = %s", [station], "append-only"),
           refused(cur, "TRUNCATE records CASCADE", [], "TRUNCATE refused"),
           refused(cur, "TRUNCATE stations CASCADE", [], "TRUNCATE refused")]
    cur.execute("UPDATE stations SET line = line || '-x' WHERE station = %s", [station])
    if cur.rowcount != 1:
        bad.append("a station's line cannot be changed")
    pg.rollback()
    pg.close()
    bad = [b for b in bad if b]
    print("\n".join(bad) or "the server refuses a broken link, a changed copy, a gap, late"
          " evidence, UPDATE, DELETE and TRUNCATE, and a station row's key or schema changed")
    return 1 if bad else 0


def main(argv):
    cmd = argv[1]
    if cmd == "compare":
        return compare(argv[2], argv[3], argv[4])
    if cmd == "evidence":
        return evidence(argv[2], argv[3], argv[4])
    if cmd == "tamper":
        return tamper(argv[2], int(argv[3]), argv[4])
    if cmd == "unpurge":
        return unpurge(argv[2])
    if cmd == "bypass":
        return bypass(argv[2], argv[3])
    return 2


if __name__ == "__main__":
    sys.exit(main(sys.argv))
