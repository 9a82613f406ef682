#!/bin/sh
# Run every unit test binary given; report totals; fail if any failed.
pass=0; fail=0; failed=""
for t in "$@"; do
	if "$t"; then pass=$((pass + 1)); else fail=$((fail + 1)); failed="$failed $t"; fi
done
echo "unit: $pass passed, $fail failed"
[ "$fail" = 0 ] || { echo "unit: failed:$failed" >&2; exit 1; }
