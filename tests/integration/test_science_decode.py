#!/usr/bin/python3
"""test_science_decode.py - derived values and QC flags in `tidepost decode`
of the demo archive (the INVENTED Quillet Reef scenario of demo/).

Run: TIDEPOST=build/tidepost /usr/bin/python3 \
         tests/integration/test_science_decode.py

Builds the demo archive the way demo/run.sh does (demo/gen.py -> tidepost
encode, no damage), decodes it with the demo config, and checks:
- derived values follow the layout's values, with sensible numbers: practical
  salinity against python3-gsw's SP_from_C (an independent TEOS-10
  implementation), oxygen saturation against gsw.O2sol_SP_pt, aragonite
  saturation 3..4.5 for warm reef water (common practice, no source);
- the invented pH spike, the invented stuck temperature and the invented
  out-of-range pH and oxygen are flagged 3/4 by the right QARTOD test in
  --qc-tests output, at the readings gen.py put them in (times computed
  here from gen.py's own constants);
- a derived value inherits its input's fail flag; the first reading after
  the outage carries the gap test's 9 without a worse flag;
- CSV with --qc-tests: the documented columns, the same flags;
- without --qc-tests no "tests" member and the same flags.
Standard library plus python3-gsw; prints "N passed, M failed".
"""
import csv
import io
import json
import os
import subprocess
import sys
import tempfile
import traceback
from datetime import datetime, timedelta, timezone

import gsw

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
PY = "/usr/bin/python3"
HERE = os.path.dirname(os.path.abspath(__file__))
DEMO = os.path.join(HERE, "..", "..", "demo")
sys.path.insert(0, DEMO)
import gen  # noqa: E402  (the demo's constants: where the events are)

TESTS = ("gross_range", "climatology", "spike", "rate_of_change",
         "flat_line", "multi_variate", "gap", "syntax")
LAYOUT_VALUES = ["kind", "battery", "logger_temp", "logger_rh", "ph", "temperature",
                 "conductivity", "oxygen"]
DERIVED = ["salinity", "oxygen_solubility", "oxygen_saturation",
           "alkalinity", "pco2", "fco2", "dic", "carbonate_ion",
           "omega_aragonite", "omega_calcite"]
QC_NAMES = ["ph", "temperature", "oxygen", "salinity"]  # demo/config.json


def at(k):
    """RFC 3339 time of gen.py's record k."""
    t = gen.START + timedelta(seconds=k * gen.RECORD_S)
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def run(args, stdin=None):
    p = subprocess.run([TIDEPOST] + args, input=stdin, capture_output=True,
                       timeout=60)
    return p.returncode, p.stdout, p.stderr.decode(errors="replace")


class Fixture:
    def __init__(self):
        self.tmp = tempfile.mkdtemp(prefix="tp-science-")
        cfg = os.path.join(DEMO, "config.json")
        csv_path = os.path.join(self.tmp, "readings.csv")
        subprocess.run([PY, os.path.join(DEMO, "gen.py"), "-o", csv_path],
                       check=True, timeout=60)
        rc, out, err = run(["encode", "-c", cfg, "--framing", "cobs",
                            csv_path])
        assert rc == 0, "encode failed: " + err
        self.archive = os.path.join(self.tmp, "archive.cobs")
        with open(self.archive, "wb") as f:
            f.write(out)
        base = ["decode", "-c", cfg, "--framing", "cobs", self.archive]
        rc, out, err = run(base + ["--qc-tests"])
        assert rc == 0, "decode failed: " + err
        self.lines = [json.loads(ln) for ln in out.decode().splitlines()]
        self.by_time = {r["time"]: r for r in self.lines}
        rc, out, err = run(base)
        assert rc == 0, err
        self.plain = [json.loads(ln) for ln in out.decode().splitlines()]
        rc, out, err = run(base + ["--qc-tests", "--format", "csv"])
        assert rc == 0, err
        self.csv = list(csv.reader(io.StringIO(out.decode(), newline="")))


FX = None
RESULTS = []


def test(fn):
    RESULTS.append(fn)
    return fn


@test
def derived_follow_layout_values():
    """values: the layout's values first, then the derived ones in the
    plan's order (WIRE.md; derive.h)."""
    r = FX.lines[0]
    assert list(r["values"]) == LAYOUT_VALUES + DERIVED, list(r["values"])
    assert list(r["flags"]) == LAYOUT_VALUES + DERIVED


