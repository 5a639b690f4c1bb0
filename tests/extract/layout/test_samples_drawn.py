"""The bundled demo layouts (sample_layouts/dsk18_cells.gds) and schematics.

The GDS is read with gdstk and its geometry measured with shapely only —
never with the project's extractor — so these checks stand on their own:
the drawing is compared with hand calculations from the dimensions that
sample_layouts/README.md documents, and a small independent tracer (below)
checks that every cell has exactly the transistors and connections its
description names.  The SPICE schematics are run in ngspice.
"""

from __future__ import annotations

import math
import os
try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

import gdstk
import pytest
from shapely.affinity import rotate
from shapely.geometry import Point, Polygon, box
from shapely.ops import unary_union

from sample_layouts import make_samples
from sample_layouts.drawing import LABEL_LAYERS, LAYERS

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.path.join(HERE, "..", "..", "..", "sample_layouts")
GDS = os.path.join(SAMPLES, "dsk18_cells.gds")
TECH = tomllib.load(open(os.path.join(SAMPLES, "dsk18.toml"), "rb"))

CELL_NAMES = [
    "DYN_NAND3",
    "DOMINO_AO22",
    "DOMINO_MUX4",
    "DYN_NAND2_DIAG",
    "DYN_NAND2_MF",
    "DYN_NAND3_LONG",
    "DYN_NAND3_PC",
    "PDYN_NOR2",
    "STATIC_NAND2",
    "DOMINO_OR16",
]


@pytest.fixture(scope="module")
def lib():
    return gdstk.read_gds(GDS)


@pytest.fixture(scope="module")
def cells(lib):
    return {c.name: c for c in lib.cells}


# ---------------------------------------------------------------- the file


def test_doctests_of_the_drawing_modules():
    # pytest's testpaths do not reach sample_layouts/, so run them here
    import doctest
    import importlib

    for mod in ("drawing", "blocks", "nand3_cells", "domino_cells", "more_cells", "make_samples"):
        result = doctest.testmod(importlib.import_module(f"sample_layouts.{mod}"))
        assert result.failed == 0 and result.attempted > 0, mod


def test_every_cell_is_its_own_top_cell_in_um(lib):
    # sample_layouts/README.md: one library, unit 1e-6 (µm), precision 1e-9, every cell a top cell
    assert sorted(c.name for c in lib.top_level()) == sorted(CELL_NAMES)
    assert len(lib.cells) == len(CELL_NAMES)
    assert lib.unit == pytest.approx(1e-6) and lib.precision == pytest.approx(1e-9)


def test_regenerating_gives_identical_bytes(tmp_path):
    # fixed timestamp + deterministic drawing => byte-for-byte the committed file
    out = tmp_path / "again.gds"
    assert make_samples.main([str(out)]) == 0
    assert out.read_bytes() == open(GDS, "rb").read()


def test_command_line_rejects_options(capsys):
    assert make_samples.main(["--help"]) == 2
    assert "usage" in capsys.readouterr().err


def test_layer_numbers_are_the_tech_files(cells):
    # the drawing module's table must be the tech file's [layers.*] gds pairs
    tech_layers = {name: tuple(t["gds"]) for name, t in TECH["layers"].items()}
    assert LAYERS == {n: tech_layers[n] for n in LAYERS} and set(LAYERS) == set(tech_layers)
    tech_labels = {n: tuple(t["labels"][0]) for n, t in TECH["layers"].items() if "labels" in t}
    assert LABEL_LAYERS == tech_labels
    allowed = set(tech_layers.values())
    for cell in cells.values():
        used = {(p.layer, p.datatype) for p in cell.polygons}
        assert used <= allowed, cell.name
        # every cell has transistors, contacts, metal1 and the nmos implant
        assert {(10, 0), (20, 0), (30, 0), (40, 0), (60, 0)} <= used, cell.name
        # ... and pmos in a pimplant inside an nwell
        assert {(61, 0), (70, 0)} <= used, cell.name


