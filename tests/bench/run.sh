#!/bin/sh
# make bench: per-stage figures of the station beside XGBoost's own predictor
# (same model, same features) and the same filter bank in OpenCV from Python,
# then locating the part, painting its zones and drawing the overlay.
# Figures, not a test: nothing here passes or fails on speed.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
REPEAT=${REPEAT:-15}
demo="$BUILD/bench-demo"
recipe="$demo/ostrel-cap38.ini"
if [ ! -f "$demo/ostrel-cap38.model.json" ]; then
    echo "bench: training the demo model first (station demo --out $demo)" >&2
    "$BUILD/station" demo --out "$demo" --seed 1 >/dev/null 2>"$demo.log" || {
        cat "$demo.log" >&2
        exit 1
    }
fi
results="$BUILD/bench-results.jsonl"
: >"$results"
for size in 640x480 1280x960; do
    w=${size%x*}
    h=${size#*x}
    for t in 1 2; do
        echo "bench: $size, $t thread(s)" >&2
        s=$("$BUILD/station" bench "$recipe" --size "$size" --threads "$t" --repeat "$REPEAT" --xgboost)
        o=$("$PYTHON" tests/bench/opencv_bank.py "$recipe" "$w" "$h" "$t" 5)
        echo "{\"station\": $s, \"opencv\": $o}" >>"$results"
    done
done
"$PYTHON" tests/bench/report.py "$results"
echo
"$BUILD/tests/bench/bench_overlay"
echo "bench: regions alone on simulated class maps" >&2
"$BUILD/tests/bench/regions_bench" "$REPEAT"
echo "bench: flat-field correction" >&2
"$BUILD/tests/bench/flat_bench" "$REPEAT"
# The inspection log: records per second with reject evidence, verify time.
echo "bench: inspection log" >&2
"$BUILD/tests/bench/log_bench" "$BUILD/bench-log" "${LOG_RECORDS:-40}" "${LOG_VERIFY_RECORDS:-100000}"
# The audit's readers: stats, report and export on 100 000 records.
echo "bench: audit stats, report, export" >&2
"$PYTHON" tests/bench/audit.py
# A cut network as the feature extractor: VGG16 block 1 beside torch.
echo "bench: CNN features (VGG16 block 1) beside torch" >&2
"$PYTHON" tests/bench/cnn_bench.py "$BUILD" "${CNN_REPEAT:-7}"
