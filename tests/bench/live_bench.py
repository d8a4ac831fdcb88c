"""Figures for the live station (tests/bench/live_bench.sh).

usage: live_bench.py STATION RECIPE OUT SECONDS

For each size, `station run --headless --source bench --trigger auto`:
at --fps 30 (a camera's rate) the preview rate it keeps (summary fps:
first frame to last) and the mean
trigger-to-verdict latency (capture of the triggering frame to the verdict
taken back by the display loop, its record durable); at --fps 0 the highest
preview rate the loop reaches while inspecting.  Idle: an empty bench
(bench:parts=0) at 30 fps, CPU time from /proc/PID/stat (utime + stime,
proc(5)) over wall time."""
import json
import os
import subprocess
import sys
import time

STATION, RECIPE, OUT, SECONDS = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4])
TICK = os.sysconf("SC_CLK_TCK")


def run(size, fps, spec="bench", seconds=SECONDS):
    db = os.path.join(OUT, "live-%s-%s.db" % (size, fps))
    p = subprocess.Popen([STATION, "run", RECIPE, "--headless", "--source", spec, "--size", size,
                          "--fps", str(fps), "--trigger", "auto", "--log", db],
                         stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                         stderr=subprocess.DEVNULL, text=True)
    # measure from the empty bench learned: model loaded, first part rendered
    for line in p.stdout:
        if '"empty_bench_learned"' in line:
            break
    with open("/proc/%d/stat" % p.pid) as f:
        a = f.read().rsplit(")", 1)[1].split()
    t0 = time.time()
    time.sleep(seconds)
    with open("/proc/%d/stat" % p.pid) as f:
        b = f.read().rsplit(")", 1)[1].split()
    wall = time.time() - t0
    p.terminate()
    # the same buffered stream the loop above read from: communicate() would
    # miss what its read-ahead holds and could split a line
    out = p.stdout.read()
    p.wait(timeout=60)
    # fields 14 and 15 of proc(5) (utime, stime) are 12 and 13 after the ")"
    cpu = (int(b[11]) + int(b[12]) - int(a[11]) - int(a[12])) / TICK
    lines = [json.loads(l) for l in out.splitlines() if l.strip()]
    summary = [o for o in lines if o.get("event") == "summary"][-1]
    lat = [o["latency_ms"] for o in lines if "latency_ms" in o]
    return summary, lat, cpu / wall


print("live station on the simulated bench (%d cores online); each run %.0f s" %
      (os.cpu_count(), SECONDS))
for size in ("640x480", "1280x960"):
    s30, lat, cpu30 = run(size, 30)
    s0, lat0, cpu0 = run(size, 0)
    lat.sort()
    med = lat[len(lat) // 2] if lat else float("nan")
    print("%-9s preview at --fps 30: %5.1f fps (CPU %3.0f%% of one core); as fast as it goes: "
          "%5.1f fps;  trigger to verdict: median %.0f ms, mean %.0f ms over %d inspections "
          "(worst %.0f ms)" %
          (size, s30["fps"], 100 * cpu30, s0["fps"], med,
           sum(lat) / len(lat) if lat else float("nan"), len(lat), max(lat) if lat else 0))
for size in ("640x480", "1280x960"):
    s, lat, cpu = run(size, 30, "bench:parts=0")
    print("idle %-9s (empty bench, 30 fps, no inspection): CPU %.1f%% of one core, %.1f fps" %
          (size, 100 * cpu, s["fps"]))
