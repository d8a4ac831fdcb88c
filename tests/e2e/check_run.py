"""End-to-end checks of `station run` (the live station), headless and
windowed under SDL's offscreen driver.

usage: check_run.py STATION RECIPE IMAGES_DIR OUT

References outside the code under test: `station inspect` on the same files
(the replay must judge exactly as the offline command does), the bench
source's own documented schedule (station/source_bench.h: a part every 84
frames, 36 of them lying still), Python's sqlite3/hashlib reading of the log
(logcheck.py), PIL for the snapshot PNG, and the kernel's ENOSPC on a full
tmpfs for the log failure."""
import glob
import json
import os
import shutil
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import logcheck  # noqa: E402

STATION, RECIPE, IMAGES, OUT = sys.argv[1:5]
CYCLE, EMPTY, SLIDE, STILL = 84, 24, 12, 36   # station/source_bench.h
ENV = dict(os.environ, LC_ALL="C")


def fail(msg):
    print("FAIL " + msg)
    sys.exit(1)


def lines(text):
    return [json.loads(l) for l in text.splitlines() if l.strip()]


def run(args, timeout=120, env=ENV):
    p = subprocess.run([STATION] + args, stdin=subprocess.DEVNULL, capture_output=True, text=True,
                       timeout=timeout, env=env)
    return p.returncode, lines(p.stdout), p.stderr


def reports(objs):
    return [o for o in objs if "verdict" in o]


def events(objs, name):
    return [o for o in objs if o.get("event") == name]


def key(reason):
    return (reason["rule"], reason["class"], reason.get("zone"), reason.get("measured"),
            reason.get("limit"), reason.get("message"))


def check_replay():
    """The replay, continuous and as fast as inspected, judges every file as
    station inspect does, a truncated file included (NO_VERDICT unreadable)."""
    folder = os.path.join(OUT, "replay")
    os.makedirs(folder)
    for f in sorted(glob.glob(os.path.join(IMAGES, "*.png"))):
        shutil.copy(f, folder)
    first = sorted(glob.glob(os.path.join(folder, "*.png")))[0]
    with open(first, "rb") as f, open(os.path.join(folder, "part-cut.png"), "wb") as g:
        g.write(f.read()[:300])
    files = sorted(glob.glob(os.path.join(folder, "*.png")))
    rc_i, ins, err_i = run(["inspect", RECIPE] + files + ["--log", os.path.join(OUT, "inspect.db")])
    rc_r, out, err_r = run(["run", RECIPE, "--headless", "--source", "replay:" + folder,
                            "--trigger", "continuous", "--fps", "0", "--log",
                            os.path.join(OUT, "replay.db")])
    live = reports(out)
    if [o["image"] for o in live] != files:
        fail("replay inspected %s, want every file once in name order %s" %
             ([o["image"] for o in live], files))
    for a, b in zip(ins, live):
        if a["verdict"] != b["verdict"] or sorted(map(key, a["reasons"])) != sorted(map(key, b["reasons"])):
            fail("%s: inspect %s %s, run %s %s" % (a["image"], a["verdict"], a["reasons"],
                                                   b["verdict"], b["reasons"]))
        if "log_seq" not in b:
            fail("%s shown without a durable record" % b["image"])
    if live[-1]["verdict"] != "NO_VERDICT" or live[-1]["reasons"][0]["rule"] != "unreadable":
        fail("the truncated file is %s" % live[-1])
    if rc_r != rc_i:
        fail("exit status: run %d, inspect %d" % (rc_r, rc_i))
    print("ok   replay: %d files judged as station inspect judges them (%s), exit %d" %
          (len(files), ", ".join(o["verdict"] for o in live), rc_r))


def bench(spec, frames, db, extra=()):
    return run(["run", RECIPE, "--headless", "--source", spec, "--fps", "120", "--frames",
                str(frames), "--log", db] + list(extra))


