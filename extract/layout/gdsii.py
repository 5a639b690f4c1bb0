"""The GDSII record grammar, checked before the native reader sees a byte.

A GDSII stream is a sequence of records: a 2-byte big-endian length
(header included), a record type and a data type, then the data.  Which
record may follow which is a grammar (GDSII Stream Format manual, Release
6.0, "Stream syntax"; written here from memory)::

    stream    HEADER BGNLIB [LIBDIRSIZE] [SRFNAME] [LIBSECUR] LIBNAME [REFLIBS]
              [FONTS] [ATTRTABLE] [GENERATIONS] [FORMAT {MASK} ENDMASKS] UNITS
              {structure} ENDLIB
    structure BGNSTR STRNAME [STRCLASS] {element} ENDSTR
    element   {BOUNDARY | PATH | SREF | AREF | TEXT | NODE | BOX} {PROPATTR PROPVALUE} ENDEL
    BOUNDARY  BOUNDARY [ELFLAGS] [PLEX] LAYER DATATYPE XY
    PATH      PATH [ELFLAGS] [PLEX] LAYER DATATYPE [PATHTYPE] [WIDTH] [BGNEXTN] [ENDEXTN] XY
    SREF      SREF [ELFLAGS] [PLEX] SNAME [STRANS [MAG] [ANGLE]] XY
    AREF      AREF [ELFLAGS] [PLEX] SNAME [STRANS [MAG] [ANGLE]] COLROW XY
    TEXT      TEXT [ELFLAGS] [PLEX] LAYER TEXTTYPE [PRESENTATION] [PATHTYPE] [WIDTH]
              [STRANS [MAG] [ANGLE]] XY STRING
    NODE      NODE [ELFLAGS] [PLEX] LAYER NODETYPE XY
    BOX       BOX [ELFLAGS] [PLEX] LAYER BOXTYPE XY

:func:`check_gds_grammar` walks the records once and refuses, with the
record number and byte offset, any record out of place, a record whose
data type or length does not fit it (a LAYER is one 2-byte integer, an
SREF's XY one point, an AREF's three, COLROW two counts from 1 to 32767), a
name that is empty or not UTF-8 text, a structure defined twice and a
stream that ends before ENDLIB.  The native reader is then only handed
streams that are well formed, which is what it assumes.
"""

from __future__ import annotations

import math
import struct

from extract.errors import InputError

__all__ = ["RECORD_NAMES", "GdsSummary", "check_gds_grammar", "gds_real"]

#: Record type -> name (GDSII Stream Format manual, "Record descriptions").
RECORD_NAMES = {
    0x00: "HEADER", 0x01: "BGNLIB", 0x02: "LIBNAME", 0x03: "UNITS", 0x04: "ENDLIB", 0x05: "BGNSTR",
    0x06: "STRNAME", 0x07: "ENDSTR", 0x08: "BOUNDARY", 0x09: "PATH", 0x0A: "SREF", 0x0B: "AREF",
    0x0C: "TEXT", 0x0D: "LAYER", 0x0E: "DATATYPE", 0x0F: "WIDTH", 0x10: "XY", 0x11: "ENDEL",
    0x12: "SNAME", 0x13: "COLROW", 0x14: "TEXTNODE", 0x15: "NODE", 0x16: "TEXTTYPE",
    0x17: "PRESENTATION", 0x18: "SPACING", 0x19: "STRING", 0x1A: "STRANS", 0x1B: "MAG",
    0x1C: "ANGLE", 0x1D: "UINTEGER", 0x1E: "USTRING", 0x1F: "REFLIBS", 0x20: "FONTS",
    0x21: "PATHTYPE", 0x22: "GENERATIONS", 0x23: "ATTRTABLE", 0x24: "STYPTABLE", 0x25: "STRTYPE",
    0x26: "ELFLAGS", 0x27: "ELKEY", 0x28: "LINKTYPE", 0x29: "LINKKEYS", 0x2A: "NODETYPE",
    0x2B: "PROPATTR", 0x2C: "PROPVALUE", 0x2D: "BOX", 0x2E: "BOXTYPE", 0x2F: "PLEX",
    0x30: "BGNEXTN", 0x31: "ENDEXTN", 0x32: "TAPENUM", 0x33: "TAPECODE", 0x34: "STRCLASS",
    0x35: "RESERVED", 0x36: "FORMAT", 0x37: "MASK", 0x38: "ENDMASKS", 0x39: "LIBDIRSIZE",
    0x3A: "SRFNAME", 0x3B: "LIBSECUR",
}
_CODE = {name: code for code, name in RECORD_NAMES.items()}