def test_labels_lie_inside_a_shape_of_their_layer(cells):
    by_text = {tt: name for name, tt in LABEL_LAYERS.items()}
    for cell in cells.values():
        assert cell.labels, cell.name
        for lab in cell.labels:
            layer = by_text[(lab.layer, lab.texttype)]
            shapes = cell.get_polygons(layer=LAYERS[layer][0], datatype=LAYERS[layer][1])
            inside = [Polygon(p.points).covers(Point(lab.origin)) for p in shapes]
            assert sum(inside) == 1, (cell.name, lab.text)


PORTS = {
    "DYN_NAND3": "VDD VSS CLK A B C X OUT",
    "DOMINO_AO22": "VDD VSS CLK A1 A2 B1 B2 X OUT FOOT",
    "DOMINO_MUX4": "VDD VSS CLK S0 S1 S2 S3 D0 D1 D2 D3 X OUT FOOT",
    "DYN_NAND2_DIAG": "VDD VSS CLK A B X OUT",
    "DYN_NAND2_MF": "VDD VSS CLK A B X OUT N1 N2",
    "DYN_NAND3_LONG": "VDD VSS CLK A B C X OUT N1 N2",
    "DYN_NAND3_PC": "VDD VSS CLK A B C X OUT N1 N2",
    "PDYN_NOR2": "VDD VSS CLKB A B XP OUTP",
    "STATIC_NAND2": "VDD VSS A B OUT",
    "DOMINO_OR16": "VDD VSS CLK X OUT FOOT "
    + " ".join(f"S{i} D{i}" for i in range(16)),
}


@pytest.mark.parametrize("name", CELL_NAMES)
def test_every_port_is_labelled_once(cells, name):
    texts = [lab.text for lab in cells[name].labels]
    assert sorted(texts) == sorted(PORTS[name].split())


def test_manhattan_cells_are_on_the_10nm_grid(cells):
    for cell in cells.values():
        if cell.name == "DYN_NAND2_DIAG":
            continue
        for p in cell.polygons:
            for x, y in p.points:
                assert abs(x * 100 - round(x * 100)) < 1e-6 and abs(y * 100 - round(y * 100)) < 1e-6
        for p in cell.polygons:
            for (xa, ya), (xb, yb) in zip(p.points, list(p.points[1:]) + [p.points[0]]):
                assert abs(xa - xb) < 1e-9 or abs(ya - yb) < 1e-9, cell.name


def _edges(points):
    return zip(points, list(points[1:]) + [points[0]])


def test_diag_cell_has_45_degree_diffusion_and_gate(cells):
    cell = cells["DYN_NAND2_DIAG"]
    for layer in (10, 20):
        slanted = [
            (a, b)
            for p in cell.get_polygons(layer=layer, datatype=0)
            for a, b in _edges(p.points)
            if abs(a[0] - b[0]) > 1e-3 and abs(a[1] - b[1]) > 1e-3
        ]
        assert slanted, layer
        # each non-Manhattan edge is at 45° (|dx| = |dy| to the 1 nm grid)
        for a, b in slanted:
            assert abs(abs(a[0] - b[0]) - abs(a[1] - b[1])) < 2.5e-3
    # the B gate crosses the 45° strip at right angles: its channel is a
    # 1.0 µm × 0.127·√2 µm rectangle turned by 45° (README; hand calculation)
    act = unary_union([Polygon(p.points) for p in cell.get_polygons(layer=10, datatype=0)])
    slanted_gate = [
        Polygon(p.points)
        for p in cell.get_polygons(layer=20, datatype=0)
        if any(abs(a[0] - b[0]) > 1e-3 and abs(a[1] - b[1]) > 1e-3 for a, b in _edges(p.points))
    ]
    assert len(slanted_gate) == 1
    channel = act.intersection(slanted_gate[0])
    assert channel.area == pytest.approx(1.0 * 0.127 * math.sqrt(2), rel=1e-3)


# ------------------------------------------------ an independent net tracer


def _polys(cell, layer):
    num, dt = LAYERS[layer]
    return [Polygon(p.points) for p in cell.get_polygons(layer=num, datatype=dt)]


