#!/usr/bin/python3
"""test_encode.py - `tidepost encode`: CSV readings -> framed packets.

Run: TIDEPOST=build/tidepost /usr/bin/python3 tests/integration/test_encode.py

Packets are compared byte for byte with the independent Python encoder of
test_decode.py, and decoded back with the real binary: decode's own CSV
fed to encode must give the very packets it came from.  Bad rows must be
reported with their line and column.  All station data is invented.
"""
import csv
import io
import json
import os
import shutil
import struct
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import test_decode as kit  # noqa: E402
from test_decode import eq, run, cobs  # noqa: E402

TMP = None
CFG = None

# A layout whose record count is given by a field, records with their
# own time offsets (invented).
LOG = {
    "name": "log-v1",
    "match": [{"at": 0, "type": "u8", "is": 7}],
    "check": {"crc": "CRC-16/IBM-3740", "at": -2},
    "fields": [
        {"name": "kind", "type": "u8"},
        {"name": "station", "type": "u16", "role": "station"},
        {"name": "seq", "type": "u32", "role": "seq"},
        {"name": "time", "type": "u32", "role": "time"},
        {"name": "n", "type": "u8"},
    ],
    "records": {"count": "n", "fields": [
        {"name": "offset", "type": "u16", "role": "time_offset"},
        {"name": "level", "type": "u16", "scale": 0.001, "missing": 65535},
    ]},
}

# Count given by a field, record times from every_s (invented).
BURST = {
    "name": "burst-v1",
    "match": [{"at": 0, "type": "u8", "is": 8}],
    "fields": [
        {"name": "kind", "type": "u8"},
        {"name": "station", "type": "u8", "role": "station"},
        {"name": "time", "type": "u32", "role": "time"},
        {"name": "count", "type": "u8"},
    ],
    "records": {"count": "count", "every_s": 60, "fields": [
        {"name": "turbidity", "type": "u16", "scale": 0.1},
    ]},
}


def log_packet(station, seq, t, recs):
    body = struct.pack(">BHIIB", 7, station, seq, t, len(recs))
    for off, level in recs:
        body += struct.pack(">HH", off, level)
    return body + struct.pack(">H", kit.crc16_ibm3740(body))


def burst_packet(station, t, recs):
    return struct.pack(">BBIB", 8, station, t, len(recs)) + \
        b"".join(struct.pack(">H", r) for r in recs)


def write(name, data):
    path = os.path.join(TMP, name)
    with open(path, "wb" if isinstance(data, bytes) else "w") as f:
        f.write(data)
    return path


def encode(args, csv_text):
    return run(["encode", "-c", CFG] + args, stdin=csv_text.encode())


def test_reef_bytes_match_model():
    """Hand-written CSV -> packets equal to the Python encoder's."""
    rows = ["kind,station,seq,time,battery,ph,temperature"]
    want = b""
    for s, q, t, b, recs in kit.REEF_CASES:
        for k, (ph, temp) in enumerate(recs):
            tv = temp - 4096 if temp >= 2048 else temp
            rows.append("2,%d,%d,%d,%.3f,%s,%.2f" % (
                s, q, t + 900 * k, b * 0.001,
                "" if ph == 4095 else "%.3f" % (6.5 + ph * 0.001),
                20 + tv * 0.01))
        want += cobs(kit.reef_packet(s, q, t, b, recs))
    rc, out, err = encode(["--layout", "reef-v2"], "\r\n".join(rows) + "\r\n")
    eq(rc, 0, "exit: " + err)
    eq(out, want, "packets")


def round_trip(layout, packets, extra=()):
    """decode --format csv of packets, fed to encode: the same bytes."""
    cap = write("rt-%s.cobs" % layout, b"".join(cobs(p) for p in packets))
    rc, out, err = run(["decode", "-c", CFG, "--format", "csv", cap])
    eq(rc, 0, "decode: " + err)
    rc, back, err = run(["encode", "-c", CFG, "--layout", layout] +
                        list(extra), stdin=out)
    eq(rc, 0, "encode: " + err)
    eq(back, b"".join(cobs(p) for p in packets), layout + " round trip")
    return out


def test_round_trip_reef():
    out = round_trip("reef-v2", [kit.reef_packet(*c)
                                 for c in kit.REEF_CASES])
    assert b"rf2-1796020500-118-3" in out, "station names used"


def test_round_trip_buoy():
    """f32 via %.9g and f64 via shortest text come back bit for bit;
    time in minutes since 2020; no seq column value."""
    round_trip("buoy-v1", [kit.buoy_packet(*c) for c in kit.BUOY_CASES])


