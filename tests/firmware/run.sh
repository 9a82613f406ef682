#!/bin/sh
# tests/firmware/run.sh - prove the decoder fits station firmware: build
# decoder/*.c alone for a Cortex-M4F (-ffreestanding, -Os, sections per
# function), show with `nm -u` that no object needs an allocator, stdio
# or any other OS service, link two bare-metal test images without an OS
# (startup.c + cortex-m4.ld, --gc-sections, -nostartfiles), report what
# the decoder core and the science module cost in flash and RAM, fail if
# the core's code is over its target, and run both images on QEMU's
# Cortex-M4 board (mps2-an386) with semihosting: the firmware example's
# round trip and the science results (compared with the host build).
#
# Usage: sh tests/firmware/run.sh        (from the top of the tree)
# Environment: FW_BUILD (default build-firmware), FW_CORE_LIMIT (bytes of
# core code, default 16384), FW_NO_QEMU=1 to only link, CI=true adds
# -Werror as the Makefile does.  Installs gcc-arm-none-eabi,
# libnewlib-arm-none-eabi and qemu-system-arm when missing (as root or
# through sudo).
set -eu
cd "$(dirname "$0")/../.."
OUT=${FW_BUILD:-build-firmware}
LIMIT=${FW_CORE_LIMIT:-16384}
FW=tests/firmware
CORE="frame check layout bits status"
SCIENCE="seawater carbonate mcp"

die() { echo "firmware: $*" >&2; exit 1; }

# --- toolchain ------------------------------------------------------------
need=""
for p in gcc-arm-none-eabi libnewlib-arm-none-eabi; do
	dpkg-query -W -f='${Status}' "$p" 2>/dev/null |
		grep -q "install ok installed" || need="$need $p"
done
if [ "${FW_NO_QEMU:-0}" != 1 ] && ! command -v qemu-system-arm >/dev/null; then
	need="$need qemu-system-arm"
fi
if [ -n "$need" ]; then
	SUDO=""
	if [ "$(id -u)" != 0 ]; then
		command -v sudo >/dev/null || die "need root or sudo to install:$need"
		SUDO=sudo
	fi
	echo "firmware: installing:$need"
	export DEBIAN_FRONTEND=noninteractive
	# shellcheck disable=SC2086
	$SUDO apt-get install -y -qq --no-install-recommends $need >/dev/null 2>&1 ||
		{ $SUDO apt-get update -qq &&
		  $SUDO apt-get install -y -qq --no-install-recommends $need; } ||
		die "apt-get install$need failed"
fi

CC=arm-none-eabi-gcc
CPU="-mcpu=cortex-m4 -mthumb -mfloat-abi=hard -mfpu=fpv4-sp-d16"
WARN="-Wall -Wextra -Wshadow -Wstrict-prototypes -Wmissing-prototypes \
-Wformat=2 -Wvla -Wno-unused-parameter"
[ "${CI:-}" = true ] && WARN="$WARN -Werror"
CFLAGS="$CPU -std=c11 -Os -ffreestanding -ffunction-sections -fdata-sections \
$WARN -Iinclude -I$FW -fstack-usage"
# No crt0 (startup.c is the start-up), newlib-nano for memcpy/memset and
# libm, the nosys stubs so nothing asks for an OS.
LDFLAGS="$CPU -nostartfiles --specs=nano.specs --specs=nosys.specs \
-Wl,--gc-sections -T $FW/cortex-m4.ld"

rm -rf "$OUT"
mkdir -p "$OUT/obj"
echo "firmware: $($CC --version | head -n 1)"
echo "firmware: flags: $CPU -Os -ffreestanding" \
	"-ffunction-sections -fdata-sections"

