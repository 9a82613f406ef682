#!/usr/bin/python3
"""test_report.py - `tidepost report` end to end, on an invented archive.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_report.py

The archive is INVENTED test data (seeded): ten days of 15-minute readings of
a made-up station "tr-test" (number 5) in a layout of our own, with a 12-hour
silence, pH and oxygen values outside the sensor range (flag 4), pH values
above the configured suspect range (flag 3), a few missing values, and a
battery falling 0.25 V a day.  It is made with `tidepost encode`, read back
with `tidepost decode`, and the report is checked against numbers computed
here from the decode output: panels (one per value), axis labels with units,
flagged markers (counted), the line break at the silence, the summary table
(count/min/max), Pearson's r (computed here with the textbook formula), the
battery forecast, the CSV summary, the packet path (QC flags and derived
values such as aragonite saturation), the progress line on a terminal, the
size of a report over a year of 10-minute data, and a PNG rendering of every
panel by a real SVG renderer (rsvg-convert) that must not be blank.

Standard library only; run by /usr/bin/python3.
"""
import calendar
import json
import math
import os
import pty
import random
import select
import shutil
import struct
import subprocess
import sys
import tempfile
import time
import traceback
import xml.etree.ElementTree as ET
import zlib

TIDEPOST = os.environ.get("TIDEPOST", "build/tidepost")
XH = "{http://www.w3.org/1999/xhtml}"
SV = "{http://www.w3.org/2000/svg}"
T0 = calendar.timegm((2030, 5, 1, 0, 0, 0))  # 2030-05-01T00:00:00Z
STEP = 900
DAYS = 10
GAP = (T0 + 5 * 86400, T0 + 5 * 86400 + 12 * 3600)  # no packets in [a, b)
BAT0, BAT_PER_DAY, CUTOFF = 12.6, 0.25, 6.0
PRETTY_UNIT = {"degC": "\u00b0C", "umol/kg": "\u00b5mol/kg",
               "umol/L": "\u00b5mol/L", "uatm": "\u00b5atm"}

LAYOUT = {  # invented layout for this test
    "name": "tr-test-v1", "byte_order": "big",
    "match": [{"at": 0, "type": "u8", "is": 7}],
    "check": {"crc": "CRC-16/IBM-3740", "at": -2},
    "fields": [
        {"name": "kind", "type": "u8"},
        {"name": "station", "type": "u16", "role": "station"},
        {"name": "seq", "type": "u16", "role": "seq"},
        {"name": "time", "type": "u32", "role": "time",
         "epoch": "1970-01-01T00:00:00Z"},
        {"name": "battery", "type": "u16", "scale": 0.001, "unit": "V",
         "range": [0, 16]}],
    "records": {"count": 4, "every_s": STEP, "fields": [
        {"name": "ph", "bits": 12, "scale": 0.001, "offset": 6.5,
         "missing": 4095, "unit": "1", "range": [6.5, 9.0],
         "standard_name": "sea_water_ph_reported_on_total_scale"},
        {"name": "temperature", "bits": 12, "signed": True, "scale": 0.01,
         "offset": 20, "missing": 2047, "unit": "degC", "range": [-2, 40],
         "standard_name": "sea_water_temperature"},
        {"name": "salinity", "bits": 12, "scale": 0.01, "missing": 4095,
         "unit": "1", "range": [0, 40],
         "standard_name": "sea_water_practical_salinity"},
        {"name": "oxygen", "bits": 12, "scale": 0.1, "missing": 4095,
         "unit": "umol/kg", "range": [0, 400],
         "standard_name": "moles_of_oxygen_per_unit_mass_in_sea_water"}]}}


def config(d):
    return {
        "state_dir": d,
        "layouts": ["layout.json"],
        "stations": {"5": {
            "name": "tr-test", "title": "Invented test station",
            "depth_m": 1.0, "expect_every_s": 3600,
            "alkalinity": {"per_salinity": 65.4, "at_zero": 0},
            "qc": {"ph": {"suspect": [7.7, 8.4]}},
            "battery": {"field": "battery", "warn_v": 10.5,
                        "cutoff_v": CUTOFF, "forecast_h": 72}}},
        "inputs": [{"kind": "stdin", "framing": "cobs"}],
        "ring": {"path": os.path.join(d, "ring"), "size_mb": 1},
        "outputs": [{"kind": "file", "name": "archive",
                     "path": os.path.join(d, "readings.ndjson")}]}


