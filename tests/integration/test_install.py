#!/usr/bin/python3
"""test_install.py - `make install` and `make uninstall` into a staging
DESTDIR, as a packager or an operator on a board would run them.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_install.py
(from the top of the repository; the build folder is TIDEPOST's folder).
TP_MAKEFILE names another makefile to use instead of ./Makefile.

Checks: the exact list of installed files and their modes (the expected
list is the project's own file list: the public headers and example
layouts found in the tree, plus the fixed files); the paths written into
the unit and the pkg-config file follow PREFIX, BINDIR, SYSCONFDIR; the
installed binary runs; a small C program builds against the installed
headers and library with only `pkg-config --cflags --libs tidepost` and
decodes COBS-framed packets built here in Python (a CRC-16/IBM-3740 and a
COBS encoder written from their specifications, not from the C code; the
packet values are invented test data); an operator's changed files
survive both a second install and the uninstall; uninstall leaves no
file of ours.  When systemd-analyze is present, the installed unit's
exposure score must be at most 2.0 ("OK", the target of RELIABILITY.md
T23).

Standard library only; run by /usr/bin/python3.
"""
import os
import re
import shutil
import stat
import struct
import subprocess
import sys
import tempfile
import traceback

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
BUILD = os.path.dirname(TIDEPOST) or "."
MAKEFILE = os.environ.get("TP_MAKEFILE", "Makefile")
ROOT = os.getcwd()
TMP = None


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
        print("test_install: %d passed, %d failed"
              % (self.passed, self.failed))
        sys.exit(1 if self.failed else 0)


def eq(got, want, what=""):
    if got != want:
        raise AssertionError("%s: got %r, want %r" % (what, got, want))


def sh(argv, env=None, cwd=None, ok=True):
    p = subprocess.run(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                       env=env, cwd=cwd)
    out, err = p.stdout.decode(), p.stderr.decode()
    if ok and p.returncode != 0:
        raise AssertionError("%s: exit %d\n%s%s" % (" ".join(argv),
                             p.returncode, out, err))
    return p.returncode, out, err


def make(target, dest, *extra):
    """make TARGET into DESTDIR dest.  -o: install the binary and library
    that were built and tested, never rebuild them here."""
    keep = ["-o", os.path.join(BUILD, "tidepost"),
            "-o", os.path.join(BUILD, "libtidepost.a")]
    return sh(["make", "-s", "-f", MAKEFILE, "BUILD=" + BUILD,
               "DESTDIR=" + dest] + keep + list(extra) + [target])


def files_under(top):
    """Every file (not folder) under top, relative, with its mode."""
    got = {}
    for d, _dirs, names in os.walk(top):
        for n in names:
            p = os.path.join(d, n)
            got[os.path.relpath(p, top)] = stat.S_IMODE(os.lstat(p).st_mode)
    return got


def version():
    with open(os.path.join(ROOT, "Makefile")) as f:
        m = re.search(r"^VERSION\s*:?=\s*(\S+)", f.read(), re.M)
    return m.group(1)


def expected(prefix="usr/local", etc="etc"):
    """The install's file list, from the project's own files."""
    want = {
        prefix + "/bin/tidepost": 0o755,
        prefix + "/lib/libtidepost.a": 0o644,
        prefix + "/lib/pkgconfig/tidepost.pc": 0o644,
        prefix + "/share/man/man1/tidepost.1": 0o644,
        prefix + "/share/man/man5/tidepost-config.5": 0o644,
        prefix + "/share/man/man5/tidepost-layout.5": 0o644,
        prefix + "/lib/systemd/system/tidepost.service": 0o644,
        prefix + "/lib/sysusers.d/tidepost.conf": 0o644,
        etc + "/tidepost/example.json": 0o644,
    }
    for h in os.listdir(os.path.join(ROOT, "include/tidepost")):
        if h.endswith(".h"):
            want[prefix + "/include/tidepost/" + h] = 0o644
    for j in os.listdir(os.path.join(ROOT, "config/layouts")):
        if j.endswith(".json"):
            want[etc + "/tidepost/layouts/" + j] = 0o644
    return want


# ---- packets, built here from the specifications -------------------------


def crc16_ibm3740(data):
    """CRC-16/IBM-3740: width 16, poly 0x1021, init 0xffff, no reflection,
    xorout 0 (CRC RevEng catalogue); bitwise."""
    reg = 0xFFFF
    for b in data:
        reg ^= b << 8
        for _ in range(8):
            reg = ((reg << 1) ^ 0x1021) if reg & 0x8000 else reg << 1
            reg &= 0xFFFF
    return reg


# The catalogue's check value: the CRC of the ASCII bytes "123456789".
assert crc16_ibm3740(b"123456789") == 0x29B1, "CRC-16/IBM-3740 model wrong"


def cobs(data):
    """COBS (Cheshire & Baker 1999), then the 0x00 delimiter."""
    out, block = bytearray(), bytearray()
    for b in data:
        if b == 0:
            out += bytes([len(block) + 1]) + block
            block = bytearray()
        else:
            block.append(b)
            if len(block) == 254:
                out += b"\xff" + block
                block = bytearray()
    out += bytes([len(block) + 1]) + block
    return bytes(out) + b"\x00"


