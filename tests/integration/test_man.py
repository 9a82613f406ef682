#!/usr/bin/python3
"""test_man.py - the manual pages against the program they describe.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_man.py
(from the top of the repository; BUILD/tools/optref must be built, as
`make all` does).  Needs man-db and groff-base.

Checks:
- every page renders with no warning at 80 columns (`man --warnings -l`)
  and no rendered line is wider than 80 columns;
- the key tables of tidepost-config(5) and tidepost-layout(5) are what
  man/gen-keys.py writes from the loader's option table today, and,
  read back from the rendered pages, each table's subsection holds
  exactly the keys of that table (a key missing from a page, or a page
  documenting a key the loader does not accept, fails);
- tidepost(1) has a subsection for exactly the commands `tidepost --help`
  lists, and every option `tidepost help COMMAND` prints is described in
  that command's subsection (and no other option is);
- EXIT STATUS lists exactly the exit codes of daemon/cli*.h; SIGNALS names
  SIGTERM, SIGINT and SIGHUP;
- the example layout of tidepost-layout(5) and the minimal config of
  tidepost-config(5) pass `tidepost check`.

Standard library only; run by /usr/bin/python3.
"""
import glob
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import traceback

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
BUILD = os.path.dirname(TIDEPOST) or "."
OPTREF = os.path.join(BUILD, "tools", "optref")
PAGES = ["man/tidepost.1", "man/tidepost-config.5", "man/tidepost-layout.5"]
TMP = None
_rendered = {}


class Runner:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def run(self, tests):
        for t in tests:
            try:
                t()
                self.passed += 1
                print("ok   %s" % t.__name__)
            except Exception:
                self.failed += 1
                print("FAIL %s" % t.__name__)
                traceback.print_exc()
        print("test_man: %d passed, %d failed" % (self.passed, self.failed))
        sys.exit(1 if self.failed else 0)


def eq(got, want, what=""):
    if got != want:
        raise AssertionError("%s: got %r, want %r" % (what, got, want))


def run(argv, **kw):
    p = subprocess.run(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                       **kw)
    return p.returncode, p.stdout.decode(), p.stderr.decode()


def man_env():
    env = dict(os.environ, MANWIDTH="80", LC_ALL="C.UTF-8", MANPAGER="cat",
               PAGER="cat")
    env.pop("MAN_KEEP_FORMATTING", None)
    return env


def render(page):
    """(exit code, text, warnings) of `man --warnings -l page`."""
    if page not in _rendered:
        if shutil.which("man") is None:
            raise AssertionError("man not found: install man-db and "
                                 "groff-base (tests/deps.sh)")
        rc, out, err = run(["man", "--warnings", "-l", page], env=man_env())
        out = re.sub(r".\x08", "", out)      # overstrike, if any
        _rendered[page] = (rc, out, err)
    return _rendered[page]


def text(page):
    rc, out, err = render(page)
    eq(rc, 0, "man -l %s exit" % page)
    return out


def sections(txt):
    """{SECTION: {subsection or '': [lines]}} of a rendered page."""
    out, sec, sub = {}, None, ""
    for line in txt.splitlines():
        if re.match(r"^[A-Z][A-Z ]+$", line):
            sec, sub = line.strip(), ""
            out[sec] = {"": []}
        elif sec and re.match(r"^   \S", line):
            sub = line.strip()
            out[sec][sub] = []
        elif sec:
            out[sec][sub].append(line)
    return out


def optref_tables():
    """[(name, where, [keys])] from the loader's reference."""
    rc, out, err = run([OPTREF])
    eq(rc, 0, "optref: " + err)
    tables = []
    for line in out.splitlines():
        m = re.match(r"^### (\S+) \((.*)\)$", line)
        if m:
            tables.append((m.group(1), m.group(2), []))
        m = re.match(r"^\| `([^`]+)` \|", line)
        if m:
            tables[-1][2].append(m.group(1))
    assert len(tables) >= 10, "optref printed %d tables" % len(tables)
    return tables


KEY_LINE = re.compile(r"^ {7}(\S+) (?:\u2014|--) ")

# ---- the tests -------------------------------------------------------------


def test_pages_render_without_warnings():
    for page in PAGES:
        rc, out, err = render(page)
        eq(rc, 0, page + " exit")
        eq(err, "", page + " warnings")
        assert len(out.splitlines()) > 40, page + " rendered almost nothing"
        wide = [ln for ln in out.splitlines() if len(ln) > 80]
        eq(wide, [], page + " lines over 80 columns")


def test_key_tables_are_current():
    rc, out, err = run(["/usr/bin/python3", "man/gen-keys.py", "--check",
                        "--optref", OPTREF])
    eq((rc, err), (0, ""), "man/gen-keys.py --check")


def test_every_key_documented_and_no_other():
    """Read the pages back: each table's subsection lists its keys."""
    docs = {}
    for page in PAGES[1:]:
        for sub, lines in sections(text(page)).get("KEYS", {}).items():
            if sub:
                keys = [m.group(1) for m in map(KEY_LINE.match, lines) if m]
                docs[sub] = (page, keys)
    seen = set()
    for name, where, keys in optref_tables():
        head = "%s (%s)" % (name, where)
        assert head in docs, "table %r is in no page" % head
        eq(docs[head][1], keys, "keys of %s in %s" % (head, docs[head][0]))
        seen.add(head)
    eq(sorted(set(docs) - seen), [], "subsections the loader has no table "
       "for")