def _parts(geom):
    geoms = [geom] if geom.geom_type == "Polygon" else list(geom.geoms)
    return [g for g in geoms if g.area > 1e-9]


def trace(cell):
    """Devices of a drawn cell: (type, gate, sorted (sd, sd), W, L) tuples.

    Channel = active ∩ poly, pieces = active − poly; contacts join the
    diffusion pieces, poly and metal1 shapes they overlap, vias metal1 and
    metal2; labels name the shape that contains them.  An unlabelled net
    is named ``?`` + the gates of the devices on it (e.g. ``?A+B``).
    W is half the channel edge shared with diffusion, L = area / W.
    """
    act = unary_union(_polys(cell, "active"))
    poly = unary_union(_polys(cell, "poly"))
    chans = _parts(act.intersection(poly))
    nodes = [("diff", g) for g in _parts(act.difference(poly))]
    for layer in ("poly", "metal1", "metal2"):
        nodes += [(layer, g) for g in _polys(cell, layer)]
    parent = list(range(len(nodes)))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for cut, joins in (("contact", ("diff", "poly", "metal1")), ("via1", ("metal1", "metal2"))):
        for c in _polys(cell, cut):
            hit = [i for i, (k, g) in enumerate(nodes) if k in joins and g.intersection(c).area > 1e-6]
            for h in hit[1:]:
                parent[find(h)] = find(hit[0])
    names = {}
    layer_of = {tt: name for name, tt in LABEL_LAYERS.items()}
    for lab in cell.labels:
        layer = layer_of[(lab.layer, lab.texttype)]
        (i,) = [i for i, (k, g) in enumerate(nodes) if k == layer and g.covers(Point(lab.origin))]
        names.setdefault(find(i), set()).add(lab.text)
    raw = []
    for ch in chans:
        (g,) = [i for i, (k, p) in enumerate(nodes) if k == "poly" and p.intersection(ch).area > 1e-6]
        sd = [
            i
            for i, (k, p) in enumerate(nodes)
            if k == "diff" and p.boundary.intersection(ch.boundary).length > 1e-6
        ]
        w = sum(nodes[i][1].boundary.intersection(ch.boundary).length for i in sd) / 2
        kind = "pmos" if any(p.covers(ch) for p in _polys(cell, "pimplant")) else "nmos"
        assert kind == "pmos" or any(p.covers(ch) for p in _polys(cell, "nimplant"))
        raw.append((kind, find(g), [find(i) for i in sd], w, ch.area / w))
    gates_on = {}
    for kind, g, sd, w, ln in raw:
        for s in sd:
            gates_on.setdefault(s, set()).add(g)

    def net(i):
        if i in names:
            (name,) = names[i]  # a net with two different labels is a short
            return name
        return "?" + "+".join(sorted(net(g) for g in gates_on[i]))

    return sorted(
        (kind, net(g), tuple(sorted(net(s) for s in sd)), round(w, 2), round(ln, 2))
        for kind, g, sd, w, ln in raw
    )


def _top(node="X", out="OUT"):
    """Precharge, keeper and receiver of an n-type stage (README table)."""
    return [
        ("pmos", "CLK", ("VDD", node), 0.6, 0.18),
        ("pmos", out, ("VDD", node), 0.3, 0.36),
        ("nmos", node, (out, "VSS"), 0.6, 0.18),
        ("pmos", node, (out, "VDD"), 1.2, 0.18),
    ]


def _legs(legs, footer_w):
    devs = [("nmos", "CLK", ("FOOT", "VSS"), footer_w, 0.18)]
    for s, d in legs:
        mid = "?" + "+".join(sorted((s, d)))
        devs += [("nmos", s, (mid, "X"), 1.0, 0.18), ("nmos", d, ("FOOT", mid), 1.0, 0.18)]
    return devs + _top()


