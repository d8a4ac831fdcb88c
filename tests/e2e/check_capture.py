"""End-to-end checks of `station capture`.

usage: check_capture.py STATION RECIPE OUT

References outside the code under test: the bench source's documented
schedule (station/source_bench.h: a part every 84 frames, lying still from
frame 36 to 72 of its cycle), PIL reading every saved PNG, hashlib for
"never overwritten", and the byte order of names (what `ls`, and
core/dataset.h, sort by)."""
import glob
import hashlib
import json
import os
import subprocess
import sys

STATION, RECIPE, OUT = sys.argv[1:4]
CYCLE, STILL_FROM, STILL_TO = 84, 36, 72   # station/source_bench.h
ENV = dict(os.environ, LC_ALL="C")


def fail(msg):
    print("FAIL " + msg)
    sys.exit(1)


def run(args, stdin="", env=ENV):
    p = subprocess.run([STATION, "capture", RECIPE] + args, input=stdin, capture_output=True,
                       text=True, timeout=120, env=env)
    return p.returncode, [json.loads(l) for l in p.stdout.splitlines() if l.strip()], p.stderr


def saved(objs):
    return [o for o in objs if o.get("event") == "saved"]


def sha(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def check_images(paths, want_size):
    from PIL import Image
    for p in paths:
        im = Image.open(p)
        im.load()
        if im.size != want_size or im.mode != "RGB":
            fail("%s: %s %s, want RGB %s" % (p, im.mode, im.size, want_size))


def main():
    data = os.path.join(OUT, "data")
    # 3 whole cycles: parts 0, 1, 2 each lie still from frame 84k+36 to 84k+72
    frames = 3 * CYCLE
    rc, out, err = run(["--out", data, "--headless", "--trigger", "auto", "--fps", "0",
                        "--frames", str(frames)], stdin=None)
    got = saved(out)
    if rc != 0 or len(got) != 3:
        fail("auto trigger over %d bench frames: exit %d, %d saved, want one per part (3): %s"
             % (frames, rc, len(got), err[-300:]))
    if [o["frame"] for o in got] != ["bench:1:0", "bench:1:1", "bench:1:2"]:
        fail("saved frames %s, want one of each part 0, 1, 2" % [o["frame"] for o in got])
    if [o["count"] for o in got] != [1, 2, 3]:
        fail("running count %s, want 1 2 3" % [o["count"] for o in got])
    files = sorted(glob.glob(os.path.join(data, "images", "*")))
    if files != sorted(o["path"] for o in got) or [o["path"] for o in got] != files:
        fail("files %s do not sort in capture order %s" % (files, [o["path"] for o in got]))
    check_images(files, (480, 360))
    if len({sha(p) for p in files}) != 3:
        fail("the three parts' frames are not three different pictures")
    print("ok   auto trigger: %d bench frames, one frame saved per part, readable 480x360 RGB"
          % frames)

    before = {p: sha(p) for p in files}
    # key trigger: an empty stdin line saves the frame in view (one at a
    # time: a second asked before the first is saved is the same request);
    # end of input quits
    p = subprocess.Popen([STATION, "capture", RECIPE, "--out", data, "--headless", "--fps", "30"],
                         stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True, env=ENV)
    got = []
    for _ in range(2):
        p.stdin.write("\n")
        p.stdin.flush()
        while True:
            line = p.stdout.readline()
            if not line:
                break
            o = json.loads(line)
            if o.get("event") == "saved":
                got.append(o)
                break
    p.stdin.close()
    p.stdout.read()
    err = p.stderr.read()
    rc = p.wait(timeout=60)
    files2 = sorted(glob.glob(os.path.join(data, "images", "*")))
    if rc != 0 or len(got) != 2 or len(files2) != 5:
        fail("key trigger: exit %d, %d saved, %d files (want 2 and 5): %s"
             % (rc, len(got), len(files2), err[-300:]))
    if files2[:3] != files or [o["path"] for o in got] != files2[3:]:
        fail("a second session's names %s do not sort after the first's" % files2)
    if any(sha(p) != h for p, h in before.items()):
        fail("a second session changed a frame saved before")
    if glob.glob(os.path.join(data, "images", "*.tmp")):
        fail("a temporary file was left behind")
    check_images(files2[3:], (480, 360))
    print("ok   key trigger: 2 more frames, names sort after the first session's, nothing "
          "overwritten")

    rc, out, err = run(["--out", "/proc/no-such/dir",
                        "--headless", "--fps", "0"], stdin="\n")
    if rc != 3 or "/proc/no-such" not in err:
        fail("an unwritable --out: exit %d, %s" % (rc, err[-200:]))
    print("ok   unwritable folder refused naming it")

    env = dict(ENV, SDL_VIDEODRIVER="offscreen")
    snap = os.path.join(OUT, "capture-screen.png")
    rc, out, err = run(["--out", os.path.join(OUT, "window"), "--trigger", "auto", "--fps", "0",
                        "--count", "1", "--allow-offscreen", "--snapshot", snap], env=env)
    if rc != 0 or len(saved(out)) != 1 or not os.path.exists(snap):
        fail("windowed capture: exit %d, %d saved, snapshot %s: %s"
             % (rc, len(saved(out)), os.path.exists(snap), err[-300:]))
    from PIL import Image
    im = Image.open(snap).convert("RGB")
    if im.size[0] < 640 or len(set(im.getdata())) < 50:
        fail("capture snapshot %s looks empty" % (im.size,))
    print("ok   windowed capture under SDL offscreen, --count 1: snapshot %s" % snap)


main()
