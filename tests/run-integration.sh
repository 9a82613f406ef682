#!/bin/sh
# Run every integration test (tests/integration/test_*.py) against the
# real binary in $1 (the build folder).
BUILD=${1:-build}
PY=${PYTHON:-/usr/bin/python3}
pass=0; fail=0; failed=""
for t in tests/integration/test_*.py; do
	[ -e "$t" ] || continue
	if TIDEPOST="$BUILD/tidepost" "$PY" "$t"; then pass=$((pass + 1)); else fail=$((fail + 1)); failed="$failed $t"; fi
done
echo "integration: $pass passed, $fail failed"
[ "$fail" = 0 ] || { echo "integration: failed:$failed" >&2; exit 1; }
