#!/bin/sh
# The program never hands a string to a shell or starts another program:
# no system(), popen() or exec*()/posix_spawn*() in its sources (core/,
# calib/, station/), and none among the C library functions the linked
# binary imports (nm(1) lists a dynamic binary's undefined symbols; our own
# libraries are linked in statically, so every call of ours would show).
# Test programs may use them (tests/core/test_log.c drives the sqlite3 tool).
set -eu
BUILD=${STATION_BUILD:-build}
calls='\b(system|popen|execl|execle|execlp|execv|execve|execvp|execvpe|fexecve|posix_spawn|posix_spawnp|wordexp)[[:space:]]*\('
found=$(grep -rnE "$calls" core calib station --include='*.c' --include='*.h' | grep -vE '^[^:]+:[0-9]+:[[:space:]]*(/?\*|//)' || true)
if [ -n "$found" ]; then
    echo "FAIL a shell or program start in the sources:"
    echo "$found"
    exit 1
fi
echo "ok   no system/popen/exec/posix_spawn/wordexp call in core/, calib/, station/"
command -v nm >/dev/null || { echo "SKIP: nm (binutils) is missing"; exit 77; }
imports=$(nm -D --undefined-only "$BUILD/station" | awk '{print $NF}' | sed 's/@.*//')
bad=$(echo "$imports" | grep -xE 'system|popen|execl|execle|execlp|execv|execve|execvp|execvpe|fexecve|posix_spawn|posix_spawnp|wordexp' || true)
if [ -n "$bad" ]; then
    echo "FAIL $BUILD/station imports: $bad"
    exit 1
fi
# the check can fail: the binary does import the C library's ordinary calls
echo "$imports" | grep -qx 'fopen\|fopen64' || { echo "FAIL nm listed no fopen: the import list is not what it seems"; exit 1; }
echo "ok   $BUILD/station imports none of them ($(echo "$imports" | wc -l) imported symbols)"
