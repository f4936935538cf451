#!/usr/bin/env python3
"""Independent check of the protocol vectors: COBS decoded with a decoder written from the
rules of Cheshire & Baker (IEEE/ACM Trans. Networking, 1999) and CRC-32 from zlib."""
import sys, zlib

def cobs_decode(data):
    out, i = bytearray(), 0
    while i < len(data):
        code = data[i]
        if code == 0:
            raise ValueError("zero inside COBS data")
        block = data[i + 1:i + code]
        if len(block) != code - 1:
            raise ValueError("short block")
        out += block
        i += code
        if code != 0xFF and i < len(data):
            out.append(0)
    return bytes(out)

def main(path):
    n = 0
    for block in open(path).read().split("\n\n"):
        kv = dict(l.split(" ", 1) for l in block.splitlines() if l and not l.startswith("#"))
        if "name" not in kv:
            continue
        wire = bytes.fromhex(kv["wire"])
        assert wire[-1] == 0 and 0 not in wire[:-1], kv["name"]
        frame = cobs_decode(wire[:-1])
        assert frame.hex() == kv["frame"], (kv["name"], frame.hex())
        crc = int.from_bytes(frame[-4:], "little")
        assert zlib.crc32(frame[:-4]) == crc, kv["name"]
        assert frame[0] == 1 and frame[1] == int(kv["type"], 16), kv["name"]
        assert int.from_bytes(frame[2:4], "little") == int(kv["seq"], 16), kv["name"]
        assert frame[4:-4].hex() == kv.get("body", ""), kv["name"]
        body = frame[4:-4]
        last_tick = None  # the batch's or window's last tick, which must stay below 2^64
        if frame[1] in (0x02, 0x05):  # EDGES / LINES: count, then count-1 minimal LEB128 deltas
            count = int.from_bytes(body[3:5], "little")
            rest, deltas = body[13:], []
            while rest:
                value, shift, i = 0, 0, 0
                while True:
                    b = rest[i]
                    value |= (b & 0x7F) << shift
                    shift += 7
                    i += 1
                    if not b & 0x80:
                        break
                assert i == 1 or rest[i - 1] != 0, "non-minimal LEB128"
                assert value > 0
                deltas.append(value)
                rest = rest[i:]
            assert len(deltas) == count - 1, kv["name"]
            last_tick = int.from_bytes(body[5:13], "little") + sum(deltas)
        elif frame[1] == 0x04:  # ANALOG: count samples every interval_ticks from first_tick
            count = int.from_bytes(body[2:4], "little")
            first, step = int.from_bytes(body[4:12], "little"), int.from_bytes(body[12:16], "little")
            last_tick = first + max(count - 1, 0) * step
        elif frame[1] in (0x03, 0x09, 0x0A):  # COUNT, EXTREMES, VIOLATIONS: start + length
            last_tick = int.from_bytes(body[2:10], "little") + int.from_bytes(body[10:14], "little")
        if frame[1] == 0x09 and kv.get("reject") != "tick-overflow":  # EXTREMES: bins add up
            cycles, nbins = int.from_bytes(body[14:18], "little"), body[66]
            bins = [int.from_bytes(body[67 + 4 * i:71 + 4 * i], "little") for i in range(nbins)]
            assert len(body) == 67 + 4 * nbins, kv["name"]
            assert (sum(bins) == cycles or nbins == 0) == (kv.get("reject") != "bad-field"), kv["name"]
        wraps = last_tick is not None and last_tick >= 1 << 64
        # a vector marked "reject tick-overflow" must wrap, and no other may
        assert wraps == (kv.get("reject") == "tick-overflow"), (kv["name"], last_tick)
        n += 1
    # the paper's encoding examples, as reproduced in the project's reference table
    for enc, dec in [("010100", "00"), ("01010100", "0000"), ("0102110100", "001100"),
                     ("031122023300", "11220033"), ("051122334400", "11223344"),
                     ("021101010100", "11000000")]:
        e = bytes.fromhex(enc)
        assert cobs_decode(e.rstrip(b"\0") if e.endswith(b"\0") else e) == bytes.fromhex(dec), enc
    print(f"{n} vectors ok")

if __name__ == "__main__":
    for path in sys.argv[1:]:
        main(path)