def test_round_trip_time_offsets():
    """Records with their own offsets; count from a field.  decode's CSV
    has record times only, so the packet time is the first row's: the
    first record's offset must be 0 to come back (see the next test)."""
    pk = [log_packet(7, 1, 1796020500, [(0, 100), (30, 65535), (95, 7)]),
          log_packet(7, 2, 1796020600, [(0, 1)]),
          log_packet(12, 2, 1796020600, [(0, 2), (1, 3)])]
    round_trip("log-v1", pk)


def test_offset_column():
    """With an offset column, packet time = row time - offset."""
    rows = ["station,seq,time,offset,level",
            "7,2,1796020605,5,0.001", "7,2,1796020610,10,0.002",
            "7,3,1796020605,5,"]
    rc, out, err = encode(["--layout", "log-v1"], "\n".join(rows))
    eq(rc, 0, err)
    eq(out, cobs(log_packet(7, 2, 1796020600, [(5, 1), (10, 2)])) +
       cobs(log_packet(7, 3, 1796020600, [(5, 65535)])), "offsets")


def test_grouping_by_packet_time():
    """Count field, every_s: consecutive rows of the same station and
    packet time (time - k * every_s) form one packet."""
    rows = ["station,time,turbidity",
            "1,1000,1.5", "1,1060,2.5",              # one packet, 2 records
            "1,1150,3.0",                            # 1150 - 2*60 != 1000
            "2,1120,4.0", "2,1180,5.0", "2,1240,6.0"]
    rc, out, err = encode(["--layout", "burst-v1"], "\n".join(rows))
    eq(rc, 0, err)
    eq(out, cobs(burst_packet(1, 1000, [15, 25])) +
       cobs(burst_packet(1, 1150, [30])) +
       cobs(burst_packet(2, 1120, [40, 50, 60])), "grouped")


def test_station_names_and_times():
    """station by name, time as RFC 3339 with an offset."""
    rows = ["station,time,conductivity,depth,pressure,kind",
            "b3,2026-11-30T08:15:00+02:00,1,2,3,5"]
    rc, out, err = encode(["--layout", "buoy-v1", "--framing", "hex"],
                          "\n".join(rows) + "\n")
    eq(rc, 0, err)
    minutes = (1796019300 - kit.BUOY_EPOCH) // 60
    eq(out.lower(), kit.hexline(kit.buoy_packet(3, minutes, 1.0, 200, 3.0)),
       "hex (either case is hex)")


def err_case(args, rows, rc_want, text):
    rc, out, err = encode(args, rows)
    eq(rc, rc_want, "exit for %r: %s" % (text, err))
    assert text in err, "want %r in:\n%s" % (text, err)


def test_errors_name_line_and_column():
    head = "station,seq,time,battery,ph,temperature\n"
    row = "7,1,1796020500,12.0,8.0,25.00\n"
    R = ["--layout", "reef-v2"]
    err_case(R, "station,seq,salinity\n", 1,
             "encode: stdin:1: column salinity: not a field of layout "
             "reef-v2 (fields: kind, station, seq, time, battery, ph, "
             "temperature)")
    err_case(R, head + row + "7,1,1796020500,12.0,abc,25\n", 1,
             "encode: stdin:3: column ph: 'abc' is not a number")
    err_case(R, head + "zz,1,1796020500,12,8,25\n", 1,
             "encode: stdin:2: column station: 'zz' is not a station")
    err_case(R, head + "7,1,1796020500,,8,25\n", 1,
             "encode: stdin:2: column battery: empty, but field battery "
             "has no missing value")
    err_case(R, head + "7,1,yesterday,12,8,25\n", 1,
             "encode: stdin:2: column time: 'yesterday' is not a time")
    err_case(R, head + row * 6, 1,
             "encode: stdin:6: a packet of layout reef-v2 needs 4 records "
             "(rows), the input ends after 2")
    err_case(R, head + "7,1,2\n", 1,
             "encode: stdin:2: 3 cells, but the header has 6 columns")
    idhead = "id," + head
    multi = '"a\r\nb",' + row   # one row over lines 2 and 3
    err_case(R, idhead + multi + '"x,7,1\n', 1,
             "encode: stdin:4: quoted cell not closed")
    err_case(R, idhead + multi + "x,7,1,1796020500,12,8,-\n", 1,
             "encode: stdin:4: column temperature: '-' is not a number")
    err_case(R, head + 'x,"1"2,1796020500,12,8,25\n', 1,
             "encode: stdin:2: a quote inside a cell")
    err_case(R, head + '7,"1\n2",1796020500,12,8,25\n', 1,
             "encode: stdin:2: column seq: '1\n2' is not a counter")
    err_case(R, "station,seq,time,battery,ph,temperature,depth\n" +
             row.strip() + ",3\n", 1, "encode: stdin:2: column depth: "
             "'3': a field of another layout, not of reef-v2")
    err_case(R, head + "7,1,1796020500,12,10.595,25\n", 1,
             "encode: stdin:2: column ph: 10.595 encodes as the field's "
             "missing value")
    err_case(R, "station,seq,time,ph,temperature\n", 1,
             "no column for the value field 'battery' of layout reef-v2, "
             "and it has no missing value")
    err_case([], head + row, 2,
             "encode: 4 layouts loaded (reef-v2, buoy-v1, log-v1, burst-v1)"
             ": choose one with --layout NAME")
    err_case(["--layout", "nope"], head, 2, "encode: --layout nope: not "
             "loaded")
    err_case(R, "", 1, "no header row")
    err_case(R, head, 1, "no readings")


