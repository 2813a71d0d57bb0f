#!/bin/sh
# Runs each libFuzzer harness for a bounded time, two at a time (one per
# core). Used by `make fuzz`; see docs/robustness.md.
#   run_fuzz.sh BUILD_DIR SECONDS PARSER...
# The working corpus grows in BUILD_DIR/fuzz-work/corpus/<parser>/ (the seed
# corpus tests/fuzz/corpus/<parser>/ is read, never written). A finding is
# written to BUILD_DIR/fuzz-work/artifacts/<parser>/ and makes the run fail:
# fix it, then copy the input to tests/fuzz/regressions/<parser>/ so that
# unit.test_fuzz_regressions replays it from then on.
set -u

build=$1
seconds=$2
shift 2
src=$(cd "$(dirname "$0")" && pwd)
work="$build/fuzz-work"
jobs=${FUZZ_JOBS:-2}
status=0

run_one() {
    p=$1
    mkdir -p "$work/corpus/$p" "$work/artifacts/$p"
    "$build/tests/fuzz/fuzz_$p" -max_total_time="$seconds" -max_len=65536 -timeout=10 \
        -rss_limit_mb=2048 -print_final_stats=1 -dict="$src/$p.dict" \
        -artifact_prefix="$work/artifacts/$p/" "$work/corpus/$p" "$src/corpus/$p" \
        >"$work/$p.log" 2>&1
    rc=$?
    runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$work/$p.log" | tail -1)
    cov=$(grep -o 'cov: [0-9]*' "$work/$p.log" | tail -1)
    if [ $rc -eq 0 ]; then
        echo "fuzz $p: ${seconds} s, ${runs:-?} runs, $cov, no finding"
    elif [ $rc -eq 72 ] && grep -q 'run interrupted' "$work/$p.log"; then
        echo "fuzz $p: interrupted after ${runs:-?} runs, $cov, no finding"
    else
        echo "fuzz $p: FINDING (exit $rc); input in $work/artifacts/$p/, log $work/$p.log"
        grep -m1 -E 'ERROR|contract broken|runtime error' "$work/$p.log"
    fi
    return $rc
}

mkdir -p "$work"
set -- "$@"
while [ $# -gt 0 ]; do
    pids=""
    i=0
    while [ $# -gt 0 ] && [ $i -lt "$jobs" ]; do
        run_one "$1" &
        pids="$pids $!"
        shift
        i=$((i + 1))
    done
    for pid in $pids; do
        wait "$pid" || status=1
    done
done
if [ $status -ne 0 ]; then
    echo "fuzz: findings above; fix them and keep each input in tests/fuzz/regressions/<parser>/"
fi
exit $status
