"""OASIS data types read from a byte buffer: integers, reals, strings, point
lists, repetitions and property values.

Every OASIS record is built from a few data types (SEMI P39, the OASIS
specification, section 7 "Data types" and the sections on point lists,
repetitions and property values; written here from memory, cross-checked
against the writer and reader of gdstk 1.0)::

    unsigned-integer  7 bits a byte, least significant group first; bit 7
                      set means another byte follows
    signed-integer    the same, with the sign in bit 0 of the value
    real              a type 0-7, then: 0/1 +-whole number, 2/3 +-1/n,
                      4/5 +-n/d (unsigned integers), 6 IEEE single,
                      7 IEEE double (little-endian)
    a-string          a length, then printable ASCII (0x20-0x7E)
    b-string          a length, then any bytes
    n-string          a length (at least 1), then 0x21-0x7E (no space)
    1-/2-/3-delta     one integer; g-delta: one integer whose bit 0 is 0,
                      or two (the first with bit 0 set)
    point-list        a type 0-5 and a vertex count, then that many deltas
                      (types 0-3 one integer each, 4-5 g-deltas)
    repetition        a type 0-11 and its dimensions, spaces or g-deltas
    property-value    a type 0-15: 0-7 a real of that form, 8/9 an integer,
                      10-12 an a-/b-/n-string, 13-15 a PROPSTRING number

Each reader takes the buffer and a position and returns what it read (when
the caller needs it) and the position after it.  A field that runs past
the end of the buffer raises :class:`IndexError` (the caller names the
record); a malformed one raises :class:`FieldError`.  Integers are capped
at :data:`MAX_INT_BYTES` bytes (63 bits): the specification sets no bound,
but no layout needs more and gdstk clips anything longer.  The types a
record reads as enumerations (point-list, repetition, real and property
value types) must be in their one-byte form, as gdstk reads them.
"""

from __future__ import annotations

import math
import re
import struct

__all__ = ["FieldError", "MAX_INT_BYTES", "INT", "INT_RUNS", "read_uint", "read_sint", "skip_ints", "read_real",
           "read_real_body", "read_string", "skip_point_list", "read_repetition", "skip_property_values"]

#: Longest integer accepted, in bytes (9 x 7 = 63 bits).
MAX_INT_BYTES = 9


class FieldError(ValueError):
    """A malformed field; the message says what, the caller says where."""


_INT = re.compile(rb"[\x80-\xff]{0,%d}[\x00-\x7f]" % (MAX_INT_BYTES - 1), re.S)
_V = rb"[\x80-\xff]{0,%d}[\x00-\x7f]" % (MAX_INT_BYTES - 1)
#: A regular expression (bytes) matching one integer.
INT = _V
_EVEN, _ODD = re.escape(bytes(range(0, 256, 2))), re.escape(bytes(range(1, 256, 2)))
#: one g-delta: an integer with bit 0 clear, or two with bit 0 of the first set
_G = rb"(?:(?=[%s])%s|(?=[%s])%s%s)" % (_EVEN, _V, _ODD, _V, _V)
_RUNS: dict[tuple[int, bool], re.Pattern] = {}
_ASTRING = re.compile(rb"[\x20-\x7e]*", re.S)
_NSTRING = re.compile(rb"[\x21-\x7e]+", re.S)
_F32 = struct.Struct("<f")
_F64 = struct.Struct("<d")


def _bad_int(buf, p: int):
    run = p
    while run < len(buf) and buf[run] & 0x80:
        run += 1
    if run >= len(buf):
        raise IndexError(p)
    raise FieldError(f"integer of {run - p + 1} bytes, more than {MAX_INT_BYTES} (63 bits)")


def read_uint(buf, p: int) -> tuple[int, int]:
    """An unsigned-integer at ``p``: ``(value, next position)``.

    >>> read_uint(b"\\x7f", 0), read_uint(b"\\x80\\x01", 0), read_uint(b"\\x00\\x96\\x01", 1)
    ((127, 1), (128, 2), (150, 3))
    >>> read_uint(b"\\xff" * 9 + b"\\x01", 0)
    Traceback (most recent call last):
    ...
    extract.layout.oasis_types.FieldError: integer of 10 bytes, more than 9 (63 bits)
    """
    b = buf[p]
    if b < 0x80:
        return b, p + 1
    m = _INT.match(buf, p)
    if m is None:
        _bad_int(buf, p)
    end = m.end()
    value, shift = 0, 0
    for c in buf[p:end]:
        value |= (c & 0x7F) << shift
        shift += 7
    return value, end