# ---- invented data ---------------------------------------------------------

SPECIAL = {  # row index -> (column, text): the known oddities
    100: ("ph", "9.250"), 700: ("ph", "9.300"), 300: ("oxygen", "405.0"),
    200: ("ph", "8.450"), 420: ("ph", "8.500"), 820: ("ph", "8.480"),
    150: ("ph", ""), 610: ("ph", ""), 870: ("ph", ""),
}


def make_csv(path):
    rnd = random.Random(20300501)
    rows = []
    for i in range(DAYS * 86400 // STEP):
        t = T0 + i * STEP
        packet_t = T0 + (i // 4) * 4 * STEP
        if GAP[0] <= packet_t < GAP[1]:
            continue
        h = (t % 86400) / 3600.0
        day = math.sin(2 * math.pi * (h - 9) / 24)
        row = {"station": "5", "seq": str((i // 4) % 65536),
               "time": str(t),
               "battery": "%.3f" % (BAT0 - BAT_PER_DAY *
                                    (packet_t - T0) / 86400),
               "ph": "%.3f" % (8.05 + 0.08 * day + rnd.gauss(0, 0.005)),
               "temperature": "%.2f" % (27.5 + 0.6 * day +
                                        rnd.gauss(0, 0.02)),
               "salinity": "%.2f" % (35.2 + 0.1 * math.sin(
                   2 * math.pi * t / 44714.0)),
               "oxygen": "%.1f" % (200 + 45 * day + rnd.gauss(0, 3))}
        if i in SPECIAL:
            row[SPECIAL[i][0]] = SPECIAL[i][1]
        rows.append(row)
    cols = ["station", "seq", "time", "battery", "ph", "temperature",
            "salinity", "oxygen"]
    with open(path, "w") as f:
        f.write(",".join(cols) + "\n")
        for r in rows:
            f.write(",".join(r[c] for c in cols) + "\n")


def run(args, **kw):
    return subprocess.run([TIDEPOST] + args, capture_output=True, **kw)


def iso(t):
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(t))


def parse_iso(s):
    return calendar.timegm(time.strptime(s, "%Y-%m-%dT%H:%M:%SZ"))


def load(path):
    with open(path) as f:
        return [json.loads(line) for line in f if line.strip()]


def stats(readings, name):
    vals = [(r["values"][name], r["flags"][name]) for r in readings
            if name in r["values"]]
    nums = [(v, f) for v, f in vals if v is not None]
    good = [v for v, f in nums if f != 4]
    return {"count": len(nums), "min": min(good), "max": max(good),
            "f3": sum(1 for _, f in nums if f == 3),
            "f4": sum(1 for _, f in nums if f == 4),
            "missing": len(vals) - len(nums)}


def pearson(readings):
    """Textbook Pearson r over pairs from one reading, neither value null
    nor flagged 4 or 9 (the rule report.h states)."""
    xs, ys = [], []
    for r in readings:
        x, y = r["values"].get("oxygen"), r["values"].get("ph")
        if x is None or y is None or r["flags"]["oxygen"] in (4, 9) or \
                r["flags"]["ph"] in (4, 9):
            continue
        xs.append(x)
        ys.append(y)
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    sxy = sum((a - mx) * (b - my) for a, b in zip(xs, ys))
    sxx = sum((a - mx) ** 2 for a in xs)
    syy = sum((b - my) ** 2 for b in ys)
    return sxy / math.sqrt(sxx * syy), len(xs)


# ---- page helpers ----------------------------------------------------------

def panels(root):
    return {s.get("data-value"): s for s in root.iter(SV + "svg")
            if s.get("class") == "panel"}


def path_pieces(svg):
    """The line's pieces as lists of (time, value) read back through the
    panel's data-* mapping."""
    t0, t1 = float(svg.get("data-t0")), float(svg.get("data-t1"))
    x0, w = float(svg.get("data-x0")), float(svg.get("data-w"))
    line = [p for p in svg.iter(SV + "path") if p.get("class") == "line"][0]
    toks = line.get("d").replace("M", " M ").replace("L", " L ").split()
    pieces, i = [], 0
    while i < len(toks):
        op = toks[i]
        if op in ("M", "L"):
            x = float(toks[i + 1])
            t = t0 + (x - x0) * (t1 - t0) / w
            if op == "M":
                pieces.append([])
            pieces[-1].append(t)
            i += 3
        else:
            i += 2  # "h0.5" after a lone point
    return pieces


def marks(svg, cls):
    return [e for g in svg.iter(SV + "g") if g.get("class") == cls
            for e in g]


def table_rows(root):
    rows = {}
    for tr in root.iter(XH + "tr"):
        if tr.get("data-value") is None:
            continue
        cells = {td.get("class"): td for td in tr.iter(XH + "td")}
        rows[tr.get("data-value")] = cells
    return rows


def text_of(e):
    return "".join(e.itertext())


# ---- PNG check -------------------------------------------------------------

def png_pixels(path):
    """Decode an 8-bit RGB/RGBA PNG (ISO/IEC 15948 filters 0-4)."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, w = 8, b"", 0
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            w, h, depth, ctype = struct.unpack(">IIBB", body[:10])
            assert depth == 8 and ctype in (2, 6), (depth, ctype)
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    raw, stride = zlib.decompress(idat), w * bpp
    prev, rows = bytearray(stride), []
    for y in range(h):
        f = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b, c = prev[i], prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 255
            elif f == 2:
                line[i] = (line[i] + b) & 255
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif f == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pr = a if pa <= pb and pa <= pc else b if pb <= pc else c
                line[i] = (line[i] + pr) & 255
        rows.append(bytes(line))
        prev = line
    return w, h, bpp, rows


def not_blank(path):
    w, h, bpp, rows = png_pixels(path)
    colours, inked = set(), 0
    for row in rows[::2]:
        for x in range(0, w * bpp, bpp * 2):
            px = row[x:x + 3]
            colours.add(px)
            if px != b"\xff\xff\xff":
                inked += 1
    share = inked / ((h // 2) * (w // 2))
    return len(colours), share


# ---- the tests ---------------------------------------------------------------

class Ctx:
    pass


def setup():
    c = Ctx()
    c.dir = tempfile.mkdtemp(prefix="tp-report-")
    c.cfg = os.path.join(c.dir, "config.json")
    with open(os.path.join(c.dir, "layout.json"), "w") as f:
        json.dump(LAYOUT, f)
    with open(c.cfg, "w") as f:
        json.dump(config(c.dir), f)
    make_csv(os.path.join(c.dir, "in.csv"))
    c.archive = os.path.join(c.dir, "archive.cobs")
    with open(c.archive, "wb") as out:
        r = subprocess.run([TIDEPOST, "encode", "-c", c.cfg,
                            os.path.join(c.dir, "in.csv")], stdout=out,
                           stderr=subprocess.PIPE)
    assert r.returncode == 0, r.stderr.decode()
    c.decoded = os.path.join(c.dir, "decoded.ndjson")
    with open(c.decoded, "wb") as out:
        r = subprocess.run([TIDEPOST, "decode", "-c", c.cfg, c.archive],
                           stdout=out, stderr=subprocess.PIPE)
    assert r.returncode == 0, r.stderr.decode()
    c.raw = load(c.decoded)
    # The NDJSON the report reads: decode's readings, with pH above the
    # configured suspect range flagged 3 here (whether decode runs QC or
    # not), so the flag-3 markers are known.
    c.readings = []
    for r in c.raw:
        r = json.loads(json.dumps(r))
        v = r["values"].get("ph")
        if v is not None and v > 8.4 and r["flags"]["ph"] in (1, 2):
            r["flags"]["ph"] = 3
        c.readings.append(r)
    c.ndjson = os.path.join(c.dir, "marked.ndjson")
    with open(c.ndjson, "w") as f:
        for r in c.readings:
            f.write(json.dumps(r) + "\n")
    c.html = os.path.join(c.dir, "report.html")
    r = run(["report", "-c", c.cfg, "--readings", c.ndjson, "-o", c.html])
    assert r.returncode == 0, r.stderr.decode()
    c.root = ET.parse(c.html).getroot()
    return c


def test_panels_and_units(c):
    names = {n for r in c.readings for n in r["values"]}
    ps = panels(c.root)
    assert set(ps) == names, (sorted(ps), sorted(names))
    units = {f["name"]: f.get("unit") for f in
             LAYOUT["fields"] + LAYOUT["records"]["fields"]}
    # values tidepost derives (decoder/derive.c's table), with their units
    units.update({"salinity": "1", "oxygen_solubility": "umol/kg",
                  "oxygen_saturation": "%", "alkalinity": "umol/kg",
                  "pco2": "uatm", "fco2": "uatm", "dic": "umol/kg",
                  "carbonate_ion": "umol/kg", "omega_aragonite": "1",
                  "omega_calcite": "1", "ph_insitu": "1"})
    for name, svg in ps.items():
        label = [t for t in svg.iter(SV + "text")
                 if t.get("class") == "ylabel"][0]
        unit = units.get(name)
        want = PRETTY_UNIT.get(unit, unit) if unit else "unit unknown"
        assert text_of(label).endswith("(%s)" % want), (name, text_of(label))
        xl = [t for t in svg.iter(SV + "text") if t.get("class") == "xlabel"]
        assert text_of(xl[0]) == "time (UTC)"
        ticks = [t for g in svg.iter(SV + "g") if g.get("class") == "ticks-y"
                 for t in g]
        assert len(ticks) >= 3, name


def test_flag_markers(c):
    ps = panels(c.root)
    for name in ("ph", "oxygen", "temperature"):
        s = stats(c.readings, name)
        assert len(marks(ps[name], "flag3")) == s["f3"], name
        assert len(marks(ps[name], "flag4")) == s["f4"], name
    # the invented data has 3 suspect and 2 failed pH values, 1 failed
    # oxygen value: the counts must not be zero by accident
    assert len(marks(ps["ph"], "flag3")) == 3
    assert len(marks(ps["ph"], "flag4")) == 2
    assert len(marks(ps["oxygen"], "flag4")) == 1
    # the failed pH values (9.25, 9.3) lie above the axis: edge triangles
    tri = [e for e in marks(ps["ph"], "flag4")
           if e.get("class") == "off-high"]
    assert len(tri) == 2


def test_gap_is_a_break(c):
    for name in ("ph", "temperature", "battery"):
        pieces = path_pieces(panels(c.root)[name])
        assert len(pieces) == 2, (name, len(pieces))
        col = DAYS * 86400 / 904.0  # seconds per pixel column
        last_before, first_after = pieces[0][-1], pieces[1][0]
        # the silence starts after the last record of the packet before
        # it and ends with the first record after it
        assert abs(last_before - (GAP[0] - STEP)) <= 2 * col, name
        assert abs(first_after - GAP[1]) <= 2 * col, name


def test_summary_table(c):
    rows = table_rows(c.root)
    for name in ("ph", "oxygen", "temperature", "salinity", "battery"):
        s = stats(c.readings, name)
        cells = rows[name]
        assert int(text_of(cells["count"])) == s["count"], name
        assert abs(float(text_of(cells["min"])) - s["min"]) < 1e-9, name
        assert abs(float(text_of(cells["max"])) - s["max"]) < 1e-9, name
        assert int(cells["f3"].get("data-n")) == s["f3"], name
        assert int(cells["f4"].get("data-n")) == s["f4"], name
        assert int(cells["missing"].get("data-n")) == s["missing"], name
    assert int(rows["ph"]["missing"].get("data-n")) == 3


def test_pearson(c):
    r_py, n = pearson(c.readings)
    el = [t for t in c.root.iter(SV + "text") if t.get("class") == "pearson"]
    assert len(el) == 1
    assert abs(float(el[0].get("data-r")) - r_py) < 1e-5, (el[0].attrib,
                                                           r_py)
    assert int(el[0].get("data-n")) == n
    assert ("Pearson r = %.3f" % r_py) in text_of(el[0])
    assert r_py > 0.8  # the invented pH and oxygen share a daily cycle


def test_battery_forecast(c):
    last = max(r for r in (parse_iso(x["time"]) for x in c.readings))
    last_packet = T0 + ((last - T0) // (4 * STEP)) * 4 * STEP
    v_last = BAT0 - BAT_PER_DAY * (last_packet - T0) / 86400
    want = last + (v_last - CUTOFF) / BAT_PER_DAY * 86400
    tm = [t for t in c.root.iter(XH + "time") if t.get("class") == "forecast"]
    assert len(tm) == 1
    got = int(tm[0].get("data-t"))
    assert abs(got - want) < 6 * 3600, (iso(got), iso(want))
    assert text_of(tm[0]) == iso(got)
    p = [e for e in c.root.iter(XH + "p") if e.get("class") == "battery"][0]
    assert "reaches the cutoff of 6.00 V" in text_of(p)
    assert "V/day" in text_of(p) and "-0.25" in text_of(p)
    svg = panels(c.root)["battery"]
    assert any(g.get("class") == "forecast" for g in svg.iter(SV + "g"))
    assert any(p.get("class") == "trend" for p in svg.iter(SV + "path"))


def test_csv_and_packets(c):
    """Packets straight into report: same counts as decode's readings,
    QC flags 3 from the config's suspect range, derived values."""
    r = run(["report", "-c", c.cfg, "--format", "csv", c.archive])
    assert r.returncode == 0, r.stderr.decode()
    lines = r.stdout.decode().split("\r\n")
    assert lines[0] == ("station,value,unit,count,min,mean,max,flagged_3,"
                        "flagged_4,missing,first,last")
    got = {}
    for line in lines[1:]:
        if line:
            f = line.split(",")
            got[f[1]] = f
    for name in ("ph", "oxygen", "temperature", "battery"):
        s = stats(c.raw, name)
        f = got[name]
        assert f[0] == "tr-test"
        assert int(f[3]) == s["count"], name
        assert abs(float(f[4]) - s["min"]) < 1e-9, name
        assert abs(float(f[6]) - s["max"]) < 1e-9, name
        assert int(f[8]) == s["f4"], name
        assert int(f[9]) == s["missing"], name
    suspect = sum(1 for x in c.raw if x["values"]["ph"] is not None and
                  x["flags"]["ph"] not in (4, 9) and
                  not 7.7 <= x["values"]["ph"] <= 8.4)
    assert int(got["ph"][7]) == suspect == 3, (got["ph"], suspect)
    assert got["ph"][2] == "1" and got["oxygen"][2] == "umol/kg"
    for derived in ("oxygen_saturation", "omega_aragonite"):
        assert derived in got, sorted(got)
    assert got["ph"][10] == iso(T0)
    # the packet path as HTML, filtered to one day
    out = os.path.join(c.dir, "day.html")
    r = run(["report", "-c", c.cfg, "--from", iso(T0 + 86400), "--to",
             iso(T0 + 2 * 86400 - 1), "-o", out, c.archive])
    assert r.returncode == 0, r.stderr.decode()
    rows = table_rows(ET.parse(out).getroot())
    day = [x for x in c.raw
           if T0 + 86400 <= parse_iso(x["time"]) < T0 + 2 * 86400]
    s = stats(day, "ph")
    assert int(text_of(rows["ph"]["count"])) == s["count"], s
    assert int(rows["ph"]["missing"].get("data-n")) == s["missing"] == 1
    assert "omega_aragonite" in panels(ET.parse(out).getroot())


def test_errors(c):
    r = run(["report", "-c", c.cfg, "--station", "nope", c.ndjson])
    assert r.returncode == 1 and b"no reading to report" in r.stderr
    r = run(["report", c.archive])  # packets need the layouts
    assert r.returncode == 2 and b"no layouts" in r.stderr, r.stderr
    r = run(["report", "--readings"])
    assert r.returncode == 2 and b"--ring or input files" in r.stderr
    r = run(["report", "--format", "pdf", c.ndjson])
    assert r.returncode == 2 and b"valid: html, csv" in r.stderr
    bad = os.path.join(c.dir, "bad.ndjson")
    with open(bad, "w") as f:
        f.write('{"station":"x","time":"2030-05-01T00:00:00Z",'
                '"values":{"ph":8.1},"flags":{"ph":1}}\nnot json\n\n'
                '{"station":"x"}\n')
    r = run(["report", "--format", "csv", bad])
    assert r.returncode == 0, r.stderr
    assert b"bad.ndjson: line 2: not JSON" in r.stderr, r.stderr
    assert b"bad.ndjson: line 4: no RFC 3339" in r.stderr, r.stderr
    # no config: the unit of "ph" comes from the derived values' table
    assert b"x,ph,1,1,8.1,8.10,8.1,0,0,0," in r.stdout, r.stdout
    # a batch body as the HTTP output sends it: its quantities give units
    batch = os.path.join(c.dir, "batch.ndjson")
    with open(batch, "w") as f:
        f.write(json.dumps({"readings": [
            {"station": "b", "time": "2030-01-01T00:00:00Z",
             "values": {"zz": 1.5}, "flags": {"zz": 1}},
            {"station": "b", "time": "2030-01-01T01:00:00Z",
             "values": {"zz": 2.5}, "flags": {"zz": 3}}],
            "quantities": {"zz": {"unit": "m"}}}) + "\n")
    r = run(["report", "--format", "csv", batch])
    assert b"b,zz,m,2,1.5,2.00,2.5,1,0,0,2030-01-01T00:00:00Z," in r.stdout
    r = run(["report", "--readings", os.path.join(c.dir, "missing")])
    assert r.returncode == 2 and b"No such file" in r.stderr


def test_duplicates_dropped(c):
    dup = os.path.join(c.dir, "dup.ndjson")
    with open(dup, "w") as f:
        for r in c.readings[:50] + c.readings[40:60]:
            f.write(json.dumps(r) + "\n")
    r = run(["report", "--format", "csv", dup])
    assert r.returncode == 0
    assert b"10 duplicates" in r.stderr, r.stderr
    row = [l for l in r.stdout.decode().split("\r\n")
           if l.startswith("tr-test,temperature,")][0]
    assert row.split(",")[3] == "60"


def year_file(d):
    """A year of invented 10-minute readings, WIRE.md lines."""
    path = os.path.join(d, "year.ndjson")
    rnd = random.Random(7)
    t0 = calendar.timegm((2029, 1, 1, 0, 0, 0))
    with open(path, "w") as f:
        for i in range(365 * 144):
            t = t0 + i * 600
            h = (t % 86400) / 3600.0
            day = math.sin(2 * math.pi * (h - 9) / 24)
            v = {"ph": round(8.05 + 0.08 * day + rnd.gauss(0, .005), 3),
                 "oxygen": round(200 + 45 * day + rnd.gauss(0, 3), 1),
                 "temperature": round(27 + 2 * math.sin(
                     2 * math.pi * i / 52560) + 0.5 * day, 2),
                 "salinity": round(35 + 0.2 * rnd.random(), 2),
                 "battery": round(12.8 - 0.004 * (i // 144), 3),
                 "omega_aragonite": round(3.4 + 0.3 * day, 2)}
            fl = {k: 1 for k in v}
            if i % 5000 == 77:
                fl["ph"] = 3
            f.write(json.dumps({"id": "yr-%d" % i, "station": "yr",
                                "time": iso(t), "values": v,
                                "flags": fl}) + "\n")
    return path


def test_year_size_and_progress(c):
    path = year_file(c.dir)
    out = os.path.join(c.dir, "year.html")
    t = time.time()
    r = run(["report", "--readings", path, "-o", out])
    took = time.time() - t
    assert r.returncode == 0, r.stderr
    assert b"\r" not in r.stderr  # not a terminal: no progress line
    size = os.path.getsize(out)
    print("    a year of 10-minute data: %d readings, %.1f MiB NDJSON -> "
          "%d bytes of HTML in %.2f s" % (365 * 144,
                                          os.path.getsize(path) / 2**20,
                                          size, took))
    assert size < 1500000, size
    root = ET.parse(out).getroot()
    for svg in panels(root).values():
        n = sum(len(p.get("d").split()) // 2 for p in svg.iter(SV + "path")
                if p.get("class") == "line")
        assert n <= 2 * 904 + 10, n  # min/max per pixel column
    assert len(marks(panels(root)["ph"], "flag3")) == 11


def test_progress_on_terminal(c):
    """stderr a terminal (a pty): the line is drawn, redrawn at most a
    few times a second, and cleared at the end.  The readings come
    through a FIFO, slowly, so the run lasts about 1.5 s whatever the
    machine; --from/--to make it a single pass."""
    fifo = os.path.join(c.dir, "slow.ndjson")
    os.mkfifo(fifo)
    lines = [json.dumps(r) + "\n" for r in c.readings]
    pid, fd = pty.fork()
    if pid == 0:
        os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
        os.execv(TIDEPOST, [TIDEPOST, "report", "--from", iso(T0), "--to",
                            iso(T0 + DAYS * 86400), "--readings", fifo,
                            "-o", os.path.join(c.dir, "slow.html")])
    seen = bytearray()

    def drain(wait):
        while True:
            ready, _, _ = select.select([fd], [], [], wait)
            if not ready:
                return True
            try:
                chunk = os.read(fd, 4096)
            except OSError:
                return False
            if not chunk:
                return False
            seen.extend(chunk)
    w = os.open(fifo, os.O_WRONLY)
    start = time.time()
    for k in range(10):
        os.write(w, "".join(lines[k * len(lines) // 10:
                                  (k + 1) * len(lines) // 10]).encode())
        drain(0.15)
    os.close(w)
    took = time.time() - start
    while drain(5):
        pass
    _, status = os.waitpid(pid, 0)
    out = bytes(seen)
    assert os.WEXITSTATUS(status) == 0, out
    draws = out.count(b"\rreport: ")
    assert draws >= 2, out
    assert draws <= took / 0.25 + 2, (draws, took)  # rate-limited
    assert b"readings/s" in out and b" KiB" in out, out
    last = out.rsplit(b"\r\x1b[K", 1)
    assert len(last) == 2 and b"readings/s" not in last[1], out
    assert b"report: %d readings" % len(c.readings) in last[1], out


def test_ring(c):
    """--ring reads what the ring holds (here: the archive replayed into
    it), the same while `tidepost run` holds the ring (read-only view),
    and never changes the file."""
    r = run(["replay", "-c", c.cfg, c.archive])
    assert r.returncode == 0, r.stderr
    ring = os.path.join(c.dir, "ring")
    with open(ring, "rb") as f:
        before = f.read()
    r = run(["report", "-c", c.cfg, "--ring", "--format", "csv"])
    assert r.returncode == 0, r.stderr
    with open(ring, "rb") as f:
        assert f.read() == before, "report --ring changed the ring"
    row = [l for l in r.stdout.decode().split("\r\n")
           if l.startswith("tr-test,temperature,")][0]
    assert int(row.split(",")[3]) == stats(c.raw, "temperature")["count"]
    d = subprocess.Popen([TIDEPOST, "run", "-c", c.cfg, "--foreground"],
                         stdin=subprocess.PIPE, stdout=subprocess.DEVNULL,
                         stderr=subprocess.PIPE)
    try:
        line = b""
        deadline = time.time() + 20
        while b"run: started" not in line and time.time() < deadline:
            line = d.stderr.readline()
            assert line, "the daemon stopped"
        # the daemon delivers the backlog to its file output and frees
        # it, so the ring may hold anything from all to none of it now:
        # report reads it anyway (before, the daemon's lock refused it)
        r = run(["report", "-c", c.cfg, "--ring", "--format", "csv"])
        assert r.returncode in (0, 1), r.stderr
        assert b" readings of " in r.stderr, r.stderr
        assert b"locked" not in r.stderr, r.stderr
    finally:
        d.terminate()
        d.wait(20)


def test_render_png(c):
    if shutil.which("rsvg-convert") is None:
        print("    skipped: no renderer (rsvg-convert not installed)")
        return
    outdir = os.path.join(c.dir, "png")
    os.makedirs(outdir, exist_ok=True)
    svgs = list(c.root.iter(SV + "svg"))
    assert len(svgs) >= 6
    for i, svg in enumerate(svgs):
        src = os.path.join(outdir, "%02d.svg" % i)
        png = os.path.join(outdir, "%02d-%s.png" % (i, svg.get("id")))
        with open(src, "wb") as f:
            f.write(ET.tostring(svg))
        r = subprocess.run(["rsvg-convert", "-o", png, src],
                           capture_output=True)
        assert r.returncode == 0, r.stderr
        colours, inked = not_blank(png)
        assert colours >= 4 and inked > 0.02, (png, colours, inked)
    keep = os.environ.get("REPORT_PNG_DIR")
    if keep:
        shutil.rmtree(keep, ignore_errors=True)
        shutil.copytree(outdir, keep)
        shutil.copy(c.html, keep)


TESTS = [test_panels_and_units, test_flag_markers, test_gap_is_a_break,
         test_summary_table, test_pearson, test_battery_forecast,
         test_csv_and_packets, test_errors, test_duplicates_dropped,
         test_year_size_and_progress, test_progress_on_terminal, test_ring,
         test_render_png]


def main():
    c = setup()
    failed = 0
    try:
        for t in TESTS:
            try:
                t(c)
                print("ok   %s" % t.__name__)
            except Exception:
                failed += 1
                print("FAIL %s" % t.__name__)
                traceback.print_exc()
    finally:
        shutil.rmtree(c.dir, ignore_errors=True)
    print("test_report: %d passed, %d failed" % (len(TESTS) - failed,
                                                  failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
