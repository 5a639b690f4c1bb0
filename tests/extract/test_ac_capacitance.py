"""The written SPICE netlist against ngspice (Debian package ngspice), the
reference simulator: it loads, its operating point converges with the
expected logic levels, and a small-signal AC measurement at zero bias
reproduces every net's junction + wire capacitance.

Why zero bias everywhere: a junction's capacitance is its zero-bias value
only when both of its sides are at 0 V; nmos junctions go to the ground
net and pmos junctions to the power net, so every net, the power net
included, is held at 0 V DC while one net at a time gets a 1 V AC drive.
The level-1 models carry no tox and zero overlap coefficients, so there is
no gate capacitance (ngspice level-1 behaviour, checked by hand), and
the measured C = Im(I) / (2 pi f V) is junction + wire alone.
Bulk nets (power and ground) are not measured: their own diffusion has the
bulk on both sides, which a circuit simulator rightly sees as nothing.
"""

from __future__ import annotations

import dataclasses

import gdstk
import pytest
from drawing import TECH, nmos_stack, write
from ngspice_run import run_deck
from writer_fixtures import (
    SAMPLE_CELLS,
    SAMPLES,
    AC_EXPECTED_FF,
    ac_deck,
    domino_circuit,
    level1_tech,
    op_deck,
    parse_spice,
)

from extract.layout.pipeline import extract_layout
from extract.writers.spice import spice_net_names, supply_nets, write_spice
from extract.techfile import load_tech

pytestmark = pytest.mark.ngspice


def measure(circuit, tech):
    """ngspice-measured zero-bias capacitance (fF) of every non-bulk net."""
    text = write_spice(circuit, tech)
    names = spice_net_names(circuit, tech)
    bulk = set(supply_nets(circuit, tech))
    nets = [n for n in sorted(circuit.nets) if n not in bulk]
    values = run_deck(ac_deck(text, tech, [names[n] for n in nets]))
    return {n: values[f"c_{i}"] / 1e-15 for i, n in enumerate(nets)}


def level1_view(tech):
    """The tech with cjswg = cjsw and pbsw = pb: SPICE level 1 has a single
    sidewall coefficient for the whole PD/PS (gate edge included) and one
    built-in potential, so only such a tech can be compared with it."""
    mos = {t: dataclasses.replace(p, cjswg=p.cjsw, pbsw=p.pb) for t, p in tech.mos.items()}
    return dataclasses.replace(tech, mos=mos)


def test_hand_built_stage_capacitance_matches_hand_calculation():
    circuit, tech = domino_circuit(), level1_tech()
    measured = measure(circuit, tech)
    assert set(measured) == set(AC_EXPECTED_FF)
    for name, expected in AC_EXPECTED_FF.items():
        # The fixture's circuit holds the same numbers as the hand table ...
        net = circuit.nets[name]
        assert net.cap.junction + net.cap.wire == pytest.approx(expected, rel=1e-12)
        # ... and ngspice (reference) finds them in the written netlist, within 1 %.
        assert measured[name] == pytest.approx(expected, rel=0.01), name


def test_netlist_loads_and_operating_point_converges():
    """Precharge (CLK = 0): the dynamic node sits at VDD, the output at 0
    (domino AND2 logic, by hand); A = B = VDD so the stack conducts up to the
    footer, which is off: n1 and n2 follow DYN up to VDD - VT(body effect)."""
    circuit, tech = domino_circuit(), level1_tech()
    text = write_spice(circuit, tech)
    drive = {"VDD": 1.8, "VSS": 0.0, "CLK": 0.0, "A": 1.8, "B": 1.8, "bus_0__x": 0.0}
    assert set(parse_spice(text)["ports"]) == set(drive) | {"OUT"}
    deck, names = op_deck(text, tech, drive)
    values = run_deck(deck)
    v = {n: values[f"v_{i}"] for i, n in enumerate(names)}
    assert v["DYN"] == pytest.approx(1.8, abs=1e-3)
    assert v["OUT"] == pytest.approx(0.0, abs=1e-3)
    # n2 charges through MN1, MN2 (gates at VDD) to V = VDD - VT(V), with the body
    # effect VT(V) = vt0 + gamma*(sqrt(phi + V) - sqrt(phi)) (level-1 threshold,
    # Shichman-Hodges; from memory).  Hand iteration with vt0 0.45, gamma 0.4, phi 0.8:
    #   V = 1.8 - 0.45 - 0.4*(sqrt(0.8 + V) - 0.894427) -> V = 1.1493 V
    # (check: sqrt(1.9493) = 1.39617, 0.4*(1.39617 - 0.894427) = 0.20070,
    #  1.8 - 0.45 - 0.20070 = 1.14930).
    assert v["n2"] == pytest.approx(1.1493, abs=5e-3)
    assert v["n1"] == pytest.approx(1.1493, abs=5e-3)