def read_sint(buf, p: int) -> tuple[int, int]:
    """A signed-integer at ``p`` (sign in bit 0): ``(value, next position)``.

    >>> read_sint(b"\\x03", 0), read_sint(b"\\x04", 0)
    ((-1, 1), (2, 1))
    """
    u, p = read_uint(buf, p)
    return (-(u >> 1) if u & 1 else u >> 1), p


def _run(k: int, gdelta: bool) -> re.Pattern:
    pattern = _RUNS.get((k, gdelta))
    if pattern is None:
        pattern = _RUNS[(k, gdelta)] = re.compile(rb"(?:%s){%d}" % (_G if gdelta else _V, 1 << k), re.S)
    return pattern


_EXACT = [[re.compile(rb"(?:%s){%d}" % (unit, n), re.S) for n in range(33)] for unit in (_V, _G)]
#: ``INT_RUNS[n].match(buf, p)`` matches exactly ``n`` integers (n <= 32).
INT_RUNS = _EXACT[0]


def skip_ints(buf, p: int, n: int, gdelta: bool = False) -> int:
    """The position after ``n`` integers (or g-deltas) from ``p``.

    >>> skip_ints(b"\\x01\\x81\\x01\\x02", 0, 3), skip_ints(b"\\x01\\x05\\x00\\x02", 0, 2, gdelta=True)
    (4, 3)

    Notes
    -----
    Up to 32 integers are matched by one compiled regular expression;
    more are split into powers of two, each one expression (compiled once,
    cached), so a long list costs C time, not a Python loop per
    integer.  On a mismatch the run is walked one integer at a time to
    name what is wrong.
    """
    if n < 33:
        m = _EXACT[gdelta][n].match(buf, p)
        if m is not None:
            return m.end()
    else:
        q, k, left = p, 0, n
        while left:
            if left & 1:
                m = _run(k, gdelta).match(buf, q)
                if m is None:
                    break
                q = m.end()
            left >>= 1
            k += 1
        else:
            return q
    for _ in range(n):  # a mismatch: walk one integer at a time to name it
        odd = buf[p] & 1
        _, p = read_uint(buf, p)
        if gdelta and odd:
            _, p = read_uint(buf, p)
    return p  # pragma: no cover - the regular expressions and the walk agree


def read_real_body(buf, p: int, form: int) -> tuple[float, int]:
    """The value of a real of type ``form`` whose body starts at ``p``.

    >>> read_real_body(b"\\x03", 0, 2), read_real_body(b"\\x03\\x02", 0, 5)
    ((0.3333333333333333, 1), (-1.5, 2))
    """
    if form < 2:
        n, p = read_uint(buf, p)
        value = float(-n if form else n)
    elif form < 6:
        n = 1
        if form >= 4:
            n, p = read_uint(buf, p)
        d, p = read_uint(buf, p)
        if d == 0:
            raise FieldError("real with a zero denominator")
        value = (-n if form & 1 else n) / d
    elif form < 8:
        codec = _F32 if form == 6 else _F64
        if p + codec.size > len(buf):
            raise IndexError(p)
        value = codec.unpack_from(buf, p)[0]
        p += codec.size
    else:
        raise FieldError(f"real of unknown type {form} (0-7)")
    if not math.isfinite(value):
        raise FieldError(f"real that is not a finite number ({value})")
    return value, p


def read_real(buf, p: int) -> tuple[float, int]:
    """A real (type byte, then its body): ``(value, next position)``.

    >>> read_real(b"\\x07" + struct.pack("<d", 0.25), 0)
    (0.25, 9)
    """
    return read_real_body(buf, p + 1, buf[p])


