"""Schematic–layout matching (analyze.compare.match).

Sources named beside each check:
- "hand": the expected pairing worked out by inspection of the two small
  circuits written out in the test (which device sits where in the stack).
- "identity": a circuit compared with itself after a trip through the SPICE
  writer and the schematic reader must pair every net and device with its
  own copy (names made SPICE-safe by extract.writers.spice.spice_net_names).
"""

from __future__ import annotations

import copy
from pathlib import Path

import pytest

from analyze.compare.groups import merge_parallel
from analyze.compare.match import match_circuits
from extract.circuit import Circuit, Device, Net
from extract.errors import InputError
from extract.netlist.reader import parse_schematic, read_schematic
from extract.tech import MosParams, NetRoles, Tech

SAMPLES = Path(__file__).resolve().parents[3] / "sample_layouts"

_P = dict(gamma=0.4, phi=0.8, kp=200.0, cox=8.0, cgo=0.0, cj=1.0, cjsw=0.2, cjswg=0.2,
          mj=0.5, mjsw=0.33, pb=0.8, pbsw=0.8)
TECH = Tech("hand", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {},
            {"nmos": MosParams("nmos", vt0=0.45, models=("nch",), **_P),
             "pmos": MosParams("pmos", vt0=-0.45, models=("pch",), **_P)})

#: Footed dynamic NAND2 with keeper and inverter; the footer has NF=2.
SCHEMATIC = """
.subckt DYN2 VDD VSS CLK A B X OUT
MP   X   CLK VDD VDD pch W=0.6u L=0.18u
MK   X   OUT VDD VDD pch W=0.3u L=0.36u
MA   X   A   n1  VSS nch W=1u   L=0.18u
MB   n1  B   n2  VSS nch W=1u   L=0.18u
MF   n2  CLK VSS VSS nch W=1.2u L=0.18u NF=2
MIN  OUT X   VSS VSS nch W=0.6u L=0.18u
MIP  OUT X   VDD VDD pch W=1.2u L=0.18u
.ends
"""


def schematic():
    return parse_schematic(SCHEMATIC, "dyn2.sp", TECH)


def layout(devices):
    """A layout-like circuit: generated internal names, labelled ports."""
    names = {n for d in devices for n in (d.drain, d.gate, d.source)}
    nets = {n: Net(n, role=TECH.role_of(n), labelled=not n.startswith("net"),
                   labels=() if n.startswith("net") else (n,)) for n in sorted(names)}
    return Circuit("DYN2", nets, devices, source="dyn2.gds")


def layout_devices():
    # As an extractor would number them, drain/source in any order, the footer as two
    # separate fingers of 0.6 µm.
    return [
        Device("M1", "nmos", "net9", "CLK", "VSS", 0.6, 0.18),
        Device("M2", "nmos", "VSS", "CLK", "net9", 0.6, 0.18),
        Device("M3", "nmos", "net9", "B", "net4", 1.0, 0.18),
        Device("M4", "nmos", "X", "A", "net4", 1.0, 0.18),
        Device("M5", "pmos", "VDD", "CLK", "X", 0.6, 0.18),
        Device("M6", "pmos", "X", "OUT", "VDD", 0.3, 0.36),
        Device("M7", "nmos", "OUT", "X", "VSS", 0.6, 0.18),
        Device("M8", "pmos", "VDD", "X", "OUT", 1.2, 0.18),
    ]


def mismatch(devices, **kw) -> str:
    with pytest.raises(InputError) as info:
        match_circuits(schematic(), layout(devices), **kw)
    return str(info.value)


def edit(name, **changes):
    devs = layout_devices()
    for d in devs:
        if d.name == name:
            for k, v in changes.items():
                setattr(d, k, v)
    return devs


def test_match_of_a_hand_built_pair():
    m = match_circuits(schematic(), layout(layout_devices()))
    # hand: net4 is between the A and B devices (n1), net9 between B and the footer (n2)
    assert m.net_map == {"A": "A", "B": "B", "CLK": "CLK", "OUT": "OUT", "VDD": "VDD",
                         "VSS": "VSS", "X": "X", "net4": "n1", "net9": "n2"}
    # hand: the two layout fingers pair with the schematic's NF=2 fingers MF.1, MF.2
    assert m.device_map == {"M1": "MF.1", "M2": "MF.2", "M3": "MB", "M4": "MA", "M5": "MP",
                            "M6": "MK", "M7": "MIN", "M8": "MIP"}
    assert (("M1", "M2"), ("MF.1", "MF.2")) in m.groups
    assert m.notes == []