def check_auto():
    """The automatic trigger inspects each part the bench places exactly
    once, in its still phase, and re-arms when it has left."""
    parts = 3
    db = os.path.join(OUT, "auto.db")
    rc, out, err = bench("bench:parts=%d" % parts, parts * CYCLE + EMPTY, db,
                         ["--operator", "ann", "--serial", "S-1"])
    got = [o["image"] for o in reports(out)]
    want = ["bench:1:%d" % i for i in range(parts)]
    if got != want:
        fail("auto trigger inspected %s, want one inspection per part %s (%s)" %
             (got, want, err[-300:]))
    if len(events(out, "empty_bench_learned")) != 1:
        fail("the empty bench was learned %d times" % len(events(out, "empty_bench_learned")))
    for o in reports(out):
        if "log_seq" not in o:
            fail("%s shown without log_seq" % o["image"])
    con = logcheck.connect(db)
    rows = con.execute("select operator, serial from records order by seq").fetchall()
    con.close()
    # the serial belongs to the first part only; the operator stays
    if [tuple(r) for r in rows] != [("ann", "S-1"), ("ann", ""), ("ann", "")] and \
       [tuple(r) for r in rows] != [("ann", "S-1"), ("ann", None), ("ann", None)]:
        fail("operator and serial logged as %s" % [tuple(r) for r in rows])
    bad = logcheck.problems(db)
    if bad:
        fail("log problems: %s" % bad)
    print("ok   auto trigger: %d parts placed, %d inspections (%s), serial on the first only" %
          (parts, len(got), ", ".join(o["verdict"] for o in reports(out))))


def check_lost():
    """Camera lost (the bench's scripted unplug) while part 1 lies still and
    before it was inspected: NO_VERDICT camera_lost for that part, and
    inspection resumes with part 2 when frames come back."""
    start = CYCLE + EMPTY + SLIDE + 2
    db = os.path.join(OUT, "lost.db")
    rc, out, err = bench("bench:parts=3,lost=%d+30" % start, 3 * CYCLE, db)
    got = [(o["image"], o["verdict"], o["reasons"][0]["rule"] if o["reasons"] else "")
           for o in reports(out)]
    if len(got) != 3 or got[1] != ("bench:1:1", "NO_VERDICT", "camera_lost") or \
       got[0][0] != "bench:1:0" or got[2][0] != "bench:1:2" or "camera_lost" in (got[0][2], got[2][2]):
        fail("with the camera lost during part 1: %s" % got)
    order = [o.get("event") or o["image"] for o in out]
    if order.index("camera_lost") > order.index("bench:1:1") or \
       order.index("camera_back") > order.index("bench:1:2"):
        fail("events out of order: %s" % order)
    if rc != 2:
        fail("exit %d with a NO_VERDICT, want 2" % rc)
    print("ok   camera lost: part 1 recorded NO_VERDICT camera_lost (seq %d), part 2 judged after"
          " camera_back" % reports(out)[1]["log_seq"])


def check_frozen():
    """The bench's camera freezes while part 1 slides in (frames repeat
    byte for byte): no inspection of the half-placed part, camera_frozen
    after frozen_frames (10) identical frames, the part in view recorded
    NO_VERDICT (rule frozen); part 2 judged after the picture moves."""
    start = CYCLE + EMPTY + 9
    db = os.path.join(OUT, "frozen.db")
    rc, out, err = bench("bench:parts=3,frozen=%d+30" % start, 3 * CYCLE, db)
    got = [(o["image"], o["verdict"], o["reasons"][0]["rule"] if o["reasons"] else "")
           for o in reports(out)]
    if len(got) != 3 or got[1] != ("bench:1:1", "NO_VERDICT", "frozen") or \
       got[0][0] != "bench:1:0" or got[2][0] != "bench:1:2":
        fail("with the camera frozen during part 1: %s" % got)
    if not events(out, "camera_frozen") or not events(out, "camera_moving"):
        fail("no camera_frozen / camera_moving events: %s" % [o.get("event") for o in out])
    print("ok   frozen camera: part 1 recorded NO_VERDICT frozen, part 2 judged after it moved")


