#!/bin/sh
# Replay every fuzz target's corpus and regression inputs through its
# replay build (BUILD/fuzz/fuzz_X-replay, made by `make fuzz-replay`),
# with any compiler.  Prints counts; fails if any input crashes.
# Usage: sh tests/fuzz/run-replay.sh [BUILD]   (run from the repo root)
BUILD=${1:-build}
DIR=tests/fuzz
fail=0; total=0; targets=0
for src in "$DIR"/fuzz_*.c; do
	t=$(basename "$src" .c)
	bin="$BUILD/fuzz/$t-replay"
	if [ ! -x "$bin" ]; then
		echo "fuzz-replay: $t: $bin not built" >&2
		fail=1
		continue
	fi
	set --
	for d in "$DIR/corpus/$t" "$DIR/regressions/$t"; do
		[ -d "$d" ] && set -- "$@" "$d"
	done
	if out=$("$bin" "$@" 2>"$BUILD/fuzz/$t-replay.log"); then
		n=$(echo "$out" | sed -n 's/.*: \([0-9]*\) inputs ran/\1/p')
		echo "fuzz-replay: $t: ${n:-?} inputs, no crash"
		total=$((total + ${n:-0}))
		targets=$((targets + 1))
	else
		rc=$?
		echo "fuzz-replay: $t: FAILED (exit $rc):" >&2
		tail -30 "$BUILD/fuzz/$t-replay.log" >&2
		fail=1
	fi
done
echo "fuzz-replay: $targets targets, $total inputs replayed"
[ "$fail" = 0 ] || { echo "fuzz-replay: failed" >&2; exit 1; }