def test_one_device_of_the_total_width_matches_two_fingers():
    # hand: a single 1.2 µm footer is the same transistor as two 0.6 µm fingers
    devs = [d for d in layout_devices() if d.name != "M2"]
    devs[0].w_um = 1.2
    m = match_circuits(schematic(), layout(devs))
    assert m.device_map["M1"] == "MF.1" and (("M1",), ("MF.1", "MF.2")) in m.groups


def test_parallel_merge_keeps_different_lengths_apart():
    c = layout([Device("M1", "nmos", "a", "g", "b", 0.5, 0.18), Device("M2", "nmos", "b", "g", "a", 0.5, 0.18),
                Device("M3", "nmos", "a", "g", "b", 0.5, 0.181), Device("M4", "nmos", "a", "g", "b", 0.5, 0.36)])
    # hand: L 0.181 is within 2 % of 0.18; 0.36 is not
    assert [(g.names, g.w) for g in merge_parallel(c)] == [(("M1", "M2", "M3"), 1.5), (("M4",), 0.5)]


def test_swapped_stack_order_is_reported():
    devs = edit("M3", gate="A")
    devs = [d if d.name != "M4" else Device("M4", "nmos", "X", "B", "net4", 1.0, 0.18) for d in devs]
    assert mismatch(devs) == (
        "dyn2.sp: schematic and layout differ: stack order differs: "
        "layout X–[B]–net4–[A]–net9–[CLK]–VSS, schematic X–[A]–n1–[B]–n2–[CLK]–VSS")


def test_missing_device_is_reported():
    devs = [d for d in layout_devices() if d.name != "M6"]
    assert mismatch(devs) == (
        "dyn2.sp: schematic and layout differ: device MK (pmos W=0.30 L=0.36, gate OUT, "
        "between VDD and X) has no layout counterpart")


def test_extra_device_is_reported():
    devs = layout_devices() + [Device("M9", "pmos", "net4", "CLK", "VDD", 0.6, 0.18)]
    assert mismatch(devs) == (
        "dyn2.sp: schematic and layout differ: layout device M9 (pmos W=0.60 L=0.18, gate CLK, "
        "between VDD and net4) has no schematic counterpart")


def test_width_off_by_20_percent_is_reported():
    # hand: 1.2 against 1.0 is 20 % off, beyond the 2 % tolerance
    assert mismatch(edit("M3", w_um=1.2)) == (
        "dyn2.sp: schematic and layout differ: W of MB is 1.20 µm in layout (M3), "
        "1.00 µm in schematic (tolerance 2%)")
    # merged fingers are compared as their sum: 0.6 + 0.72 = 1.32 against 1.2
    assert "W of MF.1+MF.2 is 1.32 µm in layout (M1+M2), 1.20 µm in schematic" in mismatch(edit("M2", w_um=0.72))


def test_small_differences_are_within_tolerance():
    m = match_circuits(schematic(), layout(edit("M3", w_um=1.015, l_um=0.183)))  # 1.5 %, 1.7 %
    assert m.device_map["M3"] == "MB"
    # the tolerance is a parameter
    assert "tolerance 1%" in mismatch(edit("M3", w_um=1.015), w_tol=0.01)


def test_length_mismatch_is_reported():
    assert mismatch(edit("M6", l_um=0.18)) == (
        "dyn2.sp: schematic and layout differ: L of MK is 0.18 µm in layout (M6), "
        "0.36 µm in schematic (tolerance 2%)")


def test_a_device_connected_elsewhere_is_reported():
    assert mismatch(edit("M3", source="X")) == (
        "dyn2.sp: schematic and layout differ: MB (gate B) is between n1 and n2 in the "
        "schematic, but layout M3 is between X and net9")


