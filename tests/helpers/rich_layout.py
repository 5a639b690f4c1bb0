"""A small library holding every kind of element gdstk writes, for the
layout reader and grammar tests (both formats)."""

import gdstk
import numpy as np


def rich_library():
    """Every kind of element gdstk writes: rectangles, polygons (Manhattan,
    octangular, any angle), paths with each end style, labels, circles,
    trapezoids, references with every repetition gdstk knows, properties of
    every value type on shapes, cells and the library, a missing cell."""
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    leaf = lib.new_cell("LEAF")
    leaf.add(gdstk.rectangle((0, 0), (1, 2), layer=1, datatype=2))
    leaf.add(gdstk.Polygon([(0, 0), (3, 0), (3, 1), (1, 1), (1, 4), (0, 4)], layer=3))
    leaf.add(gdstk.Polygon([(0, 0), (1, 1), (0, 2), (-1, 1)], layer=3))
    leaf.add(gdstk.Polygon([(0, 0), (3, 0), (2, 1.3)], layer=3))
    leaf.add(gdstk.Polygon([(0, 0), (4, 0), (3, 1), (0.5, 1)], layer=7))
    leaf.add(gdstk.Polygon([(0, 0), (4, 0), (3, 1), (1, 1)], layer=7))
    leaf.add(gdstk.ellipse((10, 10), 2, layer=6, tolerance=1e-2))
    leaf.add(gdstk.Label("A", (0.5, 0.5), layer=2, texttype=5))
    leaf.add(gdstk.Label("VDD", (0.5, 1.5), layer=2))
    for ends in ("extended", "flush", (0.1, 0.2), "round"):
        leaf.add(gdstk.FlexPath([(0, 0), (5, 0), (5, 5), (7, 9)], 0.2, layer=4, ends=ends, simple_path=True))
    leaf.add(gdstk.RobustPath((0, 0), 0.5, layer=5, simple_path=True).segment((3, 3)))
    for where, rep in (((20, 0), gdstk.Repetition(columns=3, rows=2, spacing=(2, 2))),
                       ((30, 0), gdstk.Repetition(offsets=[(0, 0), (1, 5), (7, 3)])),
                       ((40, 0), gdstk.Repetition(x_offsets=[0, 3, 4])),
                       ((45, 0), gdstk.Repetition(y_offsets=[0, 3, 4])),
                       ((50, 0), gdstk.Repetition(columns=2, rows=2, v1=(1, 1), v2=(-1, 2))),
                       ((60, 0), gdstk.Repetition(columns=4, rows=1, spacing=(-2, 0)))):
        shape = gdstk.rectangle(where, (where[0] + 1, 1), layer=1)
        shape.repetition = rep
        leaf.add(shape)
    label = gdstk.Label("R", (1, 1), layer=2)
    label.repetition = gdstk.Repetition(columns=4, rows=1, spacing=(1, 0))
    leaf.add(label)
    leaf.add(gdstk.rectangle((0, 0), (1, 1), layer=1).set_property("note", ["x", 3, -2, 2.5, b"\x01\x02"]))
    leaf.set_property("cellprop", "yes")
    top = lib.new_cell("TOP")
    top.add(gdstk.Reference(leaf, (2, 0)))
    top.add(gdstk.Reference(leaf, (0, 2), columns=2, rows=3, spacing=(20, 20)))
    top.add(gdstk.Reference(leaf, (5, 5), rotation=np.pi / 2, magnification=2, x_reflection=True))
    top.add(gdstk.Reference(leaf, (5, 5), rotation=0.3))
    lib.set_property("libprop", [1, "a"])
    return lib
