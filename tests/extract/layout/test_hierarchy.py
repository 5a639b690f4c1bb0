"""Hierarchical extraction against the flat extraction of the same cell.

Source of every check: the flat extraction (``extract_cell(...,
hierarchical=False)``) is the reference; the hierarchical one must give
the same devices (W/L/AD/AS/PD/PS), nets (names, roles, labels, points,
capacitance parts, junctions) and findings.  Numbers are compared to
1e-9 relative: the two sum the same terms in a different order.
"""

import os

import gdstk
import numpy as np
import pytest

from extract.layout.hierarchy import extract_hierarchical
from extract.layout.pipeline import extract_cell, tech_layers
from extract.layout.reader import open_layout
from extract.techfile import load_tech
from sample_layouts.make_samples import nand3_array

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))
TECH = load_tech(os.path.join(ROOT, "sample_layouts", "dsk18.toml"))
SAMPLES = os.path.join(ROOT, "sample_layouts", "dsk18_cells.gds")


def _close(a, b):
    return abs(a - b) <= 1e-9 * max(1.0, abs(a), abs(b))


def assert_same(h, f):
    """Every field of the hierarchical circuit ``h`` equals the flat ``f``."""
    key = lambda d: (d.name, d.type, d.drain, d.gate, d.source, d.location_um, d.model)  # noqa: E731
    assert [key(d) for d in h.devices] == [key(d) for d in f.devices]
    for a, b in zip(h.devices, f.devices):
        for k in ("w_um", "l_um", "ad_um2", "as_um2", "pd_um", "ps_um"):
            assert _close(getattr(a, k), getattr(b, k)), (a, b, k)
    assert list(h.nets) == list(f.nets)
    for name in f.nets:
        a, b = h.nets[name], f.nets[name]
        assert (a.role, a.labels, a.labelled, a.location_um) == (b.role, b.labels, b.labelled, b.location_um), name
        for x, y in zip(a.cap.as_dict().values(), b.cap.as_dict().values()):
            assert _close(x, y), (name, a.cap, b.cap)
        assert sorted(a.junctions) == sorted(b.junctions)
        for t in b.junctions:
            ja, jb = a.junctions[t], b.junctions[t]
            for k in ("area_um2", "field_perimeter_um", "gate_perimeter_um"):
                assert _close(getattr(ja, k), getattr(jb, k)), (name, t, ja, jb)
    assert sorted(x.text() for x in h.findings) == sorted(x.text() for x in f.findings)


def _both(path, cell=None):
    lay = open_layout(path)
    h = extract_hierarchical(lay, TECH, cell, tech_layers(TECH))
    return h, extract_cell(lay, TECH, cell, hierarchical=False), extract_cell(lay, TECH, cell)


@pytest.mark.parametrize("nx,ny", [(1, 1), (3, 2), (7, 5)])
def test_nand3_arrays_match_flat(tmp_path, nx, ny):
    path = str(tmp_path / "a.gds")
    nand3_array(nx, ny).write_gds(path)
    h, f, default = _both(path)
    assert h is not None  # the rule holds: abutting cells touch only in metal (the rails)
    assert len(f.devices) == 8 * nx * ny
    assert_same(h, f)
    assert_same(default, f)


def _mixed_block(path, dx_gap=1.0, abut=False):
    """Every sample cell placed in a row, plus a 4×3 array of each of two cells."""
    src = gdstk.read_gds(SAMPLES)
    lib = gdstk.Library("MIXED", unit=1e-6, precision=1e-9)
    top = gdstk.Cell("MIXED")
    x = 0.0
    for c in sorted(src.cells, key=lambda c: c.name):
        (x0, y0), (x1, y1) = c.bounding_box()
        top.add(gdstk.Reference(c, origin=(round(x - x0, 3), round(-y0, 3))))
        x += (x1 - x0) + (0 if abut else dx_gap)
        lib.add(c)
    for k, name in enumerate(("DYN_NAND3", "STATIC_NAND2")):
        c = next(c for c in src.cells if c.name == name)
        (x0, y0), (x1, y1) = c.bounding_box()
        top.add(gdstk.Reference(c, origin=(round(-x0, 3), round(20.0 + 40 * k - y0, 3)), columns=4, rows=3,
                                spacing=(round(x1 - x0, 3), round(y1 - y0 + 1.0, 3))))
    lib.add(top)
    lib.write_gds(path)


def test_mixed_block_of_every_sample_cell_matches_flat(tmp_path):
    path = str(tmp_path / "m.gds")
    _mixed_block(path)
    h, f, default = _both(path, "MIXED")
    assert h is not None
    assert_same(h, f)
    assert_same(default, f)