_NAND3_STACK = [
    ("nmos", "A", ("?A+B", "X"), 1.0, 0.18),
    ("nmos", "B", ("?A+B", "?B+C"), 1.0, 0.18),
    ("nmos", "C", ("?B+C", "?C+CLK"), 1.0, 0.18),
    ("nmos", "CLK", ("?C+CLK", "VSS"), 1.2, 0.18),
]
_LONG_STACK = [
    ("nmos", "A", ("N1", "X"), 1.0, 0.18),
    ("nmos", "B", ("N1", "N2"), 1.0, 0.18),
    ("nmos", "C", ("?C+CLK", "N2"), 1.0, 0.18),
    ("nmos", "CLK", ("?C+CLK", "VSS"), 1.2, 0.18),
]

# The netlist each cell is meant to have, written from the cell list in sample_layouts/README.md.
EXPECTED = {
    "DYN_NAND3": _NAND3_STACK + _top(),
    "DYN_NAND3_LONG": _LONG_STACK + _top(),
    "DYN_NAND3_PC": _LONG_STACK + _top() + [("pmos", "CLK", ("N1", "VDD"), 0.6, 0.18)],
    "DOMINO_AO22": _legs([("A1", "A2"), ("B1", "B2")], 1.2),
    "DOMINO_MUX4": _legs([(f"S{i}", f"D{i}") for i in range(4)], 1.6),
    "DOMINO_OR16": _legs([(f"S{i}", f"D{i}") for i in range(16)], 2.0),
    "DYN_NAND2_DIAG": [
        ("nmos", "A", ("?A+B", "X"), 1.0, 0.18),
        ("nmos", "B", ("?A+B", "?B+CLK"), 1.0, 0.18),
        ("nmos", "CLK", ("?B+CLK", "VSS"), 1.0, 0.18),
    ]
    + _top(),
    "DYN_NAND2_MF": [("nmos", "A", ("N1", "X"), 0.5, 0.18)] * 2
    + [("nmos", "B", ("N1", "N2"), 0.5, 0.18)] * 2
    + [("nmos", "CLK", ("N2", "VSS"), 0.6, 0.18)] * 2
    + _top(),
    "PDYN_NOR2": [
        ("nmos", "CLKB", ("VSS", "XP"), 0.6, 0.18),
        ("pmos", "CLKB", ("?A+CLKB", "VDD"), 1.0, 0.18),
        ("pmos", "A", ("?A+B", "?A+CLKB"), 1.0, 0.18),
        ("pmos", "B", ("?A+B", "XP"), 1.0, 0.18),
        ("nmos", "XP", ("OUTP", "VSS"), 0.6, 0.18),
        ("pmos", "XP", ("OUTP", "VDD"), 1.2, 0.18),
    ],
    "STATIC_NAND2": [
        ("pmos", "A", ("OUT", "VDD"), 1.0, 0.18),
        ("pmos", "B", ("OUT", "VDD"), 1.0, 0.18),
        ("nmos", "A", ("?A+B", "OUT"), 1.0, 0.18),
        ("nmos", "B", ("?A+B", "VSS"), 1.0, 0.18),
    ],
}


@pytest.mark.parametrize("name", CELL_NAMES)
def test_cell_has_exactly_the_described_transistors(cells, name):
    want = sorted((k, g, tuple(sorted(sd)), w, ln) for k, g, sd, w, ln in EXPECTED[name])
    assert trace(cells[name]) == want


@pytest.mark.parametrize("name", CELL_NAMES)
def test_every_gate_reaches_0_2_um_past_its_active(cells, name):
    # sample_layouts/README.md: poly extends ≥ 0.2 µm beyond the active on both sides.  Every
    # gate is vertical except the 45° one, which is turned upright first;
    # then the poly must cover the channel grown by 0.2 µm along y.
    cell = cells[name]
    act = unary_union(_polys(cell, "active"))
    poly = unary_union(_polys(cell, "poly"))
    for ch in _parts(act.intersection(poly)):
        a, p = act, poly
        x0, y0, x1, y1 = ch.bounds
        if x1 - x0 > 0.5 and y1 - y0 > 0.5:  # the 45° channel: turn it upright
            ch, a, p = (rotate(g, -45, origin=(0, 0)) for g in (ch, act, poly))
        x0, y0, x1, y1 = ch.bounds
        grown = box(x0 + 2e-3, y0 - 0.2 + 2e-3, x1 - 2e-3, y1 + 0.2 - 2e-3)
        assert p.covers(grown), (name, ch.bounds)
        assert not a.intersects(box(x0 + 2e-3, y1 + 2e-3, x1 - 2e-3, y1 + 0.2 - 2e-3))


