"""Drawing primitives for the dsk18 demo cells.

A :class:`Sketch` collects rectangles and polygons per drawn layer and
net-name labels, and turns them into one :class:`gdstk.Cell` with every
layer merged (overlapping shapes of a layer become one polygon).  The
helpers place MOSFET diffusion strips, gates, contacts and wires the way
the dynshare extractor reads them: a channel is active ∩ poly, a contact
square joins whatever conductors it overlaps, a label names the shape of
its layer that contains it.

Everything here is for our own invented dsk18 demo process; the layer
numbers are those of ``sample_layouts/dsk18.toml``.

Units: µm (library unit 1e-6 m, database unit 1e-9 m).
"""

from __future__ import annotations

from collections import defaultdict

import gdstk

__all__ = [
    "LAYERS",
    "LABEL_LAYERS",
    "GRID",
    "CONTACT",
    "Sketch",
    "strip",
    "snap",
]

#: Drawn layers of dsk18 as ``(layer, datatype)``, in the order written.
LAYERS: dict[str, tuple[int, int]] = {
    "nwell": (70, 0),
    "pimplant": (61, 0),
    "nimplant": (60, 0),
    "active": (10, 0),
    "poly": (20, 0),
    "contact": (30, 0),
    "metal1": (40, 0),
    "via1": (45, 0),
    "metal2": (50, 0),
}

#: Text ``(layer, texttype)`` that names a net on a conducting layer.
LABEL_LAYERS: dict[str, tuple[int, int]] = {
    "poly": (20, 5),
    "metal1": (40, 5),
    "metal2": (50, 5),
}

#: Drawing grid of the Manhattan cells, µm.
GRID = 0.01

#: Side of a contact or via square, µm.
CONTACT = 0.2


def snap(value: float, grid: float = 0.001) -> float:
    """Round ``value`` to ``grid`` (default the 1 nm database unit).

    Examples
    --------
    >>> snap(1.48 + 0.18)
    1.66
    >>> snap(0.707106781)
    0.707
    """
    return round(round(value / grid) * grid, 6)


class Sketch:
    """Shapes and labels of one cell under construction.

    Examples
    --------
    >>> sk = Sketch()
    >>> sk.rect("metal1", 0, 0, 1, 0.3)
    >>> sk.rect("metal1", 0.9, 0, 1.2, 2)       # overlaps: merged on output
    >>> sk.label("metal1", "X", 0.5, 0.15)
    >>> cell = sk.cell("DEMO")
    >>> len(cell.polygons), round(cell.polygons[0].area(), 4)
    (1, 0.87)
    >>> cell.labels[0].text, cell.labels[0].layer, cell.labels[0].texttype
    ('X', 40, 5)
    """

    def __init__(self) -> None:
        self.shapes: dict[str, list[list[tuple[float, float]]]] = defaultdict(list)
        self.labels: list[tuple[str, str, float, float]] = []

    def rect(self, layer: str, x0: float, y0: float, x1: float, y1: float) -> None:
        """Add the axis-aligned rectangle with corners (x0, y0), (x1, y1)."""
        if layer not in LAYERS:
            raise KeyError(layer)
        xa, xb = sorted((snap(x0), snap(x1)))
        ya, yb = sorted((snap(y0), snap(y1)))
        self.shapes[layer].append([(xa, ya), (xb, ya), (xb, yb), (xa, yb)])

    def polygon(self, layer: str, points) -> None:
        """Add a polygon given by its vertices (snapped to 1 nm)."""
        if layer not in LAYERS:
            raise KeyError(layer)
        self.shapes[layer].append([(snap(x), snap(y)) for x, y in points])

    def cut(self, layer: str, x: float, y: float) -> None:
        """A :data:`CONTACT`-sized square of ``layer`` centred on (x, y)."""
        h = CONTACT / 2
        self.rect(layer, x - h, y - h, x + h, y + h)

    def contact(self, x: float, y: float) -> None:
        """A contact square centred on (x, y)."""
        self.cut("contact", x, y)

    def via(self, x: float, y: float) -> None:
        """A via1 square centred on (x, y)."""
        self.cut("via1", x, y)

    def label(self, layer: str, text: str, x: float, y: float) -> None:
        """Name the ``layer`` shape that contains (x, y)."""
        if layer not in LABEL_LAYERS:
            raise KeyError(layer)
        self.labels.append((layer, text, snap(x), snap(y)))

    def wire(self, layer: str, points, width: float) -> None:
        """A Manhattan wire of ``width`` through ``points`` (square ends
        extended by half the width, so consecutive segments overlap)."""
        h = width / 2
        for (xa, ya), (xb, yb) in zip(points[:-1], points[1:]):
            if xa != xb and ya != yb:
                raise ValueError("wire segments must be horizontal or vertical")
            self.rect(layer, min(xa, xb) - h, min(ya, yb) - h, max(xa, xb) + h, max(ya, yb) + h)

    def cell(self, name: str) -> gdstk.Cell:
        """Merge each layer and return the finished cell.

        Notes
        -----
        Each layer is the union of its shapes (``gdstk.boolean`` "or",
        1 nm precision), written in :data:`LAYERS` order, so the same
        sketch always gives the same polygons.  Cut layers are unions of
        disjoint squares and stay squares.
        """
        cell = gdstk.Cell(name)
        for layer, (num, dt) in LAYERS.items():
            polys = [gdstk.Polygon(p) for p in self.shapes.get(layer, [])]
            if not polys:
                continue
            for poly in gdstk.boolean(polys, [], "or", precision=1e-3, layer=num, datatype=dt):
                cell.add(poly)
        for layer, text, x, y in self.labels:
            num, tt = LABEL_LAYERS[layer]
            cell.add(gdstk.Label(text, (x, y), layer=num, texttype=tt))
        return cell


def strip(sk: Sketch, x0: float, y0: float, elements) -> list[tuple[float, float]]:
    """Draw a horizontal diffusion strip, bottom edge at ``y0``.

    Parameters
    ----------
    sk : Sketch
    x0, y0 : float
        Lower-left corner of the strip.
    elements : sequence of (str, float, float)
        ``(kind, length, width)`` from left to right; ``kind`` is ``"d"``
        for a source/drain piece or ``"g"`` for a channel.  ``length`` is
        along x, ``width`` (the device W) along y.

    Returns
    -------
    list of (float, float)
        The x range of each element.  The caller draws the gate poly over
        the ``"g"`` ranges and the contacts in the ``"d"`` ones.

    Examples
    --------
    >>> sk = Sketch()
    >>> strip(sk, 1.0, 0.0, [("d", 0.48, 1.0), ("g", 0.18, 1.0), ("d", 0.26, 1.0)])
    [(1.0, 1.48), (1.48, 1.66), (1.66, 1.92)]
    """
    ranges = []
    x = snap(x0)
    for kind, length, width in elements:
        if kind not in ("d", "g"):
            raise ValueError(f"unknown strip element {kind!r}")
        xe = snap(x + length)
        sk.rect("active", x, y0, xe, y0 + width)
        ranges.append((x, xe))
        x = xe
    return ranges
