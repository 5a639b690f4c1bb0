"""What gdstk copies while it reads an OASIS file, counted during the grammar
walk, so that a small file cannot make it run out of memory.

gdstk 1.0 (``read_oas``; read in its source, confirmed by trial) copies, for
every element, what the element takes from a modal variable: the polygon or
path point list, an explicit repetition's offsets, the text string, the
cell name of a placement named by string, the property name and value list.
At the end of the file it copies, for every reference by number, the
TEXTSTRING (with the properties attached to it), PROPNAME or PROPSTRING
string.  And it draws every circle as a polygon of about
``pi / acos(1 - 1/r)`` vertices (``r`` the radius in grid steps; its
tolerance is one grid step).  None of this is bounded by the file's size: a
100 kB file holding one 100,000-point polygon and 50,000 two-byte POLYGON
records that reuse it asks for 80 GB, and gdstk does not check its
allocations (it crashed in 13 s under a 3 GB cap).

Counted: 16 bytes a point or offset (two doubles), 1 a character, 32 a
property value or property.  A record's own fields are not counted (the
file's size bounds them).
"""

from __future__ import annotations

import math
from collections import Counter

from extract.layout.oasis_types import FieldError

__all__ = ["COPY_TABLES", "Copies", "circle_vertices", "size"]

#: Name tables whose strings gdstk copies once per reference by number.
COPY_TABLES = ("TEXTSTRING", "PROPNAME", "PROPSTRING")


def size(n: float) -> str:
    """Bytes for a message.

    >>> size(2e9), size(201_000), size(12)
    ('2 GB', '201 kB', '12 bytes')
    """
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{n:.0f} bytes"


def circle_vertices(radius: int) -> int:
    """Vertices gdstk gives a circle of ``radius`` grid steps at a tolerance
    of one step: the arc per vertex is 2 acos(1 - 1/r) (the chord's sagitta
    is one step; a circle's geometry, from memory).

    >>> circle_vertices(1000), circle_vertices(0)
    (71, 4)
    """
    if radius <= 2:
        return 4
    return math.ceil(math.pi / math.acos(1 - 1 / radius))


class Copies:
    """The running count of copied bytes, the weight of each modal
    variable's value, and the uses of each name number.

    Parameters
    ----------
    limit : int
        Most bytes the copies may take; passing it raises FieldError.
    """

    def __init__(self, limit: int):
        self.total, self.limit = 0, limit
        self.weight: dict[str, int] = {}
        self.refs: dict[str, tuple] = {}
        self.uses = {kind: Counter() for kind in COPY_TABLES}
        self.attached: Counter = Counter()  # TEXTSTRING number -> bytes of its properties

    def add(self, n: int) -> None:
        self.total += n
        if self.total > self.limit:
            raise FieldError(f"gdstk would copy more than {size(self.limit)} reading this file (modal values, "
                             "names or circles repeated by many records; the limit is 100 bytes per allowed shape, "
                             "set DYNSHARE_MAX_SHAPES)")

    def set(self, modal: str, weight: int, refs: tuple = ()) -> None:
        """``modal`` now holds a value of ``weight`` bytes, referring to the
        name numbers ``refs`` ((kind, number) pairs); the record setting it
        takes it too."""
        self.weight[modal], self.refs[modal] = weight, refs
        self.copy(modal)

    def copy(self, modal: str) -> None:
        """One more element takes ``modal``'s value."""
        for kind, number in self.refs[modal]:
            self.uses[kind][number] += 1
        if self.weight[modal]:
            self.add(self.weight[modal])

    def finish(self, tables: dict) -> tuple | None:
        """Add the copies made per reference by number; return the first use
        of the heaviest number when the total passes the limit, else None."""
        heaviest, most = None, -1
        for kind in COPY_TABLES:
            defined = tables[kind].defined
            for number, uses in self.uses[kind].items():
                if number in defined:
                    weight = uses * (len(defined[number][0]) + 1 + self.attached.get(number, 0) * (kind == "TEXTSTRING"))
                    self.total += weight
                    if weight > most:
                        heaviest, most = tables[kind].used.get(number), weight
        return heaviest if self.total > self.limit else None