def read_string(buf, p: int, kind: str) -> tuple[bytes, int]:
    """A string of ``kind`` ``"a"``, ``"b"`` or ``"n"``: ``(bytes, next position)``.

    >>> read_string(b"\\x03abc", 0, "n")
    (b'abc', 4)
    >>> read_string(b"\\x03a c", 0, "n")
    Traceback (most recent call last):
    ...
    extract.layout.oasis_types.FieldError: n-string 'a c' holds a byte outside 0x21-0x7E
    """
    n, p = read_uint(buf, p)
    end = p + n
    if end > len(buf):
        raise IndexError(p)
    if kind != "b" and (_NSTRING if kind == "n" else _ASTRING).fullmatch(buf, p, end) is None:
        text = bytes(buf[p:end])
        if not text:
            raise FieldError("empty n-string (a name needs at least one character)")
        shown = text[:40].decode("ascii", "backslashreplace")
        span = "0x21-0x7E" if kind == "n" else "0x20-0x7E"
        raise FieldError(f"{kind}-string {shown!r} holds a byte outside {span}")
    return bytes(buf[p:end]), end


def skip_point_list(buf, p: int, fewest: int) -> tuple[int, int]:
    """A point-list with at least ``fewest`` deltas: ``(deltas, next position)``.

    >>> skip_point_list(b"\\x00\\x02\\x0a\\x14", 0, 2)
    (2, 4)
    """
    kind = buf[p]
    if kind > 5:
        raise FieldError(f"point list of unknown type {kind} (0-5)")
    n, p = read_uint(buf, p + 1)
    if n < fewest:
        raise FieldError(f"point list of {n} deltas; the record needs at least {fewest}")
    if n > len(buf) - p:
        raise FieldError(f"point list of {n:,} deltas runs past the end of the data")
    return n, skip_ints(buf, p, n, gdelta=kind >= 4)


def read_repetition(buf, p: int) -> tuple[int | None, int]:
    """A repetition: ``(number of placements, next position)``; the number
    is None for type 0 (reuse the previous repetition).

    Types 1-3 and 8-9 are grids (dimensions stored as count - 2), 4-7 and
    10-11 explicit lists of count - 1 spaces or g-deltas (5, 7 and 11 on a
    grid); the count is what the dimensions say.

    >>> read_repetition(b"\\x01\\x01\\x00\\x0a\\x0a", 0)
    (6, 5)
    >>> read_repetition(b"\\x04\\x01\\x05\\x05", 0)
    (3, 4)
    """
    kind = buf[p]
    p += 1
    if kind == 0:
        return None, p
    if kind in (1, 8):
        nx, p = read_uint(buf, p)
        ny, p = read_uint(buf, p)
        return (nx + 2) * (ny + 2), skip_ints(buf, p, 2, gdelta=kind == 8)
    if kind in (2, 3, 9):
        n, p = read_uint(buf, p)
        return n + 2, skip_ints(buf, p, 1, gdelta=kind == 9)
    if 4 <= kind <= 11:
        n, p = read_uint(buf, p)
        if kind in (5, 7, 11):
            _, p = read_uint(buf, p)  # the grid
        if n + 1 > len(buf) - p:
            raise FieldError(f"repetition of {n + 2:,} explicit positions runs past the end of the data")
        return n + 2, skip_ints(buf, p, n + 1, gdelta=kind >= 10)
    raise FieldError(f"repetition of unknown type {kind} (0-11)")


def skip_property_values(buf, p: int, count: int, refs: list) -> tuple[int, int]:
    """``count`` property values: ``(bytes of their strings, next position)``;
    the PROPSTRING numbers that values of types 13-15 refer to are appended
    to ``refs``.

    >>> refs = []
    >>> skip_property_values(b"\\x08\\x05\\x0a\\x01x\\x0d\\x03", 0, 3, refs), refs
    ((1, 7), [3])
    """
    if count > len(buf) - p:
        raise FieldError(f"{count:,} property values run past the end of the data")
    text = 0
    for _ in range(count):
        kind = buf[p]
        p += 1
        if kind < 8:
            _, p = read_real_body(buf, p, kind)
        elif kind < 10:
            _, p = read_uint(buf, p)
        elif kind < 13:
            value, p = read_string(buf, p, "abn"[kind - 10])
            text += len(value)
        elif kind < 16:
            ref, p = read_uint(buf, p)
            refs.append(ref)
        else:
            raise FieldError(f"property value of unknown type {kind} (0-15)")
    return text, p
