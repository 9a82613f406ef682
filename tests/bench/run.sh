#!/bin/sh
# Decoder benchmark (prints figures; not a pass/fail test).
#   An archive of 1,000,000 demo packets (layout quillet-v1, 4 records each,
#   invented values) is decoded by `tidepost decode` to NDJSON and to CSV,
#   copied by `cat` (the I/O floor) and decoded by tests/bench/pydecode.py,
#   a straightforward Python decoder, on the first 100,000 packets (Python
#   is too slow for the whole archive; rates are what is compared).
#   tidepost runs twice per format: --no-science writes what pydecode.py
#   writes (the layout's values and range flags: the like-for-like
#   comparison), and the full decode adds the demo config's QC tests and
#   the derived values (salinity, oxygen saturation, carbonate system).
# Usage: sh tests/bench/run.sh [BUILD]
#   env: BENCH_PACKETS, BENCH_PY_PACKETS, BENCH_RUNS (3)
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

# Sanity: tidepost --no-science and the Python decoder agree on the small
# archive (reading count; every member of every 97th reading, in order).
"$TP" decode -c "$CFG" --no-science --framing cobs "$PYARCH" \
	>"$OUT/tp-small.ndjson" 2>"$OUT/tp-small.log" || true
"$PY" "$DIR/pydecode.py" "$PYARCH" >"$OUT/py-small.ndjson" 2>/dev/null
"$PY" - "$OUT/tp-small.ndjson" "$OUT/py-small.ndjson" <<'PYEOF' || exit 1
import json, sys
a = open(sys.argv[1]).read().splitlines()
b = open(sys.argv[2]).read().splitlines()
if len(a) != len(b):
    sys.exit("bench: tidepost gave %d readings, pydecode %d" % (len(a), len(b)))
for i in range(0, len(a), 97):
    x, y = json.loads(a[i]), json.loads(b[i])
    if list(x) != list(y):
        sys.exit("bench: reading %d: keys %r != %r" % (i, list(x), list(y)))
    for k in x:
        if x[k] != y[k]:
            sys.exit("bench: reading %d: %s %r != %r" % (i, k, x[k], y[k]))
print("bench: tidepost --no-science and pydecode.py agree on %d readings"
      % len(a))
PYEOF
rm -f "$OUT/tp-small.ndjson" "$OUT/py-small.ndjson"

# Each command runs BENCH_RUNS times (default 3; Python 2), the commands
# taking turns, so a slow spell of the shared 2-core machine does not
# fall on one of them only; the fastest wall time is kept, with the
# highest peak RSS and the worst exit status seen.
RUNS=${BENCH_RUNS:-3}
T() { "$PY" "$DIR/timeit.py" "$@"; }
D() {
	log=$OUT/tp-$1.log
	res=$OUT/res-$1
	shift
	T --stderr "$log" -- "$TP" decode -c "$CFG" --framing cobs "$@" >>"$res"
}
best() {
	awk 'NR == 1 || $1 < w { w = $1 } $2 > h { h = $2 }
		$3 > e { e = $3 } $4 > m { m = $4 }
		END { print w, h, e + 0, m }' "$OUT/res-$1"
}
rm -f "$OUT"/res-*
k=0
while [ "$k" -lt "$RUNS" ]; do
	D raw-nd --no-science "$ARCH"
	D raw-csv --no-science --format csv "$ARCH"
	D nd "$ARCH"
	D csv --format csv "$ARCH"
	T -- cat "$ARCH" >>"$OUT/res-cat"
	[ $((k % 2)) -eq 1 ] ||
		T --stderr "$OUT/py.log" -- "$PY" "$DIR/pydecode.py" "$PYARCH" \
			>>"$OUT/res-py"
	k=$((k + 1))
done
rnd=$(best raw-nd)
rcs=$(best raw-csv)
fnd=$(best nd)
fcs=$(best csv)
floor=$(best cat)
py=$(best py)
rm -f "$OUT"/res-*

echo "$rnd $rcs $fnd $fcs $floor $py" | awk -v r="$R" -v pyr="$PYR" -v n="$N" \
    -v pyn="$PYN" -v runs="$RUNS" '
function line(name, i) {
	printf "  %-34s %6.2f s %10.0f readings/s  exit %d, peak RSS %.2f MiB\n",
	       name, $i, r / $i, $(i + 2), $(i + 1) / 1024
	if ($(i + 1) > rss) rss = $(i + 1)
}
{
	# per run: wall s, VmHWM KiB, exit status, ru_maxrss KiB (timeit.py)
	cat = r / $17; py = pyr / $21
	printf "bench: %d packets (%d readings), %.1f MB archive; fastest of %d runs (Python %d)\n", \
		n, r, n * 44 / 1e6, runs, (runs + 1) / 2
	line("tidepost decode --no-science", 1)
	line("tidepost decode --no-science csv", 5)
	line("tidepost decode (QC + derived)", 9)
	line("tidepost decode (QC + derived) csv", 13)
	printf "  %-34s %6.2f s %10.0f readings/s  (I/O floor)\n", "cat", $17, cat
	printf "  %-34s %6.2f s %10.0f readings/s  (first %d packets)\n", \
		"python pydecode.py", $21, py, pyn
	printf "  like for like, tidepost --no-science / python: ndjson %.1fx, csv %.1fx  target >= 50x\n", \
		r / $1 / py, r / $5 / py
	printf "  full decode / python (tidepost does more): ndjson %.1fx, csv %.1fx\n", \
		r / $9 / py, r / $13 / py
	printf "  share of the cat rate: no-science %.4f, full %.4f (ndjson)\n", \
		r / $1 / cat, r / $9 / cat
	printf "  tidepost rate: %.2e readings/s no-science, %.2e full (ndjson)  target >= 1e6\n", \
		r / $1, r / $9
	printf "  tidepost peak RSS: %.2f MiB (VmHWM, largest of the four runs)  target < 4 MB\n", \
		rss / 1024
}'
sh "$DIR/relay/run.sh" "$BUILD"
