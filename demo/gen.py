#!/usr/bin/python3
"""Generate the demo's readings as CSV for `tidepost encode`.

INVENTED DEMO SCENARIO: station 23 "qr-flat" on the made-up Quillet Reef
flat.  Every number below is invented; the shapes are chosen to look like
a shallow tropical reef flat, not taken from any real record.

What the data contains (fixed seed, so every run gives the same file):
- 21 days from 2031-03-03T00:00:00Z, one record every 15 minutes, one packet
  an hour (four consecutive rows = one packet; header values come from the
  packet's first row).
- pH (total scale) about 7.95..8.15 and oxygen about 150..260 umol/kg on a
  daily cycle in phase with daylight (photosynthesis by day, respiration by
  night), damped a little when the tide floods the flat; cloudier days have
  smaller swings.
- temperature about 26..29 degC: a daily warming plus the semidiurnal tide
  (M2, 12.42 h) bringing cooler water over the flat at high water;
  salinity 34.8..35.5 exchanged with the tide, turned into conductivity
  with PSS-78 (below) so that a decoder deriving salinity gets it back.
- battery: a 12 V pack with no charging, from 12.6 V falling about
  0.2 V/day towards the logger's 6 V cut-off.  12.6 V for a full pack and a
  6 V cut-off are common practice for such loggers, not from a source.
- logger housekeeping: enclosure temperature (degC, i8) and humidity (%).
- a radio outage of 26 h (packets lost; seq keeps counting at the station),
  a handful of missing values (empty cells) and two out-of-range glitches
  (a pH of 9.35 and an oxygen of 405 umol/kg) so QC has something to flag.
- for the QC demo, also invented: one pH spike (+0.25 for a single record
  on day 7) and a temperature sensor stuck for 3 h on day 14 (12 records
  repeating one value: a flat line).

Usage: gen.py [-o FILE]   (CSV to stdout by default)
"""

import argparse
import csv
import math
import random
import sys
from datetime import datetime, timezone

SEED = 20310303
START = datetime(2031, 3, 3, tzinfo=timezone.utc)
DAYS = 21
RECORD_S = 900
PER_PACKET = 4
STATION = 23
KIND = 3
M2_H = 12.4206  # principal lunar semidiurnal period, hours [from memory]
OUTAGE = (11 * 24 + 14, 12 * 24 + 16)  # hours since START, packets lost
MISSING = {  # (record index, field) -> empty cell; invented sensor faults
    (5 * 96 + 40, "ph"), (5 * 96 + 41, "ph"), (5 * 96 + 42, "ph"),
    (9 * 96 + 70, "oxygen"), (9 * 96 + 71, "oxygen"),
    (17 * 96 + 12, "temperature"),
}
GLITCH = {(3 * 96 + 55, "ph"): 9.35, (15 * 96 + 60, "oxygen"): 405.0}
SPIKE = (7 * 96 + 50, "ph", 0.25)  # invented: one record, +0.25 pH
FLAT = (14 * 96 + 20, 12, "temperature")  # invented: stuck for 12 records

COLUMNS = ["kind", "station", "seq", "time", "battery", "logger_temp",
           "logger_rh", "ph", "temperature", "conductivity", "oxygen"]

# PSS-78 (UNESCO 1981, Tech. Pap. Mar. Sci. 36; Lewis & Perkin 1981),
# at zero sea pressure.  Coefficients [from memory]; checked against
# python3-gsw's SP_from_C while writing this script (agreement < 1e-4).
PSS_A = (0.0080, -0.1692, 25.3851, 14.0941, -7.0261, 2.7081)
PSS_B = (0.0005, -0.0056, -0.0066, -0.0375, 0.0636, -0.0144)
PSS_C = (0.6766097, 2.00564e-2, 1.104259e-4, -6.9698e-7, 1.0031e-9)
PSS_K = 0.0162
C35 = 42.914  # mS/cm, conductivity of S=35 at 15 degC (IPTS-68), 0 dbar


def pss78_salinity(c_ms_cm, t90):
    """Practical salinity from conductivity (mS/cm) and ITS-90 temperature
    at zero pressure; valid 2 < S < 42, -2 < t < 35 degC."""
    t = 1.00024 * t90  # ITS-90 -> IPTS-68
    rt = sum(cf * t ** i for i, cf in enumerate(PSS_C))
    big_rt = (c_ms_cm / C35) / rt
    s = sum(a * big_rt ** (i / 2) for i, a in enumerate(PSS_A))
    ds = sum(b * big_rt ** (i / 2) for i, b in enumerate(PSS_B))
    return s + (t - 15) / (1 + PSS_K * (t - 15)) * ds