def test_type_mismatch_is_a_missing_and_an_extra_device():
    msg = mismatch(edit("M6", type="nmos"))
    assert "device MK (pmos" in msg and "layout device M6 (nmos" in msg


def test_port_labels():
    # a layout net carrying two port labels is a short between them
    bad = layout(layout_devices())
    bad.nets["X"].labels = ("OUT", "X")
    with pytest.raises(InputError) as info:
        match_circuits(schematic(), bad)
    assert str(info.value) == "dyn2.sp: layout net X joins schematic ports OUT and X"
    # a port left unlabelled in the layout is still found by structure, and said so
    quiet = layout(layout_devices())
    quiet.nets["OUT"].labelled, quiet.nets["OUT"].labels = False, ()
    m = match_circuits(schematic(), quiet)
    assert m.net_map["OUT"] == "OUT"
    assert m.notes == ["schematic port OUT has no labelled layout net; matched by structure"]


def test_port_names_are_case_insensitive():
    devs = layout_devices()
    for d in devs:
        d.gate = "a" if d.gate == "A" else d.gate
    m = match_circuits(schematic(), layout(devs))
    assert m.net_map["a"] == "A"


SYMMETRIC = """
.subckt LEGS VDD VSS CLK A B X
MP  X  CLK VDD VDD pch W=0.6u L=0.18u
MA1 X  A   m1  VSS nch W=1u L=0.18u
MB1 m1 B   ft  VSS nch W=1u L=0.18u
MA2 X  A   m2  VSS nch W=1u L=0.18u
MB2 m2 B   ft  VSS nch W={bw} L=0.18u
MF  ft CLK VSS VSS nch W=2u L=0.18u
.ends
"""


def symmetric_layout():
    return layout([
        Device("M1", "pmos", "X", "CLK", "VDD", 0.6, 0.18),
        Device("M2", "nmos", "X", "A", "net1", 1.0, 0.18),
        Device("M3", "nmos", "net1", "B", "net3", 1.0, 0.18),
        Device("M4", "nmos", "X", "A", "net2", 1.0, 0.18),
        Device("M5", "nmos", "net2", "B", "net3", 1.0, 0.18),
        Device("M6", "nmos", "net3", "CLK", "VSS", 2.0, 0.18),
    ])


def test_symmetric_legs_are_matched_consistently():
    """Two identical legs (same gates, own middle nodes) can be paired either way;
    whichever is chosen, each leg must map onto one leg (hand)."""
    m = match_circuits(parse_schematic(".param bw=1u" + SYMMETRIC, "legs.sp", TECH), symmetric_layout())
    leg = {m.net_map["net1"]: {m.device_map["M2"], m.device_map["M3"]},
           m.net_map["net2"]: {m.device_map["M4"], m.device_map["M5"]}}
    assert leg in ({"m1": {"MA1", "MB1"}, "m2": {"MA2", "MB2"}}, {"m2": {"MA1", "MB1"}, "m1": {"MA2", "MB2"}})
    assert m.net_map["net3"] == "ft"


def test_symmetric_legs_pick_the_pairing_that_fits_the_widths():
    # hand: only MB2 is 1.4 µm wide, so the leg with a 1.4 µm layout device is leg 2
    lay = symmetric_layout()
    lay.device("M3").w_um = 1.4
    m = match_circuits(parse_schematic(".param bw=1.4u" + SYMMETRIC, "legs.sp", TECH), lay)
    assert m.device_map["M3"] == "MB2" and m.net_map["net1"] == "m2"
    # and with no fitting pairing the width is what is reported
    with pytest.raises(InputError) as info:
        match_circuits(parse_schematic(".param bw=1.4u" + SYMMETRIC, "legs.sp", TECH), symmetric_layout())
    assert "is 1.00 µm in layout" in str(info.value) and "1.40 µm in schematic" in str(info.value)


def test_matching_leaves_its_inputs_alone():
    s, lay = schematic(), layout(layout_devices())
    before = (copy.deepcopy(s.devices), copy.deepcopy(lay.devices))
    match_circuits(s, lay)
    assert (s.devices, lay.devices) == before


# -------------------------------------------------- the bundled samples ----