def check_verify():
    """A recipe with master parts and no passing verification in the log:
    the live station refuses (NO_VERDICT verification_due) as station
    inspect does; after station verify on the same log it judges."""
    # masters this tiny model judges as expected (the replay check shows
    # station inspect's verdicts on these files)
    verdicts = {}
    for f in sorted(glob.glob(os.path.join(IMAGES, "*.png"))):
        rc, o, err = run(["inspect", RECIPE, f, "--log", os.path.join(OUT, "pick.db")])
        verdicts.setdefault(o[0]["verdict"], os.path.abspath(f))
    if "PASS" not in verdicts or "FAIL" not in verdicts:
        print("skipped: the fixture's test parts give no PASS and FAIL pair (%s)" % verdicts)
        return
    full = os.path.join(os.path.dirname(RECIPE), "masters.ini")  # beside its model
    # copied into the recipe's folder: a recipe's paths may not lead out of it
    masters = os.path.join(os.path.dirname(RECIPE), "run-masters")
    os.makedirs(masters, exist_ok=True)
    shutil.copy(verdicts["PASS"], os.path.join(masters, "good.png"))
    shutil.copy(verdicts["FAIL"], os.path.join(masters, "over.png"))
    with open(RECIPE) as f, open(full, "w") as g:
        g.write(f.read() + "\n[verification]\ninterval_hours = 8\n\n[master good]\n"
                "image = run-masters/good.png\nexpect = pass\n\n[master over]\n"
                "image = run-masters/over.png\nexpect = fail\n")
    db = os.path.join(OUT, "verify.db")
    args = ["run", full, "--headless", "--source", "bench", "--fps", "120", "--inspections", "1",
            "--trigger", "auto", "--log", db]
    rc, out, err = run(args)
    before = [r["rule"] for r in reports(out)[0]["reasons"]]
    if "verification_due" not in before:
        fail("never verified, the live station gave %s" % before)
    v = subprocess.run([STATION, "verify", full, "--log", db], capture_output=True, text=True)
    if v.returncode != 0:
        fail("station verify on the fixture: %s" % v.stderr[-300:])
    rc, out, err = run(args)
    after = [r["rule"] for r in reports(out)[0]["reasons"]]
    if "verification_due" in after:
        fail("verified, the live station still gave %s" % after)
    print("ok   verification: refused before station verify (verification_due), judged after (%s)" %
          reports(out)[0]["verdict"])


def check_halt():
    """The log's disk fills (a 6 MB tmpfs, 4.8 MB of it taken, every PASS
    keeping evidence too: about half a megabyte a record):
    inspection halts with the reason, nothing is shown as judged without a
    durable record, and once space is freed the station resumes; every
    record before the fault is intact (logcheck, audit verify)."""
    if os.geteuid() != 0:
        print("skipped: halt and resume needs root (mounts a small tmpfs)")
        return
    small = os.path.join(OUT, "small")
    os.makedirs(small)
    subprocess.run(["mount", "-t", "tmpfs", "-o", "size=6m", "tmpfs", small], check=True)
    p = None
    try:
        recipe = os.path.join(OUT, "all-evidence.ini")
        shutil.copy(RECIPE, recipe)
        for f in glob.glob(os.path.splitext(RECIPE)[0] + ".model.json*"):
            shutil.copy(f, OUT)
        with open(recipe, "a") as f:
            f.write("\n[evidence]\npass = all\n")
        filler = os.path.join(small, "filler")
        with open(filler, "wb") as f:
            f.write(b"\0" * (4800 * 1024))
        db = os.path.join(small, "station.db")
        errf = open(os.path.join(OUT, "halt.log"), "w")
        p = subprocess.Popen([STATION, "run", recipe, "--headless", "--source", "bench", "--fps",
                              "120", "--inspections", "6", "--log", db],
                             stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                             stderr=errf, text=True, env=ENV)
        out = []
        deadline = time.time() + 90
        for line in p.stdout:
            o = json.loads(line)
            out.append(o)
            if o.get("event") == "halted" and os.path.exists(filler):
                # while halted nothing is inspected: wait a little, then free the disk
                time.sleep(1.5)
                os.remove(filler)
            if time.time() > deadline:
                p.kill()
                fail("no end after 90 s: %s" % out[-3:])
        p.wait(timeout=30)
        with open(errf.name) as f:
            err = f.read()
        names = [o.get("event") or o["verdict"] for o in out]
        if "halted" not in names or "resumed" not in names:
            fail("no halt and resume: %s (%s)" % (names, err[-300:]))
        # a retry (a record without evidence) may fit before the disk is freed,
        # and the next record with evidence then halts again: every halt is
        # checked alike
        refused = []
        for h, name in enumerate(names):
            if name != "halted":
                continue
            r = names.index("resumed", h)
            if any("verdict" in o for o in out[h + 1:r]):
                fail("inspected while halted: %s" % names[h:r])
            o = out[h - 1]
            if o.get("verdict") != "NO_VERDICT" or "log_seq" in o or \
               o["reasons"][-1]["rule"] != "log_failed":
                fail("the inspection the log failed on was shown as %s" % o)
            refused.append(o)
        judged = [o for o in reports(out) if all(o is not x for x in refused)]
        if any("log_seq" not in o for o in judged):
            fail("a verdict shown without a durable record: %s" % names)
        resumed = [o["log_seq"] for o in out if o.get("event") == "resumed"]
        present = logcheck.seqs(db)
        shown = {o["log_seq"] for o in judged} | set(resumed)
        if not shown <= present:
            fail("shown but not in the log: %s" % (shown - present))
        bad = logcheck.problems(db)
        if bad:
            fail("log problems after the outage: %s" % bad)
        v = subprocess.run([STATION, "audit", "verify", "--log", db], capture_output=True,
                           text=True)
        if v.returncode != 0:
            fail("audit verify: %s" % v.stderr)
        con = logcheck.connect(db)
        for seq in resumed:
            msg = con.execute("select reasons from records where seq = ?", (seq,)).fetchone()[0]
            if "log_failed" not in msg:
                fail("the outage record %d says %s" % (seq, msg))
        con.close()
        why = [o["reason"] for o in out if o.get("event") == "halted"][0]
        print("ok   log failure: %d halt(s) (%s...), each resumed with the outage recorded (seq %s),"
              " %d records verified" % (len(resumed), why[-40:], resumed, len(present)))
    finally:
        if p and p.poll() is None:
            p.kill()
            p.wait()
        subprocess.run(["umount", small])


