#!/usr/bin/python3
"""Print a short readable summary of decoded readings (NDJSON on stdin).

Part of the INVENTED DEMO SCENARIO (station "qr-flat", the made-up Quillet
Reef): the first line printed says so.

Usage: summary.py --layout L.json [--manifest M.json] [--decoder-log F]
                  [--gap S] < readings.ndjson
"""

import argparse
import json
import math
import re
import sys
from datetime import datetime, timezone

FLAG_NAMES = ((1, "pass"), (2, "not evaluated"), (3, "suspect"),
              (4, "fail"), (9, "missing"))
# The derived values tidepost appends (decoder/derive.c) and their units.
DERIVED_UNITS = {
    "salinity": "1", "oxygen_solubility": "umol/kg",
    "oxygen_saturation": "%", "ph": "1", "alkalinity": "umol/kg",
    "ph_insitu": "1", "pco2": "uatm", "fco2": "uatm", "dic": "umol/kg",
    "carbonate_ion": "umol/kg", "omega_aragonite": "1",
    "omega_calcite": "1"}
# QARTOD roll-up rank (qc.h): 4 > 3 > 1 > 2 > 9.
RANK = {4: 4, 3: 3, 1: 2, 2: 1, 9: 0}


def strip_comments(text):
    """Drop // and /* */ comments outside strings (JSON with comments)."""
    out, i, n, in_str = [], 0, len(text), False
    while i < n:
        c = text[i]
        if in_str:
            out.append(c)
            if c == "\\" and i + 1 < n:
                out.append(text[i + 1])
                i += 1
            elif c == '"':
                in_str = False
        elif c == '"':
            in_str = True
            out.append(c)
        elif text.startswith("//", i):
            while i < n and text[i] != "\n":
                i += 1
            continue
        elif text.startswith("/*", i):
            j = text.find("*/", i + 2)
            i = n if j < 0 else j + 2
            continue
        else:
            out.append(c)
        i += 1
    return "".join(out)


def load_layout(path):
    with open(path) as f:
        return json.loads(strip_comments(f.read()))


def parse_time(s):
    return datetime.strptime(s, "%Y-%m-%dT%H:%M:%SZ").replace(
        tzinfo=timezone.utc).timestamp()


def fmt_time(t):
    return datetime.fromtimestamp(t, timezone.utc).strftime(
        "%Y-%m-%dT%H:%M:%SZ")


def units_of(layout):
    """Measured value fields (those with a unit) -> unit, in file order."""
    fields = list(layout.get("fields", []))
    fields += layout.get("records", {}).get("fields", [])
    return {f["name"]: f["unit"] for f in fields
            if "unit" in f and "role" not in f}


class Stats:
    def __init__(self):
        self.n, self.sum = 0, 0.0
        self.min, self.max = math.inf, -math.inf
        self.flags = {}

    def add(self, v, flag):
        self.flags[flag] = self.flags.get(flag, 0) + 1
        if v is None:
            return
        self.n += 1
        self.sum += v
        self.min = min(self.min, v)
        self.max = max(self.max, v)


def apply_update(by_id, u):
    """An update record {"update": id, "flags": {...}, "tests": {...}}
    makes the earlier reading's flags worse, never better (process.h)."""
    r = by_id.get(u.get("update"))
    if r is None:
        return
    for k, f in u.get("flags", {}).items():
        old = r.setdefault("flags", {}).get(k)
        if old is None or RANK.get(f, 0) > RANK.get(old, 0):
            r["flags"][k] = f
    for k, t in u.get("tests", {}).items():
        r.setdefault("tests", {}).setdefault(k, {}).update(t)


def read_readings(stream):
    readings, bad, updates = [], 0, []
    for line in stream:
        line = line.strip()
        if not line:
            continue
        try:
            obj = json.loads(line)
        except ValueError:
            bad += 1
            continue
        (updates if "update" in obj else readings).append(obj)
    by_id = {r.get("id"): r for r in readings}
    for u in updates:
        apply_update(by_id, u)
    readings.sort(key=lambda r: (parse_time(r["time"]), r.get("seq", 0)))
    return readings, bad


def gaps(readings, limit_s):
    """Time gaps longer than limit_s, with the seq jump across each."""
    out = []
    for a, b in zip(readings, readings[1:]):
        ta, tb = parse_time(a["time"]), parse_time(b["time"])
        if tb - ta > limit_s:
            out.append((ta, tb, a.get("seq"), b.get("seq")))
    return out


