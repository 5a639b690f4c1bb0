"""The OASIS records between START and END: which may come where, and the
fields each one's info byte announces.

Record ids, fields and info bytes (SEMI P39, the OASIS specification,
sections on each record; from memory, cross-checked against the gdstk 1.0
reader and writer).  ``[x]`` is present when its info bit is set; a field
left out is taken from the modal variable of that name::

    0 PAD                   15 XYABSOLUTE, 16 XYRELATIVE
    3/4 CELLNAME  n-string [number]     5/6 TEXTSTRING a-string [number]
    7/8 PROPNAME  n-string [number]     9/10 PROPSTRING b-string [number]
    11/12 LAYERNAME n-string interval interval (types 0-4: 0, 1, 1, 1, 2 numbers)
    13 CELL number          14 CELL n-string
    17 PLACEMENT  CNXYRAAF [number|n-string] [x] [y] [repetition]
    18 PLACEMENT  CNXYRMAF [number|n-string] [magnification] [angle] [x] [y] [repetition]
    19 TEXT       0CNXYRTL [number|a-string] [textlayer] [texttype] [x] [y] [repetition]
    20 RECTANGLE  SWHXYRDL [layer] [datatype] [width] [height] [x] [y] [repetition]
    21 POLYGON    00PXYRDL [layer] [datatype] [point-list] [x] [y] [repetition]
    22 PATH       EWPXYRDL [layer] [datatype] [half-width] [scheme [start] [end]]
                           [point-list] [x] [y] [repetition]
    23/24/25 TRAPEZOID OWHXYRDL [layer] [datatype] [width] [height] delta-a/-b [x] [y] [repetition]
    26 CTRAPEZOID TWHXYRDL [layer] [datatype] [type 0-25] [width] [height] [x] [y] [repetition]
    27 CIRCLE     00rXYRDL [layer] [datatype] [radius] [x] [y] [repetition]
    28 PROPERTY   UUUUVCNS [number|n-string] [count] values    29 PROPERTY (the last again)
    30/31 XNAME attribute b-string [number]   32 XELEMENT attribute b-string
    33 XGEOMETRY  000XYRDL attribute [layer] [datatype] b-string [x] [y] [repetition]
    34 CBLOCK     comp-type (0) uncompressed-size compressed-size bytes

C says the cell/text/name is given, N that it is given by number; S marks a
square (no height), V a reuse of the last value list (then UUUU is 0), and
UUUU = 15 means a count follows.  Reserved bits (0) must be clear.  Modal
variables start undefined at every CELL and name record; one a record needs
but leaves out must have been set since.  Elements and XY records belong to
a cell: after a CELL record and before the next name record.

The extension records (XNAME, XELEMENT, XGEOMETRY) are checked and then
refused: gdstk 1.0 stops reading at the first one, with only a warning,
and returns what it has so far (the rest of the file silently lost).
"""

from __future__ import annotations

import re
import sys
import zlib

from extract.layout.oasis_memory import COPY_TABLES, Copies, circle_vertices
from extract.layout.oasis_types import (INT, INT_RUNS, FieldError, read_real, read_repetition, read_string, read_uint,
                                        skip_ints, skip_point_list, skip_property_values)

__all__ = ["RECORD_NAMES", "MAX_CBLOCK_BYTES", "RecordWalk"]

#: Record id -> name (OASIS specification, "Record types").
RECORD_NAMES = dict(enumerate(
    "PAD START END CELLNAME CELLNAME TEXTSTRING TEXTSTRING PROPNAME PROPNAME PROPSTRING PROPSTRING LAYERNAME "
    "LAYERNAME CELL CELL XYABSOLUTE XYRELATIVE PLACEMENT PLACEMENT TEXT RECTANGLE POLYGON PATH TRAPEZOID "
    "TRAPEZOID TRAPEZOID CTRAPEZOID CIRCLE PROPERTY PROPERTY XNAME XNAME XELEMENT XGEOMETRY CBLOCK".split()))
#: Most bytes one CBLOCK may inflate to.
MAX_CBLOCK_BYTES = 1 << 30
#: Deflate never compresses more than 1032:1 (zlib's technical notes, from memory).
DEFLATE_RATIO = 1032

# Modal variables, one bit each; layer and datatype match their info bits (L = 1, D = 2).
_MODAL = ("layer", "datatype", "repetition", "placement-cell", "textlayer", "texttype", "text-string",
          "geometry-w", "geometry-h", "polygon-point-list", "path-point-list", "path-halfwidth",
          "path-start-extension", "path-end-extension", "ctrapezoid-type", "circle-radius", "last-property-name",
          "last-value-list")