def conductivity(salinity, t90):
    """Invert pss78_salinity by bisection (salinity rises with C)."""
    lo, hi = 1.0, 90.0
    for _ in range(60):
        mid = (lo + hi) / 2
        if pss78_salinity(mid, t90) < salinity:
            lo = mid
        else:
            hi = mid
    return (lo + hi) / 2


def daylight(hour_of_day):
    """0 at night, up to 1 at noon; sunrise 06:00, sunset 18:00 UTC."""
    return max(0.0, math.sin(math.pi * (hour_of_day - 6) / 12))


def record_values(rng, k, cloud):
    """Invented values of record k (15-min index since START)."""
    hours = k * RECORD_S / 3600
    hod = hours % 24
    tide = math.cos(2 * math.pi * (hours - 3.1) / M2_H)  # +1 high water
    # biology: cumulative photosynthesis peaks late afternoon (~16 h)
    bio = -math.cos(2 * math.pi * (hod - 4) / 24) * cloud
    bio *= 1 - 0.25 * max(tide, 0)  # flushing damps the swing
    ph = 8.05 + 0.095 * bio + rng.gauss(0, 0.004)
    oxy = 205 + 52 * bio + rng.gauss(0, 2.5)
    temp = (27.45 + 0.9 * daylight(hod) * cloud - 0.5 * tide
            - 0.35 * math.cos(2 * math.pi * (hod - 3) / 24)
            + rng.gauss(0, 0.03))
    sal = 35.15 + 0.3 * tide * -1 + 0.05 * math.sin(hours / 40) \
        + rng.gauss(0, 0.01)
    return {
        "ph": round(ph, 3),
        "temperature": round(temp, 2),
        "conductivity": round(conductivity(sal, temp), 3),
        "oxygen": round(oxy, 1),
    }


def housekeeping(rng, k):
    """Battery and logger enclosure values at record k."""
    days = k * RECORD_S / 86400
    hod = (k * RECORD_S / 3600) % 24
    sun = daylight(hod)
    batt = 12.6 - 0.205 * days - 0.0004 * days * days \
        + 0.02 * sun + rng.gauss(0, 0.004)
    return {
        "battery": round(batt, 3),
        "logger_temp": round(29 + 8 * sun + rng.gauss(0, 0.6)),
        "logger_rh": round(62 - 14 * sun + rng.gauss(0, 2)),
    }


def rows(rng):
    """Yield CSV rows (dicts), four per packet, skipping the outage."""
    n_packets = DAYS * 24
    clouds = [rng.uniform(0.6, 1.0) for _ in range(DAYS + 1)]
    stuck = None
    for p in range(n_packets):
        hk = None
        for j in range(PER_PACKET):
            k = p * PER_PACKET + j
            vals = record_values(rng, k, clouds[k // 96])
            if j == 0:
                hk = housekeeping(rng, k)
            if OUTAGE[0] <= p < OUTAGE[1]:
                continue
            for (idx, name), v in GLITCH.items():
                if idx == k:
                    vals[name] = v
            if k == SPIKE[0]:
                vals[SPIKE[1]] = round(vals[SPIKE[1]] + SPIKE[2], 3)
            if k == FLAT[0]:
                stuck = vals[FLAT[2]]
            if FLAT[0] < k < FLAT[0] + FLAT[1]:
                vals[FLAT[2]] = stuck
            for idx, name in MISSING:
                if idx == k:
                    vals[name] = ""
            t = START.timestamp() + k * RECORD_S
            row = {"kind": KIND, "station": STATION, "seq": p % 65536,
                   "time": datetime.fromtimestamp(t, timezone.utc)
                   .strftime("%Y-%m-%dT%H:%M:%SZ")}
            row.update(hk)
            row.update(vals)
            yield row


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("-o", "--output", help="CSV file (default stdout)")
    args = ap.parse_args()
    out = open(args.output, "w", newline="") if args.output else sys.stdout
    w = csv.DictWriter(out, fieldnames=COLUMNS, lineterminator="\n")
    w.writeheader()
    for r in rows(random.Random(SEED)):
        w.writerow(r)
    if out is not sys.stdout:
        out.close()


if __name__ == "__main__":
    main()
