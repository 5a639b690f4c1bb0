"""Tests of the SPICE writer: the text is parsed back by an independent
reader (writer_fixtures.parse_spice) and compared with the circuit, whose
numbers are calculated by hand in writer_fixtures.py."""

from __future__ import annotations

import re
from collections import defaultdict

import pytest
from drawing import TECH
from writer_fixtures import SAMPLE_CELLS, SAMPLES, domino_circuit, level1_tech, parse_spice

from extract.circuit import CapParts, Circuit, Device, Net
from extract.layout.pipeline import extract_layout
from extract.writers.spice import spice_net_names, write_spice
from extract.techfile import load_tech

SAFE = re.compile(r"^[A-Za-z0-9_]+$")


@pytest.fixture(scope="module")
def written():
    circuit, tech = domino_circuit(), level1_tech()
    return circuit, tech, write_spice(circuit, tech)


def test_every_device_and_value_round_trips(written):
    circuit, _, text = written
    parsed = parse_spice(text)
    assert parsed["subckt"] == "dom_and2" and parsed["ends"]
    assert set(parsed["devices"]) == {d.name for d in circuit.devices}
    for d in circuit.devices:
        got = parsed["devices"][d.name]
        # SPICE scale factors (SPICE language: u = 1e-6, p = 1e-12): W, L, PD, PS in
        # metres from um; AD, AS in m^2 from um^2.
        assert got["W"] == pytest.approx(d.w_um * 1e-6, rel=1e-9)
        assert got["L"] == pytest.approx(d.l_um * 1e-6, rel=1e-9)
        assert got["AD"] == pytest.approx(d.ad_um2 * 1e-12, rel=1e-9)
        assert got["AS"] == pytest.approx(d.as_um2 * 1e-12, rel=1e-9)
        assert got["PD"] == pytest.approx(d.pd_um * 1e-6, rel=1e-9)
        assert got["PS"] == pytest.approx(d.ps_um * 1e-6, rel=1e-9)
        # Hand: these net names are SPICE-safe already, so they are kept.
        assert (got["d"], got["g"], got["s"]) == (d.drain, d.gate, d.source)
        # Bulk: nmos to the first ground net, pmos to the first power net (tech [nets]).
        assert got["b"] == ("VDD" if d.type == "pmos" else "VSS")
        assert got["model"] == ("pch" if d.type == "pmos" else "nch")


def test_junction_area_per_net_is_counted_once(written):
    """Sum of AD (drain) and AS (source) over the devices on a net equals the
    net's diffusion area (hand table in writer_fixtures: every piece is given
    to one device only)."""
    circuit, _, text = written
    area = defaultdict(float)
    for dev in parse_spice(text)["devices"].values():
        area[dev["d"]] += dev["AD"] / 1e-12
        area[dev["s"]] += dev["AS"] / 1e-12
    for name, net in circuit.nets.items():
        expected = sum(g.area_um2 for g in net.junctions.values())
        assert area.get(name, 0.0) == pytest.approx(expected, abs=1e-9), name
    # Written out by hand from the table: DYN 0.5 + 0.5, n1 0.25, OUT 1.0 + 0.5.
    assert area["DYN"] == pytest.approx(1.0)
    assert area["n1"] == pytest.approx(0.25)
    assert area["OUT"] == pytest.approx(1.5)


def test_capacitors_hold_the_wire_part_only(written):
    circuit, _, text = written
    caps = parse_spice(text)["caps"]
    by_node = {a: (b, c) for a, b, c in caps.values()}
    # Reference node is the ground net; it has no capacitor to itself.
    assert all(b == "VSS" for b, _ in by_node.values())
    assert "VSS" not in by_node
    for name, net in circuit.nets.items():
        if name == "VSS":
            continue
        # Hand values (writer_fixtures._WIRE): e.g. DYN 0.40 fF, n1 0.05 fF; fF = 1e-15 F.
        assert by_node[name.replace("<", "_").replace(">", "_").replace(" ", "_")][1] == (
            pytest.approx(net.cap.wire * 1e-15, rel=1e-9)
        )
    assert by_node["DYN"][1] == pytest.approx(0.40e-15)
    assert set(caps) == {"Cw_" + a for a in by_node}
    assert "reference node VSS" in text


def test_ports_are_labelled_nets_supplies_first(written):
    _, _, text = written
    ports = parse_spice(text)["ports"]
    # Labelled nets of the fixture, power then ground then by name.
    assert ports == ["VDD", "VSS", "A", "B", "CLK", "OUT", "bus_0__x"]


def test_names_are_made_safe_and_distinct():
    nets = {n: Net(n, labelled=True, cap=CapParts(wire=0.1))
            for n in ["a-b", "a_b", "A_B", "x y", "0", "GND", "out<3>", "VSS"]}
    devices = [Device("n1", "nmos", "a-b", "x y", "0", 1.0, 0.2),
               Device("M1", "nmos", "GND", "out<3>", "a_b", 1.0, 0.2),
               Device("m 1", "nmos", "GND", "out<3>", "a_b", 1.0, 0.2)]
    text = write_spice(Circuit("my cell", nets, devices), level1_tech())
    parsed = parse_spice(text)
    assert parsed["subckt"] == "my_cell"
    ports = parsed["ports"]
    assert all(SAFE.match(p) for p in ports)
    assert len({p.lower() for p in ports}) == len(ports) == 8
    # Documented rule: a name needing no change keeps itself, the first in sorted
    # order winning when two differ only in case ("A_B" < "a_b" in code order); the
    # others follow in sorted order, "a-b" < "a_b": "a-b" -> a_b_2, "a_b" -> a_b_3.
    assert "A_B" in ports and "a_b_2" in ports and "a_b_3" in ports
    assert "n_0" in ports and "n_GND" in ports and "out_3_" in ports and "x_y" in ports
    assert set(parsed["devices"]) == {"M1", "Mn1", "m_1"}
    assert parsed["devices"]["Mn1"]["d"] == "a_b_2" and parsed["devices"]["Mn1"]["s"] == "n_0"
    assert '"a-b" -> a_b_2' in text and '"my cell" -> my_cell' in text