# --- the decoder alone, freestanding ----------------------------------------
objs=""
for src in decoder/*.c; do
	o="$OUT/obj/$(basename "$src" .c).o"
	# shellcheck disable=SC2086
	$CC $CFLAGS -c "$src" -o "$o" ||
		die "$src does not build freestanding for Cortex-M4"
	objs="$objs $o"
done
# shellcheck disable=SC2086
arm-none-eabi-ar rcs "$OUT/libtidepost-m4.a" $objs
echo "firmware: decoder objects before --gc-sections (arm-none-eabi-size):"
# shellcheck disable=SC2086
arm-none-eabi-size $objs | sed "s|$OUT/obj/||; s/^/  /"

# --- nm -u: what each object needs from outside ------------------------------
# Allowed: other decoder objects, the compiler's runtime (__aeabi_*, soft
# double arithmetic), libm, and the string.h memory/string functions a
# freestanding build may need.  Banned by name: allocation and stdio.
# Anything else is refused too: it would need an OS or a C library beyond
# what firmware can be assumed to have.
BANNED=" malloc free calloc realloc reallocarray aligned_alloc memalign \
posix_memalign strdup strndup printf fprintf sprintf snprintf vprintf \
vfprintf vsprintf vsnprintf dprintf puts fputs putchar fputc putc fopen \
fdopen freopen fclose fread fwrite fflush fseek ftell fgets gets getchar \
getc fgetc scanf fscanf sscanf perror setvbuf stdin stdout stderr \
__stdio_common_vfprintf _impure_ptr abort exit _exit time clock getenv "
LIBM=" acos asin atan atan2 cbrt ceil copysign cos cosh erf erfc exp exp2 \
expm1 fabs fdim floor fma fmax fmin fmod frexp hypot ldexp lgamma log \
log10 log1p log2 logb lrint lround llrint llround modf nan nearbyint \
nextafter pow remainder rint round scalbn sin sinh sqrt tan tanh trunc "
STRING=" memcpy memmove memset memcmp memchr strlen strcmp strncmp strchr "
# shellcheck disable=SC2086
defined=" $(arm-none-eabi-nm -g --defined-only $objs |
	awk 'NF == 3 {print $3}' | tr '\n' ' ') "
bad=0
echo "firmware: undefined symbols per decoder object (nm -u; __aeabi_* and"
echo "          symbols of other decoder objects counted, not listed):"
for o in $objs; do
	ext=""; rt=0; intern=0
	for s in $(arm-none-eabi-nm -u "$o" | awk '{print $NF}'); do
		case "$BANNED" in *" $s "*)
			echo "firmware: BANNED: $(basename "$o") needs $s" >&2
			bad=1; ext="$ext $s!"; continue;;
		esac
		case "$s" in __aeabi_*|__gnu_*) rt=$((rt + 1)); continue;; esac
		case "$defined" in *" $s "*) intern=$((intern + 1)); continue;; esac
		case "$LIBM$STRING" in *" $s "*) ext="$ext $s"; continue;; esac
		for f in $LIBM; do
			[ "$s" = "${f}f" ] && { ext="$ext $s"; continue 2; }
		done
		echo "firmware: NOT FREESTANDING: $(basename "$o") needs $s" >&2
		bad=1; ext="$ext $s!"
	done
	printf '  %-12s %s  [+%d runtime, +%d decoder]\n' "$(basename "$o")" \
		"${ext:- (none)}" "$rt" "$intern"
done
[ "$bad" = 0 ] || die "a decoder object needs a banned or OS symbol (marked !)"
echo "firmware: no malloc/free/calloc/realloc, no stdio, no OS call: ok"

# --- the two bare-metal images -----------------------------------------------
for f in startup example science; do
	# shellcheck disable=SC2086
	$CC $CFLAGS -c "$FW/$f.c" -o "$OUT/obj/fw_$f.o" ||
		die "$FW/$f.c does not build"
done
link() { # image objects...
	img=$1; shift
	# shellcheck disable=SC2086
	$CC $LDFLAGS -Wl,-Map="$OUT/$img.map" -o "$OUT/$img.elf" "$@" \
		"$OUT/libtidepost-m4.a" -lm || die "$img.elf does not link"
}
link example "$OUT/obj/fw_startup.o" "$OUT/obj/fw_example.o"
link science "$OUT/obj/fw_startup.o" "$OUT/obj/fw_science.o"
echo "firmware: images (arm-none-eabi-size;" \
	"flash = text + data, RAM = data + bss):"
arm-none-eabi-size "$OUT/example.elf" "$OUT/science.elf" |
	sed "s|$OUT/||; s/^/  /"

# Sum the map's bytes over groups; prints "text data bss".
sum() { # map groups...
	map=$1; shift
	awk -f $FW/mapsize.awk "$map" | awk -v want=" $* " '
		index(want, " " $1 " ") { t += $2; d += $3; b += $4 }
		END { printf "%d %d %d\n", t, d, b }'
}
row() { # label text data bss
	printf '  %-34s %7d %7d %7d\n' "$1" "$2" "$3" "$4"
}
echo "firmware: after --gc-sections, by input file (from the link maps):"
printf '  %-34s %7s %7s %7s\n' "" text data bss
core_objs=""; for m in $CORE; do core_objs="$core_objs $m.o"; done
sci_objs=""; for m in $SCIENCE; do sci_objs="$sci_objs $m.o"; done
for m in $CORE; do
	# shellcheck disable=SC2046
	row "example.elf: $m.o" $(sum "$OUT/example.map" "$m.o")
done
# shellcheck disable=SC2046,SC2086
set -- $(sum "$OUT/example.map" $core_objs)
core_text=$1; core_data=$(($2 + $3))
row "decoder core (sum)" "$@"
# shellcheck disable=SC2046
row "runtime: libgcc (soft double)" $(sum "$OUT/example.map" libgcc)
# shellcheck disable=SC2046
row "runtime: newlib libm + libc" $(sum "$OUT/example.map" libm libc)
# shellcheck disable=SC2046
row "test program (startup, example)" \
	$(sum "$OUT/example.map" fw_startup.o fw_example.o padding)
for m in $SCIENCE; do
	# shellcheck disable=SC2046
	row "science.elf: $m.o" $(sum "$OUT/science.map" "$m.o")
done
# shellcheck disable=SC2046,SC2086
row "science module (sum)" $(sum "$OUT/science.map" $sci_objs)
# shellcheck disable=SC2046
row "science.elf runtime: libgcc" $(sum "$OUT/science.map" libgcc)
# shellcheck disable=SC2046
row "science.elf runtime: libm + libc" $(sum "$OUT/science.map" libm libc)
# shellcheck disable=SC2046
row "science.elf: status.o (tp_strerror)" $(sum "$OUT/science.map" status.o)

echo "firmware: largest stack frames (-fstack-usage, bytes, per function):"
for m in $CORE $SCIENCE; do
	sort -t '	' -k2,2 -n -r "$OUT/obj/$m.su" | head -n 1 |
		awk -F '\t' -v m="$m" '{ n = split($1, a, ":");
			printf "  %-10s %5d  %s\n", m, $2, a[n] }'
done

printf 'firmware: decoder core code: %d bytes, target < %d: ' \
	"$core_text" "$LIMIT"
if [ "$core_text" -ge "$LIMIT" ]; then
	echo "OVER"
	die "decoder core code is $core_text bytes, over the $LIMIT-byte target"
fi
echo "ok (data + bss: $core_data bytes)"

# --- run on an emulated Cortex-M4 --------------------------------------------
if [ "${FW_NO_QEMU:-0}" = 1 ]; then
	echo "firmware: FW_NO_QEMU=1: images linked, not run"
	exit 0
fi
qemu() { # image
	timeout 60 qemu-system-arm -M mps2-an386 -cpu cortex-m4 -nographic \
		-monitor none -serial none \
		-semihosting-config enable=on,target=native -kernel "$1"
}
qemu "$OUT/example.elf" >"$OUT/example.out" 2>&1 ||
	{ cat "$OUT/example.out" >&2; die "example.elf failed on qemu mps2-an386"; }
sed 's/^/  qemu: /' "$OUT/example.out"
qemu "$OUT/science.elf" >"$OUT/science.out" 2>&1 ||
	{ cat "$OUT/science.out" >&2; die "science.elf failed on qemu mps2-an386"; }
grep -q '^science: ok$' "$OUT/science.out" || die "science.elf printed no ok"
# The same science.c on the build machine (glibc libm, hardware double).
gcc -std=c11 -O2 -Iinclude -I$FW -o "$OUT/science-host" $FW/science.c \
	$FW/fw_host.c decoder/seawater.c decoder/carbonate.c decoder/mcp.c \
	decoder/status.c -lm || die "science.c does not build for the host"
"$OUT/science-host" >"$OUT/science-host.out" || die "science-host failed"
/usr/bin/python3 - "$OUT/science.out" "$OUT/science-host.out" <<'EOF' ||
import struct, sys
def load(p):
    out = {}
    for line in open(p):
        w = line.split()
        if len(w) == 2 and w[1].startswith("0x"):
            out[w[0]] = struct.unpack("<d", struct.pack("<Q", int(w[1], 16)))[0]
    return out
m4, host = load(sys.argv[1]), load(sys.argv[2])
if not m4 or m4.keys() != host.keys():
    sys.exit("firmware: science results differ in names")
worst, same = 0.0, 0
for k in m4:
    a, b = m4[k], host[k]
    if a == b:
        same += 1
        continue
    worst = max(worst, abs(a - b) / max(abs(b), 1e-300))
print("  science on Cortex-M4 vs host: %d values, %d bit-identical, "
      "largest relative difference %.1e (limit 1e-12)" % (len(m4), same, worst))
sys.exit(1 if worst > 1e-12 else 0)
EOF
	die "science results on Cortex-M4 differ from the host's"
echo "firmware: ok: both images ran on qemu-system-arm mps2-an386 (Cortex-M4F)"
