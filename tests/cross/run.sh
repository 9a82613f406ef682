#!/bin/sh
# tests/cross/run.sh ARCH - cross-build the whole program for ARCH (arm64:
# aarch64-linux-gnu, armhf: arm-linux-gnueabihf) with the project Makefile
# into build-ARCH, then run every unit test binary and the decode/encode
# integration tests under qemu-user.
#
# Usage: sh tests/cross/run.sh arm64|armhf     (from the top of the tree)
# Environment:
#   CROSS_TIMEOUT      seconds per unit binary under qemu (default 300)
#   CROSS_RING_SEEDS   RING_SEEDS for the ring crash simulator under qemu
#                      (default 300; the native default is 2000: emulation
#                      is several times slower, the seeds are the same
#                      code path)
#   CROSS_INTEGRATION  integration tests to run (default: test_decode.py
#                      test_encode.py)
#   CROSS_SKIP_SETUP=1 do not call tests/cross/setup.sh
#   CROSS_BUILD        build folder (default build-ARCH); CFLAGS from the
#                      environment reach the Makefile as usual (appended)
# Binaries run as `qemu-ARCH -L /usr/TRIPLET`: the loader and libc come
# from the cross libc (libc6-ARCH-cross), the other libraries from the
# multiarch folders (/usr/lib/TRIPLET) where the loader also looks.
# Integration tests get TIDEPOST = a wrapper script that runs the cross
# binary through qemu, so they need no binfmt_misc registration.
set -eu
cd "$(dirname "$0")/../.."
ARCH=${1:-}
case "$ARCH" in
arm64) TRIPLET=aarch64-linux-gnu; QEMU=qemu-aarch64; MACHINE=AArch64 ;;
armhf) TRIPLET=arm-linux-gnueabihf; QEMU=qemu-arm; MACHINE=ARM ;;
*) echo "usage: sh tests/cross/run.sh arm64|armhf" >&2; exit 2 ;;
esac
B=${CROSS_BUILD:-build-$ARCH}
TMO=${CROSS_TIMEOUT:-300}
INTEG=${CROSS_INTEGRATION:-test_decode.py test_encode.py}
PY=/usr/bin/python3
die() { echo "cross-$ARCH: $*" >&2; exit 1; }

[ "${CROSS_SKIP_SETUP:-0}" = 1 ] || sh tests/cross/setup.sh "$ARCH" ||
	die "setup failed"

# The Makefile's pkg-config lookups go through the TRIPLET-pkg-config
# wrapper (pkgconf:ARCH); without it, point plain pkg-config at ARCH.
if command -v "$TRIPLET-pkg-config" >/dev/null 2>&1; then
	PKGC=$TRIPLET-pkg-config
else
	PKGC=pkg-config
	PKG_CONFIG_LIBDIR=/usr/lib/$TRIPLET/pkgconfig:/usr/share/pkgconfig
	export PKG_CONFIG_LIBDIR
fi
$PKGC --exists libcjson libcurl libserialport cmocka ||
	die "$PKGC does not find the $ARCH libraries"

units=""
for t in tests/unit/test_*.c; do
	units="$units $B/tests/$(basename "$t" .c)"
done
echo "cross-$ARCH: make CC=$TRIPLET-gcc AR=$TRIPLET-ar PKG_CONFIG=$PKGC" \
	"BUILD=$B all + $(echo "$units" | wc -w) unit binaries"
mkdir -p "$B"
# -k: one helper's file that does not build yet must not hide the rest.
# shellcheck disable=SC2086
make -k -j2 CC="$TRIPLET-gcc" AR="$TRIPLET-ar" PKG_CONFIG="$PKGC" \
	BUILD="$B" all $units >"$B/make.log" 2>&1 || {
	echo "cross-$ARCH: make failed; errors:" >&2
	grep -E 'error|Error' "$B/make.log" | head -n 30 >&2
}
for f in "$B/libtidepost.a" "$B/tidepost" $units; do
	[ -e "$f" ] || continue
	case "$f" in
	*.a) m=$("$TRIPLET-readelf" -h "$f" | sed -n 's/^ *Machine: *//p' |
		sort -u) ;;
	*) m=$("$TRIPLET-readelf" -h "$f" | sed -n 's/^ *Machine: *//p') ;;
	esac
	case "$m" in
	*"$MACHINE"*) ;;
	*) die "$f is for \"$m\", not $MACHINE" ;;
	esac