# data types: 0 none, 1 bit array, 2 2-byte integer, 3 4-byte integer, 5 8-byte real, 6 ASCII
#: Record -> (data type, data length rule): an int is the exact data length,
#: ("*", k) any multiple of k (k = 0: any even length).
_DATA = {
    "HEADER": (2, 2), "BGNLIB": (2, 24), "LIBNAME": (6, ("*", 0)), "UNITS": (5, 16), "ENDLIB": (0, 0),
    "BGNSTR": (2, 24), "STRNAME": (6, ("*", 0)), "ENDSTR": (0, 0), "BOUNDARY": (0, 0), "PATH": (0, 0),
    "SREF": (0, 0), "AREF": (0, 0), "TEXT": (0, 0), "LAYER": (2, 2), "DATATYPE": (2, 2), "WIDTH": (3, 4),
    "XY": (3, ("*", 8)), "ENDEL": (0, 0), "SNAME": (6, ("*", 0)), "COLROW": (2, 4), "NODE": (0, 0),
    "TEXTTYPE": (2, 2), "PRESENTATION": (1, 2), "STRING": (6, ("*", 0)), "STRANS": (1, 2),
    "MAG": (5, 8), "ANGLE": (5, 8), "REFLIBS": (6, ("*", 0)), "FONTS": (6, ("*", 0)), "PATHTYPE": (2, 2),
    "GENERATIONS": (2, 2), "ATTRTABLE": (6, ("*", 0)), "ELFLAGS": (1, 2), "NODETYPE": (2, 2),
    "PROPATTR": (2, 2), "PROPVALUE": (6, ("*", 0)), "BOX": (0, 0), "BOXTYPE": (2, 2), "PLEX": (3, 4),
    "BGNEXTN": (3, 4), "ENDEXTN": (3, 4), "STRCLASS": (1, 2), "FORMAT": (2, 2), "MASK": (6, ("*", 0)),
    "ENDMASKS": (0, 0), "LIBDIRSIZE": (2, 2), "SRFNAME": (6, ("*", 0)), "LIBSECUR": (2, ("*", 6)),
}
_HEAD = ("ELFLAGS", "PLEX")
_TRANS = ("STRANS", "MAG", "ANGLE")
#: Element -> its records in grammar order, required ones marked with "!".
_ELEMENTS = {
    "BOUNDARY": _HEAD + ("!LAYER", "!DATATYPE", "!XY"),
    "PATH": _HEAD + ("!LAYER", "!DATATYPE", "PATHTYPE", "WIDTH", "BGNEXTN", "ENDEXTN", "!XY"),
    "SREF": _HEAD + ("!SNAME",) + _TRANS + ("!XY",),
    "AREF": _HEAD + ("!SNAME",) + _TRANS + ("!COLROW", "!XY"),
    "TEXT": _HEAD + ("!LAYER", "!TEXTTYPE", "PRESENTATION", "PATHTYPE", "WIDTH") + _TRANS + ("!XY", "!STRING"),
    "NODE": _HEAD + ("!LAYER", "!NODETYPE", "!XY"),
    "BOX": _HEAD + ("!LAYER", "!BOXTYPE", "!XY"),
}
#: Points an element's XY may hold: (fewest, most or None).
_POINTS = {"BOUNDARY": (3, None), "PATH": (2, None), "SREF": (1, 1), "AREF": (3, 3), "TEXT": (1, 1),
           "NODE": (1, 50), "BOX": (5, 5)}
_LIB_HEAD = ("LIBDIRSIZE", "SRFNAME", "LIBSECUR", "!LIBNAME", "REFLIBS", "FONTS", "ATTRTABLE",
             "GENERATIONS", "FORMAT", "MASK", "ENDMASKS", "!UNITS")
_NAMES = ("LIBNAME", "STRNAME", "SNAME")

# per element: record code -> (position in the element's order, required)
_ORDER = {
    _CODE[kind]: {_CODE[r.lstrip("!")]: (i, r.startswith("!")) for i, r in enumerate(seq)}
    for kind, seq in _ELEMENTS.items()
}
_REQUIRED = {code: [c for c, (_, req) in order.items() if req] for code, order in _ORDER.items()}
_LIB_ORDER = {_CODE[r.lstrip("!")]: i for i, r in enumerate(_LIB_HEAD)}


