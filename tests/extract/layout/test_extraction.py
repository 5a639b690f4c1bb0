"""Extraction of small drawn cells against hand calculations.

Every expected number below is worked out by hand from the drawing in
tests/extract/drawing.py and the dsk18 coefficients (nmos cj 0.95 fF/µm²,
cjsw = cjswg 0.22 fF/µm, cox 8.5 fF/µm², cgo 0.25 fF/µm; poly area 0.09,
fringe 0.04; metal1 area 0.035, fringe 0.045).  The capacitance formulas
are the SPICE area–perimeter junction model C = CJ·A + CJSW·P and the
plate-plus-fringe wire estimate (see extract/capacitance.py).
"""

import math

import gdstk
import pytest

from drawing import ACTIVE, M1, NIMP, POLY, TECH, label, nmos_stack, rect, write
from extract.layout.pipeline import extract_layout
from extract.techfile import load_tech


@pytest.fixture(scope="module")
def tech():
    return load_tech(TECH)


def caps(circuit):
    return {(n, k): v for n, net in circuit.nets.items() for k, v in net.cap.as_dict().items()}


def test_two_device_stack_by_hand(tmp_path, tech):
    c = extract_layout(write(tmp_path, "t.gds", nmos_stack(gdstk.Cell("T"))), tech)
    m1, m2 = c.devices
    # W = half the shared channel edge (2 × 1.0 µm) = 1.0; L = 0.18 × 1.0 / 1.0
    assert (m1.gate, m1.w_um, m1.l_um) == ("A", 1.0, 0.18)
    assert (m2.gate, m2.w_um, m2.l_um) == ("B", 1.0, 0.18)
    assert {m1.drain, m1.source} == {"X", "net1"} and {m2.drain, m2.source} == {"net1", "VSS"}
    # middle piece 1.18..1.80 × 1: A = 0.62 µm², field edges 2 × 0.62, gate edges 2 × 1.0
    j = c.nets["net1"].junctions["nmos"]
    assert (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um) == pytest.approx((0.62, 1.24, 2.0))
    p = c.nets["net1"].cap
    assert p.junction_area == pytest.approx(0.95 * 0.62)
    assert p.junction_sidewall == pytest.approx(0.22 * 1.24)
    assert p.junction_gate_edge == pytest.approx(0.22 * 2.0)
    assert p.overlap == pytest.approx(2 * 0.25 * 1.0)  # cgo·W from each device
    assert p.wire == 0 and p.gate == 0
    # X: piece 0..1 × 1 (A 1.0, field 3.0, gate 1.0) + metal1 0.4 × 0.4
    x = c.nets["X"].cap
    assert x.junction_area == pytest.approx(0.95)
    assert x.junction_sidewall == pytest.approx(0.66)
    assert x.wire == pytest.approx(0.035 * 0.16 + 0.045 * 1.6)
    assert c.nets["X"].cap_ff == pytest.approx(0.95 + 0.66 + 0.22 + 0.0776 + 0.25)
    # gate A: cox·W·L = 8.5 × 0.18; overlap 2·cgo·W; poly outside diffusion
    # 0.18 × 0.6 µm² and outline outside diffusion 3.56 − 2 × 1.0 µm
    a = c.nets["A"].cap
    assert a.gate == pytest.approx(8.5 * 0.18)
    assert a.overlap == pytest.approx(0.5)
    assert a.wire == pytest.approx(0.09 * 0.108 + 0.04 * 1.56)
    # AD/AS/PD/PS: the shared piece is given to one device only; PD/PS
    # are field edges plus that device's own gate edge.
    total_area = m1.ad_um2 + m1.as_um2 + m2.ad_um2 + m2.as_um2
    assert total_area == pytest.approx(1.0 + 0.62 + 1.02)
    owner, other = (m1, m2)
    sd = {owner.drain: (owner.ad_um2, owner.pd_um), owner.source: (owner.as_um2, owner.ps_um)}
    assert sd["net1"] == pytest.approx((0.62, 1.24 + 1.0))
    sd2 = {other.drain: (other.ad_um2, other.pd_um), other.source: (other.as_um2, other.ps_um)}
    assert sd2["net1"] == pytest.approx((0.0, 1.0))
    assert sd2["VSS"] == pytest.approx((1.02, 3.04 + 1.0))
    assert c.nets["VSS"].role == "ground" and c.nets["X"].labelled and not c.nets["net1"].labelled
    assert c.findings == []