def test_extracted_stack_matches_ngspice_and_hand(tmp_path):
    """The two-device stack drawn in tests/extract/drawing.py, extracted and
    written: ngspice must find the hand-calculated junction + wire values.

    Hand (dsk18 nmos cj 0.95 fF/um^2, cjsw = cjswg 0.22 fF/um; metal1 0.035
    fF/um^2 + 0.045 fF/um; poly 0.09 + 0.04; C = CJ*A + CJSW*P, the SPICE
    area-perimeter junction model, and plate + fringe for wires):
      X    : piece 1.0 x 1.0, field 3.0, gate edge 1.0 -> 0.95 + 0.22*4.0 = 1.83
             metal1 0.4 x 0.4, outline 1.6 -> 0.035*0.16 + 0.045*1.6 = 0.0776
      net1 : piece 0.62 x 1.0, field 1.24, gate edges 2.0 -> 0.589 + 0.22*3.24 = 1.3018
      A, B : poly outside diffusion 0.18 x 0.6, outline 3.56 - 2.0
             -> 0.09*0.108 + 0.04*1.56 = 0.07212
    """
    tech = level1_view(load_tech(TECH))
    circuit = extract_layout(write(tmp_path, "stack.gds", nmos_stack(gdstk.Cell("STACK"))), tech)
    hand = {"X": 1.83 + 0.0776, "net1": 1.3018, "A": 0.07212, "B": 0.07212}
    measured = measure(circuit, tech)
    assert set(measured) == set(hand)
    for name, expected in hand.items():
        assert measured[name] == pytest.approx(expected, rel=0.01), name



@pytest.fixture(scope="module")
def sample_tech():
    return level1_view(load_tech(TECH))


def test_sample_library_is_there():
    # The parametrized sample tests below must not run on an empty list: the
    # library has, among others, an n-type and a p-type (pmos evaluation) stage.
    assert {"DYN_NAND3", "PDYN_NOR2"} <= set(SAMPLE_CELLS)


@pytest.mark.parametrize("cell", SAMPLE_CELLS)
def test_sample_cell_capacitance_in_ngspice(cell, sample_tech):
    """Every non-bulk net of every sample cell: ngspice (reference) on the
    written netlist finds the extractor's junction + wire within 1 %."""
    circuit = extract_layout(SAMPLES, sample_tech, cell)
    measured = measure(circuit, sample_tech)
    assert measured
    for name, value in measured.items():
        net = circuit.nets[name]
        expected = net.cap.junction + net.cap.wire
        assert value == pytest.approx(expected, rel=0.01, abs=1e-6), (cell, name)


@pytest.mark.parametrize("cell", SAMPLE_CELLS)
def test_sample_cell_operating_point(cell, sample_tech):
    """The written netlist of each sample loads and its operating point
    converges with supplies at 1.8 V / 0 V and every other port at 0 V; in
    static CMOS no DC node voltage can leave the rails (by hand: every node
    is a drain/source between devices whose other ends are rails, or a
    floating wire pulled to 0 by the shunt)."""
    circuit = extract_layout(SAMPLES, sample_tech, cell)
    text = write_spice(circuit, sample_tech)
    names = spice_net_names(circuit, sample_tech)
    ground, power = supply_nets(circuit, sample_tech)
    vdd = sample_tech.vdd
    drive = {p: 0.0 for p in parse_spice(text)["ports"]}
    drive[names[power]] = vdd
    deck, order = op_deck(text, sample_tech, drive)
    values = run_deck(deck)
    volts = [values[f"v_{i}"] for i in range(len(order))]
    assert len(volts) == len(order)
    assert all(-1e-3 <= v <= vdd + 1e-3 for v in volts), dict(zip(order, volts))
