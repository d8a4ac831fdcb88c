#!/bin/sh
# The recipe's scale from a calibration file, end to end: a tiny demo, then
# the same frames inspected with [scale] calibration = FILE instead of the
# mm_per_px keys.  A calibration of the same scale (an affine homography)
# must give the same verdicts and areas; one past its validity must give
# every frame NO_VERDICT with calibration_expired (issue 6); a calibration
# for another frame size must give NO_VERDICT too.
set -eu
BUILD=${STATION_BUILD:-build}
out="$BUILD/e2e-calibration"
rm -rf "$out"
mkdir -p "$out"
"$BUILD/station" demo --out "$out/demo" --seed 3 --train 4 --test 2 --shifted 1 2>"$out/demo.log" || {
    tail -5 "$out/demo.log"
    echo "FAIL demo"
    exit 1
}
recipe="$out/demo/ostrel-cap38.ini"
frames="$out/demo/test/images/part-0004.png $out/demo/test/images/part-0005.png"
calfile() { # NAME CREATED WIDTH
    cat >"$out/demo/$1" <<JSON
{"format": 1, "camera": "demo-bench", "width": $3, "height": 360, "created": "$2",
 "valid_days": 30, "mm_per_px_x": 0.17, "mm_per_px_y": 0.17,
 "image_to_plane": [0.17, 0, 0, 0, 0.17, 0, 0, 0, 1], "tilt_deg": 0,
 "reprojection": {"rms_px": 0.1, "worst_px": 0.2, "rms_mm": 0.017, "worst_mm": 0.034},
 "board": {"cols": 9, "rows": 6, "square_mm": 5, "views": 1}}
JSON
}
with_cal() { # NAME -> recipe using it
    sed -e '/^mm_per_px_[xy] = /d' -e "s/^\[scale\]/[scale]\ncalibration = $1/" "$recipe" \
        >"$out/demo/with-$1.ini"
}
calfile fresh.json "$(date -u +%Y-%m-%dT%H:%M:%SZ)" 480
calfile old.json 2020-01-01T00:00:00Z 480
calfile wide.json "$(date -u +%Y-%m-%dT%H:%M:%SZ)" 640
for c in fresh.json old.json wide.json; do with_cal $c; done
inspect() { # RECIPE OUT
    set +e
    "$BUILD/station" inspect --log "$out/log.db" "$1" $frames >"$2" 2>>"$out/inspect.log"
    echo $? >"$2.rc"
    set -e
}
inspect "$recipe" "$out/plain.jsonl"
inspect "$out/demo/with-fresh.json.ini" "$out/fresh.jsonl"
inspect "$out/demo/with-old.json.ini" "$out/old.jsonl"
inspect "$out/demo/with-wide.json.ini" "$out/wide.jsonl"
"${STATION_PYTHON:-/usr/bin/python3}" - "$out" <<'PY'
import json, sys
out = sys.argv[1]
def lines(name):
    return [json.loads(l) for l in open(f"{out}/{name}.jsonl")]
def rc(name):
    return int(open(f"{out}/{name}.jsonl.rc").read())
bad = 0
def check(what, ok, detail=""):
    global bad
    print(("ok   " if ok else "FAIL ") + what + ("" if ok else f": {detail}"))
    bad += not ok
plain, fresh, old, wide = lines("plain"), lines("fresh"), lines("old"), lines("wide")
check("two frames judged each way", all(len(x) == 2 for x in (plain, fresh, old, wide)))
check("a calibration of the same scale gives the same verdicts",
      [x["verdict"] for x in plain] == [x["verdict"] for x in fresh] and rc("plain") == rc("fresh"),
      [(x["verdict"], y["verdict"]) for x, y in zip(plain, fresh)])
areas = lambda ls: [round(g["area_mm2"], 9) for x in ls for g in x.get("regions", [])]
check("... and the same region areas", areas(plain) == areas(fresh))
check("an expired calibration: every frame NO_VERDICT, calibration_expired",
      rc("old") == 2 and all(x["verdict"] == "NO_VERDICT" and
                            any(r["rule"] == "calibration_expired" for r in x["reasons"])
                            for x in old), old)
check("a calibration for another frame size: NO_VERDICT",
      rc("wide") == 2 and all(x["verdict"] == "NO_VERDICT" for x in wide), wide)
sys.exit(1 if bad else 0)
PY