def gds_real(b: bytes) -> float:
    """Decode an 8-byte GDSII real (sign, excess-64 base-16 exponent,
    56-bit mantissa; GDSII Stream Format manual, "Real numbers").

    >>> gds_real(bytes([0x41, 0x10, 0, 0, 0, 0, 0, 0]))
    1.0
    >>> gds_real(bytes([0x3E, 0x41, 0x89, 0x37, 0x4B, 0xC6, 0xA7, 0xEF]))  # 1e-3
    0.001
    >>> gds_real(bytes(8))
    0.0
    """
    sign = -1.0 if b[0] & 0x80 else 1.0
    exponent = (b[0] & 0x7F) - 64
    mantissa = int.from_bytes(b[1:8], "big") / float(1 << 56)
    return sign * mantissa * 16.0**exponent


class GdsSummary:
    """What the grammar walk learnt on the way.

    Attributes
    ----------
    records : int
        Records up to and including ENDLIB.
    structures : list of str
        Structure names in file order.
    user_unit_m, db_unit_m : float
        The UNITS record: database unit in user units, and in metres.
    """

    def __init__(self):
        self.records = 0
        self.structures: list[str] = []
        self.db_in_user = 0.0
        self.db_unit_m = 0.0


def _name(path, body: bytes, rname: str, where: str) -> str:
    text = body.rstrip(b"\0")
    if not text:
        raise InputError(path, f"{rname} record holds an empty name", where)
    if b"\0" in text:
        raise InputError(path, f"{rname} record holds a NUL byte inside the name", where)
    try:
        return text.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(path, f"{rname} record is not valid text (bytes outside ASCII/UTF-8)", where) from None


def _units(path, body: bytes, where: str, summary: GdsSummary) -> None:
    per_user, metres = gds_real(body[:8]), gds_real(body[8:])
    if not (per_user > 0 and math.isfinite(per_user)):
        raise InputError(path, f"UNITS record: database unit in user units is {per_user:g}", where)
    if not (1e-13 <= metres <= 1e-3):
        raise InputError(path, f"UNITS record: database unit of {metres:g} m is not a usable length "
                               "(1e-13 to 1e-3 m)", where)
    summary.db_in_user, summary.db_unit_m = per_user, metres


_HEADER = struct.Struct(">HBB")
_BOUNDARY_LAYER = bytes.fromhex("00040800" "00060d02")  # BOUNDARY, then LAYER's header
_DATATYPE = bytes.fromhex("00060e02")
_TEXT_LAYER = bytes.fromhex("00040c00" "00060d02")  # TEXT, then LAYER's header
_TEXTTYPE = bytes.fromhex("00061602")
_PRESENTATION = bytes.fromhex("00061701")
_XY_ONE_POINT = bytes.fromhex("000c1003")
_ENDEL = bytes.fromhex("00041100")


def _plain_element(data: bytes, pos: int, n: int) -> tuple[int, int]:
    """``(records, end)`` of the plain element at ``pos``, or ``(0, pos)``.

    Plain elements are ``BOUNDARY LAYER DATATYPE XY ENDEL`` with an XY of
    at least 3 points and ``TEXT LAYER TEXTTYPE [PRESENTATION] XY STRING
    ENDEL`` with an XY of one point: almost every element of a flat
    layout.  Every header is compared as bytes (length, record and data
    type), so a plain element is exactly one the general walk accepts;
    anything else returns ``(0, pos)`` and is walked record by record.
    """
    if data.startswith(_BOUNDARY_LAYER, pos) and data.startswith(_DATATYPE, pos + 10) and pos + 20 <= n:
        length, code, dtype = _HEADER.unpack_from(data, pos + 16)
        end = pos + 16 + length
        if code == 0x10 and dtype == 3 and length >= 28 and length % 8 == 4 and data.startswith(_ENDEL, end):
            return 5, end + 4
    elif data.startswith(_TEXT_LAYER, pos) and data.startswith(_TEXTTYPE, pos + 10):
        q, records = pos + 16, 6
        if data.startswith(_PRESENTATION, q):
            q, records = q + 6, 7
        if data.startswith(_XY_ONE_POINT, q) and q + 16 <= n:
            length, code, dtype = _HEADER.unpack_from(data, q + 12)
            end = q + 12 + length
            if code == 0x19 and dtype == 6 and length >= 4 and length % 2 == 0 and data.startswith(_ENDEL, end):
                return records, end + 4
    return 0, pos