def test_nand3_has_eight_transistors(cells):
    # precharge, keeper, A, B, C, footer and the two inverter devices
    assert len(trace(cells["DYN_NAND3"])) == 8


def test_multi_finger_cell_has_two_poly_fingers_per_device(cells):
    cell = cells["DYN_NAND2_MF"]
    act = unary_union(_polys(cell, "active"))
    polys = _polys(cell, "poly")
    for lab in cell.labels:
        if lab.text in ("A", "B"):
            (g,) = [p for p in polys if p.covers(Point(lab.origin))]
            assert len(_parts(act.intersection(g))) == 2, lab.text
    # the footer fingers belong to the CLK poly, which also gates the precharge
    (clk,) = [p for p in polys if any(p.covers(Point(l.origin)) for l in cell.labels if l.text == "CLK")]
    assert len(_parts(act.intersection(clk))) == 3


# ------------------------------------------- dimensions stated in the README


def _pieces(cell):
    act = unary_union(_polys(cell, "active"))
    poly = unary_union(_polys(cell, "poly"))
    return sorted(_parts(act.difference(poly)), key=lambda g: (g.bounds[1], g.bounds[0]))


def _nmos_stack_pieces(mid):
    """Hand calculation (README): stack pieces left to right as
    (length, W, area, perimeter); n3 is 0.13 µm at W 1.2 then 0.13 µm at
    W 1.0, so its perimeter is 1.2 + 1.0 (gate edges) + 0.26 (bottom) +
    0.26 (top) + 0.2 (step)."""
    return [
        (0.48, 1.2, 0.48 * 1.2, 2 * (0.48 + 1.2)),  # VSS
        (0.26, 1.2, 0.13 * 1.2 + 0.13 * 1.0, 1.2 + 1.0 + 0.26 + 0.26 + 0.2),  # n3
        (mid, 1.0, mid * 1.0, 2 * (mid + 1.0)),  # n2
        (mid, 1.0, mid * 1.0, 2 * (mid + 1.0)),  # n1
        (0.48, 1.0, 0.48 * 1.0, 2 * (0.48 + 1.0)),  # X
    ]


@pytest.mark.parametrize("name,mid,x0", [("DYN_NAND3", 0.26, 1.0), ("DYN_NAND3_LONG", 0.48, 13.6)])
def test_nand3_stack_pieces_match_the_readme(cells, name, mid, x0):
    stack = [g for g in _pieces(cells[name]) if g.bounds[1] == pytest.approx(1.4) and g.bounds[2] < x0 + 3]
    want = _nmos_stack_pieces(mid)
    assert len(stack) == len(want)
    x = x0
    for g, (length, w, area, perim) in zip(stack, want):
        assert g.bounds[0] == pytest.approx(x)
        assert g.bounds[2] - g.bounds[0] == pytest.approx(length)
        assert g.bounds[3] - g.bounds[1] == pytest.approx(w)
        assert g.area == pytest.approx(area) and g.length == pytest.approx(perim)
        x = g.bounds[2] + 0.18  # every stack gate is 0.18 µm long


def _metal1_of(cell, text):
    (lab,) = [l for l in cell.labels if l.text == text]
    (shape,) = [g for g in _polys(cell, "metal1") if g.covers(Point(lab.origin))]
    return shape


