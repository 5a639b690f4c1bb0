"""The charge-sharing result against ngspice transients (the reference).

Each case builds a whole dynamic gate, applies one input pattern and runs
ngspice (Debian package ``ngspice``) with SPICE level-1 MOSFETs: the
simulator decides on its own how charge moves, where the pass devices cut
off (VDD − VT(V) with body effect) and what the junctions store.  v(X)
after settling must agree with ``v_final`` within 10 mV.  Deck builder:
spice_reference.transient_deck.
"""

from __future__ import annotations

import pytest

from analyze.search.analysis import evaluate_pattern
from analyze.physics.charge import depletion_charge
from analyze.physics.sharing import build_model
from analyze.physics.threshold import pass_limit
from ngspice_run import require_ngspice, run_deck
from sharing_circuits import domino, make_tech
from spice_reference import model_cards, transient_deck

pytestmark = pytest.mark.ngspice

# cjswg = cjsw and pbsw = pb: level 1 has one sidewall and one pb.
TECH = make_tech()
TOL = 0.010  # V


def _flip(caps: dict) -> dict:
    """The same capacitances with n+ and p+ junctions swapped (for the
    mirrored p-type gate, whose evaluation diffusions are p+)."""
    out = {}
    for net, kw in caps.items():
        kw = dict(kw)
        kw["nmos"], kw["pmos"] = kw.pop("pmos", None), kw.pop("nmos", None)
        out[net] = kw
    return out


def _check(evaluation, caps, polarity, pattern, regime, secondary=(), probes=()):
    require_ngspice()
    caps = caps if polarity == "n" else _flip(caps)
    if polarity == "p":
        pattern = {k: 1 - v for k, v in pattern.items()}
    circuit, stage = domino(TECH, evaluation, caps, polarity=polarity, secondary=secondary)
    wc = evaluate_pattern(circuit, stage, TECH, pattern)
    assert wc is not None and wc.regime == regime
    out = run_deck(transient_deck(circuit, stage, TECH, pattern, probes=probes))
    assert out["vx"] == pytest.approx(wc.v_final, abs=TOL)
    return wc, out