@test
def salinity_matches_gsw():
    """Salinity from conductivity, temperature and the station's 1.2 m
    depth; checked against python3-gsw SP_from_C at p = gsw.p_from_z."""
    p = float(gsw.p_from_z(-1.2, 0.0))
    n = 0
    for r in FX.lines:
        v, f = r["values"], r["flags"]
        if f["salinity"] != 1:
            continue
        ref = float(gsw.SP_from_C(v["conductivity"], v["temperature"], p))
        assert abs(v["salinity"] - ref) < 2e-4, (r["id"], v["salinity"], ref)
        assert 33 < v["salinity"] < 36, r["id"]
        n += 1
    assert n > 1500, n


@test
def oxygen_saturation_matches_gsw():
    """100 * O2 / O2sol with gsw.O2sol_SP_pt (Garcia & Gordon 1992 as
    TEOS-10 implements it); in-situ vs potential temperature at 1 m
    differs by far less than the tolerance."""
    n = 0
    for r in FX.lines:
        v, f = r["values"], r["flags"]
        if f["oxygen_saturation"] != 1:
            continue
        sol = float(gsw.O2sol_SP_pt(v["salinity"], v["temperature"]))
        assert abs(v["oxygen_solubility"] - sol) < 0.2, (r["id"], sol)
        assert abs(v["oxygen_saturation"] - 100 * v["oxygen"] / sol) < 0.2
        assert 60 < v["oxygen_saturation"] < 140, r["id"]
        n += 1
    assert n > 1500, n


