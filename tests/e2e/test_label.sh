#!/bin/sh
# station label from the command line under SDL's offscreen driver: the
# refusal without --allow-offscreen, a scripted session whose saved mask is
# read back with PIL and compared with the disc the script painted (pixel
# centres within r, computed here with numpy), the snapshot's size, a bad
# label file refused with its name, and the exit statuses (cmd_label.c:
# 0 done, 3 bad input, 4 usage).
set -eu
BUILD=${STATION_BUILD:-build}
PY=${STATION_PYTHON:-/usr/bin/python3}
out="$BUILD/e2e-label"
rm -rf "$out"
mkdir -p "$out"
"$BUILD/tests/tools/simrender" 11 2 160 120 "$out/ds" >/dev/null
rm -r "$out/ds/labels"
export SDL_VIDEODRIVER=offscreen
set +e
"$BUILD/station" label "$out/ds" 2>"$out/refused.log"
rc=$?
set -e
[ "$rc" = 3 ] && grep -q "'offscreen' video driver shows nothing" "$out/refused.log" || {
    echo "FAIL without --allow-offscreen: exit $rc, $(cat "$out/refused.log")"
    exit 1
}
printf 'key 3\nkey ]\ndown 40 30\nup 40 30\nsnapshot %s\n' "$out/shot.png" >"$out/script.txt"
"$BUILD/station" label "$out/ds" --recipe recipes/ostrel-cap38.ini --allow-offscreen \
    --script "$out/script.txt" 2>"$out/run.log" || { cat "$out/run.log"; echo "FAIL scripted run"; exit 1; }
"$PY" - "$out" <<'PYEOF'
import sys
import numpy as np
from PIL import Image
out = sys.argv[1]
m = np.asarray(Image.open(f"{out}/ds/labels/part_00000.png"))
yy, xx = np.mgrid[0:120, 0:160]
want = np.where((xx - 40) ** 2 + (yy - 30) ** 2 <= 5 * 5, 3, 255)
assert m.dtype == np.uint8 and np.array_equal(m, want), "saved mask differs from the disc"
assert Image.open(f"{out}/shot.png").size == (1280, 800), "snapshot size"
print("ok   label: the scripted disc of radius 5 saved exactly; snapshot 1280x800")
PYEOF
"$PY" -c "
from PIL import Image; import numpy as np
Image.fromarray(np.full((120, 159), 255, np.uint8)).save('$out/ds/labels/part_00001.png')"
set +e
"$BUILD/station" label "$out/ds" --allow-offscreen --snapshot "$out/no.png" 2>"$out/bad.log"
rc=$?
set -e
[ "$rc" = 3 ] && grep -q "labels/part_00001.png: label mask is 159x120 but its image is 160x120" "$out/bad.log" &&
    [ "$(wc -l <"$out/bad.log")" = 1 ] || { echo "FAIL bad mask: exit $rc, $(cat "$out/bad.log")"; exit 1; }
set +e
"$BUILD/station" label 2>/dev/null
rc=$?
set -e
[ "$rc" = 4 ] || { echo "FAIL no DIR: exit $rc, want 4"; exit 1; }
echo "ok   label: offscreen refused (3), bad mask refused naming the file (3), usage (4)"
