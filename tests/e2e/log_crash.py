"""Kills `station inspect` with SIGKILL at random moments while it records
into its log, at least 30 times, then checks the log with an independent
reader (logcheck.py: Python's sqlite3 PRAGMA integrity_check and hashlib):
every record the writer reported committed (its JSON line carries log_seq,
printed only after the commit) is there, both chains verify, no record names
a missing or changed evidence file, and `station audit verify` agrees.  While
a writer runs, `station audit list` and `audit verify` read the same log and
must finish promptly (WAL readers do not wait for the writer).

usage: log_crash.py STATION RECIPE IMAGE..."""
import json
import os
import random
import signal
import subprocess
import sys
import time

import logcheck

KILLS = 30


def reported(path):
    """log_seq of every complete JSON line the writer printed."""
    got = set()
    with open(path, "rb") as f:
        for line in f.read().split(b"\n")[:-1]:   # the last piece may be cut
            o = json.loads(line)
            if "log_seq" in o:
                got.add(o["log_seq"])
    return got


def main():
    station, recipe, images = sys.argv[1], sys.argv[2], sys.argv[3:]
    work = os.path.dirname(os.path.abspath(recipe))
    db = os.path.join(work, "crash-log", "station.db")
    out = os.path.join(work, "writer.jsonl")
    rng = random.Random(20261201)
    args = [station, "inspect", recipe] + images * 50 + ["--log", db, "--station", "crash-1"]
    committed, kills, readers = set(), 0, 0
    t0 = time.time()
    while kills < KILLS:
        with open(out, "wb") as f:
            p = subprocess.Popen(args, stdout=f, stderr=subprocess.DEVNULL)
            if kills % 10 == 5 and os.path.exists(db):
                # readers run for 2 s while the writer writes: neither waits
                time.sleep(0.3)
                before, r0 = len(reported(out)), time.time()
                while time.time() - r0 < 2:
                    for verb in (["list", "--json"], ["verify"]):
                        t = time.time()
                        r = subprocess.run([station, "audit"] + verb + ["--log", db],
                                           capture_output=True, timeout=60)
                        assert r.returncode == 0, "audit %s while writing: %s" % (verb, r.stderr)
                        assert time.time() - t < 20, "audit %s waited on the writer" % verb
                        readers += 1
                assert len(reported(out)) > before, "the writer stalled while the audit read"
            time.sleep(rng.uniform(0.05, 0.9))
            p.send_signal(signal.SIGKILL)
            p.wait()
        if p.returncode == -signal.SIGKILL:
            kills += 1
        committed |= reported(out)
    present = logcheck.seqs(db)
    lost = committed - present
    assert not lost, "records reported committed but missing: %s" % sorted(lost)
    bad = logcheck.problems(db)
    assert not bad, "log damaged after kills: %s" % bad[:5]
    r = subprocess.run([station, "audit", "verify", "--log", db], capture_output=True)
    assert r.returncode == 0, "audit verify after kills: %s" % r.stderr.decode()
    tmp = sum(n.endswith(".tmp") for _, _, fs in os.walk(os.path.dirname(db)) for n in fs)
    print("ok   %d SIGKILLs in %.0f s: %d records committed and reported, %d in the log, all"
          " present; integrity ok, chains and evidence verify (Python sqlite3 + hashlib and"
          " audit verify); %d reads during writing; %d unfinished .tmp files left (never named)"
          % (kills, time.time() - t0, len(committed), len(present), readers, tmp))
    assert len(committed) >= KILLS, "too few records committed to mean anything"


main()