def lost_seqs(readings, big_gaps):
    """Packets missing by seq outside the long gaps (u16 seq, no wrap in
    the demo's three weeks)."""
    seqs = sorted({r["seq"] for r in readings if "seq" in r})
    in_gap = {(g[2], g[3]) for g in big_gaps}
    single = []
    for a, b in zip(seqs, seqs[1:]):
        if b - a > 1 and (a, b) not in in_gap:
            single.extend(range(a + 1, b))
    return single, seqs


def print_values(readings, units):
    names = list(units)
    for r in readings:
        for k in r.get("values", {}):
            if k not in units and k not in names and k != "kind":
                names.append(k)  # derived values the decoder added
    stats = {k: Stats() for k in names}
    for r in readings:
        vals, flags = r.get("values", {}), r.get("flags", {})
        for k in names:
            if k in vals:
                stats[k].add(vals[k], flags.get(k))
    print("  %-16s %-8s %9s %9s %9s  %s" % ("value", "unit", "min",
                                            "mean", "max", "flags"))
    for k in names:
        s = stats[k]
        if not s.flags:
            continue
        fl = ", ".join("%s %d" % (nm, s.flags[c]) for c, nm in FLAG_NAMES
                       if s.flags.get(c))
        unit = units.get(k) or DERIVED_UNITS.get(k, "?") + " *"
        if s.n:
            print("  %-16s %-8s %9.3f %9.3f %9.3f  %s" % (
                k, unit, s.min, s.sum / s.n, s.max, fl))
        else:
            print("  %-16s %-8s %9s %9s %9s  %s" % (
                k, unit, "-", "-", "-", fl))
    if any(k not in units for k in names):
        print("  (* derived by tidepost from the measured values)")


def flagged(r, units):
    """The measured values of r flagged 3 or 4, with the tests that said
    so (when decode ran with --qc-tests), and how many derived values
    carry a 3 or 4."""
    meas, n_derived = [], 0
    for k, f in r.get("flags", {}).items():
        if f not in (3, 4):
            continue
        if k not in units:
            n_derived += 1
            continue
        why = sorted("%s %d" % (t, v) for t, v in
                     r.get("tests", {}).get(k, {}).items() if v in (3, 4))
        meas.append((k, f, tuple(why)))
    return sorted(meas), n_derived


def describe(meas, r):
    out = []
    for k, f, why in meas:
        v = r.get("values", {}).get(k)
        out.append("%s %s flag %d%s" % (
            k, "null" if v is None else v, f,
            " (%s)" % ", ".join(why) if why else ""))
    return "; ".join(out)


def print_events(readings, units):
    """Readings with a measured value flagged 3/4; runs of readings with
    the same values and tests flagged are merged into one line."""
    events = []
    for r in readings:
        meas, nd = flagged(r, units)
        if not meas:
            continue
        key = tuple((k, why) for k, _, why in meas)
        t = parse_time(r["time"])
        if events and events[-1]["key"] == key and \
                t - events[-1]["t1"] <= 3600:
            events[-1].update(t1=t, n=events[-1]["n"] + 1,
                              nd=max(events[-1]["nd"], nd),
                              flags=events[-1]["flags"] | {
                                  f for _, f, _ in meas})
            continue
        events.append({"key": key, "t0": t, "t1": t, "n": 1, "nd": nd,
                       "text": describe(meas, r),
                       "flags": {f for _, f, _ in meas}})
    print("flagged events (QC flag 3 suspect / 4 fail): %d" % len(events))
    for e in events[:30]:
        when = fmt_time(e["t0"]) if e["n"] == 1 else "%s .. %s (%d readings)" \
            % (fmt_time(e["t0"]), fmt_time(e["t1"])[11:], e["n"])
        print("  %s: %s%s" % (when, e["text"] if e["n"] == 1 else
                              "%s, flags %s" % (
                                  ", ".join(sorted({k for k, _ in e["key"]})),
                                  "/".join(map(str, sorted(e["flags"])))) +
                              (" (%s)" % ", ".join(sorted(
                                  {w for _, why in e["key"] for w in why}))
                               if any(why for _, why in e["key"]) else ""),
                              ("; %d derived value(s) inherit it" % e["nd"])
                              if e["nd"] else ""))
    if len(events) > 30:
        print("  ... %d more" % (len(events) - 30))


