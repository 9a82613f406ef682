#!/usr/bin/python3
"""Damage a COBS archive on purpose, for the demo (INVENTED DEMO SCENARIO).

Real archives from a radio link carry damaged frames; the demo makes a few
so the decoder has something to reject:
- in 3 frames one data byte is XORed with 0x5A (never a COBS code byte and
  never turned into 0x00), so the frame is still well stuffed but its
  CRC no longer matches: the decoder must count 3 bad checks;
- in 1 frame the first COBS code byte is set to 0xFF (a 254-byte block) so
  the block runs past the frame's delimiter: the decoder must count 1
  broken frame and resynchronise at that delimiter.
Frames are picked with a fixed seed.  A JSON manifest records what was
done, for demo/summary.py.

Usage: corrupt.py IN OUT MANIFEST
"""

import json
import random
import sys

SEED = 7


def frames(buf):
    """(start, end) of every frame; end is the index of its 0x00."""
    out, start = [], 0
    for i, b in enumerate(buf):
        if b == 0:
            if i > start:
                out.append((start, i))
            start = i + 1
    return out


def code_positions(buf, start, end):
    """Indices of the COBS code bytes of the frame buf[start:end]."""
    pos, i = set(), start
    while i < end:
        pos.add(i)
        i += buf[i]
    return pos


def packet_seq(buf, start, end):
    """The seq of the frame's packet (quillet-v1: u16 at byte 3), read
    by undoing the COBS stuffing of its first bytes."""
    out, i = bytearray(), start
    while i < end and len(out) < 5:
        code = buf[i]
        out += buf[i + 1:min(i + code, end)]
        i += code
        if code < 0xFF and i < end:
            out.append(0)
    return (out[3] << 8) | out[4]


def main():
    if len(sys.argv) != 4:
        sys.exit("usage: corrupt.py IN OUT MANIFEST")
    buf = bytearray(open(sys.argv[1], "rb").read())
    fr = frames(buf)
    if len(fr) < 8:
        sys.exit("corrupt.py: %s: only %d frames" % (sys.argv[1], len(fr)))
    rng = random.Random(SEED)
    picks = sorted(rng.sample(range(1, len(fr) - 1), 4))
    flipped, broken = picks[:2] + picks[3:], picks[2]
    seqs = {n: packet_seq(buf, *fr[n]) for n in picks}
    for n in flipped:
        s, e = fr[n]
        codes = code_positions(buf, s, e)
        data = [i for i in range(s, e) if i not in codes and
                buf[i] ^ 0x5A != 0]
        i = rng.choice(data)
        buf[i] ^= 0x5A
    buf[fr[broken][0]] = 0xFF
    open(sys.argv[2], "wb").write(buf)
    man = {"frames": len(fr), "flipped": flipped, "broken": [broken],
           "flipped_seq": [seqs[n] for n in flipped],
           "broken_seq": [seqs[broken]],
           "note": "frame numbers count from 0 in the archive"}
    with open(sys.argv[3], "w") as f:
        json.dump(man, f)
        f.write("\n")


if __name__ == "__main__":
    main()
