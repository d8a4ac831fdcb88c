# Sourced by the log tests: a tiny trained demo recipe in $fixture, made once
# per build folder (a 4-part demo, a few seconds).  Needs BUILD set.
fixture="$BUILD/e2e-log-fixture"
# remade whenever the station binary is newer, so it never outlives a format change
if [ ! -f "$fixture/ostrel-cap38.model.json.meta.json" ] ||
    [ "$BUILD/station" -nt "$fixture/ostrel-cap38.model.json.meta.json" ]; then
    rm -rf "$fixture"
    "$BUILD/station" demo --out "$fixture" --seed 5 --train 4 --test 3 --shifted 0 \
        2>"$fixture.log" || {
        tail -5 "$fixture.log"
        echo "FAIL the tiny demo the log tests start from"
        exit 1
    }
fi
# A fresh folder $out with its own copy of the recipe and model.
fresh() {
    rm -rf "$out"
    mkdir -p "$out"
    cp "$fixture"/ostrel-cap38.* "$out"/
    recipe="$out/ostrel-cap38.ini"
    # the log tests are about the log, not verification: the copy lists no
    # master parts, so no verification_due gate (the demo recipe's masters
    # and [verification] come last in the file)
    sed -i '/^\[verification\]/,$d' "$recipe"
    images="$fixture/test/images"
}