(LAYER, DTYPE, REP, PCELL, TLAYER, TTYPE, TSTR, GW, GH, PPTS, HPTS, HALFW, SEXT, EEXT, CTYPE, RADIUS, PNAME,
 PVALS) = (1 << i for i in range(len(_MODAL)))
_BITS = [bin(i).count("1") for i in range(256)]
_TABLES = ("CELLNAME", "TEXTSTRING", "PROPNAME", "PROPSTRING", "XNAME")
_PADS = re.compile(rb"\x00+")
_TRIVIAL = re.compile(rb"[\x00\x0f\x10]+")  # PAD, XYABSOLUTE, XYRELATIVE: records without fields


def _rectangles() -> tuple[re.Pattern, re.Pattern]:
    """One RECTANGLE without repetition, and a run of them: an info byte
    with R clear and not both S and H, then as many integers as it has
    bits among W H X Y D L (the most common count first)."""
    by_count: dict[int, list[int]] = {}
    for info in range(256):
        if not info & 0x04 and info & 0xA0 != 0xA0:
            by_count.setdefault(_BITS[info & 0x7B], []).append(info)
    one = rb"\x14(?:" + rb"|".join(rb"[%s](?:%s){%d}" % (re.escape(bytes(by_count[k])), INT, k)
                                  for k in sorted(by_count, reverse=True)) + rb")"
    possessive = b"+" if sys.version_info >= (3, 11) else b""  # no backtracking state: four times faster
    return re.compile(one, re.S), re.compile(rb"(?:%s)+%s" % (one, possessive), re.S)


_RECTANGLE, _RECTANGLES = _rectangles()
_RECTANGLE_MODAL = LAYER | DTYPE | GW | GH


def _unsupported(rid):
    raise FieldError(f"{RECORD_NAMES[rid]} is valid OASIS, but gdstk stops reading at extension records (XNAME, "
                     "XELEMENT, XGEOMETRY) and would lose the rest of the file")


class NameTable:
    """One kind of name: numbering mode, numbers defined (name, place) and
    the first use of each number."""

    def __init__(self, kind):
        self.kind, self.mode, self.next = kind, None, 0
        self.defined: dict[int, tuple] = {}
        self.used: dict[int, tuple] = {}