done
echo "cross-$ARCH: built files are $MACHINE ELF (readelf -h)"

run() { # binary args...
	QEMU_LD_PREFIX=/usr/$TRIPLET RING_SEEDS=${CROSS_RING_SEEDS:-300} \
		timeout "$TMO" "$QEMU" "$@"
}

# --- unit tests ------------------------------------------------------
pass=0; fail=0; missing=0; cases=0; failed=""
mkdir -p "$B/cross-logs"
for t in $units; do
	name=$(basename "$t")
	if [ ! -x "$t" ]; then
		echo "  $name: NOT BUILT (see $B/make.log)"
		missing=$((missing + 1)); failed="$failed $name(not built)"
		continue
	fi
	log=$B/cross-logs/$name.log
	start=$(date +%s)
	rc=0
	run "$t" >"$log" 2>&1 || rc=$?
	secs=$(($(date +%s) - start))
	n=$(sed -n 's/^\[  PASSED  \] \([0-9]*\) test.*/\1/p' "$log" | tail -n 1)
	if [ "$rc" = 0 ]; then
		pass=$((pass + 1)); cases=$((cases + ${n:-0}))
		echo "  $name: ok (${n:-?} cases, ${secs}s)"
	else
		fail=$((fail + 1))
		if [ "$rc" = 124 ]; then
			why="timeout after ${TMO}s"
		else
			why="exit $rc"
		fi
		failed="$failed $name($why)"
		echo "  $name: FAILED: $why, ${secs}s; log $log"
		grep -E '^\[  (FAILED|ERROR) *\]|^\[  FAILED  \]' "$log" |
			head -n 5 | sed 's/^/      /'
	fi
done
echo "cross-$ARCH: unit binaries: $pass passed, $fail failed," \
	"$missing not built; $cases cmocka cases passed"

# --- integration tests through a qemu wrapper -------------------------
wrap=$(pwd)/$B/tidepost-qemu
cat >"$wrap" <<EOF
#!/bin/sh
# Runs the $ARCH tidepost under $QEMU (written by tests/cross/run.sh).
QEMU_LD_PREFIX=/usr/$TRIPLET exec $QEMU "$(pwd)/$B/tidepost" "\$@"
EOF
chmod +x "$wrap"
ipass=0; ifail=0
[ -x "$B/tidepost" ] || {
	echo "  $B/tidepost NOT BUILT: integration tests not run"
	INTEG=""; ifail=1; failed="$failed tidepost(not built)"
}
for t in $INTEG; do
	log=$B/cross-logs/$t.log
	# TIDEPOST_EMULATOR tells a test that TIDEPOST runs under an
	# emulator (its RSS and timing are the emulator's, not tidepost's).
	if TIDEPOST=$wrap TIDEPOST_EMULATOR=$QEMU timeout 900 "$PY" \
		"tests/integration/$t" >"$log" 2>&1; then
		ipass=$((ipass + 1))
		echo "  $t: ok ($(tail -n 1 "$log"))"
	else
		ifail=$((ifail + 1)); failed="$failed $t"
		echo "  $t: FAILED; log $log"
		tail -n 5 "$log" | sed 's/^/      /'
	fi
done
echo "cross-$ARCH: integration: $ipass passed, $ifail failed"
total_fail=$((fail + missing + ifail))
echo "cross-$ARCH: $((pass + ipass)) passed, $total_fail failed"
[ "$total_fail" = 0 ] || die "failed:$failed"