# Hand calculation of the serpentines (README): centre-line lengths in µm.
# N2: strap 2.84−1.90, escape 14.94−1.00, then 3 jogs of 0.56 and 3 runs of
# 12.00.  N1: strap 3.34−1.90, escape 15.60−1.00, 3 jogs, 3 runs.  The PC
# cell adds 6.14−5.02 up and 13.84−13.00 across to the secondary precharge.
SERPENTINE_UM = {
    ("DYN_NAND3_LONG", "N2"): (2.84 - 1.90) + (14.94 - 1.00) + 3 * 0.56 + 3 * 12.0,
    ("DYN_NAND3_LONG", "N1"): (3.34 - 1.90) + (15.60 - 1.00) + 3 * 0.56 + 3 * 12.0,
    ("DYN_NAND3_PC", "N1"): (3.34 - 1.90) + (15.60 - 1.00) + 3 * 0.56 + 3 * 12.0 + 1.12 + 0.84,
}


@pytest.mark.parametrize("cell_net", sorted(SERPENTINE_UM))
def test_serpentine_area_and_perimeter(cells, cell_net):
    # a Manhattan wire of width w and centre-line length L with square ends
    # (extended by w/2) has area w·(L + w) and perimeter 2·L + 4·w, whatever
    # its turns (each 90° turn adds w/2 outside and takes w/2 inside)
    name, net = cell_net
    length, w = SERPENTINE_UM[cell_net], 0.28
    shape = _metal1_of(cells[name], net)
    assert 40 <= length <= 60
    assert shape.area == pytest.approx(w * (length + w), abs=1e-6)
    assert shape.length == pytest.approx(2 * length + 4 * w, abs=1e-6)


# ----------------------------------------- the charge-sharing intent, by hand


def _junction(mos, area, field, gate_edge):
    """Zero-bias junction capacitance, SPICE level-1 area–perimeter form
    C = CJ·A + CJSW·P_field + CJSWG·P_gate (ngspice manual, MOS level 1)."""
    t = TECH["mos"][mos]
    return t["cj"] * area + t["cjsw"] * field + t["cjswg"] * gate_edge


def _wire(shape):
    m1 = TECH["layers"]["metal1"]
    return m1["area"] * shape.area + m1["fringe"] * shape.length


def _node_caps(cells, name):
    """Hand calculation of C_X, C_N1, C_N2 (fF) from the README dimensions
    and the dsk18 tech numbers; the metal1 wire is measured from the GDS."""
    cgo = {m: TECH["mos"][m]["cgo"] for m in ("nmos", "pmos")}
    cox = TECH["mos"]["nmos"]["cox"]
    # X: stack X piece 0.48 × 1.0 (nmos), precharge drain 0.48 × 0.6 and
    # keeper drain 0.48 × 0.3 (pmos); inverter gates 0.6 and 1.2 µm wide,
    # L 0.18; overlap cgo per side per µm of W (both sides of the inverter
    # gates, one side of A, precharge and keeper); poly of the inverter gate
    # left out (small, and only raises C_X).
    c_x = (
        _junction("nmos", 0.48 * 1.0, 0.48 + 0.48 + 1.0, 1.0)
        + _junction("pmos", 0.48 * 0.6, 0.48 + 0.48 + 0.6, 0.6)
        + _junction("pmos", 0.48 * 0.3, 0.48 + 0.48 + 0.3, 0.3)
        + cox * 0.18 * (0.6 + 1.2)
        + 2 * (cgo["nmos"] * 0.6 + cgo["pmos"] * 1.2)
        + cgo["nmos"] * 1.0
        + cgo["pmos"] * (0.6 + 0.3)
        + _wire(_metal1_of(cells[name], "X"))
    )
    mid = 0.26 if name == "DYN_NAND3" else 0.48
    # n1, n2: one piece mid × 1.0 between two gates (two gate edges of 1.0,
    # two field edges of mid), overlap of the two devices beside it
    c_mid = _junction("nmos", mid * 1.0, 2 * mid, 2 * 1.0) + 2 * cgo["nmos"] * 1.0
    c_n = {"N1": c_mid, "N2": c_mid}
    if name != "DYN_NAND3":
        c_n = {n: c_mid + _wire(_metal1_of(cells[name], n)) for n in c_n}
    if name == "DYN_NAND3_PC":
        # the secondary precharge drain 0.48 × 0.6 and its overlap
        c_n["N1"] += _junction("pmos", 0.48 * 0.6, 0.48 + 0.48 + 0.6, 0.6) + cgo["pmos"] * 0.6
    return c_x, c_n["N1"], c_n["N2"]


