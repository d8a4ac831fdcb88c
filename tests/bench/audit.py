#!/usr/bin/python3
"""make bench, the audit part: the time of `station audit stats`, `report`
and `export` on a log of 100 000 records (about 30% rejects, two thirds of
them disposed, no evidence files) written through core/log by
tests/tools/auditlog.  The log is built once, in a tmpfs folder when one is
there (the writer fsyncs every record; the readers timed here never write),
and removed afterwards.  Figures, not a test: nothing passes or fails on
speed.  AUDIT_RECORDS=N changes the size."""
import os
import subprocess
import sys
import tempfile
import time

BUILD = os.environ.get("BUILD", "build")
N = int(os.environ.get("AUDIT_RECORDS", "100000"))


def best_of(args, runs=3):
    best = None
    for _ in range(runs):
        t = time.perf_counter()
        subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        d = time.perf_counter() - t
        best = d if best is None else min(best, d)
    return best


def main():
    base = "/dev/shm" if os.access("/dev/shm", os.W_OK) else None
    station = os.path.join(BUILD, "station")
    with tempfile.TemporaryDirectory(dir=base, prefix="station-audit-bench.") as d:
        db = os.path.join(d, "log.db")
        t = time.perf_counter()
        subprocess.run([os.path.join(BUILD, "tests", "tools", "auditlog"), db, str(N), "1"],
                       check=True, stdout=subprocess.DEVNULL)
        print(f"audit: wrote {N} records through the log API in {time.perf_counter() - t:.2f} s "
              f"(in {d})", file=sys.stderr)
        runs = {"stats": ["--json"], "report": ["--out", os.path.join(d, "r.html")],
                "export": ["--out", os.path.join(d, "r.csv")]}
        for verb, extra in runs.items():
            s = best_of([station, "audit", verb, "--log", db, *extra])
            print(f"audit {verb:<6} {N:7d} records  {s:6.3f} s  {N / s:8.0f} records/s  (best of 3)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