assert cobs(b"\x11\x22\x00\x33") == b"\x03\x11\x22\x02\x33\x00", "COBS model"


def packet(station, seq, time_s, battery_raw, temp_raw):
    """Invented test layout "t1": u8 kind 2, u16 station, u16 seq, u32
    time, u16 battery (mV), i16 temperature (0.01 degC), CRC-16/IBM-3740
    of all before it, big-endian."""
    body = struct.pack(">BHHIHh", 2, station, seq, time_s, battery_raw,
                       temp_raw)
    return body + struct.pack(">H", crc16_ibm3740(body))


DECODER_C = r"""
/* Decodes COBS-framed "t1" packets from stdin with the installed
 * libtidepost: one line per frame.  Test program, invented layout. */
#include <stdio.h>
#include <tidepost/check.h>
#include <tidepost/frame.h>
#include <tidepost/layout.h>
#include <tidepost/status.h>

static struct tp_field head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001,
	  .has_range = true, .range_min = 0, .range_max = 16 },
	{ .name = "temperature", .type = TP_T_I16, .bits = 16,
	  .is_signed = true, .scale = 0.01 },
};
static const struct tp_match m[] = { { .at = 0, .type = TP_T_U8, .is = 2 } };

static void one(const struct tp_layout *l, const uint8_t *p, size_t n)
{
	struct tp_packet pk;
	struct tp_reading r;
	enum tp_status s = tp_decode_packet(l, p, n, &pk);

	if (s == TP_OK)
		s = tp_decode_record(&pk, 0, &r);
	if (s != TP_OK) {
		printf("error %s %s\n", s == TP_ERR_CHECK ? "check" : "other",
		       tp_strerror(s));
		return;
	}
	printf("ok %u %llu %lld %.3f %u %.2f %u\n", (unsigned)pk.station,
	       (unsigned long long)pk.seq, (long long)r.time_s,
	       r.values[4].v, r.values[4].flag, r.values[5].v,
	       r.values[5].flag);
}

int main(void)
{
	static uint8_t in[4096], fb[TP_MAX_PACKET];
	struct tp_layout l = { .name = "t1", .fields = head, .n_fields = 6,
	                       .match = m, .n_match = 1 };
	struct tp_framer f;
	size_t n, at, used;

	l.check.kind = TP_CHECK_CRC;
	l.check.at = -2;
	if (tp_crc_init(&l.check.crc, tp_crc_find("CRC-16/IBM-3740")) != TP_OK
	    || tp_frame_init(&f, TP_FRAMING_COBS, 0, fb, sizeof fb) != TP_OK)
		return 3;
	n = fread(in, 1, sizeof in, stdin);
	for (at = 0; at < n; at += used)
		if (tp_frame_push(&f, in + at, n - at, &used) == TP_FRAME_READY)
			one(&l, tp_frame_data(&f), f.len);
	return 0;
}
"""

# ---- the tests -------------------------------------------------------------


def stage(name):
    d = os.path.join(TMP, name)
    os.makedirs(d)
    return d


def test_install_file_list():
    """Exactly the files of the project, with their modes."""
    dest = stage("list")
    make("install", dest)
    got = files_under(dest)
    want = expected()
    eq(sorted(set(got) - set(want)), [], "files installed but not expected")
    eq(sorted(set(want) - set(got)), [], "files expected but not installed")
    for p, mode in want.items():
        eq(oct(got[p]), oct(mode), "mode of " + p)
    for src, dst in [("config/example.json", "etc/tidepost/example.json"),
                     ("man/tidepost.1", "usr/local/share/man/man1/"
                      "tidepost.1"),
                     ("config/tidepost.sysusers",
                      "usr/local/lib/sysusers.d/tidepost.conf")]:
        with open(src, "rb") as a, open(os.path.join(dest, dst), "rb") as b:
            eq(a.read() == b.read(), True, dst + " is a copy of " + src)


def test_paths_follow_prefix():
    """PREFIX/SYSCONFDIR go into the unit and the .pc; DESTDIR does not."""
    dest = stage("prefix")
    make("install", dest, "PREFIX=/usr", "SYSCONFDIR=/opt/etc")
    got = files_under(dest)
    eq(sorted(got), sorted(expected("usr", "opt/etc")), "file list")
    with open(os.path.join(dest, "usr/lib/systemd/system/"
                           "tidepost.service")) as f:
        unit = f.read()
    assert ("ExecStart=/usr/bin/tidepost run -c /opt/etc/tidepost/"
            "config.json --foreground") in unit, unit
    assert "LoadCredential=token:/opt/etc/tidepost/token" in unit, unit
    assert dest not in unit and "/usr/local" not in unit, "stray paths"
    with open(os.path.join(dest, "usr/lib/pkgconfig/tidepost.pc")) as f:
        pc = f.read()
    for line in ["prefix=/usr", "libdir=/usr/lib", "includedir=/usr/include",
                 "Version: " + version(),
                 "Libs: -L${libdir} -ltidepost -lm"]:
        assert line + "\n" in pc, (line, pc)
    assert "@" not in pc and dest not in pc, pc


