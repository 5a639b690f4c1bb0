"""Mutated OASIS files for the fuzz suite, seeded and reproducible.

Mutations of the sample cell as gdstk writes it, uncompressed and with
CBLOCKs: byte flips; field mutations between START and END (a byte set to a
record id or an all-ones info byte, a huge or overlong integer inserted,
bytes dropped or repeated); the mutated records wrapped in a CBLOCK whose
sizes may lie; END mutations; and hand-built monsters (repetitions whose
count wraps in 64 bits, label arrays, decompression bombs, modal values and
names that gdstk would copy into every record, huge circles, name numbers,
extension records, deep and cyclic hierarchies, coordinates beyond reach).
Encodings from the OASIS specification (SEMI P39), from memory, through
``tests/helpers/oasis_bytes.py``.
"""

from __future__ import annotations

import os
import struct
import sys
import zlib

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "helpers"))

import oasis_bytes as ob  # noqa: E402

__all__ = ["oasis_mutation"]


def _skip_uint(data: bytes, p: int) -> int:
    while data[p] & 0x80:
        p += 1
    return p + 1


def split(data: bytes) -> tuple[bytes, bytes, bytes]:
    """(magic and START, the records between, END) of a gdstk-written file."""
    p = len(ob.MAGIC) + 1
    p += 1 + data[p]  # version a-string (short)
    form = data[p]
    p += 1
    if form == 7:
        p += 8
    elif form == 6:
        p += 4
    else:
        for _ in range(2 if form in (4, 5) else 1):
            p = _skip_uint(data, p)
    flag = data[p]
    p += 1
    if flag == 0:
        for _ in range(12):
            p = _skip_uint(data, p)
    return data[:p], data[p:-256], data[-256:]


def _field(rng, middle: bytes) -> bytes:
    b = bytearray(middle)
    for _ in range(rng.randint(1, 3)):
        i = rng.randrange(len(b))
        op = rng.randrange(6)
        if op == 0:  # a record id where a field was (or a field where a record id was)
            b[i] = rng.randrange(35) if rng.random() < 0.8 else rng.randrange(35, 256)
        elif op == 1:  # an info byte with every bit set, or none
            b[i] = rng.choice([0xFF, 0x00, 0x7F, 0x80])
        elif op == 2:  # a huge or overlong integer
            b[i:i] = rng.choice([ob.uint(1 << rng.randrange(20, 63)), b"\xff" * rng.randint(8, 12) + b"\x01",
                                 ob.uint((1 << 32) - 2), b"\x80"])
        elif op == 3:
            del b[i : i + rng.randint(1, 8)]
        elif op == 4:  # a slice repeated elsewhere
            j = rng.randrange(len(b))
            b[i:i] = middle[j : j + rng.randint(2, 40)]
        else:
            b[i] = rng.randrange(256)
    return bytes(b)


def _wrap(rng, middle: bytes) -> bytes:
    """The records in one CBLOCK, its sizes true or off by a little or a lot."""
    z = zlib.compressobj(6, zlib.DEFLATED, -15)
    packed = z.compress(middle) + z.flush()
    size, count = len(middle), len(packed)
    lie = rng.randrange(5)
    if lie == 1:
        size += rng.choice([-1, 1, 1 << 20, 1 << 40])
    elif lie == 2:
        count += rng.choice([-1, 1])
    elif lie == 3:
        packed = packed[: rng.randrange(len(packed))]
    return ob.rec(34, ob.uint(0), ob.uint(size), ob.uint(count)) + packed


