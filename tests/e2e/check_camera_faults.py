"""Camera faults through the emulated camera (tests/emucam, scripted with
emucamctl), station run --headless with the key trigger on stdin:

  stall     DQBUF gives EAGAIN (no frames): a camera_stalled event, an
            inspection asked for meanwhile is NO_VERDICT camera_stalled (never
            a verdict on the last, stale picture); frames again:
            camera_streaming, judged again.
  short     every buffer's bytesused is half a frame (a garbled buffer per
            the V4L2 spec's struct v4l2_buffer: fewer bytes than the format
            needs): skipped by the source, so the same as a stall.
  garbage   the bytes are random: inspected, and never PASS.
  unplug    every call ENODEV mid-stream: camera_lost, NO_VERDICT
            camera_lost; plugged back: camera_back, judged again.

No crash (the station exits by itself on "quit"), every verdict shown has
its record (log_seq), and the log verifies (logcheck with Python's
sqlite3/hashlib/PyNaCl, and `station audit verify`).  Runs inside a private
mount namespace as check_run.py's camera checks do.

usage: check_camera_faults.py STATION RECIPE OUT"""
import json
import queue
import os
import subprocess
import sys
import threading
import time

sys.path.insert(0, "tests/e2e")
import logcheck  # noqa: E402

STATION, RECIPE, OUT = sys.argv[1:4]
CAMERA_RULES = {"camera_lost", "camera_stalled", "frozen"}


def fail(msg):
    print("FAIL " + msg)
    sys.exit(1)


def inner(build):
    cam = os.path.join(OUT, "video-emu")
    ctl = os.path.join(build, "tests", "tools", "emucamctl")
    subprocess.run([ctl, "init", cam], check=True)
    db = os.path.join(OUT, "faults.db")
    errf = open(os.path.join(OUT, "faults.log"), "w")
    p = subprocess.Popen([STATION, "run", RECIPE, "--headless", "--source", "camera:" + cam,
                          "--trigger", "key", "--log", db], stdin=subprocess.PIPE,
                         stdout=subprocess.PIPE, stderr=errf, text=True,
                         env=dict(os.environ, LC_ALL="C"))
    out = []
    # a reader thread, so a line that never comes fails the check at its limit
    # instead of blocking the whole suite in readline
    lines = queue.Queue()

    def pump():
        for line in iter(p.stdout.readline, ""):
            lines.put(line)
    threading.Thread(target=pump, daemon=True).start()

    def until(pred, what, limit=15):
        end = time.time() + limit
        while time.time() < end:
            try:
                line = lines.get(timeout=max(0.01, end - time.time()))
            except queue.Empty:
                break
            o = json.loads(line)
            out.append(o)
            if pred(o):
                return o
        p.kill()
        fail("camera faults: no %s within %d s: %s (%s)" % (what, limit, out[-3:],
                                                          open(errf.name).read()[-300:]))

    def ask():
        p.stdin.write("inspect\n")
        p.stdin.flush()
        return until(lambda o: "verdict" in o, "report")

    def event(name, limit=15):
        until(lambda o: o.get("event") == name, name + " event", limit)

    def rules(o):
        return {r["rule"] for r in o["reasons"]}

    def setf(what, v):
        subprocess.run([ctl, "set", cam, what, v], check=True)

    got = {}
    try:
        time.sleep(1.0)
        got["before"] = ask()
        for fault in ("stall", "short"):
            setf(fault, "1")
            event("camera_stalled")
            got[fault] = ask()
            setf(fault, "0")
            event("camera_streaming", 20)
            time.sleep(0.3)
            got[fault + " over"] = ask()
        setf("garbage", "1")
        time.sleep(0.5)
        got["garbage"] = ask()
        setf("garbage", "0")
        time.sleep(0.5)
        got["garbage over"] = ask()
        setf("unplugged", "1")
        event("camera_lost")
        got["unplug"] = ask()
        setf("unplugged", "0")
        event("camera_back", 30)
        time.sleep(0.5)
        got["unplug over"] = ask()
        p.stdin.write("quit\n")
        p.stdin.flush()
        rc = p.wait(timeout=30)
    finally:
        if p.poll() is None:
            p.kill()
    if rc not in (0, 1, 2):
        fail("camera faults: the station ended with status %d (%s)" % (rc,
             open(errf.name).read()[-300:]))
    want = {"stall": "camera_stalled", "short": "camera_stalled", "unplug": "camera_lost"}
    for k, rule in want.items():
        o = got[k]
        if o["verdict"] != "NO_VERDICT" or rule not in rules(o):
            fail("camera faults: during %s: %s %s, want NO_VERDICT %s" % (k, o["verdict"],
                 sorted(rules(o)), rule))
        if rules(got[k + " over"]) & CAMERA_RULES:
            fail("camera faults: after %s still %s" % (k, sorted(rules(got[k + " over"]))))
    if got["garbage"]["verdict"] == "PASS":
        fail("camera faults: a frame of random bytes passed")
    if rules(got["before"]) & CAMERA_RULES or rules(got["garbage over"]) & CAMERA_RULES:
        fail("camera faults: camera rules with a working camera: %s" % got)
    if any("log_seq" not in o for o in got.values()):
        fail("camera faults: a verdict shown without its record")
    bad = logcheck.problems(db)
    if bad:
        fail("camera faults: the log: %s" % bad)
    v = subprocess.run([STATION, "audit", "verify", "--log", db], capture_output=True, text=True)
    if v.returncode != 0:
        fail("camera faults: audit verify: %s" % v.stderr[-300:])
    for k, o in got.items():
        print("ok   %-13s %-10s %s" % (k, o["verdict"], ",".join(sorted(rules(o))) or "-"))
    print("ok   camera faults: stall, short buffers and unplug give NO_VERDICT while they last and"
          " recover; random bytes never pass; no crash; %d records verify" % len(got))


def main():
    build = os.path.dirname(os.path.abspath(STATION))
    if os.environ.get("EMUCAM_INSIDE"):
        return inner(build)
    if os.geteuid() != 0 or subprocess.run(["unshare", "-m", "true"]).returncode != 0:
        print("SKIP the emulated camera needs root and unshare -m")
        sys.exit(77)
    libdir = subprocess.run(["pkg-config", "--variable=libdir", "libv4l2"], capture_output=True,
                            text=True).stdout.strip()
    plugins = os.path.join(libdir, "libv4l", "plugins")
    if not os.path.isdir(plugins):
        print("SKIP libv4l2 has no plugin folder %s" % plugins)
        sys.exit(77)
    rc = subprocess.run(["unshare", "-m", "sh", "-c",
                         'mount --bind "$1" "$2" && mount -t tmpfs tmpfs /dev/shm && '
                         'EMUCAM_INSIDE=1 exec "$3" "$4" "$5" "$6" "$7"', "sh",
                         os.path.join(build, "tests", "emucam"), plugins, sys.executable,
                         os.path.abspath(__file__), STATION, RECIPE, OUT]).returncode
    sys.exit(rc)


main()