def test_binary_runs():
    dest = stage("run")
    make("install", dest)
    rc, out, _ = sh([os.path.join(dest, "usr/local/bin/tidepost"),
                     "--version"])
    eq(out, "tidepost %s\n" % version(), "--version")


def test_library_with_pkg_config():
    """A program built only with pkg-config's flags decodes packets."""
    dest = stage("pc")
    make("install", dest)
    env = dict(os.environ,
               PKG_CONFIG_LIBDIR=os.path.join(dest, "usr/local/lib/pkgconfig"),
               PKG_CONFIG_SYSROOT_DIR=dest)
    env.pop("PKG_CONFIG_PATH", None)
    pkg = os.environ.get("PKG_CONFIG", "pkg-config")
    _, ver, _ = sh([pkg, "--modversion", "tidepost"], env=env)
    eq(ver.strip(), version(), "pkg-config --modversion")
    _, flags, _ = sh([pkg, "--cflags", "--libs", "tidepost"], env=env)
    assert os.path.join(dest, "usr/local/include") in flags, flags
    work = stage("pc-work")
    with open(os.path.join(work, "dec.c"), "w") as f:
        f.write(DECODER_C)
    cc = os.environ.get("CC", "cc")
    sh([cc, "-std=c11", "-Wall", "-Wextra", "-Werror", "dec.c", "-o", "dec"]
       + flags.split(), cwd=work)
    good = packet(7, 513, 1709251200, 12345, -123)
    bad = bytearray(packet(8, 2, 1709252100, 11000, 2500))
    bad[9] ^= 0x40          # a flipped bit in the battery value
    p = subprocess.run([os.path.join(work, "dec")],
                       input=cobs(good) + cobs(bytes(bad)),
                       stdout=subprocess.PIPE, check=True, cwd=work)
    eq(p.stdout.decode().splitlines()[0],
       "ok 7 513 1709251200 12.345 1 -1.23 1", "decoded values")
    assert p.stdout.decode().splitlines()[1].startswith("error check "), \
        p.stdout
    eq(len(p.stdout.decode().splitlines()), 2, "one line per frame")


def test_operator_files_kept():
    """A changed layout survives install and uninstall; so does the
    operator's config.json and the folder holding it."""
    dest = stage("keep")
    make("install", dest)
    etc = os.path.join(dest, "etc/tidepost")
    lay = os.path.join(etc, "layouts", sorted(
        os.listdir(os.path.join(etc, "layouts")))[0])
    with open(lay, "a") as f:
        f.write("\n// changed by the operator\n")
    with open(lay) as f:
        changed = f.read()
    with open(os.path.join(etc, "config.json"), "w") as f:
        f.write("{}\n")
    _, out, _ = make("install", dest)
    assert "kept, not replaced" in out, out
    with open(lay) as f:
        eq(f.read(), changed, "second install kept the changed layout")
    make("uninstall", dest)
    eq(sorted(files_under(dest)),
       sorted(os.path.relpath(p, dest) for p in
              [lay, os.path.join(etc, "config.json")]),
       "files left by uninstall")


def test_uninstall_leaves_nothing():
    """Every file goes, and our own folders too; twice is harmless."""
    dest = stage("un")
    make("install", dest)
    make("uninstall", dest)
    eq(files_under(dest), {}, "files left")
    for d in ["usr/local/include/tidepost", "etc/tidepost"]:
        eq(os.path.exists(os.path.join(dest, d)), False, d + " left")
    make("uninstall", dest)


def test_unit_exposure():
    """The installed unit's systemd-analyze exposure is "OK" (<= 2.0)."""
    if shutil.which("systemd-analyze") is None:
        print("skip test_unit_exposure: no systemd-analyze")
        return
    dest = stage("unit")
    make("install", dest)
    unit = os.path.join(dest, "usr/local/lib/systemd/system/"
                        "tidepost.service")
    rc, out, err = sh(["systemd-analyze", "security", "--offline=true",
                       "--threshold=20", "--no-pager", unit], ok=False)
    m = re.search(r"Overall exposure level for \S+: (\d+\.\d+)", out + err)
    assert m, out + err
    print("     exposure %s" % m.group(1))
    eq(rc, 0, "exposure above 2.0: " + m.group(1))
    rc, out, err = sh(["systemd-analyze", "verify", "--man=no", unit],
                      ok=False)
    bad = [ln for ln in (out + err).splitlines()
           if "is not executable" not in ln and ln.strip()]
    eq(bad, [], "systemd-analyze verify")


def main():
    global TMP
    TMP = tempfile.mkdtemp(prefix="tp-install-")
    try:
        Runner().run([test_install_file_list, test_paths_follow_prefix,
                      test_binary_runs, test_library_with_pkg_config,
                      test_operator_files_kept, test_uninstall_leaves_nothing,
                      test_unit_exposure])
    finally:
        shutil.rmtree(TMP, ignore_errors=True)


if __name__ == "__main__":
    main()
