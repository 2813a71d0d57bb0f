#!/bin/sh
# Runs the unit tests and a representative set of command-line tests under
# valgrind (memcheck), in an ordinary build. Used by `make valgrind`; see
# docs/robustness.md.
#   run_valgrind.sh BUILD_DIR [TEST_SCRIPT...]   (paths from the source root)
# The command-line tests drive fxledger (its test build, fxledger-testclock,
# whose clock the tests fix) through a wrapper that starts every
# command under valgrind with its own log file; any invalid access,
# uninitialised value or definite/indirect leak in any log fails the run,
# even in a command that a test expected to fail.
set -u

build=$(cd "$1" && pwd)
shift
src=$(cd "$(dirname "$0")/../.." && pwd)
logs="$build/valgrind-logs"
VG="valgrind --error-exitcode=99 --leak-check=full --show-leak-kinds=definite,indirect \
--errors-for-leak-kinds=definite,indirect --track-origins=yes --num-callers=30"

if ! command -v valgrind >/dev/null; then
    echo "make valgrind needs valgrind: apt-get install valgrind" >&2
    exit 1
fi
if [ $# -eq 0 ]; then
    # A whole session (set-up, logging from options and a file, refusals, an
    # amendment, the queue to a close, listings, both reports, backup,
    # verify), init and its refusals, and the audit chain with its damage
    # reports. Every command under valgrind takes a second or two, so the
    # longer command-line tests are left to the sanitizer build.
    set -- tests/valgrind/session.py tests/cli/test_init.py tests/cli/test_audit.py
fi
# SQLite keeps the C library's malloc here, so that memcheck sees each of
# its blocks (a command's own allocator for SQLite, src/store/sqlite_mem.c,
# would hide a use after free inside its free lists).
FXLEDGER_SQLITE_MALLOC=system
export FXLEDGER_SQLITE_MALLOC
rm -rf "$logs"
mkdir -p "$logs/unit" "$logs/cli"
status=0

echo "valgrind: unit tests"
for t in "$build"/tests/test_*; do
    [ -x "$t" ] || continue
    name=$(basename "$t")
    if $VG --log-file="$logs/unit/$name.log" "$t" >"$logs/unit/$name.out" 2>&1; then
        echo "  $name: clean"
    else
        echo "  $name: FAILED (see $logs/unit/$name.log)"
        status=1
    fi
done

wrapper="$logs/fxledger-vg"
cat >"$wrapper" <<WRAP
#!/bin/sh
exec $VG --quiet --log-file="$logs/cli/fxledger.%p.log" "$build/fxledger-testclock" "\$@"
WRAP
chmod +x "$wrapper"

echo "valgrind: command-line tests through $wrapper"
for path in "$@"; do
    t=$(basename "$path" .py)
    if FXLEDGER_BIN="$wrapper" FXLEDGER_SRC="$src" /usr/bin/python3 "$src/$path" \
        >"$logs/cli/$t.out" 2>&1; then
        echo "  $t: passed"
    else
        echo "  $t: FAILED (see $logs/cli/$t.out)"
        status=1
    fi
done

n=$(find "$logs/cli" -name 'fxledger.*.log' | wc -l)
bad=$(find "$logs/cli" -name 'fxledger.*.log' -size +0c | sort)
echo "valgrind: $n fxledger commands run under valgrind"
if [ -n "$bad" ]; then
    echo "valgrind: reports from fxledger commands:"
    for f in $bad; do
        echo "---- $f"
        head -40 "$f"
    done
    status=1
fi
if [ $status -eq 0 ]; then
    echo "valgrind: no invalid access, no uninitialised value, no leak"
else
    echo "valgrind: FAILED"
fi
exit $status