def _receiver_threshold():
    """Square-law switching threshold of the 0.6/0.18 – 1.2/0.18 inverter,
    VM = (VDD − |VTp| + VTn·r)/(1 + r), r = √(kpn(W/L)n / kpp(W/L)p)
    (Rabaey, Chandrakasan & Nikolić, Digital Integrated Circuits, ch. 5,
    long-channel form; from memory)."""
    n, p = TECH["mos"]["nmos"], TECH["mos"]["pmos"]
    r = math.sqrt(n["kp"] * (0.6 / 0.18) / (p["kp"] * (1.2 / 0.18)))
    return (TECH["process"]["vdd"] - abs(p["vt0"]) + n["vt0"] * r) / (1 + r)


def test_long_wires_make_the_worst_case_fail_and_the_fix_pass(cells):
    # Charge conservation over X, n1, n2 for the worst pattern A=B=1, C=0
    # (Rabaey et al., Digital Integrated Circuits, dynamic logic, charge
    # sharing; from memory): V = Σ C_i·V_i(0) / Σ C_i.
    vdd = TECH["process"]["vdd"]
    guard = TECH["check"]["guard"]
    vm = _receiver_threshold()
    assert vm == pytest.approx(0.803, abs=1e-3)  # hand: r = 1.4676, VM = 1.9804/2.4676

    c_x, c1, c2 = _node_caps(cells, "DYN_NAND3")
    v_short = c_x * vdd / (c_x + c1 + c2)
    c_x, c1, c2 = _node_caps(cells, "DYN_NAND3_LONG")
    v_long = c_x * vdd / (c_x + c1 + c2)
    c_x, c1, c2 = _node_caps(cells, "DYN_NAND3_PC")
    v_fixed = (c_x + c1) * vdd / (c_x + c1 + c2)  # n1 precharged to VDD

    assert v_short > 1.2  # clearly above ~0.9 V
    assert v_long < 0.75  # clearly below ~0.9 V and below VM + guard
    assert v_long < vm + guard < v_short
    assert v_fixed > vm + guard + 0.3


# ---------------------------------------------------------- benchmark array


def _transistors(cell):
    act = unary_union(_polys(cell, "active"))
    return len(_parts(act.intersection(unary_union(_polys(cell, "poly")))))


def test_nand3_array_repeats_the_cell(tmp_path):
    lib = make_samples.nand3_array(4, 3)
    (top,) = lib.top_level()
    (ref,) = top.references
    assert ref.cell.name == "DYN_NAND3"
    assert (ref.repetition.columns, ref.repetition.rows) == (4, 3)
    # it survives a GDS round trip with the library units
    path = tmp_path / "array.gds"
    lib.write_gds(str(path))
    back = gdstk.read_gds(str(path))
    assert back.unit == pytest.approx(1e-6) and back.precision == pytest.approx(1e-9)


def test_flat_array_has_8_transistors_per_copy_and_separate_rows():
    (top,) = make_samples.nand3_array(3, 2, flatten=True).top_level()
    assert not top.references
    assert _transistors(top) == 8 * 3 * 2
    # each row's rails join along x, but no rail touches another: the four
    # rail points (VSS, VDD of both rows) lie in four different metal1 shapes
    m1 = unary_union(_polys(top, "metal1"))
    height = 8.2 + 0.6  # cell bounding box (nwell top 8.2) plus the row gap
    ys = (0.3, 7.7, height + 0.3, height + 7.7)
    rails = {i for i, g in enumerate(_parts(m1)) for y in ys if g.covers(Point(1.0, y))}
    assert len(rails) == 4


def test_array_rejects_empty():
    with pytest.raises(ValueError):
        make_samples.nand3_array(0, 3)


# --------------------------------------------------- schematics in ngspice