@test
def aragonite_saturation_reef_like():
    """Omega_aragonite 3..4.5 for warm reef water at pH ~8.05 and TA from
    salinity (common practice for such water, no source); pCO2 of a few
    hundred uatm."""
    om = [r["values"]["omega_aragonite"] for r in FX.lines
          if r["flags"]["omega_aragonite"] == 1]
    assert len(om) > 1500, len(om)
    om.sort()
    assert 3.0 <= om[len(om) // 2] <= 4.5, om[len(om) // 2]
    assert om[len(om) // 20] > 2.8 and om[-len(om) // 20] < 4.8
    pc = [r["values"]["pco2"] for r in FX.lines if r["flags"]["pco2"] == 1]
    pc.sort()
    assert 200 < pc[len(pc) // 2] < 600, pc[len(pc) // 2]


@test
def spike_flagged_by_spike_test():
    """gen.py's invented pH spike (+0.25 at one record) is judged when the
    next reading arrives; decode holds one reading per station, so the
    archive line has the final spike flag 4."""
    k, name, _ = gen.SPIKE
    r = FX.by_time[at(k)]
    assert r["flags"][name] == 4, r["flags"][name]
    assert r["tests"][name]["spike"] == 4, r["tests"][name]
    assert r["tests"][name]["gross_range"] == 1  # inside suspect span
    before = FX.by_time[at(k - 1)]
    assert before["tests"][name]["spike"] in (1, 2)


@test
def flat_line_flagged():
    """gen.py's invented stuck temperature: with flat_n 6 and flat_fail_n
    10 (REP_CNT 5 and 9: qc.h), the record with 5 equal values before it
    is suspect and the one with 9 is a fail, to the end of the run."""
    k0, n, name = gen.FLAT
    for i in range(n):
        r = FX.by_time[at(k0 + i)]
        fl = r["tests"][name]["flat_line"]
        want = 4 if i >= 9 else 3 if i >= 5 else None
        if want is None:
            assert fl in (1, 2), (i, fl)
        else:
            assert fl == want and r["flags"][name] >= want, (i, fl)
    after = FX.by_time[at(k0 + n)]
    assert after["tests"][name]["flat_line"] == 1


@test
def out_of_range_flagged():
    """gen.py's invented glitches leave the layout's sensor range: the
    gross range test fails them (4)."""
    for (k, name), _ in gen.GLITCH.items():
        r = FX.by_time[at(k)]
        assert r["flags"][name] == 4, (name, r["flags"][name])
        assert r["tests"][name]["gross_range"] == 4, r["tests"][name]


@test
def derived_inherit_fail():
    """The carbonate values of the reading with the failed pH are 4
    (worst input flag, derive.h); its salinity is not (no pH input)."""
    k = [k for (k, n) in gen.GLITCH if n == "ph"][0]
    r = FX.by_time[at(k)]
    for d in ("pco2", "omega_aragonite", "dic"):
        assert r["flags"][d] == 4, (d, r["flags"][d])
    assert r["flags"]["salinity"] in (1, 3)


@test
def gap_after_outage():
    """The first reading after the 26 h outage carries gap 9 (QARTOD gap
    test, 2 x expect_every_s) and its flag stays a pass."""
    first = FX.by_time[at(gen.OUTAGE[1] * gen.PER_PACKET)]
    assert first["tests"]["temperature"]["gap"] == 9
    assert first["flags"]["temperature"] == 1
    prev = FX.by_time[at(gen.OUTAGE[1] * gen.PER_PACKET + 1)]
    assert prev["tests"]["temperature"]["gap"] == 1


@test
def tests_member_lists_configured_values():
    """"tests" holds every value with QC settings, each with the eight
    QARTOD tests; the flag is never better than any test says."""
    rank = {4: 4, 3: 3, 1: 2, 2: 1, 9: 0}
    for r in FX.lines:
        assert list(r["tests"]) == QC_NAMES, list(r["tests"])
        for name, t in r["tests"].items():
            assert tuple(t) == TESTS
            worst = max(t.values(), key=lambda f: rank[f])
            assert rank[r["flags"][name]] >= rank[worst], (r["id"], name)


@test
def plain_decode_same_flags():
    """Without --qc-tests: the same readings and flags, no tests member."""
    assert len(FX.plain) == len(FX.lines)
    for a, b in zip(FX.plain, FX.lines):
        assert "tests" not in a
        assert a["id"] == b["id"] and a["flags"] == b["flags"]


@test
def csv_columns():
    """CSV: id,station,time,seq, every value and derived value with its
    _flag column, then <name>_<test> for each QC'd value and test."""
    head = FX.csv[0]
    want = ["id", "station", "time", "seq"]
    for n in LAYOUT_VALUES + DERIVED:
        want += [n, n + "_flag"]
    for n in QC_NAMES:
        want += ["%s_%s" % (n, t) for t in TESTS]
    assert head == want, head
    rows = {row[2]: dict(zip(head, row)) for row in FX.csv[1:]}
    assert len(rows) == len(FX.lines)
    k = gen.SPIKE[0]
    row = rows[at(k)]
    assert row["ph_spike"] == "4" and row["ph_flag"] == "4"
    j = FX.by_time[at(k)]
    assert float(row["omega_aragonite"]) == j["values"]["omega_aragonite"]


@test
def no_science_writes_layout_values_only():
    """--no-science: the layout's values only, with the decoder's range
    flags (no config QC, no derived values); the same numbers as the full
    decode; CSV without derived or test columns; --qc-tests with it is a
    usage error (exit 2)."""
    cfg = os.path.join(DEMO, "config.json")
    base = ["decode", "-c", cfg, "--framing", "cobs", FX.archive]
    rc, out, err = run(base + ["--no-science"])
    assert rc == 0, err
    raw = [json.loads(ln) for ln in out.decode().splitlines()]
    assert len(raw) == len(FX.plain)
    changed = 0
    for a, b in zip(raw, FX.plain):
        assert a["id"] == b["id"]
        assert list(a["values"]) == LAYOUT_VALUES, list(a["values"])
        assert list(a["flags"]) == LAYOUT_VALUES
        for n in LAYOUT_VALUES:
            if b["flags"][n] != 9:  # config QC may null a failed value
                assert a["values"][n] == b["values"][n], (a["id"], n)
            assert a["flags"][n] in (1, 2, 3, 4, 9)
            changed += a["flags"][n] != b["flags"][n]
    # the config's QC tests flag some readings the layout's ranges pass
    assert changed > 0
    rc, out, err = run(base + ["--no-science", "--format", "csv"])
    assert rc == 0, err
    head = out.decode().splitlines()[0].split(",")
    want = ["id", "station", "time", "seq"]
    for n in LAYOUT_VALUES:
        want += [n, n + "_flag"]
    assert head == want, head
    rc, out, err = run(base + ["--no-science", "--qc-tests"])
    assert rc == 2 and out == b"", (rc, err)
    assert "--qc-tests and --no-science" in err, err


def main():
    global FX
    passed = failed = 0
    try:
        FX = Fixture()
    except Exception:
        traceback.print_exc()
        print("0 passed, %d failed" % len(RESULTS))
        return 1
    for fn in RESULTS:
        try:
            fn()
            passed += 1
        except Exception:
            failed += 1
            print("FAIL %s" % fn.__name__)
            traceback.print_exc()
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