def test_clamped_values_warn():
    head = "station,seq,time,battery,ph,temperature\n"
    rc, out, err = encode(["--layout", "reef-v2"],
                          head + "7,1,1796020500,70,8,25\n" * 4)
    eq(rc, 0, err)
    assert "encode: stdin:2: column battery: 70 does not fit the field" \
        in err, err
    rc, dec, err = run(["decode", "-c", CFG, "-"], stdin=out)
    eq(json.loads(dec.splitlines()[0])["values"]["battery"], 65.535,
       "clamped to the u16 maximum")


def test_framings_decode_back():
    rows = "station,seq,time,battery,ph,temperature\n" + \
        "".join("7,%d,1796020500,12.5,8.1,25.5\n" % q for q in range(8))
    for fr in ["cobs", "slip", "hex"]:
        rc, out, err = encode(["--layout", "reef-v2", "--framing", fr], rows)
        eq(rc, 0, err)
        rc, dec, err = run(["decode", "-c", CFG, "--framing", fr, "-"],
                           stdin=out)
        lines = [json.loads(l) for l in dec.splitlines()]
        eq([r["seq"] for r in lines], [0] * 4 + [4] * 4, fr)
        eq(lines[0]["values"]["ph"], 8.1, fr)
    rc, out, err = encode(["--layout", "reef-v2", "--framing", "whole"],
                          rows)
    eq(rc, 1, "whole holds one packet")
    assert "framing whole cannot hold this packet" in err, err


def test_station_name_round_trips():
    """A station name (with a dot) survives decode -> CSV -> encode."""
    d = os.path.join(TMP, "q")
    os.mkdir(d)
    cfg = kit.write_setup(d, {"7": {"name": "rf.2"}})
    pk = [kit.reef_packet(*kit.REEF_CASES[0])]
    cap = write("q.cobs", b"".join(cobs(p) for p in pk))
    rc, out, err = run(["decode", "-c", cfg, "--format", "csv", cap])
    eq(rc, 0, err)
    rows = list(csv.reader(io.StringIO(out.decode(), newline="")))
    eq(rows[1][1], "rf.2", "name")
    rc, back, err = run(["encode", "-c", cfg, "--layout", "reef-v2"],
                        stdin=out)
    eq(rc, 0, err)
    eq(back, cobs(pk[0]), "bytes")


def main():
    global TMP, CFG
    TMP = tempfile.mkdtemp(prefix="tp-encode-")
    try:
        CFG = kit.write_setup(TMP)
        with open(CFG) as f:
            cfg = json.load(f)
        for lay in (LOG, BURST):
            write(lay["name"] + ".json", json.dumps(lay))
            cfg["layouts"].append(lay["name"] + ".json")
        write("config.json", json.dumps(cfg))
        kit.Runner().run([test_reef_bytes_match_model, test_round_trip_reef,
                          test_round_trip_buoy, test_round_trip_time_offsets,
                          test_offset_column,
                          test_grouping_by_packet_time,
                          test_station_names_and_times,
                          test_errors_name_line_and_column,
                          test_clamped_values_warn, test_framings_decode_back,
                          test_station_name_round_trips])
    finally:
        shutil.rmtree(TMP, ignore_errors=True)


if __name__ == "__main__":
    main()