def test_empty_circuit_and_net_without_devices():
    empty = parse_spice(write_spice(Circuit("empty", {}, []), level1_tech()))
    assert empty == {"subckt": "empty", "ports": [], "devices": {}, "caps": {}, "ends": True}
    lone = Circuit("lone", {"w": Net("w", cap=CapParts(wire=0.2))}, [])
    parsed = parse_spice(write_spice(lone, level1_tech()))
    # The unlabelled wire is internal; its capacitor needs the reference node as a port.
    assert parsed["ports"] == ["VSS"]
    assert parsed["caps"] == {"Cw_w": ("w", "VSS", pytest.approx(0.2e-15))}


def test_bulk_net_missing_from_circuit_becomes_port():
    c = Circuit("p", {"y": Net("y", labelled=True)},
                [Device("M1", "pmos", "y", "g", "y", 1.0, 0.2)])
    parsed = parse_spice(write_spice(c, level1_tech()))
    assert parsed["ports"] == ["VDD", "y"]
    assert parsed["devices"]["M1"]["b"] == "VDD"


def test_output_is_deterministic():
    tech = level1_tech()
    a = domino_circuit()
    b = domino_circuit()
    b.nets = dict(reversed(list(b.nets.items())))
    b.devices = list(reversed(b.devices))
    b.source = "/elsewhere/hand.gds"
    text = write_spice(a, tech)
    assert text == write_spice(a, tech) == write_spice(b, tech)
    assert text.endswith(".ends dom_and2\n")


def test_long_port_lists_continue():
    nets = {f"port_number_{i:03d}": Net(f"port_number_{i:03d}", labelled=True) for i in range(40)}
    text = write_spice(Circuit("wide", nets, []), level1_tech())
    assert all(len(line) <= 80 for line in text.splitlines() if not line.startswith("*"))
    assert parse_spice(text)["ports"] == sorted(nets)


def test_reads_back_through_the_schematic_reader(written):
    """The netlist is valid input for the project's own SPICE reader
    (extract.netlist.reader), which rebuilds the devices and, from AD/AS/PD/PS and
    the C lines, each signal net's junction + wire capacitance.  The rails'
    own wire capacitance is not in the netlist (it is to AC ground)."""
    from extract.netlist.reader import parse_schematic

    circuit, tech, text = written
    back = parse_schematic(text, "written.sp", tech)
    fields = ("type", "drain", "gate", "source", "w_um", "l_um", "ad_um2", "as_um2", "pd_um", "ps_um")
    for d in circuit.devices:
        got = back.device(d.name)
        assert [getattr(got, f) for f in fields] == pytest.approx([getattr(d, f) for f in fields])
    for name, net in circuit.nets.items():
        if net.role in ("power", "ground"):
            continue
        got = back.nets[name.replace("<", "_").replace(">", "_").replace(" ", "_")]
        # Hand table (writer_fixtures): e.g. n1 0.875 + 0.05, OUT 3.95 + 0.60.
        assert got.cap.junction + got.cap.wire == pytest.approx(net.cap.junction + net.cap.wire)
        assert got.labelled == net.labelled



@pytest.fixture(scope="module")
def dsk18():
    return load_tech(TECH)


@pytest.mark.parametrize("cell", SAMPLE_CELLS)
def test_sample_cells_round_trip(cell, dsk18):
    """Each bundled sample cell: every device and value reads back, AD + AS
    per net equals the net's extracted diffusion area (each piece counted
    once, Device convention), and extracting and writing twice gives the
    same bytes."""
    circuit = extract_layout(SAMPLES, dsk18, cell)
    text = write_spice(circuit, dsk18)
    assert text == write_spice(extract_layout(SAMPLES, dsk18, cell), dsk18)
    parsed = parse_spice(text)
    names = spice_net_names(circuit, dsk18)
    area = defaultdict(float)
    for d in circuit.devices:
        got = parsed["devices"][d.name]
        assert (got["d"], got["g"], got["s"]) == (names[d.drain], names[d.gate], names[d.source])
        # u = 1e-6, p = 1e-12 (SPICE scale factors); six significant digits written.
        for key, value, scale in (("W", d.w_um, 1e-6), ("L", d.l_um, 1e-6), ("AD", d.ad_um2, 1e-12),
                                  ("AS", d.as_um2, 1e-12), ("PD", d.pd_um, 1e-6), ("PS", d.ps_um, 1e-6)):
            assert got[key] == pytest.approx(value * scale, rel=1e-5, abs=1e-30), (d.name, key)
        area[got["d"]] += got["AD"] / 1e-12
        area[got["s"]] += got["AS"] / 1e-12
    for name, net in circuit.nets.items():
        expected = sum(g.area_um2 for g in net.junctions.values())
        assert area.get(names[name], 0.0) == pytest.approx(expected, rel=1e-5, abs=1e-9), name
    labelled = {names[n] for n, net in circuit.nets.items() if net.labelled}
    assert labelled <= set(parsed["ports"])
