"""Flattening with a layer list asks gdstk for those layers only, and gives
what flattening everything and keeping those layers gives.

The cause of the slowest GDSII fuzz case (README, "Hostile and broken
inputs"): 13 million rectangles on a layer the tech file does not use were
flattened into Python objects and then dropped (12 s, 3.2 GB); now gdstk
filters them.  Source of the expected result: the unfiltered flattening, the
same gdstk calls without the layer arguments.
"""

import gdstk
import numpy as np

from rich_layout import rich_library

from extract.layout.reader import flatten_cell, open_layout


def test_layer_filter_matches_flattening_everything(tmp_path):
    lib = rich_library()
    for fmt in ("gds", "oas"):
        path = tmp_path / f"r.{fmt}"
        (lib.write_gds if fmt == "gds" else lib.write_oas)(str(path))
        layout = open_layout(str(path))
        everything = flatten_cell(layout, "TOP")
        wanted = [(1, 0), (4, 0), (7, 0), (99, 0)]
        some = flatten_cell(layout, "TOP", layers=wanted)
        assert sorted(some.polygons) == sorted(k for k in everything.polygons if k in wanted)
        for key, arrays in some.polygons.items():
            assert len(arrays) == len(everything.polygons[key])
            for a, b in zip(arrays, everything.polygons[key]):
                assert np.array_equal(a, b)
        assert some.labels == everything.labels


def test_shapes_on_other_layers_are_not_flattened(tmp_path):
    # a 300 x 300 array of a cell with one shape on layer 1 and one on layer 2:
    # asking for layer 2 gives the 90,000 copies of that one only
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    leaf = lib.new_cell("LEAF")
    leaf.add(gdstk.rectangle((0, 0), (1, 1), layer=1), gdstk.rectangle((0, 0), (0.5, 0.5), layer=2))
    lib.new_cell("TOP").add(gdstk.Reference(leaf, columns=300, rows=300, spacing=(2, 2)))
    path = tmp_path / "a.gds"
    lib.write_gds(str(path))
    flat = flatten_cell(open_layout(str(path)), "TOP", layers=[(2, 0)])
    assert list(flat.polygons) == [(2, 0)] and len(flat.polygons[(2, 0)]) == 300 * 300
