"""The OASIS record grammar, checked before gdstk sees a byte.

An OASIS file (SEMI P39, the OASIS specification; the grammar below is
written from memory, cross-checked against the gdstk 1.0 reader and
writer) is the magic ``%SEMI-OASIS\\r\\n`` and a stream of records, each a
record id (0-34) and fields whose presence an info byte decides::

    file     magic START {CBLOCK | PAD | PROPERTY | cell | name} END
    name     (CELLNAME | TEXTSTRING | PROPNAME | PROPSTRING | LAYERNAME | XNAME) {PROPERTY}
    cell     CELL {CBLOCK | PAD | PROPERTY | XYABSOLUTE | XYRELATIVE | element}
    element  (PLACEMENT | TEXT | XELEMENT | RECTANGLE | POLYGON | PATH | TRAPEZOID
              | CTRAPEZOID | CIRCLE | XGEOMETRY) {PROPERTY}

START holds the version ``"1.0"``, the database unit (grid steps per µm)
and, when its flag is 0, the name-table offsets (else END holds them).
END is the last 256 bytes of the file: offsets, padding, a validation
scheme (0 none, 1 CRC-32, 2 byte sum) and its signature.  A CBLOCK holds
records compressed with raw deflate (RFC 1951); they continue the stream
and must end exactly where its data does.  Names are numbered implicitly
(in order) or explicitly, never both for one kind; a number used must be
defined somewhere in the file.  Fields a record leaves out are taken from
modal variables, which start undefined at every CELL and name record.

:func:`check_oasis_grammar` walks every record once, CBLOCKs inflated, and
refuses the first that breaks a rule with its record number and byte offset
(``record N (byte B)``, records counted from 1 at START; inside a CBLOCK
``(byte B of the CBLOCK at byte C)``, B counted in its inflated data).
Name-table offsets must point before END (where they point is not checked:
gdstk does not use them); a validation signature must match.  Besides the
grammar it enforces what gdstk needs to stay safe (each seen to crash it or
lose data, see the tests): extension records refused (gdstk stops reading
at them), at most the shape limit of elements, properties and names (gdstk
holds each in memory), no repetition of more placements than the shape
limit (gdstk multiplies its dimensions in 64 bits), explicit name numbers
near the count of names (gdstk sizes its tables by the largest), a circle
radius within 100 m (gdstk draws it), and CBLOCKs inflating to at most
:data:`MAX_INFLATION` times the file plus 1 MiB (a decompression bomb).
"""

from __future__ import annotations

import zlib

from extract.errors import InputError
from extract.layout.oasis_memory import size
from extract.layout.oasis_records import RECORD_NAMES, RecordWalk
from extract.layout.oasis_types import FieldError, read_real, read_string, read_uint
from extract.limits import MAX_LAYOUT_BYTES, MAX_SHAPES, env_limit

__all__ = ["MAGIC", "RECORD_NAMES", "OasisSummary", "check_oasis_grammar"]

MAGIC = b"%SEMI-OASIS\r\n"
#: All CBLOCKs together inflate to at most this many times the file's size (plus 1 MiB): OASIS
#: records are dense already (gdstk's CBLOCKs inflate 1.3-1.4 times), a decompression bomb is
#: hundreds of times (common practice for archive readers; the number is ours).
MAX_INFLATION = 64


class OasisSummary:
    """What the walk learnt: ``records`` (START to END, CBLOCK contents
    included), ``cells`` (names in file order), ``grid_um`` (the database
    unit in µm), ``objects`` (records gdstk keeps: names, cells, elements,
    properties), ``cblocks``, ``inflated`` (bytes the CBLOCKs held),
    ``memory`` (bytes gdstk will take to read it, roughly: 200 an object
    and what :mod:`extract.layout.oasis_memory` counts), ``validation``
    (``"none"``, ``"crc32"`` or ``"checksum32"``)."""

    def __init__(self):
        self.records = self.objects = self.cblocks = self.inflated = self.memory = 0
        self.cells: list[str] = []
        self.grid_um = 0.0
        self.validation = "none"