def _bar_cell(name="BAR"):
    """A transistor whose drain goes by contact to a metal1 bar spanning
    the cell's width (0..4 µm), unlabelled: abutted copies share the bar."""
    c = gdstk.Cell(name)
    c.add(gdstk.rectangle((0.5, 0.0), (2.5, 1.0), layer=10))       # active
    c.add(gdstk.rectangle((1.4, -0.4), (1.6, 1.4), layer=20))      # poly gate
    c.add(gdstk.rectangle((0.0, 2.0), (4.0, 2.4), layer=40))       # metal1 bar, edge to edge
    c.add(gdstk.rectangle((0.7, 0.3), (0.9, 0.5), layer=30))       # contact on the drain
    c.add(gdstk.rectangle((0.6, 0.2), (1.0, 2.2), layer=40))       # metal1 from drain to bar
    c.add(gdstk.rectangle((0.0, -1.0), (4.0, 3.0), layer=60))      # nimplant
    c.add(gdstk.rectangle((0.0, 4.0), (4.0, 4.4), layer=40))       # a bare bar: a metal-only net across copies
    return c


def test_abutting_instances_join_a_net_like_flat(tmp_path):
    # hand check of the rule: 3 bars abut edge to edge -> one unlabelled net
    # holding the three drains; its wire capacitance loses 2·fringe·0.4 µm per joint
    lib = gdstk.Library("ABUT", unit=1e-6, precision=1e-9)
    bar = _bar_cell()
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(bar, origin=(0, 0), columns=3, rows=1, spacing=(4.0, 0)))
    lib.add(top, bar)
    path = str(tmp_path / "abut.gds")
    lib.write_gds(path)
    h, f, _ = _both(path)
    assert h is not None
    assert len(f.devices) == 3
    shared = [n for n in f.nets if sum(n in (d.drain, d.source) for d in f.devices) == 3]
    assert len(shared) == 1  # the flat extraction joins the bars: one net on all three devices
    assert len(f.nets) == 3 + 1 + 1 + 3  # gates, the drain bar, the bare bar, sources
    assert_same(h, f)


@pytest.mark.parametrize("dx,why", [(3.0, "metal bars overlap"), (1.0, "diffusion overlaps")])
def test_overlapping_instances_fall_back_to_flat(tmp_path, dx, why):
    lib = gdstk.Library("OVER", unit=1e-6, precision=1e-9)
    bar = _bar_cell()
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(bar, origin=(0, 0)))
    top.add(gdstk.Reference(bar, origin=(dx, 0)))
    lib.add(top, bar)
    path = str(tmp_path / "over.gds")
    lib.write_gds(path)
    h, f, default = _both(path)
    assert h is None, why
    assert_same(default, f)


def test_rotated_instance_or_top_shapes_fall_back(tmp_path):
    lib = gdstk.Library("ROT", unit=1e-6, precision=1e-9)
    bar = _bar_cell()
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(bar, origin=(0, 0), rotation=np.pi / 2))
    lib.add(top, bar)
    path = str(tmp_path / "rot.gds")
    lib.write_gds(path)
    assert _both(path)[0] is None
    top.remove(*top.references)
    top.add(gdstk.Reference(bar, origin=(0, 0)), gdstk.rectangle((10, 10), (11, 11), layer=40))
    lib.write_gds(path)
    h, f, default = _both(path)
    assert h is None  # the top cell's own metal: flattened
    assert_same(default, f)


def test_placed_shapes_are_the_flat_pieces(tmp_path):
    # source: the flat extraction's per-net pieces; the hierarchical ones,
    # translated on demand, cover the same area per net and layer
    path = str(tmp_path / "a.gds")
    nand3_array(3, 2).write_gds(path)
    h, f, _ = _both(path)
    assert sorted(h.shapes) == sorted(f.shapes)
    for name in f.shapes:
        for layer in {l for l, _ in f.shapes[name]}:
            a = sum(g.area for l, g in h.shapes[name] if l == layer)
            b = sum(g.area for l, g in f.shapes[name] if l == layer)
            assert _close(a, b), (name, layer)


def test_instances_with_nothing_on_the_tech_layers_are_left_out(tmp_path):
    # a 300 x 300 array of a cell drawn only on a layer the tech file does not use, beside a
    # NAND3 array: the same circuit as flat (and the array is not paired in the STR-tree: before,
    # 704,340 such instances took 4.7 s and 500 MB, the slowest GDSII fuzz case)
    lib = nand3_array(2, 1)
    top = next(c for c in lib.top_level())
    dummy = lib.new_cell("DUMMY")
    dummy.add(gdstk.rectangle((0, 0), (1, 1), layer=99))
    top.add(gdstk.Reference(dummy, (-1000, -1000), columns=300, rows=300, spacing=(2, 2)))
    path = str(tmp_path / "a.gds")
    lib.write_gds(path)
    h, f, default = _both(path, top.name)
    assert h is not None and len(f.devices) == 16
    assert_same(h, f)