def camera_inner(build):
    """Inside the namespace: station run on the emulated camera, key trigger
    on stdin; unplug and replug it between inspections."""
    cam = os.path.join(OUT, "video-emu")
    ctl = os.path.join(build, "tests", "tools", "emucamctl")
    subprocess.run([ctl, "init", cam], check=True)
    db = os.path.join(OUT, "camera.db")
    # settings locked from the recipe, so the records have values to carry
    recipe = os.path.join(os.path.dirname(RECIPE), "camera.ini")
    with open(RECIPE) as f, open(recipe, "w") as g:
        g.write(f.read() + "\n[camera]\nexposure = 300\npower_line = 50\n")
    # stderr to a file: a pipe nobody reads fills up and stops the station
    errf = open(os.path.join(OUT, "camera.log"), "w")
    p = subprocess.Popen([STATION, "run", recipe, "--headless", "--source", "camera:" + cam,
                          "--trigger", "key", "--log", db], stdin=subprocess.PIPE,
                         stdout=subprocess.PIPE, stderr=errf, text=True, env=ENV)
    out = []

    def err_tail():
        with open(errf.name) as f:
            return f.read()[-400:]

    def until(pred, what, limit=20):
        end = time.time() + limit
        while time.time() < end:
            line = p.stdout.readline()
            if not line:
                break
            o = json.loads(line)
            out.append(o)
            if pred(o):
                return o
        p.kill()
        fail("camera: no %s within %d s: %s (%s)" % (what, limit, out[-4:], err_tail()))

    def ask():
        p.stdin.write("inspect\n")
        p.stdin.flush()
        return until(lambda o: "verdict" in o, "report")

    try:
        time.sleep(1.0)  # frames flowing
        first = ask()
        subprocess.run([ctl, "unplug", cam, "1"], check=True)
        until(lambda o: o.get("event") == "camera_lost", "camera_lost event")
        lost = ask()
        subprocess.run([ctl, "unplug", cam, "0"], check=True)
        until(lambda o: o.get("event") == "camera_back", "camera_back event", 30)
        time.sleep(0.5)
        back = ask()
        p.stdin.write("quit\n")
        p.stdin.flush()
        p.wait(timeout=30)
    finally:
        if p.poll() is None:
            p.kill()
    rules = [[r["rule"] for r in o["reasons"]] for o in (first, lost, back)]
    if "camera_lost" in rules[0] or rules[1] != ["camera_lost"] or "camera_lost" in rules[2]:
        fail("camera: reasons before, during and after the unplug: %s" % rules)
    if any("log_seq" not in o for o in (first, lost, back)):
        fail("camera: a verdict shown without a durable record")
    con = logcheck.connect(db)
    cams = [r[0] for r in con.execute("select camera from records order by seq")]
    con.close()
    if len(cams) != 3 or any(c is None or "exposure" not in json.loads(c) for c in cams):
        fail("camera: the records' camera settings are %s" % cams)
    print("ok   emulated camera: judged (%s), unplugged -> NO_VERDICT camera_lost, replugged -> "
          "judged again; camera settings logged with every record (%d bytes)" %
          (first["verdict"], len(cams[0])))


