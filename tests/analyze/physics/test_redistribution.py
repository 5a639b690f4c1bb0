"""Final voltages of charge sharing (analyze.physics.redistribution).

Checked against hand calculations (charge conservation on capacitors,
written out per test) and, for the nonlinear junction case, a closed-form
solution of the SPICE junction formula with M = 1/2.  The agreement with a
circuit simulator is in test_against_ngspice.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from analyze.search.analysis import analyze_stage
from analyze.physics.charge import NodeCharge
from analyze.physics.redistribution import final_voltage, linear_final_voltage, network_final_voltage
from sharing_circuits import domino, make_tech


def lin(c: float) -> NodeCharge:
    return NodeCharge.linear(c, 1.8)


def test_nand3_hand_calculation():
    # 3-input NAND, C_X = 30 fF, C1 = C2 = 10 fF at 1.8 V, A = B = 1, C = 0:
    # V = 30 * 1.8 / (30 + 10 + 10) = 54 / 50 = 1.08 V
    assert linear_final_voltage([30.0, 10.0, 10.0], [1.8, 0.0, 0.0]) == pytest.approx(1.08)
    r = final_voltage(lin(30.0), lin(20.0), lin(0.0), v_lim=1.35)
    assert (r.v_final, r.regime) == (pytest.approx(1.08), "a")


def test_nand3_through_the_whole_analysis():
    # The same gate built as a circuit (linear capacitances only, no body
    # effect: pass limit 1.8 - 0.45 = 1.35 V > 1.08 V).  Worst case A = B = 1,
    # C = 0, both internal nodes shared, 1.08 V; receiver threshold VDD/2
    # for the symmetric inverter (see test_threshold).
    tech = make_tech(guard=0.0, nmos={"gamma": 0.0, "vt0": 0.45}, pmos={"vt0": -0.45, "kp": 280.0})
    ev = [("MA", "X", "A", "n1"), ("MB", "n1", "B", "n2"), ("MC", "n2", "C", "FOOT")]
    caps = {"X": dict(linear=30.0), "n1": dict(linear=10.0), "n2": dict(linear=10.0)}
    circuit, stage = domino(tech, ev, caps, receivers=((1.0, 0.18, 1.0, 0.18),))
    res = analyze_stage(circuit, stage, tech)
    wc = res.worst_case
    assert wc.inputs == {"A": 1, "B": 1, "C": 0}
    assert wc.shared_nodes == ["n1", "n2"]
    assert wc.v_final == pytest.approx(1.08)
    assert wc.v_final_linear == pytest.approx(1.08)
    assert wc.droop_v == pytest.approx(0.72)
    assert res.threshold_v == pytest.approx(0.9)
    assert res.margin_v == pytest.approx(0.18)
    assert res.status == "pass"


def test_regime_b_hand_calculation():
    # X = 30 fF, one discharged node 6 fF, pass limit 1.35 V.  All at 1.35 V
    # would hold 36 * 1.35 = 48.6 fC < 54 fC, so the node stops at 1.35 V and
    # X gives 6 * 1.35 = 8.1 fC: V = 1.8 - 8.1/30 = 1.53 V.
    r = final_voltage(lin(30.0), lin(6.0), lin(0.0), v_lim=1.35)
    assert (r.v_final, r.regime, r.v_discharged) == (pytest.approx(1.53), "b", 1.35)


def test_regime_c_hand_calculation():
    # X = 10 fF, discharged 20 fF, precharged 60 fF, pass limit 1.35 V.
    # Q = 10*1.8 + 60*1.8 = 126 fC; all at 1.35 V: 90 * 1.35 = 121.5 < 126 (not a).
    # X alone can give 10 * 0.45 = 4.5 fC < 20 * 1.35 = 27 fC (not b).  So X
    # ends at 1.35 V and the precharged node at (126 - 13.5 - 27) / 60 = 1.425 V.
    r = final_voltage(lin(10.0), lin(20.0), lin(60.0), v_lim=1.35)
    assert r.regime == "c"
    assert r.v_final == pytest.approx(1.35)
    assert r.v_precharged == pytest.approx(1.425)


def test_junction_closed_form():
    # X: 20 fF linear.  Discharged node: one n+ junction C0 = 10 fF, PB = 0.8,
    # M = 1/2, no pass limit in the way (v_lim = 1.5 V).  With s = sqrt(1 + V/PB)
    # the junction charge is 2*C0*PB*(s - 1) and V = PB*(s^2 - 1), so
    #   20*(1.8 - 0.8*(s^2 - 1)) = 16*(s - 1)  ->  s^2 + s - 4.25 = 0
    #   s = (-1 + sqrt(18))/2,  V = 0.8*(s^2 - 1)
    s = (-1 + math.sqrt(18.0)) / 2
    expect = 0.8 * (s * s - 1)
    junction = NodeCharge(0.0, np.array([10.0]), np.array([0.8]), np.array([0.5]),
                          np.array([False]), 1.8)
    r = final_voltage(lin(20.0), junction, lin(0.0), v_lim=1.5)
    assert r.regime == "a"
    assert r.v_final == pytest.approx(expect, abs=1e-9)
    assert expect == pytest.approx(1.30294, abs=1e-5)


def test_no_sharing_keeps_vdd():
    r = final_voltage(lin(10.0), lin(0.0), lin(0.0), v_lim=1.2)
    assert r.v_final == pytest.approx(1.8)


caps = st.floats(0.0, 40.0)


@settings(max_examples=200, deadline=None)
@given(caps.filter(lambda c: c > 0.1), caps, caps, st.floats(0.0, 5.0), st.floats(0.2, 1.7))
def test_monotone_and_continuous(cx, cd, cp, extra, v_lim):
    # Physical sense (charge conservation): more discharged capacitance can
    # only lower X, more precharged capacitance only raise it, and a tiny
    # change moves X only a little (no jump between regimes).
    base = final_voltage(lin(cx), lin(cd), lin(cp), v_lim).v_final
    assert final_voltage(lin(cx), lin(cd + extra), lin(cp), v_lim).v_final <= base + 1e-12
    assert final_voltage(lin(cx), lin(cd), lin(cp + extra), v_lim).v_final >= base - 1e-12
    # 1e-6 fF more at 0 V takes at most 1e-6 * 1.8 fC from at least C_X.
    nudged = final_voltage(lin(cx), lin(cd + 1e-6), lin(cp), v_lim).v_final
    assert abs(nudged - base) <= 1e-6 * 1.8 / cx + 1e-9


# -- the topology-aware form (network_final_voltage) ---------------------------
# Hand calculations in linear-capacitance form: Q = C·V, VDD = 1.8 V, pass
# limit 1.2 V; node 0 is X, "need" of a node is C·(1.2 − V_start).
def net(caps, precharged, edges, v_lim=1.2):
    return network_final_voltage([lin(c) for c in caps], precharged, edges, v_lim)


def test_chain_x_p_d_precharged_node_holds():
    # X(30) – P(50) – D(20).  Not regime a: all at 1.2 V holds 100·1.2 = 120 fC
    # < 30·1.8 + 50·1.8 = 144 fC.  D can be fed only through P (MA is off while
    # X and P are both above 1.2 V): D needs 20·1.2 = 24 fC, P can give
    # 50·0.6 = 30 fC, so P ends at (90 − 24)/50 = 1.32 V and X keeps 1.8 V.
    r = net([30.0, 50.0, 20.0], [1], [(0, 1), (1, 2)])
    assert (r.v_final, r.regime) == (pytest.approx(1.8), "b")
    assert r.voltages == pytest.approx([1.8, 1.32, 1.2])
    # The topology-free form lets X pay first: 1.8 − 24/30 = 1.0 < 1.2, regime c.
    old = final_voltage(lin(30.0), lin(20.0), lin(50.0), v_lim=1.2)
    assert (old.v_final, old.regime) == (pytest.approx(1.2), "c")


def test_chain_x_p_d_precharged_node_runs_out():
    # X(40) – P(10) – D(20).  Not a: 70·1.2 = 84 < 40·1.8 + 10·1.8 = 90 fC.
    # P gives 10·0.6 = 6 fC of D's 24 and ends at 1.2 V; {P, D} then touches X,
    # which pays the other 18 fC: 1.8 − 18/40 = 1.35 V (regime b).
    r = net([40.0, 10.0, 20.0], [1], [(0, 1), (1, 2)])
    assert (r.v_final, r.regime) == (pytest.approx(1.35), "b")
    assert r.voltages == pytest.approx([1.35, 1.2, 1.2])


def test_chain_x_d_p_x_pays_first():
    # X(60) – D(20) – P(40): D touches X, so X pays D's 24 fC first:
    # 1.8 − 24/60 = 1.4 V, P keeps 1.8 V (the same as the topology-free form).
    r = net([60.0, 20.0, 40.0], [2], [(0, 1), (1, 2)])
    assert (r.v_final, r.regime, r.v_precharged) == (pytest.approx(1.4), "b", pytest.approx(1.8))
    # X(30): 1.8 − 24/30 = 1.0 < 1.2, so X ends at 1.2 V and P holds it there.
    # Not a: 90·1.2 = 108 < 54 + 72 = 126 fC; P = (126 − 36 − 24)/40 = 1.65 V.
    r = net([30.0, 20.0, 40.0], [2], [(0, 1), (1, 2)])
    assert (r.v_final, r.regime, r.v_precharged) == (pytest.approx(1.2), "c", pytest.approx(1.65))
    old = final_voltage(lin(30.0), lin(20.0), lin(40.0), v_lim=1.2)
    assert (old.v_final, old.v_precharged) == (pytest.approx(1.2), pytest.approx(1.65))


def test_x_d_and_p_side_by_side():
    # X(30) with D(20) on one device and P(40) on another (P beside D, both
    # next to X): as X–D–P, X pays 24 fC first, falls to the limit, and P
    # holds it: P = (126 − 36 − 24)/40 = 1.65 V.
    r = net([30.0, 20.0, 40.0], [2], [(0, 1), (0, 2)])
    assert (r.v_final, r.regime, r.v_precharged) == (pytest.approx(1.2), "c", pytest.approx(1.65))


def test_one_precharged_node_feeds_two_regions():
    # X(30) – P(50), and P – D1(10), P – D2(10) (two regions, only P beside
    # each): P's load is 2·10·1.2 = 24 fC of its 30; P = (90 − 24)/50 = 1.32 V.
    r = net([30.0, 50.0, 10.0, 10.0], [1], [(0, 1), (1, 2), (1, 3)])
    assert (r.v_final, r.regime) == (pytest.approx(1.8), "b")
    assert r.voltages == pytest.approx([1.8, 1.32, 1.2, 1.2])


def test_two_precharged_nodes_feeding_one_region():
    # X – P1(10) – D(20) – P2(40).  D (needs 24 fC) has two precharged
    # neighbours; which runs out first depends on device strengths, so the
    # worst is taken: P1 gives its 10·0.6 = 6 fC and runs out while P2 gives
    # nothing, and X pays the other 18 fC through P1.  (The other choices
    # cost X less: nobody runs out, 0; both, 24 − 6 − 24 < 0.)
    # X(40): 1.8 − 18/40 = 1.35 V, regime b; P2 keeps 1.8 V.
    # (Pooling P1 and P2 as D's supply would leave X at 1.8 V: ngspice shows
    # X falls, test_against_ngspice.py.)
    edges = [(0, 1), (1, 2), (2, 3)]
    r = net([40.0, 10.0, 20.0, 40.0], [1, 3], edges)
    assert (r.v_final, r.regime) == (pytest.approx(1.35), "b")
    assert r.voltages == pytest.approx([1.35, 1.2, 1.2, 1.8])
    # X(20) can give only 20·0.6 = 12 < 18 fC: it ends at 1.2 V and P2 holds
    # it.  Not a: 90·1.2 = 108 < 36 + 18 + 72 = 126 fC.  X, P1, D at 1.2 V
    # hold 24 + 12 + 24 = 60 fC, P2 the other 66: 66/40 = 1.65 V.
    r = net([20.0, 10.0, 20.0, 40.0], [1, 3], edges)
    assert (r.v_final, r.regime) == (pytest.approx(1.2), "c")
    assert r.voltages == pytest.approx([1.2, 1.2, 1.2, 1.65])


def test_cheapest_way_in_runs_out_first():
    # X – P1(10) – D(20) and X – P2(20) – D: both precharged nodes open D to
    # X when they run out.  P1 running out costs X 24 − 6 = 18 fC, P2 24 − 12
    # = 12 fC, both 24 − 18 = 6 fC, neither 0: the worst is P1.
    # X(40): 1.8 − 18/40 = 1.35 V.
    r = net([40.0, 10.0, 20.0, 20.0], [1, 3], [(0, 1), (1, 2), (0, 3), (3, 2)])
    assert (r.v_final, r.regime) == (pytest.approx(1.35), "b")
    assert r.voltages == pytest.approx([1.35, 1.2, 1.2, 1.8])


def test_precharged_node_that_cannot_run_out_keeps_x():
    # X – P1(50) – D(20) – P2(40): P1 alone can give 30 fC > 24, so it cannot
    # be drained by D: X keeps 1.8 V whatever the split (D's 24 fC from P1
    # and P2, both ending at or above 1.2 V; reported pooled:
    # (90 + 72 − 24)/90 = 1.5333 V).
    r = net([30.0, 50.0, 20.0, 40.0], [1, 3], [(0, 1), (1, 2), (2, 3)])
    assert (r.v_final, r.regime) == (pytest.approx(1.8), "b")
    assert r.voltages == pytest.approx([1.8, 138.0 / 90.0, 1.2, 138.0 / 90.0])


def test_exhausted_chain_feeds_through_two_precharged_nodes():
    # X(30) – P1(20) – P2(5) – D(20).  Not a: 75·1.2 = 90 < 54 + 36 + 9 = 99 fC.
    # D needs 24 fC; P2 gives 5·0.6 = 3 and runs out; {P2, D} needs 21, its
    # only high neighbour P1 gives 20·0.6 = 12 and runs out; {P1, P2, D}
    # touches X, which pays 9 fC: 1.8 − 9/30 = 1.5 V.
    r = net([30.0, 20.0, 5.0, 20.0], [1, 2], [(0, 1), (1, 2), (2, 3)])
    assert (r.v_final, r.regime) == (pytest.approx(1.5), "b")
    assert r.voltages == pytest.approx([1.5, 1.2, 1.2, 1.2])


def test_network_regime_a():
    # X(10) – P(5) – D(40): 10·1.8 + 5·1.8 = 27 fC on 55 fF is 0.4909 V < 1.2 V.
    r = net([10.0, 5.0, 40.0], [1], [(0, 1), (1, 2)])
    assert (r.v_final, r.regime) == (pytest.approx(27.0 / 55.0), "a")


def test_network_bad_input():
    with pytest.raises(ValueError, match="join every node"):
        net([10.0, 5.0, 5.0], [], [(0, 1)])
    with pytest.raises(ValueError, match="outside"):
        net([10.0, 5.0], [], [(0, 2)])
    with pytest.raises(ValueError, match="precharged node 0"):
        net([10.0, 5.0], [0], [(0, 1)])


@st.composite
def networks(draw):
    n = draw(st.integers(1, 7))
    caps_ = [draw(st.floats(0.5, 30.0))] + [draw(st.floats(0.0, 15.0)) for _ in range(n - 1)]
    junction = [draw(st.floats(0.0, 5.0)) for _ in range(n)]
    edges = [(i, draw(st.integers(0, i - 1))) for i in range(1, n)]  # a tree joins all
    edges += draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)), max_size=3))
    pre = draw(st.lists(st.integers(1, n - 1), unique=True)) if n > 1 else []
    return caps_, junction, edges, pre, draw(st.floats(0.8, 1.5))


def _nodes(caps_, junction):
    return [NodeCharge(c, np.array([j]), np.array([0.8]), np.array([0.4]), np.array([False]), 1.8)
            for c, j in zip(caps_, junction)]


@settings(max_examples=300, deadline=None)
@given(networks())
def test_network_final_state_is_physical(case):
    # Independent of the rule's bookkeeping: charge is conserved over the
    # node voltages it reports, every conducting device ends either with
    # both ends equal at or below the pass limit or with its lower end at or
    # above it (the README's final-state condition), and X ends at or above the
    # topology-free result (it never pays more), equal when every region of
    # discharged nodes touches X.
    caps_, junction, edges, pre, v_lim = case
    q = _nodes(caps_, junction)
    r = network_final_voltage(q, pre, edges, v_lim)
    start = [1.8 if i == 0 or i in pre else 0.0 for i in range(len(q))]
    q_start = sum(float(c.charge(v)) for c, v in zip(q, start))
    q_end = sum(float(c.charge(v)) for c, v in zip(q, r.voltages))
    assert q_end == pytest.approx(q_start, abs=1e-7)
    assert r.v_final == r.voltages[0]
    for a, b in edges:
        lo, hi = sorted((r.voltages[a], r.voltages[b]))
        assert (hi - lo < 1e-7 and hi <= v_lim + 1e-9) or lo >= v_lim - 1e-9
    zero = NodeCharge.linear(0.0, 1.8)
    discharged = [i for i in range(1, len(q)) if i not in pre]
    d_sum = sum((q[i] for i in discharged), zero)
    p_sum = sum((q[i] for i in pre), zero)
    old = final_voltage(q[0], d_sum, p_sum, v_lim).v_final
    assert r.v_final >= old - 1e-9
    adj = {i: set() for i in range(len(q))}
    for a, b in edges:
        adj[a].add(b)
        adj[b].add(a)
    seen, all_touch = set(), True
    for d in discharged:  # regions of discharged nodes, by search
        if d in seen:
            continue
        region, stack = {d}, [d]
        while stack:
            for j in adj[stack.pop()] - region:
                if j in discharged:
                    region.add(j)
                    stack.append(j)
        seen |= region
        all_touch &= any(0 in adj[i] for i in region)
    if all_touch:
        assert r.v_final == pytest.approx(old, abs=1e-9)
    # Precharging one more node never lowers X (what analyze.search.flags relies on).
    for d in discharged:
        more = network_final_voltage(q, pre + [d], edges, v_lim).v_final
        assert more >= r.v_final - 1e-9


def test_network_falls_back_to_the_topology_free_form(monkeypatch):
    # Past the search limit the topology-free result is returned (a lower
    # bound): X(40) – P(10) – D(20), X – P2(20) – D as in
    # test_cheapest_way_in_runs_out_first, topology-free: X pays all 24 fC,
    # 1.8 − 24/40 = 1.2 V, just at the limit.
    import analyze.physics.redistribution as redistribution

    monkeypatch.setattr(redistribution, "SEARCH_LIMIT", 1)
    r = net([40.0, 10.0, 20.0, 20.0], [1, 3], [(0, 1), (1, 2), (0, 3), (3, 2)])
    assert (r.v_final, r.voltages) == (pytest.approx(1.2), ())