def _models():
    """Level-1 models from the dsk18 tech numbers (REFERENCE: ngspice
    manual, MOS level 1; unit conversions 1 fF/µm² = 1e-3 F/m², 1 fF/µm =
    1e-9 F/m, 1 µA/V² = 1e-6 A/V²)."""
    lines = []
    for model, kind, mos in (("nch", "nmos", "nmos"), ("pch", "pmos", "pmos")):
        t = TECH["mos"][mos]
        lines.append(
            f".model {model} {kind} level=1 vto={t['vt0']} gamma={t['gamma']} phi={t['phi']}"
            f" kp={t['kp'] * 1e-6} cj={t['cj'] * 1e-3} cjsw={t['cjsw'] * 1e-9} mj={t['mj']}"
            f" mjsw={t['mjsw']} pb={t['pb']} cgso=0 cgdo=0 cgbo=0"
        )
    return "\n".join(lines)


@pytest.mark.ngspice
@pytest.mark.parametrize("name", ["DYN_NAND3", "DYN_NAND3_LONG"])
def test_schematic_works_as_a_footed_dynamic_nand3(name):
    from ngspice_run import run_deck

    path = os.path.abspath(os.path.join(SAMPLES, f"{name}.sp"))
    # 0–2 ns evaluate with A=B=C=1; 2–6 ns precharge, inputs rise again at
    # 4 ns with the footer off; 6–8 ns evaluate with C=0 (the charge-sharing
    # pattern A=B=1); 8–10 ns C=1.
    deck = f"""* {name} in ngspice
.include {path}
{_models()}
VDD vdd 0 1.8
VCLK clk 0 PWL(0 1.8 2n 1.8 2.05n 0 6n 0 6.05n 1.8)
VA a 0 PWL(0 1.8 1.9n 1.8 1.95n 0 4n 0 4.05n 1.8)
VB b 0 PWL(0 1.8 1.9n 1.8 1.95n 0 4n 0 4.05n 1.8)
VC c 0 PWL(0 1.8 1.9n 1.8 1.95n 0 4n 0 4.05n 1.8 5.9n 1.8 5.95n 0 8n 0 8.05n 1.8)
X1 vdd 0 clk a b c x out {name}
.tran 5p 10n
.control
run
meas tran out_eval find v(out) at=1.9n
meas tran x_pre find v(x) at=3.9n
meas tran x_footer_off find v(x) at=5.9n
meas tran out_share max v(out) from=6.1n to=8n
meas tran x_end find v(x) at=10n
meas tran out_end find v(out) at=10n
.endc
.end
"""
    v = run_deck(deck)
    assert v["out_eval"] > 1.7  # all inputs high, clock high: X pulled down
    assert v["x_pre"] > 1.75  # precharged
    assert v["x_footer_off"] > 1.7  # inputs high but the footer is off
    assert v["out_share"] < 0.2  # A=B=1, C=0: X stays high (keeper on)
    assert v["x_end"] < 0.1 and v["out_end"] > 1.7


def test_schematics_declare_the_same_ports_and_devices():
    # sample_layouts/README.md: .subckt NAME VDD VSS CLK inputs X OUT; W/L as drawn
    for name in ("DYN_NAND3", "DYN_NAND3_LONG"):
        text = open(os.path.join(SAMPLES, f"{name}.sp")).read()
        (sub,) = [l for l in text.splitlines() if l.lower().startswith(".subckt")]
        assert sub.split()[1:] == [name, "VDD", "VSS", "CLK", "A", "B", "C", "X", "OUT"]
        assert sum(1 for l in text.splitlines() if l[:1].upper() == "M") == 8
    nand3 = open(os.path.join(SAMPLES, "DYN_NAND3.sp")).read()
    # AD/AS only on contacted nodes: MB (n1–n2) has none, MA only on X
    (mb,) = [l for l in nand3.splitlines() if l.startswith("MB ")]
    assert "AD=" not in mb and "AS=" not in mb
    (ma,) = [l for l in nand3.splitlines() if l.startswith("MA ")]
    assert "AD=0.48p" in ma and "AS=" not in ma  # X piece 0.48 × 1.0 µm
    assert ".param" in open(os.path.join(SAMPLES, "DYN_NAND3_LONG.sp")).read()
