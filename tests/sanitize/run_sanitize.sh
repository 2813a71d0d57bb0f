#!/bin/sh
# Runs the whole test suite (ctest) in a build made with -DFXL_SANITIZE=ON
# (AddressSanitizer, LeakSanitizer, UndefinedBehaviorSanitizer). Used by
# `make sanitize` and .ci/run; see docs/robustness.md.
#   run_sanitize.sh BUILD_DIR
# Every sanitizer report is written to BUILD_DIR/sanitizer-logs/ instead of
# stderr: a command-line test that expects fxledger to fail (exit 2) would
# not notice a leak report's own exit code, so any report there fails the run
# even when every test passed.
set -u

build=$(cd "$1" && pwd)
logs="$build/sanitizer-logs"
rm -rf "$logs"
mkdir -p "$logs"

ASAN_OPTIONS="log_path=$logs/asan:detect_leaks=1:strict_string_checks=1:check_initialization_order=1:detect_invalid_pointer_pairs=1"
UBSAN_OPTIONS="log_path=$logs/ubsan:print_stacktrace=1:halt_on_error=1"
LSAN_OPTIONS="log_path=$logs/lsan"
# Tests that measure memory use skip themselves under the sanitizers.
FXL_SANITIZE=1
export ASAN_OPTIONS UBSAN_OPTIONS LSAN_OPTIONS FXL_SANITIZE

(cd "$build" && ctest --output-on-failure -j2)
rc=$?

reports=$(find "$logs" -type f | sort)
if [ -n "$reports" ]; then
    echo "sanitizer reports in $logs:"
    for f in $reports; do
        echo "---- $f"
        head -40 "$f"
    done
    rc=1
fi
if [ $rc -eq 0 ]; then
    echo "sanitize: every test passed with ASan, LSan and UBSan, no report"
else
    echo "sanitize: FAILED"
fi
exit $rc
