"""Tests of the staticness test over circuits (analyze.stages.static).

Circuits are built by hand with ``tests/helpers/stage_circuits.py``.  What
each test checks against: the truth table or the case analysis written
out in the test, by hand, from the switch-level reading of a transistor
(nmos closed when its gate is high, pmos when low; Weste & Harris, *CMOS
VLSI Design*, 4th ed., ch. 1 and 9, from memory).
"""

from __future__ import annotations

from extract.tech import Tech

from analyze.stages.static import StaticNets
from analyze.stages.topology import Topology

from stage_circuits import NAND3_FOOTED, NO_CLOCK, inverter, make_circuit


def static_nets(rows, tech: Tech = NO_CLOCK, **kw) -> StaticNets:
    return StaticNets(Topology(make_circuit(rows, tech), tech), **kw)


def tg_latch(with_set: bool):
    """A transmission-gate latch: d = !D passes to S when G = 1 (nmos G,
    pmos GB = !G); a clocked inverter of Q = !S holds S when G = 0 (pmos
    G, nmos GB).  ``with_set``: an active-low set, pmos SET_B straight
    from VDD to S and nmos SET_B in series at ground under the feedback."""
    bottom = "k" if with_set else "VSS"
    rows = inverter("MID", "D", "d") + inverter("MIG", "G", "GB") + inverter("MIQ", "S", "Q") + [
        ("MTN", "nmos", "d", "G", "S", 0.5, 0.15),
        ("MTP", "pmos", "d", "GB", "S", 0.5, 0.15),
        ("MFP1", "pmos", "VDD", "Q", "f2", 0.4, 0.15),
        ("MFP2", "pmos", "f2", "G", "S", 0.4, 0.15),
        ("MFN1", "nmos", "S", "GB", "f1", 0.4, 0.15),
        ("MFN2", "nmos", "f1", "Q", bottom, 0.4, 0.15),
    ]
    if with_set:
        rows += [
            ("MSP", "pmos", "VDD", "SET_B", "S", 0.4, 0.15),
            ("MSN", "nmos", "k", "SET_B", "VSS", 0.4, 0.15),
        ]
    return rows


def test_tg_latch_storage_node_is_static():
    # Case analysis (G, GB = !G through the inverter MIG):
    #   G = 1: the pass gate joins S to d, the output of an inverter: driven.
    #   G = 0: MFP2 and MFN1 closed; Q = 0 closes MFP1 (S to VDD), Q = 1
    #          closes MFN2 (S to ground, with SET_B = 1 through MSN);
    #          SET_B = 0 closes MSP (S to VDD).
    # So S is driven for every D, G, Q (and SET_B): static.
    for with_set in (False, True):
        static = static_nets(tg_latch(with_set))
        assert static("S") and static("d") and static("Q") and static("GB")


def test_complement_through_inverter_and_feedback_left_free():
    # Case analysis: an nmos-only pass latch, S from d when G = 1, from the
    # feedback F = !Q when GB = 1.  GB is the inverter of G, so one of the
    # two always conducts: static.  Were GB a cell input (no inverter),
    # G = GB = 0 would float S.
    rows = inverter("MID", "D", "d") + inverter("MIQ", "S", "Q") + inverter("MIF", "Q", "F") + [
        ("MTN", "nmos", "d", "G", "S", 0.5, 0.15),
        ("MFN", "nmos", "F", "GB", "S", 0.5, 0.15),
    ]
    assert static_nets(rows + inverter("MIG", "G", "GB"))("S")
    floating = static_nets(rows).floating("S")
    assert floating is not None and (floating.assignment["G"], floating.assignment["GB"]) == (False, False)


def test_keeper_fed_back_from_the_node_stays_a_free_input():
    # Hand reasoning: in the footed domino NAND3 the keeper MK is gated by
    # OUT = !X.  X is the node itself, so OUT is not replaced by "not X"
    # (the stored state is what a dynamic node is); with OUT free,
    # CLK = 1, A = B = C = 0, OUT = 1 floats X.
    static = static_nets(NAND3_FOOTED)
    assert not static("X")
    assert static.floating("X").assignment == {"A": False, "B": False, "C": False, "CLK": True, "OUT": True}
    # Internal stack nodes float too (CLK = 1, inputs 0): never static.
    assert not static("n1") and static("OUT")


def test_undecided_counts_as_not_static():
    # Hand count (see test_logic): a static NAND3 needs 7 cases; with a
    # limit of 1 it is undecided, and undecided is not static.
    rows = [(f"MP{x}", "pmos", "Y", x, "VDD", 1.0, 0.18) for x in "ABC"] + [
        ("MNA", "nmos", "Y", "A", "s1", 1.0, 0.18),
        ("MNB", "nmos", "s1", "B", "s2", 1.0, 0.18),
        ("MNC", "nmos", "s2", "C", "VSS", 1.0, 0.18),
    ]
    assert static_nets(rows)("Y")
    limited = static_nets(rows, max_cases=1)
    assert not limited("Y") and limited.floating("Y") is None


def test_rails_and_nets_without_channels():
    # Hand reasoning: a rail is driven by definition; a net that only gates
    # devices (a cell input) is joined to nothing.
    static = static_nets(inverter("MI", "A", "Y"))
    assert static("VDD") and static("VSS") and static("Y")
    assert not static("A")


def test_search_once_per_network_shape_gives_each_nets_own_answer(tmp_path):
    # Reference: find_floating run on each net's own switches (the
    # definition of the test), against the answers shared between nets of
    # one network shape, on an array of every sample cell.
    import os

    from analyze.stages.logic import Floating, SearchLimit, conducts, find_floating
    from extract.layout.pipeline import extract_layout
    from extract.techfile import load_tech
    from sample_layouts.make_samples import mixed_block

    root = os.path.dirname(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))
    tech = load_tech(os.path.join(root, "sample_layouts", "dsk18.toml"))
    path = str(tmp_path / "m.gds")
    mixed_block(2, 2).write_gds(path)
    topo = Topology(extract_layout(path, tech, "MIXED_BLOCK"), tech)
    shared = StaticNets(topo)
    nets = sorted({n for d in topo.devices for n in (d.drain, d.source) if not topo.is_rail(n)})
    for net in nets:
        comp = topo.component_of(None, net)
        switches = StaticNets(topo)._switches(comp.devices, set(comp.nets))
        rails = {n for s in switches for n in (s.a, s.b) if topo.is_rail(n)}
        try:
            own = find_floating(switches, net, rails)
        except SearchLimit as e:
            own = e  # undecided counts as not static
        assert shared(net) == (own is None), net
        if isinstance(own, Floating):
            got = shared.floating(net)
            assert isinstance(got, Floating) and got.assignment == own.assignment, net
            # the witness really leaves the net undriven
            assert not conducts(switches, net, rails, got.assignment), net
    assert len(shared._searched) < len(nets)