def check_gds_grammar(path: str, data: bytes) -> GdsSummary:
    """Walk the records of a GDSII stream and check them against the grammar.

    Parameters
    ----------
    path : str
        The file's name, for messages.
    data : bytes
        The whole file.

    Returns
    -------
    GdsSummary

    Raises
    ------
    InputError
        The first record that breaks the grammar, placed as
        ``record N (byte B)`` (records counted from 1).

    Notes
    -----
    One pass over the records with a small state machine: library header,
    structure list, structure, element.  Inside an element each record
    has a position in the element's grammar; positions must increase and
    the required ones must all be there at ENDEL.  Plain boundaries and
    texts (fixed headers, see :func:`_plain_element`) are recognised by a
    few byte comparisons and skipped whole.  Cost: O(records), a few
    microseconds per record walked and about one per plain element; no
    record data is copied except names.

    Examples
    --------
    >>> def rec(name, body=b"", dt=None):
    ...     code = _CODE[name]
    ...     return struct.pack(">HBB", 4 + len(body), code, _DATA[name][0] if dt is None else dt) + body
    >>> head = rec("HEADER", b"\\x02\\x58") + rec("BGNLIB", bytes(24)) + rec("LIBNAME", b"LIB\\0")
    >>> units = rec("UNITS", bytes([0x3E, 0x41, 0x89, 0x37, 0x4B, 0xC6, 0xA7, 0xEF,
    ...                             0x39, 0x44, 0xB8, 0x2F, 0xA0, 0x9B, 0x5A, 0x54]))
    >>> box = rec("BOUNDARY") + rec("LAYER", b"\\0\\1") + rec("DATATYPE", b"\\0\\0") + rec(
    ...     "XY", struct.pack(">8i", 0, 0, 1, 0, 1, 1, 0, 0)) + rec("ENDEL")
    >>> cell = rec("BGNSTR", bytes(24)) + rec("STRNAME", b"TOP\\0") + box + rec("ENDSTR")
    >>> check_gds_grammar("ok.gds", head + units + cell + rec("ENDLIB")).structures
    ['TOP']
    >>> bad = cell.replace(rec("ENDEL"), rec("LIBNAME", b"XX"))
    >>> check_gds_grammar("bad.gds", head + units + bad + rec("ENDLIB"))
    Traceback (most recent call last):
    ...
    extract.errors.InputError: bad.gds: record 11 (byte 150): LIBNAME is not allowed inside a BOUNDARY element (begun at record 7)
    """
    n = len(data)
    summary = GdsSummary()
    unpack = _HEADER.unpack_from
    pos = 0
    index = 0
    state = "start"  # start, bgnlib, libhead, lib, strname, str, el, prop
    lib_at = -1  # position reached in the library header
    element = None  # code of the open element
    element_rec = 0
    at = -1  # position reached in the element
    seen_required = 0
    structures: dict[str, int] = {}
    order, seen, strclass_ok = None, set(), False
    while True:
        if state == "str":
            records, end = _plain_element(data, pos, n)
            while records:
                index, pos, strclass_ok = index + records, end, False
                records, end = _plain_element(data, pos, n)
        index += 1
        where = f"record {index} (byte {pos})"
        if pos + 4 > n:
            if pos == 0:
                raise InputError(path, "empty file, not a GDSII stream", "byte 0")
            raise InputError(path, "truncated GDSII file (no ENDLIB record)", where)
        length, code, dtype = unpack(data, pos)
        if length < 4 or length % 2:
            if index == 1:
                raise InputError(path, "not a GDSII stream (no HEADER record)", "byte 0")
            raise InputError(path, f"corrupt GDSII record (length {length})", where)
        if pos + length > n:
            raise InputError(path, "truncated GDSII file (record runs past the end)", where)
        rname = RECORD_NAMES.get(code)
        if index == 1 and code != 0x00:
            raise InputError(path, "not a GDSII stream (no HEADER record)", "byte 0")
        if rname is None or rname not in _DATA:
            raise InputError(path, f"unknown or obsolete GDSII record type 0x{code:02X}", where)
        want_type, rule = _DATA[rname]
        size = length - 4
        if dtype != want_type:
            raise InputError(path, f"{rname} record has data type {dtype}, the grammar says {want_type}", where)
        if (size != rule) if isinstance(rule, int) else (rule[1] and size % rule[1]):
            expect = f"{rule} bytes" if isinstance(rule, int) else f"a multiple of {rule[1]} bytes"
            raise InputError(path, f"{rname} record holds {size} bytes of data, the grammar says {expect}", where)
        # -- grammar ------------------------------------------------------
        if state == "el":
            if code == 0x11:  # ENDEL
                if seen_required != len(_REQUIRED[element]):
                    missing = [RECORD_NAMES[c] for c in _REQUIRED[element] if c not in seen]
                    raise InputError(path, f"{RECORD_NAMES[element]} element (begun at record {element_rec}) "
                                           f"ends without {', '.join(missing)}", where)
                state = "str"
            elif code == 0x2B:  # PROPATTR
                if seen_required != len(_REQUIRED[element]):
                    raise InputError(path, f"PROPATTR before the {RECORD_NAMES[element]} element (begun at record "
                                           f"{element_rec}) is complete", where)
                state = "prop"
            else:
                slot = order.get(code)
                if slot is None:
                    raise InputError(path, f"{rname} is not allowed inside a {RECORD_NAMES[element]} element "
                                           f"(begun at record {element_rec})", where)
                if slot[0] <= at:
                    raise InputError(path, f"{rname} is out of order or repeated in the {RECORD_NAMES[element]} "
                                           f"element begun at record {element_rec}", where)
                at = slot[0]
                seen.add(code)
                if slot[1]:
                    seen_required += 1
                if code == 0x10:  # XY
                    points = size // 8
                    low, high = _POINTS[RECORD_NAMES[element]]
                    if points < low or (high is not None and points > high):
                        span = f"{low}" if low == high else (f"at least {low}" if high is None else f"{low} to {high}")
                        raise InputError(path, f"XY of a {RECORD_NAMES[element]} holds {points} points, the grammar "
                                               f"says {span}", where)
                elif code == 0x13:  # COLROW
                    cols, rows = struct.unpack_from(">hh", data, pos + 4)
                    if not (1 <= cols <= 32767 and 1 <= rows <= 32767):
                        raise InputError(path, f"COLROW of {cols} columns and {rows} rows; each must be 1 to 32767",
                                         where)
                elif code == 0x12:  # SNAME
                    _name(path, data[pos + 4 : pos + length], rname, where)
        elif state == "prop":
            if code == 0x2C:  # PROPVALUE
                state = "propvalue"
            else:
                raise InputError(path, f"{rname} after PROPATTR; the grammar says PROPVALUE", where)
        elif state == "propvalue":
            if code == 0x11:
                state = "str"
            elif code == 0x2B:
                state = "prop"
            else:
                raise InputError(path, f"{rname} after PROPVALUE; the grammar says PROPATTR or ENDEL", where)
        elif state == "str":
            if code in _ORDER:
                state, element, element_rec, at, seen_required = "el", code, index, -1, 0
                order, seen = _ORDER[code], set()
            elif code == 0x07:  # ENDSTR
                state = "lib"
            elif code == 0x34 and strclass_ok:  # STRCLASS right after STRNAME
                pass
            else:
                raise InputError(path, f"{rname} is not allowed here; inside a structure the grammar says an "
                                       "element (BOUNDARY, PATH, SREF, AREF, TEXT, NODE, BOX) or ENDSTR", where)
            strclass_ok = False
        elif state == "lib":
            if code == 0x05:  # BGNSTR
                state = "strname"
            elif code == 0x04:  # ENDLIB
                summary.records = index
                summary.structures = list(structures)
                return summary
            else:
                raise InputError(path, f"{rname} is not allowed here; between structures the grammar says BGNSTR "
                                       "or ENDLIB", where)
        elif state == "strname":
            if code != 0x06:
                raise InputError(path, f"{rname} after BGNSTR; the grammar says STRNAME", where)
            name = _name(path, data[pos + 4 : pos + length], rname, where)
            if name in structures:
                raise InputError(path, f"structure {name!r} is defined twice (records {structures[name]} and "
                                       f"{index})", where)
            structures[name] = index
            state, strclass_ok = "str", True
        elif state == "libhead":
            slot = _LIB_ORDER.get(code)
            if slot is None or slot < lib_at or (slot == lib_at and code != 0x37):  # MASK may repeat
                raise InputError(path, f"{rname} is not allowed here; the library header is BGNLIB ... LIBNAME "
                                       "... UNITS", where)
            if code == 0x03:
                if lib_at < _LIB_ORDER[0x02]:
                    raise InputError(path, "UNITS before LIBNAME; the grammar says LIBNAME first", where)
                _units(path, data[pos + 4 : pos + length], where, summary)
                state = "lib"
            elif code == 0x02:
                _name(path, data[pos + 4 : pos + length], rname, where)
            lib_at = slot
        elif state == "bgnlib":
            if code != 0x01:
                raise InputError(path, f"{rname} after HEADER; the grammar says BGNLIB", where)
            state = "libhead"
        else:  # start: HEADER, checked above
            state = "bgnlib"
        pos += length