def _sample_tech():
    from extract.techfile import load_tech

    return load_tech(SAMPLES / "dsk18.toml")


def test_sample_dyn_nand3_schematic_against_its_layout():
    from extract.layout.pipeline import extract_layout

    tech = _sample_tech()
    sch = read_schematic(SAMPLES / "DYN_NAND3.sp", tech)
    lay = extract_layout(str(SAMPLES / "dsk18_cells.gds"), tech, "DYN_NAND3")
    m = match_circuits(sch, lay)
    # hand: the stack is X–A–n1–B–n2–C–n3–footer(CLK)–VSS in both; every device pairs
    # with one of the same type and size, and its terminals with the mapped nets
    assert sorted(m.device_map.values()) == sorted(d.name for d in sch.devices)
    for dl, ds in m.device_map.items():
        a, b = lay.device(dl), sch.device(ds)
        assert (a.type, m.net_map[a.gate]) == (b.type, b.gate)
        assert {m.net_map[a.drain], m.net_map[a.source]} == {b.drain, b.source}
        assert a.w_um == pytest.approx(b.w_um, rel=0.02) and a.l_um == pytest.approx(b.l_um, rel=0.02)
    gate_of = {m.net_map[d.gate] for d in lay.devices if "n1" in (m.net_map[d.drain], m.net_map[d.source])}
    assert gate_of == {"A", "B"}


def test_sample_secondary_precharge_is_a_difference():
    from extract.layout.pipeline import extract_layout

    tech = _sample_tech()
    sch = read_schematic(SAMPLES / "DYN_NAND3_LONG.sp", tech)
    lay = extract_layout(str(SAMPLES / "dsk18_cells.gds"), tech, "DYN_NAND3_PC")
    with pytest.raises(InputError) as info:
        match_circuits(sch, lay)
    # hand: DYN_NAND3_PC adds a CLK-gated pmos from VDD to N1 that the schematic lacks
    msg = str(info.value)
    assert msg.startswith(f"{SAMPLES / 'DYN_NAND3_LONG.sp'}: schematic and layout differ: layout device ")
    assert "(pmos W=0.60 L=0.18, gate CLK, between N1 and VDD) has no schematic counterpart" in msg


def test_every_sample_cell_matches_itself_through_spice():
    """identity: extract, write SPICE, read it back as a schematic, match."""
    import gdstk

    from extract.layout.pipeline import extract_layout
    from extract.writers.spice import spice_net_names, write_spice

    tech = _sample_tech()
    gds = str(SAMPLES / "dsk18_cells.gds")
    for cell in sorted(c.name for c in gdstk.read_gds(gds).top_level()):
        lay = extract_layout(gds, tech, cell)
        back = parse_schematic(write_spice(lay, tech), f"{cell}.sp", tech)
        m = match_circuits(back, lay)
        names = spice_net_names(lay, tech)
        used = {n for d in lay.devices for n in (d.drain, d.gate, d.source)}
        assert {k: v for k, v in m.net_map.items() if k in used} == {n: names[n] for n in used}, cell
        assert m.device_map == {d.name: d.name for d in lay.devices}, cell


def test_two_cells_without_devices_match():
    # hand: a fill or tap cell has no transistor on either side, so the
    # pairing is empty; it used to crash on the empty colouring (found on
    # the sky130 fill cells, tests/pdk/)
    empty = Circuit("FILL", {"VDD": Net("VDD", labelled=True), "VSS": Net("VSS", labelled=True)}, [])
    m = match_circuits(empty, copy.deepcopy(empty))
    assert m.device_map == {} and m.groups == []
    assert m.net_map == {"VDD": "VDD", "VSS": "VSS"}  # labelled nets paired by name


def test_devices_against_an_empty_layout_is_a_mismatch():
    # hand: one schematic device and no layout device cannot match
    s = Circuit("C", {"A": Net("A", labelled=True), "VSS": Net("VSS", labelled=True)},
                [Device("M1", "nmos", "A", "A", "VSS", 1.0, 0.18)], source="c.sp")
    with pytest.raises(InputError, match="has no layout counterpart"):
        match_circuits(s, Circuit("C", {}, []))
