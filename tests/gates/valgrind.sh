#!/bin/sh
# valgrind.sh - the valgrind gate of `make check` (STYLE.md Tests): runs
# integration tests of the daemon with every tidepost binary they start
# (BUILD/tidepost and BUILD/tools/*) under valgrind memcheck, through
# tests/gates/vgwrap.sh installed as BUILD/vg/tidepost and
# BUILD/vg/tools/NAME.  Passes when each test passes and no run of a
# binary had a memcheck error or a definite leak.
#
# Which tests: $VG_TESTS (names under tests/integration/), by default
# decode, encode, the science, gsw reference and man-page checks (every
# command's help and `check`), judged on their result and memcheck's,
# and the daemon run tests and HTTP output tests (memcheck only, below).
# Left out: test_install (runs make),
# test_killloop (SIGKILLs by design, timing), test_tls and test_harness
# (timeouts and a pty shim; TLS code is also run by test_http).
# A test function that only measures what valgrind itself changes (peak
# memory) is excused by name in $VG_EXCUSE ("file:function"):
# when every FAIL line of a test names an excused function, it counts as
# passed.  Any other failure, and any memcheck error, fails the gate.
# Tests in $VG_MEMCHECK_ONLY (default: test_run test_http) drive the
# daemon's poll loop and HTTP output against deadlines (Retry-After to the
# second, readings within a wait); under a 20-50x slowdown some of those
# fail at random, so for them only memcheck's verdict gates and their
# own result is printed for information.
# Prints: tests passed/failed, runs of binaries, runs with errors, bytes
# definitely lost.  Exit 1 on any failure.
# Usage: sh tests/gates/valgrind.sh BUILD   (from the repository root)
BUILD=${1:-build}
PY=${PYTHON:-/usr/bin/python3}
VG_TESTS=${VG_TESTS:-"test_decode test_encode test_science_decode
test_gsw_reference test_man test_run test_http"}

if ! command -v valgrind >/dev/null 2>&1; then
	if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
		echo "valgrind: installing valgrind"
		DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
			--no-install-recommends valgrind >/dev/null ||
			{ apt-get update -qq && DEBIAN_FRONTEND=noninteractive \
				apt-get install -y -qq --no-install-recommends \
				valgrind >/dev/null; }
	fi
	command -v valgrind >/dev/null 2>&1 ||
		{ echo "valgrind: not installed (apt-get install valgrind)" >&2
		exit 1; }
fi
[ -x "$BUILD/tidepost" ] || { echo "valgrind: $BUILD/tidepost not built" >&2
	exit 1; }

VG="$BUILD/vg"
WRAP="$(cd "$(dirname "$0")" && pwd)/vgwrap.sh"
rm -rf "$VG"
mkdir -p "$VG/tools" "$VG/logs" "$VG/out"
ln -s "$WRAP" "$VG/tidepost"
for t in "$BUILD"/tools/*; do
	[ -f "$t" ] && [ -x "$t" ] && ln -s "$WRAP" "$VG/tools/$(basename "$t")"
done
# files the tests expect beside the binary (the pty shim, for instance)
for d in "$BUILD"/*; do
	b=$(basename "$d")
	case "$b" in tidepost | tools | vg | obj | tests | fuzz) continue ;; esac
	[ -d "$d" ] && ln -s "$(cd "$d" && pwd)" "$VG/$b"
done
VG_LOGDIR="$(cd "$VG/logs" && pwd)"
VG_SUPP="$(cd "$(dirname "$0")" && pwd)/valgrind.supp"
export VG_LOGDIR VG_SUPP

# peak RSS measured there is valgrind's own memory
VG_EXCUSE=${VG_EXCUSE:-"test_decode:test_memory_stays_flat"}

# Exit 0 if every "FAIL name" line of output $2 of test $1 is excused.
excused() {
	names=$(sed -n 's/^FAIL \([A-Za-z0-9_]*\).*/\1/p' "$2")
	[ -n "$names" ] || return 1
	for n in $names; do
		case " $(echo $VG_EXCUSE) " in *" $1:$n "*) ;; *) return 1 ;; esac
	done
	echo "$names" | tr '\n' ' '
}

VG_MEMCHECK_ONLY=${VG_MEMCHECK_ONLY:-"test_run test_http"}

pass=0; fail=0; failed=""
for t in $VG_TESTS; do
	f="tests/integration/$t.py"
	[ -f "$f" ] || { echo "valgrind: $f: no such test (skipped)"; continue; }
	start=$(date +%s)
	if TIDEPOST="$VG/tidepost" "$PY" "$f" >"$VG/out/$t.log" 2>&1; then
		pass=$((pass + 1)); r=passed
	elif ex=$(excused "$t" "$VG/out/$t.log"); then
		pass=$((pass + 1)); r="passed, excused: $ex"
	elif case " $(echo $VG_MEMCHECK_ONLY) " in *" $t "*) true ;;
		*) false ;; esac; then
		pass=$((pass + 1))
		r="memcheck only; its own result: $(grep -c '^FAIL' \
			"$VG/out/$t.log") function(s) failed under valgrind:"
		r="$r $(sed -n 's/^FAIL \([A-Za-z0-9_]*\).*/\1/p' \
			"$VG/out/$t.log" | tr '\n' ' ')"
	else
		fail=$((fail + 1)); failed="$failed $t"; r=FAILED
	fi
	echo "valgrind: $t: $r ($(($(date +%s) - start)) s)"
	if [ "$r" = FAILED ]; then
		tail -15 "$VG/out/$t.log" | sed 's/^/  /'
	fi
done

# Every finished run ends its log with "ERROR SUMMARY: N errors"; a run
# ended by SIGKILL (a test that kills on purpose) has none: unfinished.
runs=0; bad=0; unfinished=0; lost=0; badlogs=""
for l in "$VG_LOGDIR"/*.log; do
	[ -f "$l" ] || continue
	runs=$((runs + 1))
	n=$(sed -n 's/.*ERROR SUMMARY: \([0-9,]*\) errors.*/\1/p' "$l" |
		tail -1 | tr -d ,)
	if [ -z "$n" ]; then
		unfinished=$((unfinished + 1))
	elif [ "$n" != 0 ]; then
		bad=$((bad + 1)); badlogs="$badlogs $l"
	fi
	b=$(sed -n 's/.*definitely lost: \([0-9,]*\) bytes.*/\1/p' "$l" |
		tail -1 | tr -d ,)
	lost=$((lost + ${b:-0}))
done
for l in $(echo "$badlogs" | cut -d' ' -f2-4); do
	echo "valgrind: errors in $l:"
	grep -v '^==[0-9]*== *$' "$l" | sed -n '/Invalid\|uninitialised\|definitely lost in\|Mismatched\|overlap\|Syscall param/,+14p' |
		head -40 | sed 's/^/  /'
done
echo "valgrind: $runs runs under memcheck, $bad with errors, $unfinished" \
	"unfinished (killed), $lost bytes definitely lost"
echo "valgrind: $pass passed, $fail failed"
[ "$fail" = 0 ] && [ "$bad" = 0 ] && exit 0
[ "$fail" = 0 ] || echo "valgrind: failed:$failed (outputs in $VG/out/)" >&2
exit 1
