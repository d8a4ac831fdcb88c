#!/usr/bin/python3
"""The bad-input table (tests/e2e/bad_input.tsv) run row by row: each kind of
bad input gets its exact one-line message on stderr and its exit status
(DEVELOPERS.md: 2 NO VERDICT, 3 bad input, 4 usage).  README.md's table is
made from the same file (`bad_input.py --table`) and checked here to be
identical, so the two cannot drift apart.

Rows marked non-root need a user whom file permissions bind: run as root,
they run as nobody through setpriv(1) (util-linux), after checking that root
itself is not refused (root bypasses permission bits, capabilities(7)
CAP_DAC_OVERRIDE, which is why the drop is needed).  The scratch folder is a
fresh mkdtemp under /tmp that nobody may enter, with its own copy of the
station binary, since the build folder may lie where nobody cannot.

Usage: bad_input.py BUILD FIXTURE  (FIXTURE: a trained tiny demo, see
log_fixture.sh) or bad_input.py --table."""
import hashlib
import json
import os
import re
import shutil
import stat
import struct
import subprocess
import sys
import tempfile
import zlib

HERE = os.path.dirname(os.path.abspath(__file__))
TSV = os.path.join(HERE, "bad_input.tsv")
README = os.path.join(HERE, "..", "..", "README.md")
BEGIN = "<!-- bad-input table: made by tests/e2e/bad_input.py --table from tests/e2e/bad_input.tsv -->"
END = "<!-- end of bad-input table -->"


def rows():
    out = []
    for line in open(TSV, encoding="utf-8"):
        line = line.rstrip("\n")
        if not line or line.startswith("#"):
            continue
        kind, who, code, message, command = line.split("\t")
        out.append({"kind": kind, "as": who, "exit": int(code), "message": message,
                    "command": command})
    return out


def shown(text):
    return (text.replace("{S}", "station").replace("{R}", "DIR/r/ostrel-cap38.ini")
            .replace("{I}", "DIR/good.png").replace("{D}", "DIR").replace("{HEX}", "HASH"))


def table():
    lines = ["| bad input | example (DIR: the folder) | exit | message, exactly as printed |",
             "|---|---|---|---|"]
    for r in rows():
        who = " (as a non-root user)" if r["as"] == "non-root" else ""
        lines.append("| %s%s | `%s` | %d | `%s` |" % (r["kind"], who, shown(r["command"]),
                                                     r["exit"], shown(r["message"])))
    return "\n".join(lines)


def readme_table():
    text = open(README, encoding="utf-8").read()
    if BEGIN not in text or END not in text:
        return None
    return text.split(BEGIN, 1)[1].split(END, 1)[0].strip("\n")


def png_chunk(kind, data):
    return (struct.pack(">I", len(data)) + kind + data +
            struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))


def write(path, data):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "wb" if isinstance(data, bytes) else "w") as f:
        f.write(data)


def dataset(d, name, label_png):
    """DIR/name/images/a.png (a real frame) and labels/a.png (the bad mask)."""
    frame = os.path.join(d, "good.png")
    os.makedirs(os.path.join(d, name, "images"))
    shutil.copy(frame, os.path.join(d, name, "images", "a.png"))
    write(os.path.join(d, name, "labels", "a.png"), label_png)


def png(w, h, depth, colour_type, row):
    """A PNG of w x h, row(y) the bytes of row y (ISO/IEC 15948: IHDR, IDAT
    of filter-0 rows, IEND)."""
    ihdr = struct.pack(">IIBBBBB", w, h, depth, colour_type, 0, 0, 0)
    raw = b"".join(b"\0" + row(y) for y in range(h))
    return (b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) +
            png_chunk(b"IDAT", zlib.compress(raw)) + png_chunk(b"IEND", b""))


def copy_recipe(fixture, dst):
    os.makedirs(dst)
    for f in os.listdir(fixture):
        if f.startswith("ostrel-cap38."):
            shutil.copy(os.path.join(fixture, f), dst)
    # masters need a verification first; these rows are about bad input
    p = os.path.join(dst, "ostrel-cap38.ini")
    text = open(p).read()
    write(p, text.split("[verification]")[0])
    return p


def set_model_hash(d):
    model = os.path.join(d, "ostrel-cap38.model.json")
    meta = model + ".meta.json"
    m = json.load(open(meta))
    m["model_sha256"] = hashlib.sha256(open(model, "rb").read()).hexdigest()
    write(meta, json.dumps(m))


