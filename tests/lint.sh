#!/bin/sh
# make lint: house rules that a machine can check (STYLE.md).
#  (a) banned calls: sprintf strcpy strcat strtok atoi atol gets sscanf in
#      any C file of decoder/ daemon/ tests/; and inside decoder/ also
#      malloc calloc realloc free printf fprintf snprintf puts fopen and
#      #include <stdio.h> (the library does no I/O and never allocates).
#      Comments and string literals are ignored; a call is the word
#      followed by "(".
#  (b) clang-format --dry-run -Werror (the committed .clang-format) on
#      decoder/*.c daemon/*.c include/tidepost/*.h.
#  (c) cppcheck --enable=warning on decoder/ and daemon/.
# Exit 1 if any part fails; every problem is printed with its place.
# Usage: sh tests/lint.sh   (from the repository root)
PY=${PYTHON:-/usr/bin/python3}
fail=0

# ---- (a) banned functions ---------------------------------------------
banned=$("$PY" - <<'PYEOF'
import glob, re, sys

ANY = "sprintf strcpy strcat strtok atoi atol gets sscanf".split()
LIB = "malloc calloc realloc free printf fprintf snprintf puts fopen".split()

def code_only(text):
    """Blank out comments and string/char literals, keeping newlines."""
    out, i, n = [], 0, len(text)
    while i < n:
        c = text[i]
        if text.startswith("/*", i):
            j = text.find("*/", i + 2)
            j = n if j < 0 else j + 2
            out.append(re.sub(r"[^\n]", " ", text[i:j])); i = j
        elif text.startswith("//", i):
            j = text.find("\n", i)
            j = n if j < 0 else j
            out.append(" " * (j - i)); i = j
        elif c in "\"'":
            j = i + 1
            while j < n and text[j] != c and text[j] != "\n":
                j += 2 if text[j] == "\\" else 1
            j = min(j + 1, n)
            out.append(c + " " * (j - i - 2) + c if j - i >= 2 else c)
            i = j
        else:
            out.append(c); i += 1
    return "".join(out)

files = sorted(set(glob.glob("decoder/**/*.[ch]", recursive=True) +
                   glob.glob("daemon/**/*.[ch]", recursive=True) +
                   glob.glob("tests/**/*.[ch]", recursive=True)))
n = 0
for path in files:
    with open(path, errors="replace") as f:
        raw = f.read()
    code = code_only(raw)
    words = ANY + (LIB if path.startswith("decoder/") else [])
    pat = re.compile(r"(?<![A-Za-z0-9_])(%s)\s*\(" % "|".join(words))
    for ln, line in enumerate(code.split("\n"), 1):
        for m in pat.finditer(line):
            fn = m.group(1)
            why = ("not allowed in decoder/ (no I/O, no allocation)"
                   if fn in LIB else "banned everywhere (STYLE.md)")
            print("%s:%d:%d: %s(): %s" % (path, ln, m.start() + 1, fn, why))
            n += 1
        if path.startswith("decoder/") and re.match(r"\s*#\s*include\s*<stdio\.h>", line):
            print("%s:%d:1: decoder/ must not include <stdio.h>" % (path, ln))
            n += 1
print("lint: %d file(s) searched" % len(files), file=sys.stderr)
sys.exit(1 if n else 0)
PYEOF
) ; rc=$?
if [ "$rc" != 0 ]; then
	echo "$banned"
	echo "lint (a): banned functions: $(echo "$banned" | grep -c .) problem(s)"
	fail=1
else
	echo "lint (a): banned functions: none"
fi

# ---- (b) clang-format ---------------------------------------------------
if command -v clang-format >/dev/null 2>&1; then
	nf=0; nbad=0; badlist=""
	for f in decoder/*.c daemon/*.c include/tidepost/*.h; do
		[ -f "$f" ] || continue
		nf=$((nf + 1))
		if ! out=$(clang-format --dry-run -Werror "$f" 2>&1); then
			nbad=$((nbad + 1)); badlist="$badlist $f"
			echo "$out" | grep -m3 'error:' | sed 's/^/  /'
			n=$(echo "$out" | grep -c 'error:')
			echo "  $f: $n place(s) differ from .clang-format"
		fi
	done
	if [ "$nbad" -gt 0 ]; then
		echo "lint (b): clang-format: $nbad of $nf file(s) not formatted:$badlist"
		echo "          (see them with: clang-format --dry-run FILE)"
		fail=1
	else
		echo "lint (b): clang-format: $nf file(s) formatted"
	fi
else
	echo "lint (b): clang-format not installed" >&2
	fail=1
fi

# ---- (c) cppcheck -------------------------------------------------------
if command -v cppcheck >/dev/null 2>&1; then
	if out=$(cppcheck --error-exitcode=1 --enable=warning --inline-suppr \
		-q --std=c11 -Iinclude -Idaemon -D_GNU_SOURCE \
		--template='{file}:{line}:{column}: {severity}: {message} [{id}]' \
		decoder daemon 2>&1); then
		echo "lint (c): cppcheck: no warnings in decoder/ daemon/"
	else
		echo "$out"
		echo "lint (c): cppcheck: $(echo "$out" | grep -c ': \(error\|warning\):') problem(s)"
		fail=1
	fi
else
	echo "lint (c): cppcheck not installed" >&2
	fail=1
fi

[ "$fail" = 0 ] && echo "lint: ok" || echo "lint: FAILED"
exit "$fail"