def _monster(rng) -> tuple[bytes, dict]:
    R = ob.rectangle(layer=99)
    label = ob.rec(19, b"\x5b", ob.string("A"), ob.uint(4), ob.uint(10), ob.sint(0), ob.sint(0))
    place = lambda name, rep=b"": ob.rec(17, b"\xb8" if rep else b"\xb0", ob.string(name), ob.sint(0), ob.sint(0)) + rep
    which = rng.randrange(14)
    env: dict = {}
    if which == 0:  # a grid whose count wraps to 0 in 64 bits
        n = ob.uint((1 << 32) - 2)
        body = ob.cell("L") + R + ob.cell("TOP") + place("L", b"\x01" + n + n + ob.uint(5) + ob.uint(5))
    elif which == 1:  # a label cell in a huge array (3000 or 30000 square)
        n = ob.uint(rng.choice([2998, 29998]))
        body = ob.cell("L") + label + ob.cell("TOP") + place("L", b"\x01" + n + n + ob.uint(5) + ob.uint(5))
    elif which == 2:  # a decompression bomb of all-modal rectangles, refused by the element limit
        env = {"DYNSHARE_MAX_SHAPES": "100000"}
        body = ob.cell() + R + ob.cblock(b"\x14\x00" * 400_000, 9)
    elif which == 3:  # a bomb of PAD records (no elements): inflated, walked, harmless
        body = ob.cblock(bytes(rng.choice([1 << 20, 20 << 20])), 9) + ob.cell() + R
    elif which == 4:  # circles: huge, zero and one grid step radius
        r = rng.choice([1 << 50, 0, 1, 10**11])
        body = ob.cell() + ob.rec(27, b"\x3b", ob.uint(1), ob.uint(0), ob.uint(r), ob.sint(0), ob.sint(0))
    elif which == 5:  # name numbers far beyond the names
        body = ob.rec(4, ob.string("A"), ob.uint(rng.choice([1 << 33, 70000, 3]))) + ob.rec(13, ob.uint(3)) + R
    elif which == 6:  # extension records
        body = ob.cell() + R + rng.choice([ob.rec(32, ob.uint(1), ob.string("x")),
                                           ob.rec(33, b"\x03", ob.uint(1), ob.uint(1), ob.uint(0), ob.string("x"))])
    elif which == 7:  # a reference cycle, or a deep hierarchy
        if rng.random() < 0.3:
            body = ob.cell("A") + place("B") + ob.cell("B") + place("A") + R
        else:
            depth = rng.choice([50, 500, 3000])
            body = ob.cell("D0") + R + b"".join(ob.cell(f"D{k}") + place(f"D{k - 1}") for k in range(1, depth))
    elif which == 8:  # coordinates and sizes at the edge of 63 bits
        big = (1 << 61) * rng.choice([1, -1])
        body = ob.cell() + ob.rectangle(layer=1, x=big, y=big, w=(1 << 62), h=5)
    elif which == 9:  # a magnification or angle that is not a number, or is huge
        value = rng.choice([float("nan"), float("inf"), 1e300, -0.0, 1e-300])
        body = ob.cell("L") + R + ob.cell("TOP") + ob.rec(18, b"\xb6", ob.string("L"), b"\x07" + struct.pack(
            "<d", value), b"\x07" + struct.pack("<d", value), ob.sint(0), ob.sint(0))
    elif which == 10:  # one polygon of many vertices
        n = rng.choice([10_000, 1_000_000])
        deltas = (ob.uint(8 << 2) + ob.uint((8 << 2) | 1)) * (n // 2)
        body = ob.cell() + ob.rec(21, b"\x23", ob.uint(99), ob.uint(0), b"\x02", ob.uint(n), deltas)
    elif which == 12:  # a modal point list of 100,000 points reused by 50,000 two-byte polygons (80 GB in gdstk)
        n = 100_000
        points = b"\x02" + ob.uint(n) + (ob.uint(8 << 2) + ob.uint((8 << 2) | 1)) * (n // 2)
        body = ob.cell() + ob.rec(21, b"\x23", ob.uint(99), ob.uint(0), points) + ob.cblock(b"\x15\x00" * 50_000, 9)
    elif which == 13:  # a 100 kB TEXTSTRING used by 50,000 labels, by number or as the modal text
        body = (ob.rec(5, ob.string(b"A" * 100_000)) + ob.cell() + ob.cblock(ob.rec(
            19, b"\x7b", ob.uint(0), ob.uint(4), ob.uint(10), ob.sint(0), ob.sint(0)) + b"\x13\x00" * 50_000, 9))
    else:  # text labels with odd bytes (a-strings are printable ASCII)
        text = rng.choice([b"VDD\x01", "caf\u00e9".encode(), b"A\nB", b""])
        body = ob.cell() + R + ob.rec(19, b"\x5b", ob.string(text), ob.uint(4), ob.uint(10), ob.sint(0), ob.sint(0))
    return ob.file(body, scheme=rng.choice([0, 0, 1, 2])), env


def oasis_mutation(rng, base: dict) -> tuple[bytes, dict]:
    """A mutated OASIS file and the environment to run it with."""
    r = rng.random()
    if r < 0.15:
        return _flip(rng, base["cell.oas" if rng.random() < 0.3 else "cell0.oas"]), {}
    if r < 0.85:
        head, middle, tail = split(base["cell0.oas"])
        if r < 0.6:
            middle = _field(rng, middle)
        if r >= 0.45:  # the name tables move into the CBLOCK: END without offsets
            middle, tail = _wrap(rng, middle), ob.end_record()
        if rng.random() < 0.1:  # END: its scheme, padding length, or a byte after it
            tail = bytearray(tail)
            tail[rng.randrange(len(tail))] = rng.choice([1, 2, 3, 0x80, 0xFF])
            tail = bytes(tail) + (b"\x00" if rng.random() < 0.3 else b"")
        return head + middle + tail, {}
    return _monster(rng)


def _flip(rng, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 6)):
        i = rng.randrange(len(b))
        b[i] ^= (1 << rng.randrange(8)) if rng.random() < 0.5 else rng.randrange(256)
    return bytes(b)
