# mapsize.awk - bytes per input file in a GNU ld map file, for
# tests/firmware/run.sh.  Prints "group text data bss" lines, where group
# is a decoder object (layout.o), a library (libgcc, libm, libc) or a test
# file.  text counts code and read-only data (.text, .rodata, vectors,
# unwind tables), data counts .data (which also takes flash for its
# initial values), bss counts .bss and COMMON.
function group(f,   g) {
	if (f == "")
		return "padding"
	g = f
	sub(/.*\//, "", g)
	if (g ~ /^libtidepost[^(]*\.a\(/) {
		sub(/.*\(/, "", g)
		sub(/\)$/, "", g)
		return g
	}
	if (g ~ /^libgcc\.a\(/) return "libgcc"
	if (g ~ /^libm\.a\(/) return "libm"
	if (g ~ /^libc(_nano)?\.a\(/) return "libc"
	if (g ~ /^lib[a-z]*\.a\(/) { sub(/\(.*/, "", g); return g }
	return g
}
# mawk has no strtonum: parse "0x..." by hand
function hex(s,   i, n) {
	s = tolower(substr(s, 3))
	n = 0
	for (i = 1; i <= length(s); i++)
		n = n * 16 + index("0123456789abcdef", substr(s, i, 1)) - 1
	return n
}
function take(name, size, file,   g, n) {
	n = hex(size)
	if (n == 0)
		return
	g = group(file)
	if (name == "*fill*")
		name = "." sect
	if (name ~ /^\.(text|rodata|isr_vector|ARM\.ex|glue|vfp11|v4_bx)/ ||
	    name ~ /^\.(init|fini|ctors|dtors|preinit_array)/)
		text[g] += n
	else if (name ~ /^\.data/)
		data[g] += n
	else if (name ~ /^\.bss/ || name == "COMMON")
		bss[g] += n
	else
		return
	seen[g] = 1
}
/^Linker script and memory map/ { on = 1; next }
!on { next }
# an output section header: remember which kind of bytes *fill* pads
/^\.[A-Za-z_]/ {
	sect = ""
	if ($1 ~ /^\.(text|isr_vector|ARM\.exidx)/) sect = "text"
	else if ($1 ~ /^\.data/) sect = "data"
	else if ($1 ~ /^\.bss/) sect = "bss"
	pending = ""
	next
}
/^ [.A-Za-z_*]/ {
	if (NF >= 3 && $2 ~ /^0x/ && $3 ~ /^0x/) {
		take($1, $3, NF >= 4 ? $4 : "")
		pending = ""
	} else if (NF == 1) {
		pending = $1
	} else {
		pending = ""
	}
	next
}
pending != "" && NF >= 3 && $1 ~ /^0x/ && $2 ~ /^0x/ {
	take(pending, $2, $3)
	pending = ""
	next
}
{ pending = "" }
END {
	for (g in seen)
		printf "%s %d %d %d\n", g, text[g], data[g], bss[g]
}
