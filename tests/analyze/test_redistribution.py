"""Final voltages of charge sharing (analyze.redistribution).

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

from analyze.analysis import analyze_stage
from analyze.charge import NodeCharge
from analyze.redistribution import final_voltage, linear_final_voltage
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
