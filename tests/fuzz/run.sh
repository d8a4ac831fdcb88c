#!/bin/sh
# Builds the libFuzzer harnesses (tests/fuzz/fuzz_*.c) and runs each for
# SECONDS from its seeds: first every regression input in
# tests/fuzz/regress/TARGET/ once (a crash there fails the run), then
# fuzzing from tests/fuzz/corpus/TARGET/ into a working corpus under
# BUILD/fuzz/corpus/TARGET/ (the seeds in the repository stay as they are).
# A crash leaves its input in BUILD/fuzz/crashes/ and fails the run.  Prints
# one line per target with libFuzzer's final figures (executions, cov, ft,
# corpus size) and writes them to BUILD/fuzz/summary.tsv.
# Usage: run.sh BUILD SECONDS [TARGET ...]; exits 77 (skipped) when clang
# or its libFuzzer runtime is missing.
BUILD=${1:?usage: run.sh BUILD SECONDS [TARGET ...]}
SECONDS_EACH=${2:?usage: run.sh BUILD SECONDS [TARGET ...]}
shift 2
FUZZ_CC=${FUZZ_CC:-clang}
here=$(dirname "$0")
probe=$(mktemp -d) || exit 1
trap 'rm -rf "$probe"' EXIT
printf 'int LLVMFuzzerTestOneInput(const unsigned char *d, unsigned long n) { (void)d; (void)n; return 0; }\n' \
    >"$probe/p.c"
if ! command -v "$FUZZ_CC" >/dev/null 2>&1 ||
    ! "$FUZZ_CC" -fsanitize=fuzzer,address,undefined "$probe/p.c" -o "$probe/p" >/dev/null 2>&1; then
    echo "SKIP: $FUZZ_CC with libFuzzer is missing (Debian: apt-get install clang libclang-rt-14-dev)"
    exit 77
fi
"${MAKE:-make}" --no-print-directory BUILD="$BUILD" FUZZ_CC="$FUZZ_CC" fuzz-programs || exit 1
if [ $# = 0 ]; then
    set -- $(ls "$here"/fuzz_*.c | sed 's|.*/fuzz_||; s|\.c$||')
fi
max_len() {
    case $1 in
    png | forest) echo 65536 ;;
    recipe | flatfield) echo 16384 ;;
    *) echo 4096 ;;
    esac
}
out="$BUILD/fuzz"
mkdir -p "$out/crashes" "$out/logs"
printf 'target\tseconds\texecutions\tcov\tft\tcorpus\tregressions\n' >"$out/summary.tsv"
failed=""
for t in "$@"; do
    bin="$out/fuzz_$t"
    log="$out/logs/$t.log"
    seeds="$here/corpus/$t"
    reg="$here/regress/$t"
    nreg=0
    if [ -d "$reg" ] && [ -n "$(ls "$reg")" ]; then
        nreg=$(ls "$reg" | wc -l)
        if ! "$bin" "$reg"/* >"$out/logs/$t.regress.log" 2>&1; then
            echo "FAIL  fuzz $t: a regression input crashes again (log: $out/logs/$t.regress.log)"
            tail -n 20 "$out/logs/$t.regress.log" | sed 's/^/      /'
            failed="$failed $t"
            continue
        fi
    fi
    mkdir -p "$out/corpus/$t"
    "$bin" -max_len="$(max_len "$t")" -max_total_time="$SECONDS_EACH" -timeout=10 \
        -rss_limit_mb=2048 -print_final_stats=1 -artifact_prefix="$out/crashes/$t-" \
        "$out/corpus/$t" "$seeds" >"$log" 2>&1
    rc=$?
    done_line=$(grep -E '^#[0-9]+[[:space:]]+(DONE|INITED|NEW|REDUCE|pulse)' "$log" | tail -n 1)
    execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)
    cov=$(echo "$done_line" | sed -n 's/.* cov: \([0-9]*\).*/\1/p')
    ft=$(echo "$done_line" | sed -n 's/.* ft: \([0-9]*\).*/\1/p')
    corp=$(echo "$done_line" | sed -n 's/.* corp: \([0-9]*\).*/\1/p')
    printf '%s\t%s\t%s\t%s\t%s\t%s\t%s\n' "$t" "$SECONDS_EACH" "${execs:-?}" "${cov:-?}" "${ft:-?}" \
        "${corp:-?}" "$nreg" >>"$out/summary.tsv"
    if [ "$rc" != 0 ]; then
        echo "FAIL  fuzz $t: exit $rc, input in $out/crashes/ (log: $log)"
        grep -m1 -E 'ERROR|SUMMARY|deadly' "$log" | sed 's/^/      /'
        failed="$failed $t"
    else
        echo "ok    fuzz $t: ${execs:-?} executions, cov ${cov:-?}, ft ${ft:-?}, corpus ${corp:-?}, $nreg regression inputs"
    fi
done
[ -z "$failed" ] || {
    echo "fuzz: crashes in:$failed (copy each input to tests/fuzz/regress/TARGET/ and fix the parser)"
    exit 1
}
