#!/bin/sh
# make bench: per-stage figures of the station beside XGBoost's own predictor
# (same model, same features) and the same filter bank in OpenCV from Python,
# and a Python peer of the whole inspection (torch CNN block 1 + XGBoost), the
# filter floor, peak memory, training time and callgrind instruction counts;
# then locating the part, painting its zones and drawing the overlay; the
# log, the audit, the live station, the screen, CNN features, and forwarding
# to the central database.
# Figures, not a test: nothing here passes or fails on speed.
set -eu
BUILD=${BUILD:-build}
PYTHON=${PYTHON:-/usr/bin/python3}
REPEAT=${REPEAT:-20}
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
frames="$BUILD/bench-frames"
: >"$results"
for size in 640x480 1280x960; do
    w=${size%x*}
    h=${size#*x}
    mkdir -p "$frames/$size"
    for t in 1 2; do
        echo "bench: $size, $t thread(s)" >&2
        s=$("$BUILD/station" bench "$recipe" --size "$size" --threads "$t" --repeat "$REPEAT" --xgboost \
            --save-frame "$frames/$size")
        o=$("$PYTHON" tests/bench/opencv_bank.py "$recipe" "$w" "$h" "$t" 5)
        # the Python peer of the whole inspection, on the first of the same frames
        p=$("$PYTHON" tests/bench/peer_pipeline.py "$frames/$size/frame.png" "$frames/$size/truth.png" \
            "$t" "${PEER_REPEAT:-5}" 2>/dev/null)
        echo "{\"station\": $s, \"opencv\": $o, \"peer\": $p}" >>"$results"
    done
done
# Peak memory of the inspection alone (no XGBoost beside it) at the larger size.
echo "bench: peak memory at 1280x960" >&2
mem=$("$BUILD/station" bench "$recipe" --size 1280x960 --threads 2 --repeat 3 --frames-only)
# Training the demo recipe, timed, into a copy so the bench's model stays.
echo "bench: training the demo recipe" >&2
mkdir -p "$demo/train-timing"
sed 's|^model = .*|model = retrained.model.json|' "$recipe" >"$demo/train-timing/recipe.ini"
t0=$(date +%s.%N)
"$BUILD/station" train "$demo/train-timing/recipe.ini" --data "$demo/train" >"$demo/train-timing/log" 2>&1 || {
    cat "$demo/train-timing/log" >&2
    exit 1
}
t1=$(date +%s.%N)
train_s=$("$PYTHON" -c "print(round($t1 - $t0, 1))")
# The coarse approximation ([classifier] coarse, off by default): its stage
# times beside the exact pixel pass on the same frames, and its effect on the
# demo's test set (IoU per class, verdicts).
echo "bench: the coarse option" >&2
sed 's|^validation_fraction = .*|&\ncoarse = yes|' "$recipe" >"$demo/coarse.ini"
coarse=$("$BUILD/station" bench "$demo/coarse.ini" --size 640x480 --threads 2 --repeat "$REPEAT")
exact=$("$BUILD/station" bench "$recipe" --size 640x480 --threads 2 --repeat "$REPEAT" --frames-only)
effect=$("$PYTHON" tests/bench/coarse_effect.py "$BUILD" "$recipe" "$demo/coarse.ini" "$demo")
# Instructions (load-independent) of the features and classify stages on two
# 640x480 frames, one thread, under callgrind.
cg=""
if command -v valgrind >/dev/null && [ "${CALLGRIND:-1}" = 1 ]; then
    echo "bench: callgrind on two 640x480 frames (valgrind has no AVX-512: the AVX2 and scalar paths run)" >&2
    valgrind --tool=callgrind --callgrind-out-file="$BUILD/bench-callgrind.out" \
        --toggle-collect=inspector_run \
        "$BUILD/station" bench "$recipe" --threads 1 --repeat 1 --frames-only >/dev/null 2>"$BUILD/bench-callgrind.log"
    # inclusive counts inside inspector_run: feat_compute_box is the features
    # stage, forest_classify the classifier's share of the classify stage
    cg=$(callgrind_annotate --inclusive=yes --threshold=100 "$BUILD/bench-callgrind.out" 2>/dev/null |
        awk '$2 ~ /^\(/ && $3 ~ /(^|\/)core\/[a-z]+\.c:(feat_compute_box|forest_classify|inspector_run)$/ {
            gsub(",", "", $1); sub(".*:", "", $3); if (!seen[$3]++) print $1, $3 }' | tr '\n' ';')
fi
echo "{\"memory\": $mem, \"train_s\": $train_s, \"callgrind\": \"$cg\", \"coarse\": $coarse, \"exact\": $exact, \"coarse_effect\": $effect}" >"$BUILD/bench-extra.json"
"$PYTHON" tests/bench/report.py "$results" "$BUILD/bench-extra.json"
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
# The live station: preview rate, trigger-to-verdict latency, idle CPU.
echo "bench: live station" >&2
BUILD="$BUILD" PYTHON="$PYTHON" sh tests/bench/live_bench.sh
echo "bench: the operator screen" >&2
"$BUILD/tests/bench/screen_bench" 60
# A cut network as the feature extractor: VGG16 block 1 beside torch.
echo "bench: CNN features (VGG16 block 1) beside torch" >&2
"$PYTHON" tests/bench/cnn_bench.py "$BUILD" "${CNN_REPEAT:-7}"
# Forwarding to the central PostgreSQL database: records per second, and the
# catch-up of a station offline for 10 000 inspections.
echo "bench: forwarding to the central database" >&2
BUILD="$BUILD" PYTHON="$PYTHON" sh tests/bench/sync_bench.sh || [ $? = 77 ]
# The audit verbs on the central database beside the same verbs on a local log.
echo "bench: the audit verbs on the central database" >&2
BUILD="$BUILD" PYTHON="$PYTHON" sh tests/bench/central_bench.sh || [ $? = 77 ]
