"""Tests of dynamic-stage recognition (analyze.stages.recognize.find_stages).

Every circuit here is built by hand.  What each test checks against:

- "W&H ch. 9": the textbook definition of the footed / footless dynamic
  gate and the domino gate in Weste & Harris, *CMOS VLSI Design*, 4th ed.,
  ch. 9 "Circuit Families" (from memory): a clocked pmos precharges the
  dynamic node from VDD, an nmos network evaluates it to ground, in a
  footed gate through a clocked nmos footer; a weak pmos keeper fed back
  from the output inverter holds the node high; a domino gate is the
  dynamic gate followed by a static inverter, and domino gates cascade
  output to input.  The p-type gate is the mirror image.
- "hand reasoning": written out in the test.
"""

from __future__ import annotations

import random

import pytest
from hypothesis import given, settings, strategies as st

from extract.tech import Tech

from analyze.stages.recognize import Recognition, find_stages
from analyze.stages.stage import Receiver

from stage_circuits import NAND3_FOOTED, NO_CLOCK, TECH, dsk18_tech, inverter, make_circuit, recognised_both_ways


def recognise(rows, tech: Tech = TECH) -> Recognition:
    # Every hand-built circuit is recognised both on the whole circuit and
    # by islands; the two must agree (recognised_both_ways asserts it).
    return recognised_both_ways(make_circuit(rows, tech), tech)


def test_footed_nand3_keeper_and_inverter():
    # W&H ch. 9: clocked pmos precharge, series nmos A-B-C, clocked footer,
    # keeper fed from the output inverter.  The inverter itself is static.
    r = recognise(NAND3_FOOTED)
    assert len(r.stages) == 1
    s = r.stages[0]
    assert (s.dynamic_node, s.polarity, s.clock) == ("X", "n", "CLK")
    assert (s.supply, s.rail) == ("VDD", "VSS")
    assert s.footed and s.footer == "MF" and s.footer_node == "n3"
    assert s.precharge == ("MPC",)
    assert s.evaluation == ("MA", "MB", "MC")
    assert s.inputs == ("A", "B", "C")
    assert s.internal_nodes == ("n1", "n2")
    assert s.keepers == ("MK",)
    assert s.receivers == (Receiver(nmos="MIN", pmos="MIP", output="OUT"),)
    assert s.secondary_precharge == {}
    assert s.location_um == make_circuit(NAND3_FOOTED, TECH).nets["X"].location_um
    assert r.findings == []
    assert r.clocks == ["CLK"] and not r.clock_inferred
    assert r.clock_note == "clock CLK from tech file"


def test_drain_source_order_and_device_order_do_not_matter():
    # Hand reasoning: a MOSFET is symmetric, so swapping drain and source
    # (and listing devices in any order) describes the same circuit.
    rng = random.Random(7)
    base = recognise(NAND3_FOOTED).stages
    for _ in range(5):
        rows = [(n, t, s, g, d, w, l) if rng.random() < 0.5 else (n, t, d, g, s, w, l)
                for (n, t, d, g, s, w, l) in NAND3_FOOTED]
        rng.shuffle(rows)
        assert recognise(rows).stages == base


