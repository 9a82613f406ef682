#!/bin/sh
# Coverage-guided fuzzing with libFuzzer (RELIABILITY.md T16/T17).
# Builds every tests/fuzz/fuzz_X.c with clang -fsanitize=fuzzer,address,
# undefined -fno-sanitize-recover=all into build/fuzz-clang/ (the library
# and daemon objects with fuzzer-no-link instrumentation), runs each target
# for SECONDS on a scratch copy of its corpus with -max_len=4096
# -timeout=5 -rss_limit_mb=512, prints executions per target from
# libFuzzer's final stats, and copies every crash, timeout, leak or OOM
# input into tests/fuzz/regressions/<target>/ (replayed by make check).
# New corpus entries stay in the scratch copy; the committed corpus is
# not touched.  Exit 1 if anything was found.
# Usage: sh tests/fuzz/run-fuzz.sh [SECONDS] [TARGET...]  (from repo root)
set -u
SECONDS_EACH=${1:-60}
[ $# -gt 0 ] && shift
OUT=build/fuzz-clang
CC_FUZZ=${CC_FUZZ:-clang}
PKG_CONFIG=${PKG_CONFIG:-pkg-config}
SAN="-fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer"
export UBSAN_OPTIONS="${UBSAN_OPTIONS:-print_stacktrace=1}"
mkdir -p "$OUT"

echo "fuzz: building the libraries with $CC_FUZZ (sanitizers + fuzzer-no-link)"
if ! make -s CC="$CC_FUZZ" BUILD="$OUT" SANITIZE=address,undefined \
	CFLAGS="-fsanitize=fuzzer-no-link -O1" \
	"$OUT/libtidepost.a" "$OUT/libdaemon.a" >"$OUT/build.log" 2>&1; then
	echo "fuzz: library build failed:" >&2; tail -30 "$OUT/build.log" >&2
	exit 2
fi
DEPS_CFLAGS=$($PKG_CONFIG --cflags libcjson libcurl libserialport 2>/dev/null)
DEPS_LIBS=$($PKG_CONFIG --libs libcjson libcurl libserialport 2>/dev/null ||
	echo -lcjson -lcurl -lserialport)

targets=$*
if [ -z "$targets" ]; then
	for src in tests/fuzz/fuzz_*.c; do
		targets="$targets $(basename "$src" .c)"
	done
fi
found=0
for t in $targets; do
	# shellcheck disable=SC2086
	if ! $CC_FUZZ -std=c11 -g -O1 $SAN -fsanitize=fuzzer -Iinclude -Idaemon \
		-D_DEFAULT_SOURCE -D_GNU_SOURCE $DEPS_CFLAGS "tests/fuzz/$t.c" \
		"$OUT/libdaemon.a" "$OUT/libtidepost.a" $DEPS_LIBS -lm \
		-o "$OUT/$t" 2>"$OUT/$t.build.log"; then
		echo "fuzz: $t: build failed:" >&2; tail -20 "$OUT/$t.build.log" >&2
		found=1
		continue
	fi
	work="$OUT/work/$t"; art="$OUT/artifacts/$t/"
	rm -rf "$work" "$art"; mkdir -p "$work" "$art"
	[ -d "tests/fuzz/corpus/$t" ] && cp tests/fuzz/corpus/"$t"/* "$work"/ 2>/dev/null
	dict=""
	[ -f "tests/fuzz/$t.dict" ] && dict="-dict=tests/fuzz/$t.dict"
	# shellcheck disable=SC2086
	"$OUT/$t" -max_total_time="$SECONDS_EACH" -max_len=4096 -timeout=5 \
		-rss_limit_mb=512 -print_final_stats=1 -artifact_prefix="$art" \
		$dict "$work" >"$OUT/$t.log" 2>&1
	rc=$?
	execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$OUT/$t.log" | tail -1)
	rate=$(sed -n 's/^stat::average_exec_per_sec: *//p' "$OUT/$t.log" | tail -1)
	cov=$(grep -o 'cov: [0-9]*' "$OUT/$t.log" | tail -1)
	ft=$(grep -o 'ft: [0-9]*' "$OUT/$t.log" | tail -1)
	n_corpus=$(ls "$work" | wc -l)
	n_art=0
	for a in "$art"*; do
		[ -f "$a" ] || continue
		mkdir -p "tests/fuzz/regressions/$t"
		cp "$a" "tests/fuzz/regressions/$t/"
		n_art=$((n_art + 1))
	done
	echo "fuzz: $t: ${execs:-?} executions in ${SECONDS_EACH}s" \
	     "(${rate:-?}/s), $cov $ft, corpus $n_corpus, findings $n_art (exit $rc)"
	if [ "$n_art" -gt 0 ] || [ "$rc" != 0 ]; then
		found=1
		echo "fuzz: $t: see $OUT/$t.log; inputs copied to tests/fuzz/regressions/$t/" >&2
		grep -A25 -m1 'ERROR: \|==ERROR\|runtime error\|deadly signal' "$OUT/$t.log" >&2
	fi
done
exit "$found"
