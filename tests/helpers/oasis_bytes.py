"""Hand-built OASIS byte streams for tests and fuzzing.

Encodings from the OASIS specification (SEMI P39), from memory: unsigned
integers 7 bits a byte, low group first, bit 7 = more; signed integers with
the sign in bit 0; strings as a length and the bytes; reals as a type and a
body; the END record is the file's last 256 bytes; a CBLOCK holds raw
deflate (RFC 1951) data.  ``file(body)`` wraps records in the magic bytes,
START (unit 1000 per micron, offsets in END) and END.
"""

from __future__ import annotations

import struct
import zlib

MAGIC = b"%SEMI-OASIS\r\n"


def uint(v: int) -> bytes:
    """An unsigned integer, 7 bits a byte, low group first.

    >>> uint(150).hex()
    '9601'
    """
    out = bytearray()
    while True:
        b = v & 0x7F
        v >>= 7
        out.append(b | (0x80 if v else 0))
        if not v:
            return bytes(out)


def sint(v: int) -> bytes:
    return uint((-v << 1) | 1 if v < 0 else v << 1)


def string(s: bytes | str) -> bytes:
    s = s.encode() if isinstance(s, str) else s
    return uint(len(s)) + s


def real(v: float) -> bytes:
    """A real as an IEEE double (type 7), or a whole number (type 0/1)."""
    if float(v).is_integer():
        return (b"\x00" if v >= 0 else b"\x01") + uint(int(abs(v)))
    return b"\x07" + struct.pack("<d", v)


def rec(rid: int, *fields: bytes) -> bytes:
    return uint(rid) + b"".join(fields)


def start(unit: float = 1000, flag: int = 1) -> bytes:
    return rec(1, string("1.0"), real(unit), uint(flag)) + (bytes(12) if flag == 0 else b"")


def end_record(prefix_len: int = 0, scheme: int = 0, signature: bytes = b"", offsets: bool = True) -> bytes:
    """END padded to 256 bytes (the table offsets all 0 when ``offsets``)."""
    head = rec(2) + (bytes(12) if offsets else b"")
    tail = uint(scheme) + signature
    pad = 256 - len(head) - len(tail)
    for n in range(pad, -1, -1):  # the padding string's length field takes 1 or 2 bytes
        if len(uint(n)) + n == pad:
            return head + uint(n) + bytes(n) + tail
    raise ValueError("cannot pad")


def file(body: bytes, scheme: int = 0, unit: float = 1000, flag: int = 1) -> bytes:
    """magic, START, ``body``, END (validation scheme 0, 1 CRC-32 or 2 checksum)."""
    head = MAGIC + start(unit, flag) + body
    end = end_record(scheme=scheme, signature=bytes(4) if scheme else b"", offsets=flag == 1)
    data = head + end
    if scheme:
        covered = data[:-4]
        value = zlib.crc32(covered) if scheme == 1 else sum(covered) & 0xFFFFFFFF
        data = covered + value.to_bytes(4, "little")
    return data


def cblock(records: bytes, level: int = 6) -> bytes:
    z = zlib.compressobj(level, zlib.DEFLATED, -15)
    packed = z.compress(records) + z.flush()
    return rec(34, uint(0), uint(len(records)), uint(len(packed))) + packed


def cell(name: str = "TOP") -> bytes:
    return rec(14, string(name))


def rectangle(layer=1, datatype=0, w=10, h=20, x=0, y=0, repetition: bytes = b"") -> bytes:
    """A RECTANGLE with every field given (info SWHXYRDL = 0x7B, R when a repetition follows)."""
    info = 0x7B | (0x04 if repetition else 0)
    return rec(20, bytes([info]), uint(layer), uint(datatype), uint(w), uint(h), sint(x), sint(y)) + repetition


#: Where ``file(body)`` puts the body (magic and START before it).
BODY = len(MAGIC) + len(start())