def test_45_degree_channels(tmp_path, tech):
    cell = gdstk.Cell("D")
    # A 45° diffusion strip, 1 µm tall measured vertically, vertices on grid.
    cell.add(gdstk.Polygon([(0, 0), (3, 3), (3, 4), (0, 1)], layer=ACTIVE))
    rect(cell, POLY, 1.0, -1.0, 1.2, 5.0)
    # A horizontal strip crossed by a 45° poly strip.
    rect(cell, ACTIVE, 5, 0, 9, 1)
    cell.add(gdstk.Polygon([(6, -1), (6.2, -1), (9.2, 2), (9.0, 2)], layer=POLY))
    rect(cell, NIMP, -1, -2, 10, 6)
    c = extract_layout(write(tmp_path, "d.gds", cell), tech)
    d1, d2 = c.devices
    # Vertical poly over the 45° strip: each shared poly edge runs 1 µm
    # (the strip's vertical thickness), W = 1; the channel is a
    # parallelogram 0.2 wide and 1 tall, area 0.2, L = 0.2.
    assert (d1.w_um, d1.l_um) == pytest.approx((1.0, 0.2))
    # 45° poly over the horizontal strip: each shared edge runs from y = 0 to
    # y = 1 at 45°, √2 long, W = √2; area 0.2 × 1, L = 0.2 / √2.
    assert d2.w_um == pytest.approx(math.sqrt(2))
    assert d2.l_um == pytest.approx(0.2 / math.sqrt(2))


def test_bent_gate(tmp_path, tech):
    cell = gdstk.Cell("L")
    rect(cell, ACTIVE, 0, 0, 4, 3)
    rect(cell, NIMP, -1, -1, 5, 4)
    cell.add(gdstk.Polygon([(1, -0.5), (1.2, -0.5), (1.2, 1.8), (4.5, 1.8), (4.5, 2.0), (1, 2.0)], layer=POLY))
    c = extract_layout(write(tmp_path, "l.gds", cell), tech)
    (d,) = c.devices
    # inner edge 1.8 + 2.8, outer edge 2.0 + 3.0: W = (4.6 + 5.0) / 2;
    # channel area 0.2·2.0 + 3.0·0.2 − 0.2·0.2 (corner counted once) = 0.96
    assert d.w_um == pytest.approx(4.8)
    assert d.l_um == pytest.approx(0.96 / 4.8)


def test_poly_that_does_not_split_diffusion_is_reported(tmp_path, tech):
    cell = gdstk.Cell("U")
    rect(cell, ACTIVE, 0, 0, 3, 1)
    rect(cell, POLY, 1.0, -0.3, 1.18, 0.5)  # ends inside the diffusion
    c = extract_layout(write(tmp_path, "u.gds", cell), tech)
    assert c.devices == []
    (f,) = c.findings
    assert "does not split" in f.message
    assert f.location_um[0] == pytest.approx(1.09, abs=0.1)


def _same_caps(a, b):
    assert sorted(round(n.cap_ff, 9) for n in a.nets.values()) == pytest.approx(
        sorted(round(n.cap_ff, 9) for n in b.nets.values())
    )
    key = lambda d: (d.type, round(d.w_um, 6), round(d.l_um, 6))  # noqa: E731
    assert sorted(map(key, a.devices)) == sorted(map(key, b.devices))
    # which device carries a shared piece may change with the drawing order,
    # but every junction is counted once either way
    total = lambda c: sum(d.ad_um2 + d.as_um2 for d in c.devices)  # noqa: E731
    assert total(a) == pytest.approx(total(b))


@pytest.mark.parametrize(
    "rotation, reflect",
    [(math.pi / 2, False), (math.pi, True), (3 * math.pi / 2, True), (0.0, True)],
)
def test_rotated_and_mirrored_instance_matches_flat(tmp_path, tech, rotation, reflect):
    # Source: geometry is invariant under rigid motions, so devices and
    # capacitances of a transformed instance equal those of the flat cell.
    flat = extract_layout(write(tmp_path, "f.gds", nmos_stack(gdstk.Cell("T"))), tech)
    child = nmos_stack(gdstk.Cell("T"))
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(child, (7.3, -2.1), rotation=rotation, x_reflection=reflect))
    inst = extract_layout(write(tmp_path, "h.gds", top, child), tech, "TOP")
    _same_caps(flat, inst)
    assert inst.nets["X"].cap.as_dict() == pytest.approx(flat.nets["X"].cap.as_dict())


def test_array_instance(tmp_path, tech):
    flat = extract_layout(write(tmp_path, "f.gds", nmos_stack(gdstk.Cell("T"))), tech)
    child = nmos_stack(gdstk.Cell("T"))
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(child, (0, 0), columns=3, rows=2, spacing=(5, 6)))
    c = extract_layout(write(tmp_path, "a.gds", top, child), tech)
    assert len(c.devices) == 6 * len(flat.devices)
    # Supply nets with one name are one net; repeated signal labels are
    # kept apart (X, X_2, ...), each with the flat cell's capacitance.
    xs = [n for n in c.nets.values() if n.name == "X" or n.name.startswith("X_")]
    assert len(xs) == 6
    for n in xs:
        assert n.cap_ff == pytest.approx(flat.nets["X"].cap_ff)
    assert c.nets["VSS"].cap_ff == pytest.approx(6 * flat.nets["VSS"].cap_ff)
    assert any("names 6 unconnected nets" in f.message for f in c.findings)


