"""Tiny layouts drawn in the tests, on the demo dsk18 layers.

Layers (sample_layouts/dsk18.toml): active 10, poly 20 (text 20/5),
contact 30, metal1 40 (text 40/5), via1 45, metal2 50, nimplant 60,
pimplant 61, nwell 70.
"""

from __future__ import annotations

import os

import gdstk

ACTIVE, POLY, CONT, M1, NIMP, PIMP, NWELL = 10, 20, 30, 40, 60, 61, 70
TECH = os.path.join(os.path.dirname(__file__), "..", "..", "sample_layouts", "dsk18.toml")


def rect(cell, layer, x0, y0, x1, y1):
    cell.add(gdstk.rectangle((x0, y0), (x1, y1), layer=layer))


def label(cell, text, x, y, layer=M1):
    cell.add(gdstk.Label(text, (x, y), layer=layer, texttype=5))


def nmos_stack(cell):
    """Two series nmos on one 3 µm × 1 µm active strip.

    Gates A at x 1.00–1.18 and B at x 1.80–1.98 (poly from y −0.3 to 1.3);
    left piece 0–1.00 contacted to metal1 "X", right piece 1.98–3.00
    contacted to metal1 "VSS", middle piece 1.18–1.80 uncontacted.
    """
    rect(cell, ACTIVE, 0, 0, 3, 1)
    rect(cell, NIMP, -0.2, -0.2, 3.2, 1.2)
    rect(cell, POLY, 1.0, -0.3, 1.18, 1.3)
    rect(cell, POLY, 1.8, -0.3, 1.98, 1.3)
    rect(cell, CONT, 0.3, 0.4, 0.5, 0.6)
    rect(cell, M1, 0.2, 0.3, 0.6, 0.7)
    rect(cell, CONT, 2.4, 0.4, 2.6, 0.6)
    rect(cell, M1, 2.3, 0.3, 2.7, 3.0)
    label(cell, "X", 0.4, 0.5)
    label(cell, "VSS", 2.5, 2.0)
    label(cell, "A", 1.09, 1.2, POLY)
    label(cell, "B", 1.89, 1.2, POLY)
    return cell


def library(*cells, unit=1e-6, precision=1e-9):
    lib = gdstk.Library(unit=unit, precision=precision)
    for c in cells:
        lib.add(c)
    return lib


def write(tmp_path, name, *cells, **kw):
    path = os.path.join(str(tmp_path), name)
    library(*cells, **kw).write_gds(path)
    return path
