#!/bin/sh
# Relay daemon benchmark (prints figures and ratios; not a pass/fail test).
#   100,000 readings drained from the ring to a local nginx answering 204,
#   against a one-POST-per-reading Python relay (urllib), the wrk POST rate
#   to the same nginx as the ceiling, latency at 10 packets/s, peak RSS and
#   idle CPU.  The work is in run.py (its docstring says how each figure is
#   taken); this wrapper installs nginx and wrk when they are missing.
# Usage: sh tests/bench/relay/run.sh [BUILD]
#   env: BENCH_RELAY_READINGS BENCH_PY_READINGS BENCH_LAT_S BENCH_IDLE_S
#        BENCH_WRK_S BENCH_REPEAT BENCH_KEEP
set -eu
BUILD=${1:-build}
PY=${PYTHON:-/usr/bin/python3}
DIR=$(dirname "$0")
PKGS="nginx wrk"

have() { PATH="$PATH:/usr/sbin:/sbin" command -v "$1" >/dev/null 2>&1; }

missing=""
for p in $PKGS; do
	have "$p" || missing="$missing $p"
done
if [ -n "$missing" ]; then
	echo "bench relay: installing$missing"
	SUDO=""
	[ "$(id -u)" -eq 0 ] || SUDO="sudo"
	# shellcheck disable=SC2086
	$SUDO apt-get install -y --no-install-recommends $missing \
		>/dev/null 2>&1 ||
	{ $SUDO apt-get update >/dev/null 2>&1 &&
	  $SUDO apt-get install -y --no-install-recommends $missing \
		>/dev/null; } ||
	{ echo "bench relay: could not install$missing" >&2; exit 1; }
fi
PATH="$PATH:/usr/sbin:/sbin" exec "$PY" "$DIR/run.py" "$BUILD"