def fixtures(d, fixture):
    frames = os.path.join(fixture, "test", "images")
    shutil.copy(os.path.join(frames, sorted(os.listdir(frames))[0]), os.path.join(d, "good.png"))
    copy_recipe(fixture, os.path.join(d, "r"))
    write(os.path.join(d, "empty.ini"), "")
    write(os.path.join(d, "typo.ini"), "[product]\nformat = 1\nidd = x\n")
    write(os.path.join(d, "section.ini"), "[product]\nformat = 1\n[colour]\n")
    write(os.path.join(d, "value.ini"), "[product]\nformat = one\n")
    write(os.path.join(d, "range.ini"), "[product]\nformat = 1\nid = x\nversion = 0\n")
    write(os.path.join(d, "absolute.ini"), "[classifier]\nmodel = /srv/models/m.json\n")
    write(os.path.join(d, "up.ini"), "[classifier]\nmodel = ../m.json\n")
    os.makedirs(os.path.join(d, "elsewhere"))
    os.makedirs(os.path.join(d, "linked"))
    os.symlink(os.path.join(d, "elsewhere"), os.path.join(d, "linked", "out"))
    write(os.path.join(d, "linked", "link.ini"), "[classifier]\nmodel = out/m.json\n")
    write(os.path.join(d, "empty.png"), b"")
    good = open(os.path.join(d, "good.png"), "rb").read()
    write(os.path.join(d, "cut.png"), good[:300])
    # a header and an empty IDAT: the size is refused before any data is read
    write(os.path.join(d, "huge.png"), b"\x89PNG\r\n\x1a\n" +
          png_chunk(b"IHDR", struct.pack(">IIBBBBB", 20000, 20000, 8, 2, 0, 0, 0)) +
          png_chunk(b"IDAT", b"") + png_chunk(b"IEND", b""))
    w, h = struct.unpack(">II", good[16:24])
    dataset(d, "depth", png(w, h, 16, 0, lambda y: b"\0\0" * w))
    dataset(d, "rgb", png(w, h, 8, 2, lambda y: b"\0\0\0" * w))
    # unlabelled (255) but for label 9 at (17, 10)
    dataset(d, "range", png(w, h, 8, 0,
                            lambda y: b"\xff" * 17 + (b"\x09" if y == 10 else b"\xff") + b"\xff" * (w - 18)))
    nan = os.path.dirname(copy_recipe(fixture, os.path.join(d, "nan")))
    p = os.path.join(nan, "ostrel-cap38.model.json")
    text = open(p).read()
    assert re.search(r'"base_score":"[^"]*"', text), "XGBoost's JSON has no base_score string"
    write(p, re.sub(r'"base_score":"[^"]*"', '"base_score":"NaN"', text, count=1))
    set_model_hash(nan)
    changed = os.path.dirname(copy_recipe(fixture, os.path.join(d, "changed")))
    with open(os.path.join(changed, "ostrel-cap38.model.json"), "a") as f:
        f.write(" ")
    os.makedirs(os.path.join(d, "locked-data", "images"))
    os.chmod(os.path.join(d, "locked-data"), 0)
    shutil.copy(os.path.join(d, "r", "ostrel-cap38.ini"), os.path.join(d, "locked.ini"))
    os.chmod(os.path.join(d, "locked.ini"), 0)
    os.makedirs(os.path.join(d, "rootonly"))
    # the one record audit dispose would act on
    os.makedirs(os.path.join(d, "log"))


def pattern(message, d):
    parts = re.split(r"(\{D\}|\{HEX\})", message)
    out = ""
    for p in parts:
        out += re.escape(d) if p == "{D}" else "[0-9a-f]{12}" if p == "{HEX}" else re.escape(p)
    return re.compile("^" + out + "$")


def main():
    if sys.argv[1:] == ["--table"]:
        print(table())
        return 0
    build, fixture = sys.argv[1], sys.argv[2]
    failed = 0
    def check(ok, what, detail=""):
        nonlocal failed
        print(("ok   " if ok else "FAIL ") + what + ("" if ok else ": " + str(detail)))
        failed += not ok
    check(readme_table() == table(), "README.md's bad-input table is made from bad_input.tsv",
          "regenerate it: /usr/bin/python3 tests/e2e/bad_input.py --table")
    d = tempfile.mkdtemp(prefix="station-bad-input.")
    try:
        os.chmod(d, 0o755)
        station = os.path.join(d, "station")
        shutil.copy(os.path.join(build, "station"), station)
        fixtures(d, os.path.abspath(fixture))
        root = os.geteuid() == 0
        drop = ["setpriv", "--reuid=nobody", "--regid=nogroup", "--clear-groups"]
        if root:
            r = subprocess.run(["cat", os.path.join(d, "locked.ini")], capture_output=True)
            check(r.returncode == 0, "root reads a mode-000 file (why the non-root rows drop to nobody)",
                  r.returncode)
            if not shutil.which("setpriv"):
                print("SKIP the non-root rows: running as root without setpriv(1)")
        env = dict(os.environ, XDG_DATA_HOME=os.path.join(d, "xdg"))
        for row in rows():
            cmd = (row["command"].replace("{S}", station).replace("{R}", os.path.join(d, "r", "ostrel-cap38.ini"))
                   .replace("{I}", os.path.join(d, "good.png")).replace("{D}", d)).split()
            if row["as"] == "non-root" and root:
                if not shutil.which("setpriv"):
                    continue
                cmd = drop + cmd
            r = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=300)
            want = pattern(row["message"], d)
            lines = r.stderr.splitlines()
            check(r.returncode == row["exit"] and any(want.match(l) for l in lines),
                  "%s: exit %d and its message" % (row["kind"], row["exit"]),
                  "exit %d, stderr %r" % (r.returncode, r.stderr[:600]))
        # nothing already logged is lost: the image rows each left one NO_VERDICT record
        r = subprocess.run([station, "audit", "list", "--log", os.path.join(d, "log", "log.db"), "--json"],
                           capture_output=True, text=True)
        got = [json.loads(l)["verdict"] for l in r.stdout.splitlines() if l.strip()]
        check(got == ["NO_VERDICT"] * 4, "each unreadable image is one NO_VERDICT record in the log", got)
    finally:
        for root_dir, dirs, _ in os.walk(d):
            for x in dirs:
                p = os.path.join(root_dir, x)
                if not os.path.islink(p):
                    os.chmod(p, 0o755)
        shutil.rmtree(d)
    print("bad input: %d failed" % failed)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
