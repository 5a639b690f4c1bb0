"""Tests of the SPEF writer: the text is parsed back by an independent
reader (writer_fixtures.parse_spef) and checked against the header and
name rules of IEEE 1481 (from memory) and the hand-calculated circuit."""

from __future__ import annotations

import re

import pytest
from drawing import TECH
from writer_fixtures import SAMPLE_CELLS, SAMPLES, domino_circuit, level1_tech, parse_spef

from extract.circuit import CapParts, Circuit, Device, Net
from extract.layout.pipeline import extract_layout
from extract.writers.spef import SPEF_DATE, write_spef
from extract.techfile import load_tech

# IEEE 1481 identifier (from memory): letters, digits, _ and backslash-escaped
# special characters.
IDENTIFIER = re.compile(r'^(?:[A-Za-z0-9_]|\\[!-/:-@\[-^`{-~])+$')


def unescape(name: str) -> str:
    return re.sub(r"\\(.)", r"\1", name)


@pytest.fixture(scope="module")
def parsed():
    circuit = domino_circuit()
    return circuit, parse_spef(write_spef(circuit, level1_tech()))


def test_header(parsed):
    _, spef = parsed
    h = spef["header"]
    # Header records and their values as IEEE 1481-1998 and the README fix them.
    assert h["*SPEF"] == '"IEEE 1481-1998"'
    assert h["*DESIGN"] == '"dom_and2"'
    assert h["*DATE"] == f'"{SPEF_DATE}"'
    assert h["*VENDOR"] == '"dynshare"' and h["*PROGRAM"] == '"dynshare"'
    assert h["*VERSION"].startswith('"') and h["*DESIGN_FLAG"] == '"PIN_CAP INPUT_OUTPUT"'
    assert (h["*DIVIDER"], h["*DELIMITER"], h["*BUS_DELIMITER"]) == ("/", ":", "[ ]")
    assert (h["*T_UNIT"], h["*C_UNIT"], h["*R_UNIT"], h["*L_UNIT"]) == (
        "1 NS", "1 FF", "1 OHM", "1 HENRY")


def test_name_map_ports_and_totals(parsed):
    circuit, spef = parsed
    names = {unescape(v): k for k, v in spef["names"].items()}
    assert all(IDENTIFIER.match(v) for v in spef["names"].values())
    assert set(names) == set(circuit.nets) - {"bus<0> x"} | {"bus<0>_x"}
    # Indices follow code-point order of the names: A B CLK DYN OUT VDD VSS bus... n1 ...
    assert names["bus<0>_x"] == "*8" and names["A"] == "*1" and names["spare"] == "*11"
    ports = {unescape(spef["names"][ref]) for ref, _ in spef["ports"]}
    assert ports == {"VDD", "VSS", "CLK", "A", "B", "OUT", "bus<0>_x"}
    assert {d for _, d in spef["ports"]} == {"B"}
    assert len(spef["nets"]) == len(circuit.nets)
    for name, net in circuit.nets.items():
        d_net = spef["nets"][names[name.replace(" ", "_")]]
        assert d_net["total"] == pytest.approx(net.cap.total, rel=1e-5)
        # The *CAP entries add up to the D_NET total.
        assert sum(c for _, _, c in d_net["caps"]) == pytest.approx(d_net["total"], rel=1e-12)
    # Hand: DYN = junction 1.25 + 1.5, wire 0.40, gate 1.44 + 2.88 -> 7.47 fF.
    assert spef["nets"][names["DYN"]]["total"] == pytest.approx(7.47, rel=1e-6)
    # Hand: spare = wire 0.15 only, no device and no port -> no *CONN.
    spare = spef["nets"][names["spare"]]
    assert spare["conn"] == [] and spare["caps"] == [("1", names["spare"], 0.15)]


