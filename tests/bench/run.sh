#!/bin/sh
# Decoder benchmark (prints figures; not a pass/fail test).
#   An archive of 1,000,000 demo packets (layout quillet-v1, 4 records each,
#   invented values) is decoded by `tidepost decode` to NDJSON and to CSV,
#   copied by `cat` (the I/O floor) and decoded by tests/bench/pydecode.py,
#   a straightforward Python decoder, on the first 100,000 packets (Python
#   is too slow for the whole archive; rates are what is compared).
# Usage: sh tests/bench/run.sh [BUILD]   env: BENCH_PACKETS, BENCH_PY_PACKETS
set -eu
BUILD=${1:-build}
PY=${PYTHON:-/usr/bin/python3}
TP=$BUILD/tidepost
DIR=$(dirname "$0")
OUT=$BUILD/bench
N=${BENCH_PACKETS:-1000000}
PYN=${BENCH_PY_PACKETS:-100000}
CFG=demo/config.json
ARCH=$OUT/archive-$N.cobs
PYARCH=$OUT/archive-$N-first-$PYN.cobs
[ -x "$TP" ] || { echo "bench: $TP not built (run make)" >&2; exit 1; }
mkdir -p "$OUT"

if [ ! -s "$ARCH" ] || [ ! -s "$PYARCH" ] ||
   [ "$DIR/mkarchive.py" -nt "$ARCH" ]; then
	echo "bench: writing $N demo packets to $ARCH"
	"$PY" "$DIR/mkarchive.py" -n "$N" -o "$ARCH" --prefix "$PYN" "$PYARCH"
fi
R=$((N * 4))
PYR=$((PYN * 4))

# Sanity: tidepost and the Python decoder agree on the small archive
# (reading count, and ids, times and values of every 97th reading).
"$TP" decode -c "$CFG" --framing cobs "$PYARCH" >"$OUT/tp-small.ndjson" \
	2>"$OUT/tp-small.log" || true
"$PY" "$DIR/pydecode.py" "$PYARCH" >"$OUT/py-small.ndjson" 2>/dev/null
"$PY" - "$OUT/tp-small.ndjson" "$OUT/py-small.ndjson" <<'PYEOF' || exit 1
import json, sys
a = open(sys.argv[1]).read().splitlines()
b = open(sys.argv[2]).read().splitlines()
if len(a) != len(b):
    sys.exit("bench: tidepost gave %d readings, pydecode %d" % (len(a), len(b)))
for i in range(0, len(a), 97):
    x, y = json.loads(a[i]), json.loads(b[i])
    for k in ("id", "station", "seq", "time"):
        if x[k] != y[k]:
            sys.exit("bench: reading %d: %s %r != %r" % (i, k, x[k], y[k]))
    for k, v in y["values"].items():
        if x["values"].get(k) != v or x["flags"].get(k) != y["flags"][k]:
            sys.exit("bench: reading %d: %s differs" % (i, k))
print("bench: tidepost and pydecode.py agree on %d readings" % len(a))
PYEOF
rm -f "$OUT/tp-small.ndjson" "$OUT/py-small.ndjson"

T() { "$PY" "$DIR/timeit.py" "$@"; }
nd=$(T --stderr "$OUT/tp-ndjson.log" -- "$TP" decode -c "$CFG" --framing cobs "$ARCH")
csv=$(T --stderr "$OUT/tp-csv.log" -- "$TP" decode -c "$CFG" --framing cobs --format csv "$ARCH")
floor=$(T -- cat "$ARCH")
py=$(T --stderr "$OUT/py.log" -- "$PY" "$DIR/pydecode.py" "$PYARCH")

echo "$nd $csv $floor $py" | awk -v r="$R" -v pyr="$PYR" -v n="$N" -v pyn="$PYN" '{
	# per run: wall s, VmHWM KiB, exit status, ru_maxrss KiB (timeit.py)
	nd = r / $1; csv = r / $5; cat = r / $9; py = pyr / $13
	printf "bench: %d packets (%d readings), %.1f MB archive\n", n, r, n * 44 / 1e6
	printf "  %-26s %7.2f s %11.0f readings/s  exit %d, peak RSS %.2f MiB\n", \
		"tidepost decode (ndjson)", $1, nd, $3, $2 / 1024
	printf "  %-26s %7.2f s %11.0f readings/s  exit %d, peak RSS %.2f MiB\n", \
		"tidepost decode (csv)", $5, csv, $7, $6 / 1024
	printf "  %-26s %7.2f s %11.0f readings/s  (I/O floor)\n", "cat", $9, cat
	printf "  %-26s %7.2f s %11.0f readings/s  (first %d packets)\n", \
		"python pydecode.py", $13, py, pyn
	printf "  tidepost/python   : ndjson %.1fx, csv %.1fx    target >= 50x\n", nd / py, csv / py
	printf "  tidepost/cat      : ndjson %.4f, csv %.4f (share of the I/O floor rate)\n", nd / cat, csv / cat
	printf "  tidepost rate     : %.2e readings/s (ndjson)  target >= 1e6\n", nd
	rss = ($2 > $6 ? $2 : $6) / 1024
	printf "  tidepost peak RSS : %.2f MiB (VmHWM)          target < 4 MB\n", rss
}'
sh "$DIR/relay/run.sh" "$BUILD"
