#!/bin/sh
# The demo under valgrind's memcheck: no memory error and nothing definitely
# lost (valgrind's manual, "Memory leak detection": definitely lost = no
# pointer to the block anywhere).  XGBoost, OpenMP, SDL and fontconfig keep
# blocks reachable until exit, which is "still reachable" or "possibly
# lost" and not counted.  Reduced to what memcheck can run in minutes: the
# demo recipe with 4 rounds, sigmas 1 2 and fewer samples, 4 training, 2
# test and 1 shifted part (the same code paths: render, train, evaluate,
# masters, inspect with the log and evidence).  Usage: memcheck.sh BUILD
set -eu
BUILD=${1:-build}
command -v valgrind >/dev/null || { echo "SKIP: valgrind is missing (Debian: apt-get install valgrind)"; exit 77; }
out="$BUILD/memcheck"
rm -rf "$out"
mkdir -p "$out"
sed -e 's/^rounds = .*/rounds = 4/' -e 's/^sigmas = .*/sigmas = 1 2/' -e 's/^early_stop = .*/early_stop = 0/' \
    -e 's/^samples_per_class = .*/samples_per_class = 300/' recipes/ostrel-cap38.ini >"$out/recipe.ini"
set +e
valgrind --tool=memcheck --error-exitcode=1 --leak-check=full --errors-for-leak-kinds=definite \
    --show-leak-kinds=definite --num-callers=30 --suppressions=tests/valgrind.supp \
    --log-file="$out/valgrind.log" \
    "$BUILD/station" demo --recipe "$out/recipe.ini" --out "$out/demo" --seed 3 --train 4 --test 2 \
    --shifted 1 >"$out/demo.out" 2>"$out/demo.log"
rc=$?
set -e
grep -E 'ERROR SUMMARY|definitely lost|indirectly lost|possibly lost|still reachable|suppressed:' "$out/valgrind.log" | sed 's/^==[0-9]*== */    /'
if [ "$rc" != 0 ]; then
    echo "FAIL memcheck: exit $rc (log: $out/valgrind.log, demo: $out/demo.log)"
    exit 1
fi
echo "ok   memcheck: the demo ran clean under valgrind"