class RecordWalk:
    """The state of a walk over the records: place, cell context, modal
    variables, name tables, counts.

    Parameters
    ----------
    limit : int
        Most records that become objects in gdstk (everything but PAD,
        XYABSOLUTE, XYRELATIVE), and most placements one repetition may
        make; 100 bytes per unit of it is the most gdstk may copy
        (:mod:`extract.layout.oasis_memory`).
    grid_um : float
        The database unit in µm (bounds a circle's radius).
    inflate_budget : int
        Bytes all CBLOCKs together may inflate to.
    """

    def __init__(self, limit: int, grid_um: float, inflate_budget: int):
        self.limit, self.grid_um, self.budget, self.inflated = limit, grid_um, inflate_budget, 0
        self.index, self.start, self.cblock, self.free, self.cblocks = 1, 13, None, 1, 0
        self.in_cell, self.seen_cell, self.defined = False, False, 0
        self.copies, self.rep_weight, self.attach = Copies(100 * limit), 0, None
        self.tables = {k: NameTable(k) for k in _TABLES}
        self.cells: list[tuple] = []  # (by number, number or name, place)
        h = [self._unknown] * 256
        h[3:11] = [self._name] * 8
        h[11] = h[12] = self._layername
        h[13] = h[14] = self._cell
        h[17] = h[18] = self._placement
        h[19], h[20], h[21], h[22] = self._text, self._rectangle, self._polygon, self._path
        h[23] = h[24] = h[25] = self._trapezoid
        h[26], h[27], h[28], h[29] = self._ctrapezoid, self._circle, self._property, self._property
        h[30] = h[31] = self._name
        h[32], h[33] = self._xelement, self._xgeometry
        self.handlers = h

    def here(self) -> tuple:
        """The current record's place: (number, byte, CBLOCK byte or None)."""
        return self.index, self.start, self.cblock

    def walk(self, buf, p: int, cblock: int | None = None) -> int:
        """Walk the records of ``buf`` from ``p``; return the position of
        END in the file, or ``len(buf)`` at the end of a CBLOCK's data.

        Raises FieldError or IndexError with :meth:`here` on the culprit.
        """
        saved, self.cblock = self.cblock, cblock
        handlers, n, limit = self.handlers, len(buf), self.limit
        index, free = self.index, self.free
        while p < n:
            rid = buf[p]
            index += 1
            self.index, self.start = index, p
            if rid == 0 or rid == 15 or rid == 16:
                if rid and not self.in_cell:
                    raise FieldError(f"{RECORD_NAMES[rid]} outside a cell")
                end = (_TRIVIAL if self.in_cell else _PADS).match(buf, p).end()
                index += end - p - 1
                free += end - p
                p = end
                continue
            if rid == 2:
                if cblock is not None:
                    raise FieldError("END inside a CBLOCK; END comes last, outside any CBLOCK")
                self.free = free + 1
                return p
            if rid == 34:  # the records inside continue the count
                self.free = free + 1
                p = self._cblock(buf, p + 1, rid)
                index, free = self.index, self.free
                continue
            if rid == 20 and self.defined & _RECTANGLE_MODAL == _RECTANGLE_MODAL and self.in_cell:
                # a run of rectangles needing nothing new: matched in C, counted by subn
                end = _RECTANGLES.match(buf, p)
                if end is not None:
                    end = end.end()
                    run = _RECTANGLE.subn(b"", buf[p:end])[1]
                    if index - free + run - 1 > limit:
                        self._too_many(buf, p, index, free)
                    index += run - 1
                    self.attach, p = None, end
                    continue
            if index - free > limit:
                self._too_many(buf, p, index, free)
            p = handlers[rid](buf, p + 1, rid)
        self.index, self.free, self.cblock = index, free, saved
        return n

    def _too_many(self, buf, p, index, free):
        """Raise at the record that passes the element limit (inside a run
        of rectangles from ``p`` when there is one)."""
        over = self.limit - (index - free) + 2  # the record of the run from p that passes the limit
        if over > 1:
            for k, m in enumerate(_RECTANGLE.finditer(buf, p), 1):
                if k == over:
                    self.index, self.start = index + k - 1, m.start()
                    break
        raise FieldError(f"more than {self.limit:,} elements, properties and names (gdstk holds every one in "
                         "memory; set DYNSHARE_MAX_SHAPES)")

    # -- shared checks ---------------------------------------------------------
    def _unknown(self, buf, p, rid):
        if rid == 1:
            raise FieldError("a second START record; START comes once, right after the magic bytes")
        raise FieldError(f"unknown record id {rid} (OASIS defines 0-34)")

    def _outside(self, rid):
        where = "after a name record (names end a cell)" if self.seen_cell else "before the first CELL record"
        raise FieldError(f"{RECORD_NAMES[rid]} {where}; elements belong inside a cell")

    def _missing(self, rid, need):
        names = ", ".join(name for i, name in enumerate(_MODAL) if need & ~self.defined & (1 << i))
        raise FieldError(f"{RECORD_NAMES[rid]} leaves out {names}, which no earlier record sets (modal variables "
                         "start undefined at each CELL and name record)")

    def _info(self, buf, p, rid, reserved=0):
        """The info byte of element ``rid`` (which must be inside a cell),
        its ``reserved`` bits clear."""
        if not self.in_cell:
            self._outside(rid)
        self.attach = None
        info = buf[p]
        if info & reserved:
            raise FieldError(f"{RECORD_NAMES[rid]} info byte {info:08b} has a reserved bit set (mask {reserved:08b})")
        return info

    def _modal(self, rid, need, sets):
        """Modal variables ``need`` must be defined; ``sets`` are defined after."""
        if need & ~self.defined:
            self._missing(rid, need)
        self.defined |= sets

    def _repetition(self, buf, p, what):
        kind = buf[p]
        n, p = read_repetition(buf, p)
        if n is None:
            if not self.defined & REP:
                raise FieldError("repetition type 0 (reuse the previous one) with no earlier repetition in this cell")
        elif n > self.limit:
            raise FieldError(f"repetition of {n:,} {what}, more than the limit of {self.limit:,} shapes "
                             "(set DYNSHARE_MAX_SHAPES)")
        else:  # gdstk keeps an explicit repetition's offsets (x or y: 8 bytes, both: 16) with every element
            self.rep_weight = 0 if kind in (1, 2, 3, 8, 9) else (n - 1) * (16 if kind >= 10 else 8)
        if self.rep_weight:
            self.copies.add(self.rep_weight)
        self.defined |= REP
        return p

    def _use(self, kind, number):
        used = self.tables[kind].used
        if number not in used:
            used[number] = self.here()

    def _named(self, buf, p, by_number, kind, form, modal):
        """A name given in an element or property: a ``kind`` number (N
        bit set) or a string of ``form``, now the value of ``modal``;
        returns the position after it."""
        if by_number:
            number, p = read_uint(buf, p)
            self._use(kind, number)
            self.copies.set(modal, 0, ((kind, number),) if kind in COPY_TABLES else ())
            return p
        text, p = read_string(buf, p, form)
        self.copies.set(modal, len(text) + 1)
        return p

    # -- names and cells ------------------------------------------------------
    def _name(self, buf, p, rid):
        kind = _TABLES[(rid - 3) // 2] if rid < 11 else "XNAME"
        explicit = rid % 2 == 0 if rid < 11 else rid == 31
        if kind == "XNAME":
            _, p = read_uint(buf, p)  # the attribute
        text, p = read_string(buf, p, {"CELLNAME": "n", "TEXTSTRING": "a", "PROPNAME": "n"}.get(kind, "b"))
        table = self.tables[kind]
        mode = "explicit" if explicit else "implicit"
        if table.mode not in (None, mode):
            raise FieldError(f"{kind} records mix implicit and explicit numbers; one form per file")
        table.mode = mode
        if explicit:
            number, p = read_uint(buf, p)
        else:
            number, table.next = table.next, table.next + 1
        if number in table.defined:
            raise FieldError(f"{kind} number {number} defined twice (first by record {table.defined[number][1][0]})")
        table.defined[number] = (text, self.here())
        self.in_cell, self.defined = False, 0
        self.attach = number if kind == "TEXTSTRING" else None  # gdstk copies its properties to every label
        if kind == "XNAME":
            _unsupported(rid)
        return p

    def _layername(self, buf, p, rid):
        _, p = read_string(buf, p, "n")
        for what in ("layer", "type"):
            kind, p = read_uint(buf, p)
            if kind > 4:
                raise FieldError(f"LAYERNAME {what} interval of unknown type {kind} (0-4)")
            p = skip_ints(buf, p, (0, 1, 1, 1, 2)[kind])
        self.in_cell, self.defined, self.attach = False, 0, None
        return p

    def _cell(self, buf, p, rid):
        if rid == 13:
            key, p = read_uint(buf, p)
            self._use("CELLNAME", key)
        else:
            text, p = read_string(buf, p, "n")
            key = text.decode("ascii")
        self.cells.append((rid == 13, key, self.here()))
        self.in_cell, self.seen_cell, self.defined, self.attach = True, True, 0, None
        return p

    # -- elements ---------------------------------------------------------------
    def _placement(self, buf, p, rid):  # CNXYRAAF or CNXYRMAF
        info = self._info(buf, p, rid)
        p += 1
        if info & 0x80:
            p = self._named(buf, p, info & 0x40, "CELLNAME", "n", "placement-cell")
            self.defined |= PCELL
        elif not self.defined & PCELL:
            self._missing(rid, PCELL)
        else:
            self.copies.copy("placement-cell")
        if rid == 18:
            if info & 0x04:
                _, p = read_real(buf, p)
            if info & 0x02:
                _, p = read_real(buf, p)
        p = skip_ints(buf, p, _BITS[info & 0x30])
        return self._repetition(buf, p, "placements") if info & 0x08 else p

    def _text(self, buf, p, rid):  # 0CNXYRTL
        info = self._info(buf, p, rid, 0x80)
        p += 1
        if info & 0x40:
            p = self._named(buf, p, info & 0x20, "TEXTSTRING", "a", "text-string")
        self._modal(rid, (0 if info & 0x40 else TSTR) | (0 if info & 1 else TLAYER) | (0 if info & 2 else TTYPE),
                    TSTR | TLAYER | TTYPE)
        if not info & 0x40:
            self.copies.copy("text-string")
        p = skip_ints(buf, p, _BITS[info & 0x1B])
        return self._repetition(buf, p, "labels") if info & 0x04 else p

    def _rectangle(self, buf, p, rid):  # SWHXYRDL
        if not self.in_cell:
            self._outside(rid)
        info = buf[p]
        if info & 0xA0 == 0xA0:
            raise FieldError("RECTANGLE is a square (S) yet gives a height (H)")
        need = (~info & 3) | (0 if info & 0x40 else GW) | (0 if info & 0xA0 else GH)
        if need & ~self.defined:
            self._missing(rid, need)
        self.defined |= LAYER | DTYPE | GW | GH
        m = INT_RUNS[_BITS[info & 0x7B]].match(buf, p + 1)
        p = m.end() if m else skip_ints(buf, p + 1, _BITS[info & 0x7B])
        return self._repetition(buf, p, "rectangles") if info & 0x04 else p

    def _polygon(self, buf, p, rid):  # 00PXYRDL
        info = self._info(buf, p, rid, 0xC0)
        self._modal(rid, (~info & 3) | (0 if info & 0x20 else PPTS), LAYER | DTYPE | PPTS)
        p = skip_ints(buf, p + 1, _BITS[info & 0x03])
        if info & 0x20:
            n, p = skip_point_list(buf, p, 2)
            self.copies.set("polygon-point-list", 16 * (n + 2))
        else:
            self.copies.copy("polygon-point-list")
        p = skip_ints(buf, p, _BITS[info & 0x18])
        return self._repetition(buf, p, "polygons") if info & 0x04 else p

    def _path(self, buf, p, rid):  # EWPXYRDL
        info = self._info(buf, p, rid)
        need = (~info & 3) | (0 if info & 0x40 else HALFW) | (0 if info & 0x20 else HPTS)
        p = skip_ints(buf, p + 1, _BITS[info & 0x43])
        if info & 0x80:  # extension scheme 0000SSEE: 0 the modal one, 1 flush, 2 half width, 3 given
            scheme = buf[p]
            if scheme > 15:
                raise FieldError(f"PATH extension scheme {scheme} has bits above 3 set")
            need |= (0 if scheme & 0x0C else SEXT) | (0 if scheme & 0x03 else EEXT)
            p = skip_ints(buf, p + 1, (scheme & 0x0C == 0x0C) + (scheme & 0x03 == 0x03))
        else:
            need |= SEXT | EEXT
        self._modal(rid, need, LAYER | DTYPE | HALFW | SEXT | EEXT | HPTS)
        if info & 0x20:  # gdstk keeps the spine and builds the path from it: twice the points
            n, p = skip_point_list(buf, p, 1)
            self.copies.set("path-point-list", 32 * (n + 1))
        else:
            self.copies.copy("path-point-list")
        p = skip_ints(buf, p, _BITS[info & 0x18])
        return self._repetition(buf, p, "paths") if info & 0x04 else p

    def _trapezoid(self, buf, p, rid):  # OWHXYRDL, with delta-a and delta-b (23), delta-a (24), delta-b (25)
        info = self._info(buf, p, rid)
        self._modal(rid, (~info & 3) | (0 if info & 0x40 else GW) | (0 if info & 0x20 else GH),
                    LAYER | DTYPE | GW | GH)
        p = skip_ints(buf, p + 1, _BITS[info & 0x7B] + (2 if rid == 23 else 1))
        return self._repetition(buf, p, "trapezoids") if info & 0x04 else p

    def _ctrapezoid(self, buf, p, rid):  # TWHXYRDL
        info = self._info(buf, p, rid)
        self._modal(rid, (~info & 3) | (0 if info & 0x80 else CTYPE),
                    LAYER | DTYPE | CTYPE | (GW if info & 0x40 else 0) | (GH if info & 0x20 else 0))
        p = skip_ints(buf, p + 1, _BITS[info & 0x03])
        if info & 0x80:
            kind, p = read_uint(buf, p)
            if kind > 25:
                raise FieldError(f"CTRAPEZOID of unknown type {kind} (0-25)")
        p = skip_ints(buf, p, _BITS[info & 0x78])
        return self._repetition(buf, p, "trapezoids") if info & 0x04 else p

    def _circle(self, buf, p, rid):  # 00rXYRDL
        info = self._info(buf, p, rid, 0xC0)
        self._modal(rid, (~info & 3) | (0 if info & 0x20 else RADIUS), LAYER | DTYPE | RADIUS)
        p = skip_ints(buf, p + 1, _BITS[info & 0x03])
        if info & 0x20:
            radius, p = read_uint(buf, p)
            if radius * self.grid_um > 1e8:
                raise FieldError(f"CIRCLE radius of {radius * self.grid_um:.3g} um, beyond 100 m")
            self.copies.set("circle-radius", 16 * circle_vertices(radius))
        else:
            self.copies.copy("circle-radius")
        p = skip_ints(buf, p, _BITS[info & 0x18])
        return self._repetition(buf, p, "circles") if info & 0x04 else p

    def _xelement(self, buf, p, rid):
        if not self.in_cell:
            self._outside(rid)
        _, p = read_uint(buf, p)
        read_string(buf, p, "b")
        _unsupported(rid)

    def _xgeometry(self, buf, p, rid):  # 000XYRDL attribute [layer] [datatype] b-string [x] [y] [repetition]
        info = self._info(buf, p, rid, 0xE0)
        self._modal(rid, ~info & 3, LAYER | DTYPE)
        p = skip_ints(buf, p + 1, 1 + _BITS[info & 0x03])
        _, p = read_string(buf, p, "b")
        p = skip_ints(buf, p, _BITS[info & 0x18])
        if info & 0x04:
            self._repetition(buf, p, "shapes")
        _unsupported(rid)

    # -- properties and compression -------------------------------------------------
    def _property(self, buf, p, rid):  # 28: UUUUVCNS [name] [count] values; 29: the last one again
        copies = self.copies
        before = copies.total
        if rid == 29:
            if ~self.defined & (PNAME | PVALS):
                self._missing(rid, PNAME | PVALS)
            copies.copy("last-property-name")
            copies.copy("last-value-list")
        else:
            info = buf[p]
            p += 1
            if info & 0x04:
                p = self._named(buf, p, info & 0x02, "PROPNAME", "n", "last-property-name")
            need = 0 if info & 0x04 else PNAME
            if info & 0x08:
                if info & 0xF0:
                    raise FieldError("PROPERTY reuses the last value list (V) yet counts values (UUUU is not 0)")
                need |= PVALS
            if need & ~self.defined:
                self._missing(rid, need)
            if not info & 0x04:
                copies.copy("last-property-name")
            if info & 0x08:
                copies.copy("last-value-list")
            else:
                count = info >> 4
                if count == 15:
                    count, p = read_uint(buf, p)
                refs: list[int] = []
                text, p = skip_property_values(buf, p, count, refs)
                for number in refs:
                    self._use("PROPSTRING", number)
                copies.set("last-value-list", 32 * count + text, tuple(("PROPSTRING", n) for n in refs))
            self.defined |= PNAME | PVALS
        copies.add(32)
        if self.attach is not None:  # gdstk copies it to every label of this TEXTSTRING
            copies.attached[self.attach] += copies.total - before
        return p

    def _cblock(self, buf, p, rid):
        if self.cblock is not None:
            raise FieldError("CBLOCK inside a CBLOCK")
        method, p = read_uint(buf, p)
        if method != 0:
            raise FieldError(f"CBLOCK compression type {method}; OASIS defines only 0 (deflate)")
        size, p = read_uint(buf, p)
        packed, p = read_uint(buf, p)
        if packed > len(buf) - p:
            raise FieldError(f"CBLOCK of {packed:,} compressed bytes runs past the end of the file")
        if size > DEFLATE_RATIO * packed + 64:
            raise FieldError(f"CBLOCK says {packed:,} bytes inflate to {size:,}: more than deflate gives (1032:1)")
        if size > MAX_CBLOCK_BYTES:
            raise FieldError(f"CBLOCK of {size:,} bytes inflated, more than the {MAX_CBLOCK_BYTES >> 20} MiB one may "
                             "hold")
        if self.inflated + size > self.budget:
            raise FieldError(f"the CBLOCKs inflate to more than {self.budget:,} bytes (64 times the file, and 1 MiB):"
                             " a decompression bomb")
        inflater = zlib.decompressobj(-15)
        try:
            body = inflater.decompress(buf[p : p + packed], size + 1)
        except zlib.error as exc:
            raise FieldError(f"CBLOCK data is not a deflate stream ({exc})") from None
        if len(body) != size or not inflater.eof or inflater.unused_data or inflater.unconsumed_tail:
            got = f"more than {size:,}" if len(body) > size else f"{len(body):,}"
            raise FieldError(f"CBLOCK says {packed:,} bytes inflate to {size:,}; they give {got} bytes"
                             + ("" if inflater.eof and not inflater.unused_data else
                                " and do not end the deflate stream exactly"))
        self.cblocks += 1
        self.inflated += size
        try:
            self.walk(body, 0, self.start)
        except IndexError:
            name = RECORD_NAMES.get(body[self.start], "record")
            raise FieldError(f"{name} runs past the end of the CBLOCK's data (a record may not cross it)") from None
        return p + packed
