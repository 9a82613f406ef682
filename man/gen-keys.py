#!/usr/bin/python3
"""gen-keys.py - write the key tables of tidepost-config(5) and
tidepost-layout(5) from the loader's own option table.

The tables come from `BUILD/tools/optref` (tests/tools/optref.c), which
prints every table of daemon/options.c through opt_print_reference as
Markdown.  Each table becomes one subsection (.SS) of one page, each key
one tagged paragraph (.TP): name, type, default, what is valid, meaning.
The text between the two marker lines of each page is replaced; the rest
of the page is written by hand.

    man/gen-keys.py [--optref PATH] [--check]

--optref  the optref program (default $OPTREF, else build/tools/optref)
--check   change nothing; exit 1 and say which page is stale

A table that belongs to neither page (a new table in options.c) is an
error, so a new section of the config cannot go undocumented.
Standard library only; run by /usr/bin/python3.
"""
import argparse
import os
import re
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))

BEGIN = ('.\\" KEYS BEGIN: written by man/gen-keys.py from the loader\'s '
         'option table; do not edit by hand')
END = '.\\" KEYS END'

# Which page documents which table (the table names of options.c); a
# page shows its tables in the order optref prints them.
PAGES = {
    "tidepost-config.5": {"config", "station", "alkalinity", "qc",
                          "climatology", "multi_variate", "battery",
                          "carbonate", "ph_from_ratio", "derive_inputs",
                          "input", "ring", "output", "alerts", "alert",
                          "status"},
    "tidepost-layout.5": {"layout", "match", "length", "check", "crc",
                          "field", "skip", "records"},
}

HEAD_RE = re.compile(r"^### (\S+) \((.*)\)$")
ROW_RE = re.compile(r"^\| `([^`|]+)` \|(.*)\|$")


def parse_reference(text):
    """Markdown of opt_print_reference -> [(table, where, [row...])],
    row = dict(key, type, default, valid, meaning)."""
    tables = []
    for n, line in enumerate(text.splitlines(), 1):
        m = HEAD_RE.match(line)
        if m:
            tables.append((m.group(1), m.group(2), []))
            continue
        m = ROW_RE.match(line)
        if not m:
            continue
        cells = [c.strip() for c in m.group(2).split("|")]
        if len(cells) != 4 or not tables:
            raise ValueError("optref line %d: expected 5 cells: %r"
                             % (n, line))
        tables[-1][2].append(dict(key=m.group(1), type=cells[0],
                                  default=cells[1], valid=cells[2],
                                  meaning=cells[3]))
    if not tables:
        raise ValueError("optref printed no table")
    return tables


def run_optref(path):
    out = subprocess.run([path], check=True, stdout=subprocess.PIPE)
    return out.stdout.decode("utf-8")


def esc(s):
    """Plain text -> troff text: backslashes, minus signs, `code`."""
    s = s.replace("\\", "\\e").replace("-", "\\-")
    return re.sub(r"`([^`]+)`", r"\\fB\1\\fR", s)


def line(s):
    """A text line that troff cannot take for a request."""
    return "\\&" + s if s[:1] in (".", "'") else s


def sentence(s):
    s = s[:1].upper() + s[1:]
    return s if s.endswith(".") else s + "."


WORDS_RE = re.compile(r"^[A-Za-z0-9_:.]+( [A-Za-z0-9_:.]+)+$")


def valid_text(r):
    """opt_describe's text; a bare word list reads as "one of: ..."."""
    v = r["valid"]
    if r["type"] == "word" and WORDS_RE.match(v):
        return "one of " + ", ".join("\\fB%s\\fR" % esc(w)
                                     for w in v.split())
    return esc(v)


def render_row(r):
    if r["default"] == "required":
        what = "%s, required" % esc(r["type"])
    else:
        what = "%s, default \\fI%s\\fR" % (esc(r["type"]),
                                          esc(r["default"]))
    return [".TP", line("\\fB%s\\fR \\(em %s" % (esc(r["key"]), what)),
            line(esc(sentence(r["meaning"]))),
            line("Valid: %s." % valid_text(r).rstrip("."))]


def render(tables, names):
    out = []
    for t in tables:
        if t[0] not in names:
            continue
        head = "%s (%s)" % (esc(t[0]), esc(t[1]))
        out.append('.SS "%s"' % head.replace('"', "\\(dq"))
        for r in t[2]:
            out.extend(render_row(r))
    return out


def splice(page_text, block, page):
    lines = page_text.split("\n")
    try:
        b = lines.index(BEGIN)
        e = lines.index(END, b)
    except ValueError:
        raise ValueError("%s: marker lines not found" % page)
    return "\n".join(lines[:b + 1] + block + lines[e:])


def check_coverage(tables):
    names = [t[0] for t in tables]
    placed = [n for p in PAGES.values() for n in p]
    missing = [n for n in names if n not in placed]
    gone = [n for n in placed if n not in names]
    if missing or gone:
        raise ValueError("gen-keys.py PAGES is out of date: tables in "
                         "neither page: %s; unknown tables: %s"
                         % (missing or "none", gone or "none"))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--optref", default=os.environ.get(
        "OPTREF", os.path.join("build", "tools", "optref")))
    ap.add_argument("--check", action="store_true")
    a = ap.parse_args()
    try:
        tables = parse_reference(run_optref(a.optref))
        check_coverage(tables)
        stale = []
        for page, names in PAGES.items():
            path = os.path.join(HERE, page)
            with open(path, encoding="utf-8") as f:
                old = f.read()
            new = splice(old, render(tables, names), page)
            if new == old:
                continue
            stale.append(page)
            if not a.check:
                with open(path, "w", encoding="utf-8") as f:
                    f.write(new)
    except (OSError, ValueError, subprocess.CalledProcessError) as e:
        print("gen-keys.py: %s" % e, file=sys.stderr)
        return 2
    for page in stale:
        print("gen-keys.py: man/%s %s" % (page, "is stale: run "
              "man/gen-keys.py" if a.check else "updated"),
              file=sys.stderr)
    return 1 if a.check and stale else 0


if __name__ == "__main__":
    sys.exit(main())
