#!/bin/sh
# The tidepost demo: an INVENTED scenario (station 23 "qr-flat" on the
# made-up Quillet Reef flat; no real station, place or measurement).
#   gen.py (3 weeks of invented readings, CSV) -> tidepost encode (COBS
#   archive) -> corrupt.py (damage 4 frames on purpose) -> tidepost decode
#   (NDJSON) -> summary.py (a short readable summary).
# Then the live part (demo/live/run_live.py, about 30 s): an invented
#   station streams packets over local TCP into `tidepost run`, which
#   relays them to a small local HTTP receiver (stopped for 10 s and
#   restarted: the backlog drains) and to an NDJSON file; it ends by itself
#   with a summary and fails if any accepted reading was lost.
# Usage: sh demo/run.sh [BUILD]   (outputs in BUILD/demo/, default build/)
#   DEMO_OFFLINE_ONLY=1 skips the live part.
set -eu
BUILD=${1:-build}
PY=${PYTHON:-/usr/bin/python3}
TP=$BUILD/tidepost
OUT=$BUILD/demo
DEMO=$(dirname "$0")
[ -x "$TP" ] || { echo "demo: $TP not built (run make)" >&2; exit 1; }
mkdir -p "$OUT"

echo "demo: INVENTED scenario - made-up station qr-flat, invented Quillet Reef"
"$PY" "$DEMO/gen.py" -o "$OUT/readings.csv"
echo "demo: $(($(wc -l <"$OUT/readings.csv") - 1)) invented rows -> $OUT/readings.csv"

"$TP" encode -c "$DEMO/config.json" --framing cobs "$OUT/readings.csv" \
	>"$OUT/archive.cobs" 2>"$OUT/encode.log" || {
	echo "demo: tidepost encode failed:" >&2; cat "$OUT/encode.log" >&2
	exit 1
}
echo "demo: encoded $(wc -c <"$OUT/archive.cobs") bytes -> $OUT/archive.cobs"

"$PY" "$DEMO/corrupt.py" "$OUT/archive.cobs" "$OUT/archive-damaged.cobs" \
	"$OUT/damage.json"
echo "demo: damaged 4 frames on purpose -> $OUT/archive-damaged.cobs"

# decode exits non-zero when it rejected packets; that is expected here,
# so its status is kept and checked below rather than stopping the demo.
rc=0
"$TP" decode -c "$DEMO/config.json" --framing cobs --qc-tests \
	"$OUT/archive-damaged.cobs" >"$OUT/decoded.ndjson" \
	2>"$OUT/decode.log" || rc=$?
if [ ! -s "$OUT/decoded.ndjson" ]; then
	echo "demo: tidepost decode gave no readings (exit $rc):" >&2
	cat "$OUT/decode.log" >&2
	exit 1
fi
echo "demo: tidepost decode exit status $rc; readings -> $OUT/decoded.ndjson"
echo
"$PY" "$DEMO/summary.py" --layout "$DEMO/layouts/quillet-v1.json" \
	--manifest "$OUT/damage.json" --decoder-log "$OUT/decode.log" \
	<"$OUT/decoded.ndjson" | tee "$OUT/summary.txt"

[ "${DEMO_OFFLINE_ONLY:-}" = 1 ] && exit 0
echo
echo "demo: live part - outputs in $OUT/live/"
"$PY" "$DEMO/live/run_live.py" "$BUILD"