def _place(at: tuple) -> str:
    index, start, cblock = at
    inner = f" of the CBLOCK at byte {cblock}" if cblock is not None else ""
    return f"record {index} (byte {start}{inner})"


def _start(data: bytes) -> tuple[int, list, float]:
    """START: version, unit, table-offsets flag (and the offsets); returns
    the position after it, the offsets (empty: they are in END) and the
    database unit in µm."""
    if data[13] != 1:
        raise FieldError(f"record id {data[13]} after the magic bytes; the file starts with START (1)")
    version, p = read_string(data, 14, "a")
    if version != b"1.0":
        raise FieldError(f"OASIS version {version.decode()!r}; only '1.0' is defined")
    unit, p = read_real(data, p)
    if not unit > 0:
        raise FieldError(f"database unit of {unit:g} grid steps per micron; it must be positive")
    grid_m = 1e-6 / unit
    if not 1e-13 <= grid_m <= 1e-3:
        raise FieldError(f"database unit of {grid_m:g} m is not a usable length (1e-13 to 1e-3 m)")
    flag, p = read_uint(data, p)
    if flag > 1:
        raise FieldError(f"table-offsets flag {flag}; 0 (offsets here) or 1 (offsets in END)")
    offsets: list[int] = []
    if flag == 0:
        offsets, p = _offsets(data, p)
    return p, offsets, grid_m * 1e6


def _offsets(data: bytes, p: int) -> tuple[list, int]:
    """Six (strict flag, byte offset) pairs: the CELLNAME, TEXTSTRING,
    PROPNAME, PROPSTRING, LAYERNAME and XNAME tables."""
    out = []
    for _ in range(6):
        strict, p = read_uint(data, p)
        offset, p = read_uint(data, p)
        if strict > 1:
            raise FieldError(f"table-offsets strict flag {strict}; 0 or 1")
        out.append(offset)
    return out, p


def _end(data: bytes, at: int, offsets: list) -> str:
    """END at ``at``: [offsets] padding validation-scheme [signature], the
    file's last 256 bytes.  Returns the validation scheme's name."""
    p = at + 1
    if not offsets:
        offsets, p = _offsets(data, p)
    for offset in offsets:
        if offset >= at:
            raise FieldError(f"a name-table offset ({offset:,}) points at or past the END record")
    _, p = read_string(data, p, "b")
    scheme, p = read_uint(data, p)
    if scheme > 2:
        raise FieldError(f"validation scheme {scheme}; 0 (none), 1 (CRC-32) or 2 (checksum)")
    if len(data) - at != 256:
        raise FieldError(f"the END record (to the end of the file) is {len(data) - at} bytes; the specification "
                         "makes it 256")
    size = p + (4 if scheme else 0) - at
    if size != 256:
        raise FieldError(f"the END record's fields take {size} of its 256 bytes; its padding must fill it")
    if not scheme:
        return "none"
    # the signature covers every byte before it (checked against gdstk's writer)
    signature = int.from_bytes(data[p : p + 4], "little")
    value = zlib.crc32(data[:p]) if scheme == 1 else sum(data[:p]) & 0xFFFFFFFF
    if signature != value:
        kind = "CRC-32" if scheme == 1 else "checksum"
        raise FieldError(f"{kind} of the file is {value:08x}, the END record says {signature:08x} (the file was "
                         "changed or cut)")
    return "crc32" if scheme == 1 else "checksum32"