def test_magnified_instance_scales(tmp_path, tech):
    flat = extract_layout(write(tmp_path, "f.gds", nmos_stack(gdstk.Cell("T"))), tech)
    child = nmos_stack(gdstk.Cell("T"))
    top = gdstk.Cell("TOP")
    top.add(gdstk.Reference(child, (0, 0), magnification=2))
    c = extract_layout(write(tmp_path, "m.gds", top, child), tech, "TOP")
    # Hand scaling: lengths ×2, areas ×4.
    assert [v for d in c.devices for v in (d.w_um, d.l_um)] == pytest.approx([2.0, 0.36, 2.0, 0.36])
    j0, j = flat.nets["net1"].junctions["nmos"], c.nets["net1"].junctions["nmos"]
    assert j.area_um2 == pytest.approx(4 * j0.area_um2)
    assert j.field_perimeter_um == pytest.approx(2 * j0.field_perimeter_um)


def test_nm_and_um_database_units_agree(tmp_path, tech):
    um = extract_layout(write(tmp_path, "um.gds", nmos_stack(gdstk.Cell("T"))), tech)
    cell = gdstk.Cell("T")
    nmos_stack(cell)
    for p in cell.polygons:
        p.scale(1000)
    for lab in cell.labels:
        lab.origin = (lab.origin[0] * 1000, lab.origin[1] * 1000)
    nm = extract_layout(write(tmp_path, "nm.gds", cell, unit=1e-9, precision=1e-9), tech)
    assert caps(nm) == pytest.approx(caps(um))
    assert [d.name for d in nm.devices] == [d.name for d in um.devices]
    for a, b in zip(nm.devices, um.devices):
        assert (a.w_um, a.l_um, a.ad_um2, a.as_um2, a.pd_um, a.ps_um) == pytest.approx(
            (b.w_um, b.l_um, b.ad_um2, b.as_um2, b.pd_um, b.ps_um)
        )


def test_oasis_reads_like_gdsii(tmp_path, tech):
    from drawing import library

    gds = extract_layout(write(tmp_path, "t.gds", nmos_stack(gdstk.Cell("T"))), tech)
    path = str(tmp_path / "t.oas")
    library(nmos_stack(gdstk.Cell("T"))).write_oas(path)
    oas = extract_layout(path, tech)
    assert caps(oas) == pytest.approx(caps(gds))


def test_paths_become_polygons(tmp_path, tech):
    # A metal1 path 10 µm long, 0.4 µm wide, from the X contact: its wire
    # capacitance is area 0.035 × (10 × 0.4) + fringe 0.045 × 2 × (10 + 0.4)
    # added to X (the path overlaps the existing 0.4 × 0.4 pad, which merges).
    cell = nmos_stack(gdstk.Cell("T"))
    base = extract_layout(write(tmp_path, "a.gds", cell), tech).nets["X"].cap.wire
    cell2 = nmos_stack(gdstk.Cell("T"))
    cell2.add(gdstk.FlexPath([(0.2, 0.5), (-9.8, 0.5)], 0.4, layer=M1))
    got = extract_layout(write(tmp_path, "b.gds", cell2), tech).nets["X"].cap.wire
    pad_only = 0.035 * 0.16 + 0.045 * 1.6
    merged = 0.035 * (0.16 + 4.0) + 0.045 * (2 * (10.4 + 0.4))
    assert base == pytest.approx(pad_only)
    assert got == pytest.approx(merged)


def test_label_conflict_warns(tmp_path, tech):
    cell = nmos_stack(gdstk.Cell("T"))
    label(cell, "DYN", 0.45, 0.45)
    c = extract_layout(write(tmp_path, "c.gds", cell), tech)
    assert "DYN" in c.nets and "X" not in c.nets  # 'DYN' sorts before 'X'
    assert any("'DYN', 'X'" in f.message for f in c.findings)


def test_labels_snap_to_the_grid_without_negative_zero(tmp_path, tech):
    # Hand calculation: the database unit is 1 nm = 0.001 µm; a label drawn
    # at (-0.001, 0.004) µm in a cell placed with magnification 0.4 lands at
    # (-0.0004, 0.0016) µm = (-0.4, 1.6) units, which round to (0, 2) units
    # = (0.0, 0.002) µm; 0 units is +0.0 µm, not -0.0, so a finding at it
    # prints "(0.0, 0.002)"
    from drawing import library
    from extract.layout.reader import read_layout

    child = gdstk.Cell("C")
    label(child, "STRAY", -0.001, 0.004, layer=POLY)
    top = gdstk.Cell("T")
    top.add(gdstk.Reference(child, (0, 0), magnification=0.4))
    path = str(tmp_path / "s.gds")
    library(top, child).write_gds(path)
    flat = read_layout(path, "T")
    (lab,) = flat.labels
    assert (lab.x, lab.y) == (0.0, 0.002)
    assert math.copysign(1.0, lab.x) == 1.0