def test_footless_nand2():
    # W&H ch. 9: a footless dynamic gate has its evaluation network directly
    # on ground.
    rows = [
        ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
        ("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18),
    ] + inverter("MI", "X", "OUT")
    (s,) = recognise(rows).stages
    assert not s.footed and s.footer is None and s.footer_node is None
    assert s.rail == "VSS" and s.inputs == ("A", "B") and s.internal_nodes == ("n1",)
    assert s.evaluation == ("MA", "MB") and s.keepers == ()


def test_domino_ao22_two_legs():
    # W&H ch. 9: domino AND-OR: two series legs (A·B, C·D) in parallel above
    # one footer.  Hand reasoning: internal nodes are the two mid-leg nets;
    # the common bottom net is the footer node, not an internal node.
    rows = [
        ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
        ("MB", "nmos", "n1", "B", "nf", 1.0, 0.18),
        ("MC", "nmos", "X", "C", "n2", 1.0, 0.18),
        ("MD", "nmos", "n2", "D", "nf", 1.0, 0.18),
        ("MF", "nmos", "nf", "CLK", "VSS", 2.0, 0.18),
        ("MK", "pmos", "X", "Y", "VDD", 0.3, 0.36),
    ] + inverter("MI", "X", "Y")
    (s,) = recognise(rows).stages
    assert s.inputs == ("A", "B", "C", "D")
    assert s.internal_nodes == ("n1", "n2")
    assert (s.footer, s.footer_node) == ("MF", "nf")
    assert s.evaluation == ("MA", "MB", "MC", "MD")


def test_domino_mux4():
    # W&H ch. 9 (domino multiplexer, from memory): four legs select·data in
    # parallel above a footer.  Hand reasoning: 8 inputs, 4 mid-leg nodes.
    rows = [("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18), ("MF", "nmos", "nf", "CLK", "VSS", 2.0, 0.18)]
    for k in range(4):
        rows += [
            (f"MS{k}", "nmos", "X", f"S{k}", f"m{k}", 1.0, 0.18),
            (f"MD{k}", "nmos", f"m{k}", f"D{k}", "nf", 1.0, 0.18),
        ]
    rows += inverter("MI", "X", "Z")
    (s,) = recognise(rows).stages
    assert s.inputs == ("D0", "D1", "D2", "D3", "S0", "S1", "S2", "S3")
    assert s.internal_nodes == ("m0", "m1", "m2", "m3")
    assert len(s.evaluation) == 8 and s.footer_node == "nf"


def test_multi_finger_devices_in_parallel():
    # Hand reasoning: a device drawn as two fingers is two devices with the
    # same three terminals; both belong to the network, the input and the
    # internal node are listed once.  Likewise a two-finger precharge.
    rows = [
        ("MPCa", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MPCb", "pmos", "VDD", "CLK", "X", 1.0, 0.18),
        ("MAa", "nmos", "X", "A", "n1", 1.0, 0.18),
        ("MAb", "nmos", "n1", "A", "X", 1.0, 0.18),
        ("MB", "nmos", "n1", "B", "n2", 1.0, 0.18),
        ("MF", "nmos", "n2", "CLK", "VSS", 2.0, 0.18),
    ] + inverter("MI", "X", "OUT")
    (s,) = recognise(rows).stages
    assert s.precharge == ("MPCa", "MPCb")
    assert s.evaluation == ("MAa", "MAb", "MB")
    assert s.inputs == ("A", "B") and s.internal_nodes == ("n1",)


P_NOR2 = [
    # p-type footed NOR2: predischarge nmos, series pmos A-B, pmos header.
    ("MND", "nmos", "XP", "CLKB", "VSS", 1.0, 0.18),
    ("MPA", "pmos", "XP", "A", "p1", 2.0, 0.18),
    ("MPB", "pmos", "p1", "B", "p2", 2.0, 0.18),
    ("MH", "pmos", "p2", "CLKB", "VDD", 3.0, 0.18),
    ("MKN", "nmos", "XP", "YP", "VSS", 0.3, 0.36),
] + inverter("MI", "XP", "YP")


def test_p_type_nor2():
    # W&H ch. 9 mirror image: predischarged low by a clocked nmos, pmos
    # network to VDD through a clocked pmos header; keeper nmos from VSS.
    # Hand reasoning: series pmos A, B pull XP high only when A = B = 0: NOR.
    tech = dsk18_tech(clock=("CLKB",))
    (s,) = recognise(P_NOR2, tech).stages
    assert (s.dynamic_node, s.polarity, s.clock) == ("XP", "p", "CLKB")
    assert (s.supply, s.rail) == ("VSS", "VDD")
    assert s.precharge == ("MND",) and (s.footer, s.footer_node) == ("MH", "p2")
    assert s.evaluation == ("MPA", "MPB") and s.inputs == ("A", "B")
    assert s.internal_nodes == ("p1",) and s.keepers == ("MKN",)
    assert s.receivers == (Receiver("MIN", "MIP", "YP"),)


def test_p_type_clock_not_listed_is_inferred():
    # The tech file lists CLK, the p-type stage is clocked by CLKB: CLKB
    # gates both the predischarge device and the header, so it is a clock.
    r = recognise(P_NOR2)
    assert [s.dynamic_node for s in r.stages] == ["XP"]
    assert r.clocks == ["CLKB"] and r.clock_inferred
    assert r.clock_note == "clock CLKB inferred: gates predischarge MND and header MH of XP"


def test_domino_chain_two_stages():
    # W&H ch. 9: domino stages cascade, stage 2's input is stage 1's
    # inverter output.  Devices listed stage 2 first: the stages still come
    # out sorted by dynamic node.
    stage2 = [
        ("M2P", "pmos", "X2", "CLK", "VDD", 1.0, 0.18),
        ("M2A", "nmos", "X2", "OUT1", "m", 1.0, 0.18),
        ("M2B", "nmos", "m", "C", "VSS", 1.0, 0.18),
        ("M2K", "pmos", "X2", "OUT2", "VDD", 0.3, 0.36),
    ] + inverter("M2I", "X2", "OUT2")
    stage1 = [
        ("M1P", "pmos", "X1", "CLK", "VDD", 1.0, 0.18),
        ("M1A", "nmos", "X1", "A", "k", 1.0, 0.18),
        ("M1B", "nmos", "k", "B", "f", 1.0, 0.18),
        ("M1F", "nmos", "f", "CLK", "VSS", 2.0, 0.18),
        ("M1K", "pmos", "X1", "OUT1", "VDD", 0.3, 0.36),
    ] + inverter("M1I", "X1", "OUT1")
    for tech in (TECH, NO_CLOCK):
        r = recognise(stage2 + stage1, tech)
        assert [s.dynamic_node for s in r.stages] == ["X1", "X2"]
        s1, s2 = r.stages
        assert s1.footed and s1.inputs == ("A", "B") and s1.keepers == ("M1K",)
        assert not s2.footed and s2.inputs == ("C", "OUT1") and s2.keepers == ("M2K",)
        assert s2.internal_nodes == ("m",)
        assert r.clocks == ["CLK"]


@pytest.mark.parametrize("footed", [True, False])
def test_dual_rail_pair(footed):
    # W&H ch. 9 (dual-rail domino, from memory): true and complement
    # networks over one footer, cross-coupled pmos keepers.  Hand reasoning:
    # XT = A·B (series), XF = A'+B' (parallel); the shared bottom net is the
    # footer node of both, so XF is not an internal node of XT.  A dynamic
    # node gating the other's keeper is no clock, so even footless and
    # with no declared clock, CLK is the only clock.
    bottom = "nf" if footed else "VSS"
    rows = [
        ("MPT", "pmos", "XT", "CLK", "VDD", 1.0, 0.18),
        ("MPF", "pmos", "XF", "CLK", "VDD", 1.0, 0.18),
        ("MKT", "pmos", "XT", "XF", "VDD", 0.3, 0.36),
        ("MKF", "pmos", "XF", "XT", "VDD", 0.3, 0.36),
        ("MAT", "nmos", "XT", "A_T", "t1", 1.0, 0.18),
        ("MBT", "nmos", "t1", "B_T", bottom, 1.0, 0.18),
        ("MAF", "nmos", "XF", "A_F", bottom, 1.0, 0.18),
        ("MBF", "nmos", "XF", "B_F", bottom, 1.0, 0.18),
    ] + inverter("MIT", "XT", "YT") + inverter("MIF", "XF", "YF")
    if footed:
        rows.append(("MF", "nmos", "nf", "CLK", "VSS", 2.0, 0.18))
    for tech in (TECH, NO_CLOCK):
        r = recognise(rows, tech)
        assert [s.dynamic_node for s in r.stages] == ["XF", "XT"]
        by = {s.dynamic_node: s for s in r.stages}
        assert by["XT"].internal_nodes == ("t1",) and by["XT"].keepers == ("MKT",)
        assert by["XF"].internal_nodes == () and by["XF"].evaluation == ("MAF", "MBF")
        assert by["XT"].footer_node == by["XF"].footer_node == ("nf" if footed else None)
        assert r.clocks == ["CLK"] and r.findings == []


@pytest.mark.parametrize("with_inverter", [True, False])
def test_secondary_precharge(with_inverter):
    # W&H ch. 9 (secondary precharge transistors against charge sharing,
    # from memory): a clocked pmos from VDD to an internal node.  Hand
    # reasoning: n1 is still an internal node of X's network, not a stage
    # of its own: X drives the inverter; without one, X is the farthest
    # precharged net from ground (4 devices against 3).
    rows = NAND3_FOOTED + [("MPS", "pmos", "n1", "CLK", "VDD", 0.5, 0.18)]
    if not with_inverter:
        rows = [r for r in rows if not r[0].startswith(("MI", "MK"))]
    (s,) = recognise(rows).stages
    assert s.dynamic_node == "X"
    assert s.internal_nodes == ("n1", "n2")
    assert s.secondary_precharge == {"n1": "MPS"}
    assert s.precharge == ("MPC",)


def test_static_nand2_and_inverter_are_not_stages():
    # Hand reasoning: in a complementary static gate every pull-up input
    # also drives the pull-down, so no pmos from VDD is a precharge.  Also
    # a NAND2 of CLK and EN (clock gating) is static, CLK or not.
    rows = [
        ("MPA", "pmos", "Y", "A", "VDD", 1.0, 0.18),
        ("MPB", "pmos", "Y", "B", "VDD", 1.0, 0.18),
        ("MNA", "nmos", "Y", "A", "s1", 1.0, 0.18),
        ("MNB", "nmos", "s1", "B", "VSS", 1.0, 0.18),
        ("MPC", "pmos", "G", "CLK", "VDD", 1.0, 0.18),
        ("MPE", "pmos", "G", "EN", "VDD", 1.0, 0.18),
        ("MNE", "nmos", "G", "EN", "s2", 1.0, 0.18),
        ("MNC", "nmos", "s2", "CLK", "VSS", 1.0, 0.18),
    ] + inverter("MI", "Y", "Z") + inverter("MJ", "CLK", "CLKB")
    for tech in (TECH, NO_CLOCK):
        r = recognise(rows, tech)
        assert r.stages == [] and r.findings == []
    assert recognise(rows, NO_CLOCK).clocks == []


def test_no_stage_no_clock():
    # Hand reasoning: a lone inverter has no dynamic stage and no clock.
    r = recognise(inverter("MI", "A", "Y"), NO_CLOCK)
    assert (r.stages, r.findings, r.clocks, r.clock_inferred) == ([], [], [], False)
    assert r.clock_note.startswith("no clock")


def test_clock_inferred_with_empty_clock_list():
    # Footed: CLK gates both the precharge pmos and the footer (W&H ch. 9).
    r = recognise(NAND3_FOOTED, NO_CLOCK)
    assert [s.dynamic_node for s in r.stages] == ["X"] and r.stages[0].footer == "MF"
    assert r.clocks == ["CLK"] and r.clock_inferred
    assert r.clock_note == "clock CLK inferred: gates precharge MPC and footer MF of X"


def test_footless_clock_inferred_as_only_candidate_beside_static_gates():
    # Footless with keeper, next to a static NAND2: the keeper's gate is the
    # inverter output (feedback, no clock) and the static pull-ups are no
    # precharge, so PHI is the only net gating precharge-like devices.
    rows = [
        ("MPC", "pmos", "X", "PHI", "VDD", 1.0, 0.18),
        ("MK", "pmos", "X", "OUT", "VDD", 0.3, 0.36),
        ("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
        ("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18),
        ("MSA", "pmos", "Y", "A", "VDD", 1.0, 0.18),
        ("MSB", "pmos", "Y", "OUT", "VDD", 1.0, 0.18),
        ("MSN", "nmos", "Y", "A", "s", 1.0, 0.18),
        ("MSM", "nmos", "s", "OUT", "VSS", 1.0, 0.18),
    ] + inverter("MI", "X", "OUT")
    for tech in (NO_CLOCK, TECH):  # TECH declares CLK, which is absent here
        r = recognise(rows, tech)
        assert [s.dynamic_node for s in r.stages] == ["X"]
        assert r.stages[0].clock == "PHI" and r.stages[0].keepers == ("MK",)
        assert r.clocks == ["PHI"] and r.clock_inferred
        assert "only net gating precharge-like devices (MPC on X)" in r.clock_note


def test_differently_named_clock_footed():
    rows = [tuple("PHI1" if v == "CLK" else v for v in row) for row in NAND3_FOOTED]
    r = recognise(rows)  # the tech file declares CLK
    assert [s.clock for s in r.stages] == ["PHI1"] and r.clocks == ["PHI1"]
    assert r.clock_inferred


def test_two_unlisted_clocks_of_footless_stages_stay_unexplained():
    # Hand reasoning: two footless stages gated by two unlisted nets: no rule
    # singles either out, so neither is a stage; each gets a finding.
    rows = [
        ("M1P", "pmos", "X1", "P1", "VDD", 1.0, 0.18),
        ("M1A", "nmos", "X1", "A", "a", 1.0, 0.18),
        ("M1B", "nmos", "a", "B", "VSS", 1.0, 0.18),
        ("M2P", "pmos", "X2", "P2", "VDD", 1.0, 0.18),
        ("M2A", "nmos", "X2", "C", "c", 1.0, 0.18),
        ("M2B", "nmos", "c", "D", "VSS", 1.0, 0.18),
    ]
    r = recognise(rows, NO_CLOCK)
    assert r.stages == [] and r.clocks == []
    assert len(r.findings) == 2
    assert "M1P looks like a precharge device of X1 but its gate P1 is not a known clock" in r.findings[0].message
    # Declaring one makes it a clock; the other then is the only one left.
    r = recognise(rows, dsk18_tech(clock=("P1",)))
    assert [s.clock for s in r.stages] == ["P1", "P2"] and r.clock_inferred


def test_complement_clock_inferred_from_inverter():
    # Hand reasoning: CLKB is the output of a static inverter fed by the
    # declared CLK and gates the predischarge of a footless p-type stage.
    # Two more footless stages gated by unlisted P2 and P3 keep rule 4 (only
    # one net left) from deciding, so only the complement rule finds CLKB.
    rows = [
        ("MND", "nmos", "XP", "CLKB", "VSS", 1.0, 0.18),
        ("MPA", "pmos", "XP", "A", "p1", 2.0, 0.18),
        ("MPB", "pmos", "p1", "B", "VDD", 2.0, 0.18),
    ] + inverter("MCK", "CLK", "CLKB")
    for k in (2, 3):
        rows += [
            (f"M{k}P", "pmos", f"X{k}", f"P{k}", "VDD", 1.0, 0.18),
            (f"M{k}A", "nmos", f"X{k}", f"C{k}", f"c{k}", 1.0, 0.18),
            (f"M{k}B", "nmos", f"c{k}", f"D{k}", "VSS", 1.0, 0.18),
        ]
    r = recognise(rows)
    assert [s.dynamic_node for s in r.stages] == ["XP"]
    assert r.clocks == ["CLK", "CLKB"]
    assert r.clock_note == "clock CLK from tech file; clock CLKB inferred: complement of clock CLK"
    assert sorted(f.message.split()[0] for f in r.findings) == ["M2P", "M3P"]
    # With only P2 left unexplained, rule 4 takes it as well.
    r = recognise([row for row in rows if "3" not in row[0]])
    assert [s.dynamic_node for s in r.stages] == ["X2", "XP"]
    assert r.clocks == ["CLK", "CLKB", "P2"] and r.findings == []


def test_half_recognised_structures_are_findings():
    c = make_circuit(
        [
            # (a) precharge, no evaluation network: X only drives an inverter.
            ("MPA", "pmos", "XA", "CLK", "VDD", 1.0, 0.18),
            # (b) evaluation network with no path to ground.
            ("MPB", "pmos", "XB", "CLK", "VDD", 1.0, 0.18),
            ("MB1", "nmos", "XB", "A", "b1", 1.0, 0.18),
            ("MB2", "nmos", "b1", "B", "b2", 1.0, 0.18),
            # (c) clocked footer under a network that nothing precharges.
            ("MC1", "nmos", "XC", "C", "c1", 1.0, 0.18),
            ("MC2", "nmos", "c1", "D", "c2", 1.0, 0.18),
            ("MCF", "nmos", "c2", "CLK", "VSS", 1.0, 0.18),
        ]
        + inverter("MIA", "XA", "YA")
        + inverter("MIB", "XB", "YB"),
        TECH,
    )
    r = find_stages(c, TECH)
    assert r.stages == []
    msgs = {f.message: f.location_um for f in r.findings}
    assert len(msgs) == 3
    (a,) = [m for m in msgs if m.startswith("MPA")]
    assert "XA has no nmos evaluation network" in a
    assert msgs[a] == c.device("MPA").location_um
    (b,) = [m for m in msgs if "no path to ground" in m]
    assert "XB" in b and msgs[b] == c.nets["XB"].location_um
    (f,) = [m for m in msgs if m.startswith("MCF")]
    assert "footer" in f and msgs[f] == c.device("MCF").location_um


def test_clock_inside_evaluation_network_is_a_finding():
    # Hand reasoning: a clock gating a mid-stack device is neither footer
    # nor input; with no static pull-up this is not a gate we can analyse.
    rows = [
        ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MA", "nmos", "X", "CLK", "n1", 1.0, 0.18),
        ("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18),
    ]
    r = recognise(rows)
    assert r.stages == []
    assert len(r.findings) == 1 and "gates a device inside the evaluation network of X" in r.findings[0].message


def test_many_stages_recognised():
    # Hand reasoning: 500 copies of the footed NAND3 (suffixes on every
    # net but the rails and the clock) are 500 identical stages.
    rows = []
    for k in range(500):
        for n, t, d, g, s, w, l in NAND3_FOOTED:
            ren = {v: v if v in ("VDD", "VSS", "CLK") else f"{v}_{k}" for v in (d, g, s)}
            rows.append((f"{n}_{k}", t, ren[d], ren[g], ren[s], w, l))
    r = recognise(rows)
    assert len(r.stages) == 500 and r.findings == []
    assert all(s.internal_nodes == (f"n1_{s.dynamic_node[2:]}", f"n2_{s.dynamic_node[2:]}") for s in r.stages)


def test_np_domino_n_stage_feeding_p_stage():
    # W&H ch. 9 (NP domino, from memory): an n-type stage clocked by CLK
    # drives a p-type stage clocked by CLKB = not CLK directly, no inverter
    # between.  Hand reasoning: CLKB gates the predischarge nmos and the
    # pmos header of XP, so it is inferred although only CLK is declared.
    rows = [
        ("M1P", "pmos", "X1", "CLK", "VDD", 1.0, 0.18),
        ("M1A", "nmos", "X1", "A", "k", 1.0, 0.18),
        ("M1B", "nmos", "k", "B", "f", 1.0, 0.18),
        ("M1F", "nmos", "f", "CLK", "VSS", 2.0, 0.18),
        ("M2D", "nmos", "XP", "CLKB", "VSS", 1.0, 0.18),
        ("M2A", "pmos", "XP", "X1", "h", 2.0, 0.18),
        ("M2H", "pmos", "h", "CLKB", "VDD", 3.0, 0.18),
    ] + inverter("MCK", "CLK", "CLKB")
    r = recognise(rows)
    assert [(s.dynamic_node, s.polarity, s.clock) for s in r.stages] == [("X1", "n", "CLK"), ("XP", "p", "CLKB")]
    p = r.stages[1]
    assert p.inputs == ("X1",) and p.internal_nodes == () and (p.footer, p.footer_node) == ("M2H", "h")
    assert r.clocks == ["CLK", "CLKB"] and r.clock_inferred and r.findings == []


def test_footers_on_two_nets_kept_with_finding():
    # Hand reasoning: each leg has its own footer; the stage is still
    # recognised, with the first footer node and a finding about the other.
    rows = [
        ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MA", "nmos", "X", "A", "f1", 1.0, 0.18),
        ("MF1", "nmos", "f1", "CLK", "VSS", 1.0, 0.18),
        ("MB", "nmos", "X", "B", "f2", 1.0, 0.18),
        ("MF2", "nmos", "f2", "CLK", "VSS", 1.0, 0.18),
    ]
    r = recognise(rows)
    (s,) = r.stages
    assert (s.footer, s.footer_node, s.internal_nodes) == ("MF1", "f1", ("f2",))
    assert len(r.findings) == 1 and "footers on several nets (f1, f2)" in r.findings[0].message

# -- static gates are never dynamic stages ---------------------------------
# Each circuit's outcome comes from its truth table, written out by hand in
# the test: a node whose pull-up conducts for every input pattern in which
# its pull-down does not is driven for every input, so it is static.


def oai21(y, a, b, c, tag):
    """y = !(a·(b + c)): pmos a straight from VDD to y, pmos b, c in series;
    nmos a in series at ground under nmos b, c in parallel."""
    return [
        (f"MP{tag}a", "pmos", y, a, "VDD", 0.42, 0.15),
        (f"MP{tag}b", "pmos", "VDD", b, f"m{tag}", 0.84, 0.15),
        (f"MP{tag}c", "pmos", f"m{tag}", c, y, 0.84, 0.15),
        (f"MN{tag}a", "nmos", "VSS", a, f"s{tag}", 0.42, 0.15),
        (f"MN{tag}b", "nmos", f"s{tag}", b, y, 0.64, 0.15),
        (f"MN{tag}c", "nmos", f"s{tag}", c, y, 0.64, 0.15),
    ]


def set_reset_flip_flop_slice():
    """The set/reset gate of a flip-flop with active-low set and reset:
    Y = !(SET_B · (S + R)), R = !RESET_B, S the storage node of a
    transmission-gate latch clocked by CK = !CLK_N (pass gate open when
    CKB = !CK is high, clocked feedback inverter of Y), Q = !Y."""
    return (
        oai21("Y", "SET_B", "S", "R", "1")
        + inverter("MIR", "RESET_B", "R")
        + inverter("MIC", "CLK_N", "CK")
        + inverter("MIK", "CK", "CKB")
        + inverter("MID", "D", "d")
        + inverter("MIQ", "Y", "Q")
        + [
            ("MTN", "nmos", "d", "CKB", "S", 0.36, 0.15),
            ("MTP", "pmos", "d", "CK", "S", 0.42, 0.15),
            ("MFN1", "nmos", "S", "CK", "f1", 0.36, 0.15),
            ("MFN2", "nmos", "f1", "Y", "VSS", 0.42, 0.15),
            ("MFP1", "pmos", "S", "CKB", "f2", 0.42, 0.15),
            ("MFP2", "pmos", "f2", "Y", "VDD", 0.42, 0.15),
        ]
    )


def assert_static_only(rows, techs=(TECH, NO_CLOCK)):
    for tech in techs:
        r = recognise(rows, tech)
        assert r.stages == [] and r.findings == []
        assert not r.clock_inferred


def test_oai21_with_one_pmos_from_supply_and_footer_like_nmos_is_static():
    # Truth table of y = !(a·(b + c)), rows a b c = 000 ... 111:
    #   pull-up   !a + !b·!c : 1 1 1 1 1 0 0 0
    #   pull-down a·(b + c)  : 0 0 0 0 0 1 1 1
    # Complementary, so static; yet pmos a alone from VDD and nmos a alone
    # at ground look like a precharge and a footer gated by a.
    rows = oai21("Y", "A", "B", "C", "") + inverter("MI", "Y", "Z")
    assert_static_only(rows)
    assert recognise(rows, NO_CLOCK).clocks == []
    # A declared clock on that input changes nothing: a clock is an input.
    assert_static_only(rows, [dsk18_tech(clock=("A",))])


def test_aoi21_mirror_is_no_p_type_stage():
    # The mirror image (W&H ch. 9: a p-type stage mirrors the n-type one):
    # y = !(a + b·c), nmos a straight from ground to y (like a predischarge
    # device), pmos a in series at VDD (like a header).  Truth table, rows
    # a b c = 000 ... 111:
    #   pull-up   !a·(!b + !c) : 1 1 1 0 0 0 0 0
    #   pull-down a + b·c      : 0 0 0 1 1 1 1 1
    rows = [
        ("MNa", "nmos", "Y", "A", "VSS", 0.42, 0.15),
        ("MNb", "nmos", "Y", "B", "k", 0.64, 0.15),
        ("MNc", "nmos", "k", "C", "VSS", 0.64, 0.15),
        ("MPa", "pmos", "VDD", "A", "m", 0.84, 0.15),
        ("MPb", "pmos", "m", "B", "Y", 0.84, 0.15),
        ("MPc", "pmos", "m", "C", "Y", 0.84, 0.15),
    ] + inverter("MI", "Y", "Z")
    assert_static_only(rows, [NO_CLOCK, dsk18_tech(clock=("A",))])
    assert recognise(rows, NO_CLOCK).clocks == []


def test_set_reset_gate_of_a_flip_flop_is_static_and_set_b_is_no_clock():
    # Truth table of Y = !(SET_B · (S + R)), rows SET_B S R = 000 ... 111:
    #   pull-up   !SET_B + !S·!R : 1 1 1 1 1 0 0 0
    #   pull-down SET_B·(S + R)  : 0 0 0 0 0 1 1 1
    # and the latch node S is driven for every CK (pass gate when CK = 0,
    # feedback inverter of Y when CK = 1; CKB = !CK).  So nothing is
    # dynamic, with clocks inferred or declared (the clock, or even the set
    # and reset inputs), and SET_B is never taken for a clock.
    rows = set_reset_flip_flop_slice()
    r = recognise(rows, NO_CLOCK)
    assert (r.stages, r.findings, r.clocks) == ([], [], [])
    for clock in (("CLK_N",), ("CLK_N", "SET_B", "RESET_B")):
        r = recognise(rows, dsk18_tech(clock=clock))
        assert (r.stages, r.findings, r.clocks) == ([], [], sorted(clock))


def test_set_reset_input_is_not_the_clock_beside_a_domino_stage():
    # The footed domino NAND3 (W&H ch. 9) clocked by CLK beside the static
    # set/reset gate: only CLK gates a precharge device and a footer of a
    # node that can float (CLK = 1, A = B = C = 0: truth table of the NAND3
    # pull-down, 0 unless A = B = C = 1); Y is static (truth table above).
    r = recognise(NAND3_FOOTED + set_reset_flip_flop_slice(), NO_CLOCK)
    assert [s.dynamic_node for s in r.stages] == ["X"]
    assert r.clocks == ["CLK"] and r.findings == []
    assert r.clock_note == "clock CLK inferred: gates precharge MPC and footer MF of X"


def test_static_nand3_nor3_aoi22():
    # Truth tables (inputs A B C, resp. A B C D, all 2^n rows):
    #   NAND3: pull-up !A + !B + !C, pull-down A·B·C: exactly one conducts.
    #   NOR3:  pull-up !A·!B·!C,     pull-down A + B + C.
    #   AOI22: pull-up (!A + !B)·(!C + !D), pull-down A·B + C·D.
    # Each pull-up is the complement of its pull-down (De Morgan), so no
    # node is dynamic, whichever input is named CLK.
    nand3 = [(f"MP{x}", "pmos", "Y", x, "VDD", 1.0, 0.18) for x in ("CLK", "A", "B")] + [
        ("MNA", "nmos", "Y", "A", "s1", 1.0, 0.18),
        ("MNB", "nmos", "s1", "B", "s2", 1.0, 0.18),
        ("MNC", "nmos", "s2", "CLK", "VSS", 1.0, 0.18),
    ]
    nor3 = [
        ("MPA", "pmos", "VDD", "CLK", "m1", 2.0, 0.18),
        ("MPB", "pmos", "m1", "A", "m2", 2.0, 0.18),
        ("MPC", "pmos", "m2", "B", "Y", 2.0, 0.18),
    ] + [(f"MN{x}", "nmos", "Y", x, "VSS", 0.5, 0.18) for x in ("CLK", "A", "B")]
    aoi22 = [
        ("MPA", "pmos", "VDD", "A", "m", 1.0, 0.18),
        ("MPB", "pmos", "VDD", "B", "m", 1.0, 0.18),
        ("MPC", "pmos", "m", "CLK", "Y", 1.0, 0.18),
        ("MPD", "pmos", "m", "D", "Y", 1.0, 0.18),
        ("MNA", "nmos", "Y", "A", "k1", 1.0, 0.18),
        ("MNB", "nmos", "k1", "B", "VSS", 1.0, 0.18),
        ("MNC", "nmos", "Y", "CLK", "k2", 1.0, 0.18),
        ("MND", "nmos", "k2", "D", "VSS", 1.0, 0.18),
    ]
    for rows in (nand3, nor3, aoi22):
        assert_static_only(rows + inverter("MI", "Y", "Z"))


def test_clocked_static_gate_with_clock_as_lone_pull_up_is_static():
    # Truth table of Y = !(CLK·(A + B)), rows CLK A B = 000 ... 111:
    #   pull-up   !CLK + !A·!B : 1 1 1 1 1 0 0 0
    #   pull-down CLK·(A + B)  : 0 0 0 0 0 1 1 1
    # With CLK declared, pmos CLK from VDD to Y and nmos CLK at ground look
    # exactly like precharge and footer; the complementary pull-up (pmos A,
    # B in series, off the supply) makes Y static all the same.
    assert_static_only(oai21("Y", "CLK", "A", "B", "") + inverter("MI", "Y", "Z"))


def test_transmission_gate_latch_is_no_stage():
    # Case analysis (G, GB = !G): G = 1 opens the pass gate from d = !D; G =
    # 0 closes the feedback tristate of Q = !S onto S; an active-low set
    # adds pmos SET_B from VDD to S and nmos SET_B at ground under the
    # feedback: SET_B = 0 drives S high, SET_B = 1 leaves the latch as it
    # was.  S is driven for every input: no stage, whichever net is
    # declared a clock (G, or SET_B, which then looks like a footer).
    for with_set in (False, True):
        rows = inverter("MID", "D", "d") + inverter("MIG", "G", "GB") + inverter("MIQ", "S", "Q") + [
            ("MTN", "nmos", "d", "G", "S", 0.5, 0.15),
            ("MTP", "pmos", "d", "GB", "S", 0.5, 0.15),
            ("MFP1", "pmos", "VDD", "Q", "f2", 0.4, 0.15),
            ("MFP2", "pmos", "f2", "G", "S", 0.4, 0.15),
            ("MFN1", "nmos", "S", "GB", "f1", 0.4, 0.15),
            ("MFN2", "nmos", "f1", "Q", "k" if with_set else "VSS", 0.4, 0.15),
        ]
        if with_set:
            rows += [("MSP", "pmos", "VDD", "SET_B", "S", 0.4, 0.15), ("MSN", "nmos", "k", "SET_B", "VSS", 0.4, 0.15)]
        assert_static_only(rows, [NO_CLOCK, dsk18_tech(clock=("G",)), dsk18_tech(clock=("G", "SET_B"))])


@pytest.mark.parametrize("footed", [True, False])
def test_domino_or2_still_a_stage(footed):
    # W&H ch. 9: domino OR2, nmos A and B in parallel below the precharged
    # node.  Truth table of the pull-down: A + B; with CLK = 1 (precharge
    # off) and A = B = 0 the node is joined to nothing, so it is dynamic;
    # the keeper's gate OUT is the node's own inverter output.
    bottom = "nf" if footed else "VSS"
    rows = [
        ("MPC", "pmos", "X", "CLK", "VDD", 1.0, 0.18),
        ("MK", "pmos", "X", "OUT", "VDD", 0.3, 0.36),
        ("MA", "nmos", "X", "A", bottom, 1.0, 0.18),
        ("MB", "nmos", "X", "B", bottom, 1.0, 0.18),
    ] + inverter("MI", "X", "OUT")
    if footed:
        rows.append(("MF", "nmos", "nf", "CLK", "VSS", 2.0, 0.18))
    for tech in (TECH, NO_CLOCK):
        r = recognise(rows, tech)
        (s,) = r.stages
        assert (s.dynamic_node, s.inputs, s.internal_nodes, s.footed) == ("X", ("A", "B"), (), footed)
        assert s.keepers == ("MK",) and r.clocks == ["CLK"] and r.findings == []


_NETS = ["VDD", "VSS", "CLK", "X", "Y", "n1", "n2", "A", "B"]
_ROW = st.tuples(st.sampled_from(["nmos", "pmos"]), *[st.sampled_from(_NETS)] * 3)


@settings(max_examples=300, deadline=None)
@given(st.lists(_ROW, min_size=1, max_size=12), st.booleans())
def test_random_circuits_respect_the_stage_definition(rows, declared):
    # Hand reasoning, the definition (W&H ch. 9): whatever the circuit,
    # recognition never raises, and every stage it reports is made of a
    # clock-gated precharge device from the supply to X, evaluation devices
    # of the other type, a footer (if any) gated by a clock on the rail,
    # and internal nodes that are neither X, nor a rail, nor the footer node.
    tech = TECH if declared else NO_CLOCK
    c = make_circuit([(f"M{k}", t, d, g, s, 1.0, 0.18) for k, (t, d, g, s) in enumerate(rows)], tech)
    r = recognised_both_ways(c, tech)
    assert [s.dynamic_node for s in r.stages] == sorted(s.dynamic_node for s in r.stages)
    for s in r.stages:
        ev, pull = ("nmos", "pmos") if s.polarity == "n" else ("pmos", "nmos")
        for name in s.precharge:
            d = c.device(name)
            assert d.type == pull and d.gate in r.clocks and {d.drain, d.source} == {s.dynamic_node, s.supply}
        assert s.clock in r.clocks
        assert s.evaluation and all(c.device(n).type == ev for n in s.evaluation)
        assert list(s.inputs) == sorted({c.device(n).gate for n in s.evaluation})
        assert not set(s.inputs) & set(r.clocks)
        assert list(s.internal_nodes) == sorted(s.internal_nodes)
        assert not {s.dynamic_node, s.footer_node, "VDD", "VSS"} & set(s.internal_nodes)
        if s.footer:
            f = c.device(s.footer)
            assert f.gate in r.clocks and {f.drain, f.source} == {s.footer_node, s.rail}
        for k in s.keepers:
            assert c.device(k).gate not in r.clocks