def print_battery(readings):
    pts = [(parse_time(r["time"]), r["values"]["battery"]) for r in readings
           if r.get("values", {}).get("battery") is not None]
    if len(pts) < 2:
        print("battery: not enough readings")
        return
    (t0, v0), (t1, v1) = pts[0], pts[-1]
    # least-squares slope, robust to the daily wiggle
    mt = sum(p[0] for p in pts) / len(pts)
    mv = sum(p[1] for p in pts) / len(pts)
    sxx = sum((p[0] - mt) ** 2 for p in pts)
    slope = sum((p[0] - mt) * (p[1] - mv) for p in pts) / sxx * 86400
    print("battery: %.3f V at the start, %.3f V at the end, %+.3f V/day "
          "(least squares)" % (v0, v1, slope))
    if slope < 0:
        days = (v1 - 6.0) / -slope
        print("  at this rate it reaches the 6 V cut-off in about %.1f "
              "days" % days)


def print_decoder(log_path, manifest_path):
    if manifest_path:
        with open(manifest_path) as f:
            m = json.load(f)
        print("damage done on purpose: %d of %d frames with a flipped byte "
              "(seq %s), %d with broken stuffing (seq %s)" % (
                  len(m["flipped"]), m["frames"],
                  ", ".join(map(str, m["flipped_seq"])), len(m["broken"]),
                  ", ".join(map(str, m["broken_seq"]))))
        print("  expected from the decoder: %d bad check(s), %d broken "
              "frame(s)" % (len(m["flipped"]), len(m["broken"])))
    if log_path:
        with open(log_path, errors="replace") as f:
            lines = [ln.rstrip() for ln in f if ln.strip()]
        # the decoder's closing line (daemon/cmd_decode.c), e.g.
        # "decode: 474 frames, 1880 readings, 3 bad checks, 0 unknown
        # layouts, 1 broken frame, 0 undecodable"
        pat = re.compile(r"(\d+) frames?, (\d+) readings?, (\d+) bad checks?,"
                         r" (\d+) unknown layouts?, (\d+) broken frames?,"
                         r" (\d+) undecodable")
        found = None
        for ln in lines:
            m = pat.search(ln)
            if m:
                found = [int(x) for x in m.groups()]
        others = [ln for ln in lines if not pat.search(ln)]
        print("decoder said (stderr, %d lines):" % len(lines))
        for ln in others[:8]:
            print("  | " + ln)
        if len(others) > 8:
            print("  | ... %d more" % (len(others) - 8))
        if found:
            print("decoder counted: %d frames, %d readings, %d bad checks, "
                  "%d unknown layouts, %d broken frames, %d undecodable"
                  % tuple(found))
        else:
            for ln in lines[-3:]:
                print("  | " + ln)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--layout", required=True)
    ap.add_argument("--manifest")
    ap.add_argument("--decoder-log")
    ap.add_argument("--gap", type=float, default=None,
                    help="report silences longer than this many s "
                    "(default: two packets' worth of records)")
    args = ap.parse_args()
    layout = load_layout(args.layout)
    rec = layout.get("records", {})
    count = rec.get("count") if isinstance(rec.get("count"), int) else 1
    limit = args.gap or 2 * count * rec.get("every_s", 900)
    print("INVENTED DATA: a made-up demo scenario (station qr-flat on the "
          "invented Quillet Reef); no real station, place or measurement.")
    readings, bad = read_readings(sys.stdin)
    if not readings:
        print("no readings decoded")
        sys.exit(1)
    stations = sorted({str(r.get("station")) for r in readings})
    t0, t1 = parse_time(readings[0]["time"]), parse_time(readings[-1]["time"])
    print("station: %s   layout: %s" % (", ".join(stations),
                                        readings[0].get("layout")))
    print("span: %s .. %s (%.2f days)" % (fmt_time(t0), fmt_time(t1),
                                          (t1 - t0) / 86400))
    big = gaps(readings, limit)
    single, seqs = lost_seqs(readings, big)
    print("readings: %d from %d packets%s" % (
        len(readings), len(seqs),
        ", %d unparsable lines" % bad if bad else ""))
    for ta, tb, sa, sb in big:
        lost = sb - sa - 1 if sa is not None and sb is not None else "?"
        print("gap: no readings from %s to %s (%.1f h); seq %s -> %s, "
              "%s packet(s) lost" % (fmt_time(ta), fmt_time(tb),
                                     (tb - ta) / 3600, sa, sb, lost))
    if not big:
        print("gap: none longer than %d s" % limit)
    if single:
        print("single packets missing by seq (no gap in time beyond one "
              "packet): %s" % ", ".join(map(str, single)))
    print_values(readings, units_of(layout))
    print_events(readings, units_of(layout))
    print_battery(readings)
    print_decoder(args.decoder_log, args.manifest)


if __name__ == "__main__":
    main()