NAND3 = [("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "FOOT")]


def _nand3_caps(x: float, mid: float) -> dict:
    return {
        "X": dict(linear=x, nmos=(0.5, 1.5, 1.0), pmos=(0.9, 3.0, 1.3)),
        "n1": dict(linear=mid, nmos=(0.4, 1.2, 2.0)),
        "n2": dict(linear=mid, nmos=(0.4, 1.2, 2.0)),
        "FOOT": dict(linear=0.5, nmos=(0.5, 1.5, 2.0)),
    }


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_all_nodes_equalise(polarity):
    # Large internal nodes: X falls below the pass limit, all three meet.
    _check(NAND3, _nand3_caps(8.0, 4.0), polarity, {"A": 1, "B": 1, "C": 0}, "a")


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_internal_nodes_stop_at_pass_limit(polarity):
    # Small internal nodes: they stop at VDD - VT(V) (mirror: |VTp(VDD - V)|)
    # while X stays above.
    wc, out = _check(NAND3, _nand3_caps(20.0, 0.5), polarity, {"A": 1, "B": 1, "C": 0}, "b",
                     probes=("n1", "n2"))
    lim = pass_limit(TECH.mos["nmos" if polarity == "n" else "pmos"], TECH.vdd)
    expect = lim if polarity == "n" else TECH.vdd - lim
    assert out["v_n1"] == pytest.approx(expect, abs=TOL)
    assert out["v_n2"] == pytest.approx(expect, abs=TOL)


# Two legs: p1 has a secondary precharge device, d1 does not.  With A and C
# on, p1 sits on the far side of X from d1: it keeps its charge until X
# reaches the pass limit, and then holds X there.
TWO_LEGS = [("MA", "X", "A", "p1"), ("MB", "p1", "B", "FOOT"),
            ("MC", "X", "C", "d1"), ("MD", "d1", "D", "FOOT")]


def _two_leg_caps(x: float, p1: float, d1: float) -> dict:
    return {
        "X": dict(linear=x, nmos=(0.5, 1.5, 2.0), pmos=(0.9, 3.0, 1.3)),
        "p1": dict(linear=p1, nmos=(0.4, 1.2, 2.0), pmos=(0.3, 1.6, 0.5)),
        "d1": dict(linear=d1, nmos=(0.4, 1.2, 2.0)),
        "FOOT": dict(linear=0.5, nmos=(0.8, 2.0, 4.0)),
    }


ON = {"A": 1, "B": 0, "C": 1, "D": 0}


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_precharged_node_keeps_its_charge(polarity):
    # Regime b: X alone charges d1 to the pass limit; p1 stays at its start.
    wc, out = _check(TWO_LEGS, _two_leg_caps(15.0, 6.0, 2.0), polarity, ON, "b",
                     secondary=("p1",), probes=("p1",))
    start = TECH.vdd if polarity == "n" else 0.0
    assert out["v_p1"] == pytest.approx(start, abs=TOL)


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_precharged_node_holds_x_at_pass_limit(polarity):
    # Regime c: d1 would pull X below the pass limit; p1 gives up charge
    # and X ends at the limit.
    wc, out = _check(TWO_LEGS, _two_leg_caps(3.0, 20.0, 8.0), polarity, ON, "c",
                     secondary=("p1",))
    lim = pass_limit(TECH.mos["nmos" if polarity == "n" else "pmos"], TECH.vdd)
    assert wc.v_final == pytest.approx(lim if polarity == "n" else TECH.vdd - lim, abs=1e-9)


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_precharged_node_rule_is_a_bound(polarity):
    # X - A - n1 - B - n2 - C - FOOT with n2 precharged, A = B = 1: n2 feeds
    # n1 directly, not through X, so it gives up charge before X reaches the
    # pass limit.  The analysis lets X pay first (it cannot know the device
    # strengths that split the charge), so the simulator ends with less droop.
    require_ngspice()
    caps = _nand3_caps(10.0, 3.0) if polarity == "n" else _flip(_nand3_caps(10.0, 3.0))
    pattern = {"A": 1, "B": 1, "C": 0} if polarity == "n" else {"A": 0, "B": 0, "C": 1}
    circuit, stage = domino(TECH, NAND3, caps, polarity=polarity, secondary=("n2",))
    wc = evaluate_pattern(circuit, stage, TECH, pattern)
    out = run_deck(transient_deck(circuit, stage, TECH, pattern))
    droop_sim = abs(out["vx"] - (TECH.vdd if polarity == "n" else 0.0))
    assert droop_sim <= wc.droop_v + 0.001


# The chain X – A – n1 – B – n2 – C – FOOT with n1 precharged and A = B = 1:
# MA is off while X and n1 are both above the pass limit, so n1 alone feeds
# n2; X gives charge only once n1 has run out at the limit.
def _chain_caps(x: float, n1: float, n2: float) -> dict:
    caps = _nand3_caps(x, 0.0)
    caps["n1"]["linear"], caps["n2"]["linear"] = n1, n2
    return caps


def _node_voltage(polarity, caps, pattern, node):
    """The analysis's own final voltage of ``node`` (real volts)."""
    circuit, stage = domino(TECH, NAND3, caps, polarity=polarity, secondary=("n1",))
    model = build_model(circuit, stage, TECH)
    values = tuple(pattern[n] for n in model.inputs)
    on = model.conducting(values)
    comp, _ = model.component(on)
    red = model.redistribute_component(comp, on)
    local = [i for i in range(len(model.nodes)) if (comp >> i) & 1].index(model.nodes.index(node))
    return model.to_volts(red.voltages[local])


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_chain_precharged_node_feeds_what_only_it_reaches(polarity):
    # Large n1, small n2: n1 charges n2 to the pass limit and stays above it;
    # X keeps its start level, and n1 ends where the analysis puts it.
    caps = _chain_caps(10.0, 8.0, 2.0)
    pattern = {"A": 1, "B": 1, "C": 0}
    wc, out = _check(NAND3, caps, polarity, pattern, "b", secondary=("n1",), probes=("n1", "n2"))
    start = TECH.vdd if polarity == "n" else 0.0
    assert wc.v_final == pytest.approx(start, abs=1e-9)
    flipped = caps if polarity == "n" else _flip(caps)
    real = pattern if polarity == "n" else {k: 1 - v for k, v in pattern.items()}
    assert out["v_n1"] == pytest.approx(_node_voltage(polarity, flipped, real, "n1"), abs=TOL)
    lim = pass_limit(TECH.mos["nmos" if polarity == "n" else "pmos"], TECH.vdd)
    assert out["v_n2"] == pytest.approx(lim if polarity == "n" else TECH.vdd - lim, abs=TOL)


@pytest.mark.parametrize("polarity", ["n", "p"])
@pytest.mark.parametrize("x", [20.0, 10.0])
def test_chain_precharged_node_runs_out(polarity, x):
    # Small n1, large n2: n1 runs out at the pass limit and X, through it,
    # pays the rest from above the limit (the fix of DYN_NAND3_LONG).
    lim = pass_limit(TECH.mos["nmos" if polarity == "n" else "pmos"], TECH.vdd)
    lim = lim if polarity == "n" else TECH.vdd - lim
    wc, out = _check(NAND3, _chain_caps(x, 2.0, 8.0), polarity, {"A": 1, "B": 1, "C": 0}, "b",
                     secondary=("n1",), probes=("n1", "n2"))
    assert out["v_n1"] == pytest.approx(lim, abs=TOL)
    assert out["v_n2"] == pytest.approx(lim, abs=TOL)
    assert wc.droop_v > 0.1


# X – A – p1 – B – d – C – p2 – D – FOOT (and d – E – FOOT), p1 and p2
# precharged, A = B = C = 1: d has two precharged neighbours.  The small p1
# runs out while p2 still feeds d, and X then pays through p1: pooling p1
# and p2 as d's only supply would leave X at its start level, which ngspice
# does not.  The analysis charges d to X first, a bound.
TWO_FEEDERS = [("MA", "X", "A", "p1"), ("MB", "p1", "B", "d"), ("MC", "d", "C", "p2"),
               ("MD", "p2", "D", "FOOT"), ("ME", "d", "E", "FOOT")]


@pytest.mark.parametrize("polarity", ["n", "p"])
def test_two_precharged_neighbours_rule_is_a_bound(polarity):
    require_ngspice()
    caps = {"X": dict(linear=10.0), "p1": dict(linear=1.0), "d": dict(linear=8.0),
            "p2": dict(linear=40.0), "FOOT": dict(linear=0.5)}
    pattern = {"A": 1, "B": 1, "C": 1, "D": 0, "E": 0}
    if polarity == "p":
        pattern = {k: 1 - v for k, v in pattern.items()}
    circuit, stage = domino(TECH, TWO_FEEDERS, caps, polarity=polarity, secondary=("p1", "p2"))
    wc = evaluate_pattern(circuit, stage, TECH, pattern)
    out = run_deck(transient_deck(circuit, stage, TECH, pattern))
    droop_sim = abs(out["vx"] - (TECH.vdd if polarity == "n" else 0.0))
    assert droop_sim <= wc.droop_v + 0.001
    assert droop_sim > 0.1  # pooling p1 and p2 would have promised no droop


def test_reference_junction_discharge():
    # Self-check of the reference (a known property of ngspice level 1): one n+
    # junction discharged by a constant current.  The time between two
    # voltages times the current equals the depletion-charge difference of
    # the SPICE junction formula, bottom plus sidewall.
    require_ngspice()
    area, perim, current_ua = 4.0, 10.0, 1.0  # µm², µm, µA
    v1, v2 = 1.5, 0.5
    deck = "\n".join([
        "* junction discharge",
        model_cards(TECH),
        "Vg g 0 DC 0",
        "M1 d g 0 0 nmod w=1u l=1u ad=4p as=0p pd=10u ps=0u",
        f"I1 d 0 DC {current_ua}u",
        ".ic v(d)=1.8 v(g)=0",
        ".options reltol=1e-6 abstol=1e-16 method=gear",
        ".tran 0.01n 40n uic",
        ".control", "run",
        f"meas tran t1 when v(d)={v1} fall=1",
        f"meas tran t2 when v(d)={v2} fall=1",
        ".endc", ".end", "",
    ])
    out = run_deck(deck)
    p = TECH.mos["nmos"]
    dq = sum(
        float(depletion_charge(c0, p.pb, m, v1) - depletion_charge(c0, p.pb, m, v2))
        for c0, m in ((p.cj * area, p.mj), (p.cjsw * perim, p.mjsw))
    )  # fC
    dt_ns = (out["t2"] - out["t1"]) * 1e9
    assert dt_ns * current_ua * 1e-6 * 1e-9 == pytest.approx(dq * 1e-15, rel=2e-3)