def test_connections_are_the_device_pins(parsed):
    circuit, spef = parsed
    names = {unescape(v): k for k, v in spef["names"].items()}
    for d in circuit.devices:
        for pin, net, direction in (("D", d.drain, "B"), ("G", d.gate, "I"), ("S", d.source, "B")):
            assert ("*I", f"{d.name}:{pin}", direction) in spef["nets"][names[net]]["conn"]
    total_pins = sum(len([c for c in n["conn"] if c[0] == "*I"]) for n in spef["nets"].values())
    assert total_pins == 3 * len(circuit.devices)
    assert ("*P", names["OUT"], "B") in spef["nets"][names["OUT"]]["conn"]
    assert not any(c[0] == "*P" for c in spef["nets"][names["n1"]]["conn"])


def test_special_characters_are_escaped():
    nets = {n: Net(n, labelled=True, cap=CapParts(wire=0.1))
            for n in ["d[3]", "x/y:z", "a b", "a_b", "q*"]}
    devices = [Device("M/1", "nmos", "d[3]", "x/y:z", "q*", 1.0, 0.2)]
    spef = parse_spef(write_spef(Circuit("c/1", nets, devices), level1_tech()))
    written = sorted(spef["names"].values())
    assert all(IDENTIFIER.match(w) for w in written)
    # Printable punctuation is escaped, so it reads back unchanged; a space cannot be
    # escaped and becomes "_", clashing with "a_b", which keeps its name: a_b_2.
    assert sorted(map(unescape, written)) == sorted(["d[3]", "x/y:z", "a_b_2", "a_b", "q*"])
    assert "d\\[3\\]" in written and "x\\/y\\:z" in written
    conns = [c for n in spef["nets"].values() for c in n["conn"] if c[0] == "*I"]
    assert ("*I", "M\\/1:G", "I") in conns
    assert spef["header"]["*DESIGN"] == '"c/1"'


def test_empty_circuit_and_unknown_terminal_net():
    text = write_spef(Circuit("empty", {}, []), level1_tech())
    spef = parse_spef(text)
    assert spef["names"] == {} and spef["nets"] == {} and spef["ports"] == []
    assert spef["header"]["*C_UNIT"] == "1 FF"
    # A device terminal net that the net list lacks is still written, total 0.
    c = Circuit("t", {}, [Device("M1", "nmos", "a", "g", "b", 1.0, 0.2)])
    spef = parse_spef(write_spef(c, level1_tech()))
    assert [n["total"] for n in spef["nets"].values()] == [0.0, 0.0, 0.0]
    assert all(n["caps"] == [] for n in spef["nets"].values())


def test_output_is_deterministic():
    a, b = domino_circuit(), domino_circuit()
    b.nets = dict(reversed(list(b.nets.items())))
    b.devices = list(reversed(b.devices))
    tech = level1_tech()
    assert write_spef(a, tech) == write_spef(a, tech) == write_spef(b, tech)



@pytest.mark.parametrize("cell", SAMPLE_CELLS)
def test_sample_cells(cell):
    """Each bundled sample cell: one D_NET per net whose total is the
    extracted cap_ff and whose *CAP entries add up to it, three pins per
    device, ports = labelled nets, and the same bytes twice."""
    tech = load_tech(TECH)
    circuit = extract_layout(SAMPLES, tech, cell)
    text = write_spef(circuit, tech)
    assert text == write_spef(extract_layout(SAMPLES, tech, cell), tech)
    spef = parse_spef(text)
    ref = {unescape(v): k for k, v in spef["names"].items()}
    assert set(ref) == set(circuit.nets)
    for name, net in circuit.nets.items():
        d_net = spef["nets"][ref[name]]
        assert d_net["total"] == pytest.approx(net.cap_ff, rel=1e-5, abs=1e-9)
        assert sum(c for _, _, c in d_net["caps"]) == pytest.approx(d_net["total"], rel=1e-12)
        pins = [c for c in d_net["conn"] if c[0] == "*I"]
        expected = sum((d.drain == name) + (d.gate == name) + (d.source == name)
                       for d in circuit.devices)
        assert len(pins) == expected, name
    ports = {unescape(spef["names"][r]) for r, _ in spef["ports"]}
    assert ports == {n for n, net in circuit.nets.items() if net.labelled}