def check_camera():
    """The camera path end to end, through libv4l2 and the emulated-camera
    plugin (tests/emucam) bind-mounted over libv4l2's plugin folder in a
    private mount namespace, as tests/station/test_camera.c does."""
    build = os.path.dirname(os.path.abspath(STATION))
    if os.environ.get("EMUCAM_INSIDE"):
        return camera_inner(build)
    if os.geteuid() != 0 or subprocess.run(["unshare", "-m", "true"]).returncode != 0:
        print("skipped: the emulated camera needs root and unshare -m")
        return
    libdir = subprocess.run(["pkg-config", "--variable=libdir", "libv4l2"], capture_output=True,
                            text=True).stdout.strip()
    plugins = os.path.join(libdir, "libv4l", "plugins")
    if not os.path.isdir(plugins):
        print("skipped: libv4l2 has no plugin folder %s" % plugins)
        return
    rc = subprocess.run(["unshare", "-m", "sh", "-c",
                         'mount --bind "$1" "$2" && mount -t tmpfs tmpfs /dev/shm && '
                         'EMUCAM_INSIDE=1 exec "$3" "$4" "$5" "$6" "$7" "$8" camera_keep', "sh",
                         os.path.join(build, "tests", "emucam"), plugins, sys.executable,
                         os.path.abspath(__file__), STATION, RECIPE, IMAGES,
                         os.path.join(OUT, "camera")]).returncode
    if rc != 0:
        fail("camera checks in the namespace failed")


def check_window():
    """A windowed run under SDL's offscreen driver: refused without the
    test flag, and with it a snapshot of the screen after the verdict."""
    env = dict(ENV, SDL_VIDEODRIVER="offscreen")
    db = os.path.join(OUT, "window.db")
    rc, out, err = run(["run", RECIPE, "--source", "bench", "--fps", "120", "--inspections", "1",
                        "--log", db], env=env)
    if rc != 3 or "offscreen" not in err:
        fail("offscreen driver without the test flag: exit %d, %s" % (rc, err[-200:]))
    snap = os.path.join(OUT, "screen.png")
    rc, out, err = run(["run", RECIPE, "--source", "bench", "--fps", "120", "--inspections", "1",
                        "--log", db, "--allow-offscreen", "--snapshot", snap], env=env)
    if len(reports(out)) != 1 or not os.path.exists(snap):
        fail("windowed run: exit %d, %d reports, snapshot %s (%s)" %
             (rc, len(reports(out)), os.path.exists(snap), err[-300:]))
    from PIL import Image
    im = Image.open(snap).convert("RGB")
    colours = len(set(im.getdata()))
    if im.size[0] < 640 or colours < 50:
        fail("snapshot %s with %d colours" % (im.size, colours))
    print("ok   windowed under SDL offscreen: refused without the flag; snapshot %dx%d, %d colours,"
          " verdict %s" % (im.size[0], im.size[1], colours, reports(out)[0]["verdict"]))


which = sys.argv[5:] or ["replay", "auto", "lost", "frozen", "verify", "halt", "camera", "window"]
if which == ["camera_keep"]:
    which = ["camera"]
if os.path.exists(OUT):
    shutil.rmtree(OUT)
os.makedirs(OUT)
for name in which:
    globals()["check_" + name]()