def _resolve(path: str, walk: RecordWalk) -> list[str]:
    """Numbers used must be defined and close to the count of names; a
    cell is defined once.  Returns the cell names in file order."""
    for table in walk.tables.values():
        for number, at in table.used.items():
            if number not in table.defined:
                raise InputError(path, f"{table.kind} number {number} is used but no {table.kind} record defines "
                                       "it", _place(at))
        if table.mode == "explicit":
            top = max(table.defined)
            if top >= 4 * len(table.defined) + 65536:
                raise InputError(path, f"{table.kind} number {top:,} for {len(table.defined):,} names (gdstk sizes "
                                       "its table by the largest number)", _place(table.defined[top][1]))
    names = walk.tables["CELLNAME"].defined
    seen: dict[str, tuple] = {}
    for by_number, key, at in walk.cells:
        name = names[key][0].decode("ascii") if by_number else key
        if name in seen:
            raise InputError(path, f"cell {name!r} is defined twice (first by record {seen[name][0]})", _place(at))
        seen[name] = at
    return list(seen)


def check_oasis_grammar(path: str, data: bytes) -> OasisSummary:
    """Walk the records of an OASIS file and check them against the grammar.

    Parameters
    ----------
    path : str
        The file's name, for messages.
    data : bytes
        The whole file.

    Returns
    -------
    OasisSummary

    Raises
    ------
    InputError
        The first record that breaks a rule, placed as ``record N (byte B)``
        (``... (byte B of the CBLOCK at byte C)`` inside a CBLOCK).

    Notes
    -----
    One pass over the records, each CBLOCK inflated once.  Per record a
    handler reads the info byte and skips the fields it announces; runs of
    integers (point lists, explicit repetitions) are matched by compiled
    regular expressions in C, so the cost is O(bytes) plus a Python step
    per record (about a microsecond).  Deferred checks (numbers used but
    never defined, cells defined twice) run once at the end.

    Examples
    --------
    >>> end = lambda body: body + b"\\x02" + bytes(12) + b"\\xf0\\x01" + bytes(240) + b"\\x00"
    >>> start = MAGIC + b"\\x01\\x031.0\\x00\\xe8\\x07\\x01"
    >>> cell = b"\\x0e\\x03TOP" + b"\\x14\\x7b\\x01\\x00\\x0a\\x14\\x00\\x00"
    >>> check_oasis_grammar("ok.oas", end(start + cell)).cells
    ['TOP']
    >>> check_oasis_grammar("bad.oas", end(start + cell[5:]))
    Traceback (most recent call last):
    ...
    extract.errors.InputError: bad.oas: record 2 (byte 22): RECTANGLE before the first CELL record; elements belong inside a cell
    """
    if not data.startswith(MAGIC):
        raise InputError(path, "not an OASIS file (no %SEMI-OASIS magic bytes)", "byte 0")
    summary = OasisSummary()
    walk = None
    try:
        p, offsets, summary.grid_um = _start(data)
        budget = min(MAX_LAYOUT_BYTES, MAX_INFLATION * len(data) + (1 << 20))
        walk = RecordWalk(env_limit("DYNSHARE_MAX_SHAPES", MAX_SHAPES), summary.grid_um, budget)
        at = walk.walk(data, p)
        if at >= len(data):
            walk.index, walk.start = walk.index + 1, len(data)
            raise FieldError("the file ends without an END record")
        summary.validation = _end(data, at, offsets)
    except (FieldError, IndexError) as exc:
        place = walk.here() if walk else (1, len(MAGIC), None)
        if isinstance(exc, IndexError):
            name = RECORD_NAMES.get(data[place[1]], "record") if place[1] < len(data) else "record"
            exc = f"{name} runs past the end of the file"
        raise InputError(path, str(exc), _place(place)) from None
    summary.cells = _resolve(path, walk)
    over = walk.copies.finish(walk.tables)
    if over is not None:
        raise InputError(path, f"gdstk would copy {size(walk.copies.total)} reading this file (a name used by "
                               "many records; the limit is 100 bytes per allowed shape, set DYNSHARE_MAX_SHAPES)",
                         _place(over))
    summary.records, summary.objects, summary.cblocks = walk.index, walk.index - walk.free, walk.cblocks
    summary.inflated = walk.inflated
    summary.memory = 200 * summary.objects + walk.copies.total
    return summary