def command_sections():
    return sections(text("man/tidepost.1"))["COMMANDS"]


def listed_commands():
    rc, out, _ = run([TIDEPOST, "--help"])
    eq(rc, 0, "tidepost --help")
    return [m.group(1) for m in
            re.finditer(r"^  ([a-z]+) {2,}\S", out, re.M)] + ["help"]


def options_in(s):
    return set(re.findall(r"(?<![\w-])(--?[A-Za-z][\w-]*)", s))


def test_every_command_has_a_section():
    cmds = listed_commands()
    assert len(cmds) >= 5, cmds
    eq(sorted(s for s in command_sections() if s), sorted(cmds),
       "commands in tidepost(1)")
    synopsis = "\n".join(sections(text("man/tidepost.1"))["SYNOPSIS"][""])
    for c in cmds:
        assert "tidepost " + c in synopsis, c + " not in SYNOPSIS"


def help_options(cmd):
    if cmd == "help":
        rc, out, _ = run([TIDEPOST, "--help"])
        # main.c also takes --help, -h and -V, which --help does not print
        opts = options_in(out) | {"--help", "-h", "-V"}
        out = ""                # its "not built yet" marks are others'
    else:
        rc, out, _ = run([TIDEPOST, "help", cmd])
        # The usage lines (up to the first blank line) and the option
        # list (lines starting with a dash); not the prose.
        usage = out.split("\n\n")[0]
        table = [ln for ln in out.splitlines() if re.match(r"^\s+-", ln)]
        opts = options_in(usage + "\n" + "\n".join(table))
    eq(rc, 0, "tidepost help " + cmd)
    return opts, "not built yet" in out


def test_every_option_documented():
    secs = command_sections()
    for cmd in listed_commands():
        opts, unbuilt = help_options(cmd)
        lines = secs[cmd]
        body = "\n".join(lines)
        tags = "\n".join(ln for ln in lines if re.match(r"^ {7}-", ln))
        for o in sorted(opts):
            assert re.search(r"(?<![\w-])%s(?![\w-])" % re.escape(o),
                             tags), "%s: %s is not described" % (cmd, o)
        if unbuilt:
            # Its usage text is a sketch: the page may say more (-c's
            # long form); once built, the check below holds for it too.
            assert "not built yet" in body, cmd + ": say it is unbuilt"
            continue
        eq(sorted(options_in(tags) - opts), [], "%s: options described "
           "but not in its help" % cmd)
        assert "not built yet" not in body, cmd + ": is built now"


def test_exit_codes_and_signals():
    codes = set()
    for h in glob.glob("daemon/cli*.h"):     # cli.h, cli_run.h, ...
        with open(h) as f:
            codes |= set(re.findall(r"^#define\s+\w+_EXIT_\w+\s+(\d+)\b",
                                    f.read(), re.M))
    codes = sorted(codes)
    assert "2" in codes, "no exit codes found in daemon/cli*.h"
    page = sections(text("man/tidepost.1"))
    tags = [ln.strip() for ln in page["EXIT STATUS"][""]
            if re.match(r"^ {7}\d+\s*$|^ {7}\d+ ", ln)]
    eq(sorted(t.split()[0] for t in tags), codes, "EXIT STATUS codes")
    sig = "\n".join(page["SIGNALS"][""])
    for s in ["SIGTERM", "SIGINT", "SIGHUP"]:
        assert re.search(r"^ {7}%s\b" % s, sig, re.M), s


def example_block(page, section):
    """The first {...} block of a section of a rendered page, as JSON."""
    lines = sections(text(page))[section][""]
    start = next(i for i, ln in enumerate(lines) if ln.strip() == "{")
    depth, block = 0, []
    for ln in lines[start:]:
        block.append(ln)
        depth += ln.count("{") - ln.count("}")
        if depth == 0:
            break
    return json.loads("\n".join(block))


def check_config(cfg):
    path = os.path.join(TMP, "config.json")
    with open(path, "w") as f:
        json.dump(cfg, f)
    return run([TIDEPOST, "check", "-c", path])


def test_examples_are_valid():
    layout = example_block("man/tidepost-layout.5", "EXAMPLE")
    with open(os.path.join(TMP, "example-layout.json"), "w") as f:
        json.dump(layout, f)
    rc, out, err = check_config({"layouts": ["example-layout.json"]})
    eq((rc, err), (0, ""), "tidepost-layout(5) example: " + out)
    cfg = sections(text("man/tidepost-config.5"))["DESCRIPTION"]
    lines = cfg.get("Defaults")
    assert lines, "no Defaults subsection"
    start = next(i for i, ln in enumerate(lines) if ln.strip() == "{")
    end = next(i for i, ln in enumerate(lines) if ln.strip() == "}")
    minimal = json.loads("\n".join(lines[start:end + 1]))
    minimal["layouts"] = ["example-layout.json"]
    rc, out, err = check_config(minimal)
    eq((rc, err), (0, ""), "tidepost-config(5) minimal config: " + out)


def main():
    global TMP
    TMP = tempfile.mkdtemp(prefix="tp-man-")
    try:
        Runner().run([test_pages_render_without_warnings,
                      test_key_tables_are_current,
                      test_every_key_documented_and_no_other,
                      test_every_command_has_a_section,
                      test_every_option_documented,
                      test_exit_codes_and_signals,
                      test_examples_are_valid])
    finally:
        shutil.rmtree(TMP, ignore_errors=True)


if __name__ == "__main__":
    main()
