"""Node charge models (analyze.physics.charge).

Sources: the SPICE2 junction depletion-charge formula
q = C0·PB/(1−M)·[(1+VR/PB)^(1−M) − 1] and its derivative C0/(1+VR/PB)^M
(Massobrio & Antognetti, Semiconductor Device Modeling with SPICE, from
memory); hand calculations written out below.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from analyze.physics.charge import NodeCharge, depletion_capacitance, depletion_charge, node_charge
from extract.circuit import CapParts, Net
from sharing_circuits import make_net, make_tech

TECH = make_tech()


def test_depletion_charge_hand_value():
    # C0 = 2 fF, PB = 0.8 V, M = 0.5, VR = 1.0 V:
    # 2 * 0.8 / 0.5 * (sqrt(1 + 1.0/0.8) - 1) = 3.2 * (1.5 - 1) = 1.6 fC
    assert float(depletion_charge(2.0, 0.8, 0.5, 1.0)) == pytest.approx(1.6, abs=1e-12)


def test_grading_one_is_the_log_limit():
    # M -> 1: C0 * PB * ln(1 + VR/PB) = 1 * 0.8 * ln(2.25) = 0.648744 fC
    assert float(depletion_charge(1.0, 0.8, 1.0, 1.0)) == pytest.approx(0.8 * math.log(2.25), abs=1e-12)
    assert float(depletion_charge(1.0, 0.8, 1.0 - 1e-7, 1.0)) == pytest.approx(0.8 * math.log(2.25), abs=1e-6)


def test_capacitance_is_the_derivative():
    vr = np.linspace(0.0, 1.8, 7)
    h = 1e-6
    numeric = (depletion_charge(3.0, 0.85, 0.33, vr + h) - depletion_charge(3.0, 0.85, 0.33, vr - h)) / (2 * h)
    assert np.allclose(numeric, depletion_capacitance(3.0, 0.85, 0.33, vr), atol=1e-8)
    # Hand value: C0 / (1 + VR/PB)^M at VR = 2.4, PB = 0.8, M = 0.5: 1/sqrt(4) = 0.5
    assert float(depletion_capacitance(1.0, 0.8, 0.5, 2.4)) == pytest.approx(0.5)


def test_zero_bias_total_equals_net_cap():
    # Hand: nmos 0.5 µm² * 0.95 + 2.0 µm * 0.22 + 1.0 µm * 0.22 = 0.475 + 0.44 + 0.22
    #       pmos 0.6 µm² * 1.10 + 1.5 µm * 0.28 + 0.5 µm * 0.28 = 0.66 + 0.42 + 0.14
    #       wire 3.0 -> total 5.355 fF
    net = make_net("n", TECH, linear=3.0, nmos=(0.5, 2.0, 1.0), pmos=(0.6, 1.5, 0.5))
    q = node_charge(net, TECH)
    assert net.cap.total == pytest.approx(5.355)
    assert q.zero_bias_total == pytest.approx(5.355)
    assert q.c_lin == pytest.approx(3.0)


def test_small_signal_capacitance_at_the_rails():
    # n+ junction: zero reverse bias at V = 0, so C(0) = its C0; p+ junction:
    # zero reverse bias at V = VDD.  At V = 0 the p+ bottom has VR = 1.8:
    # 0.66 / (1 + 1.8/0.85)^0.45.
    n_only = node_charge(make_net("a", TECH, nmos=(0.5, 2.0, 1.0)), TECH)
    assert float(n_only.capacitance(0.0)) == pytest.approx(1.135)
    p_only = node_charge(make_net("b", TECH, pmos=(0.6, 0.0, 0.0)), TECH)
    assert float(p_only.capacitance(1.8)) == pytest.approx(0.66)
    assert float(p_only.capacitance(0.0)) == pytest.approx(0.66 / (1 + 1.8 / 0.85) ** 0.45)


def test_charge_increases_with_voltage_and_vectorises():
    q = node_charge(make_net("n", TECH, linear=1.0, nmos=(0.5, 2.0, 1.0), pmos=(0.6, 1.5, 0.5)), TECH)
    v = np.linspace(0.0, 1.8, 19)
    qs = q.charge(v)
    assert np.all(np.diff(qs) > 0)
    assert np.allclose(qs, [q.charge(float(x)) for x in v], atol=1e-12)
    assert np.all(q.capacitance(v) > 0)


def test_pmos_junction_charge_sign():
    # A p+ junction charged from V = 0 to V = 1.8 gains -q(0) + q(1.8) = q_dep(1.8)
    # on the node (its reverse bias falls from 1.8 V to 0).
    q = node_charge(make_net("b", TECH, pmos=(1.0, 0.0, 0.0)), TECH)
    expect = float(depletion_charge(1.10, 0.85, 0.45, 1.8))
    assert q.charge(1.8) - q.charge(0.0) == pytest.approx(expect)


def test_mirror_is_the_voltage_flip():
    q = node_charge(make_net("n", TECH, linear=1.0, nmos=(0.5, 2.0, 1.0), pmos=(0.6, 1.5, 0.5)), TECH)
    u = np.linspace(0.0, 1.8, 10)
    d = q.mirrored().charge(u) + q.charge(1.8 - u)
    assert np.allclose(d, d[0], atol=1e-12)


def test_capacitance_only_net_is_linear():
    net = Net("n", cap=CapParts(junction_area=1.0, junction_sidewall=0.5, wire=2.0))
    q = node_charge(net, TECH)
    assert q.zero_bias_total == pytest.approx(3.5)
    assert q.charge(1.0) - q.charge(0.0) == pytest.approx(3.5)
    none = node_charge(None, TECH)
    assert none.zero_bias_total == 0.0


def test_sum_of_nodes():
    a = NodeCharge.linear(2.0, 1.8)
    b = node_charge(make_net("n", TECH, nmos=(0.5, 2.0, 1.0)), TECH)
    s = a + b
    assert s.charge(1.2) - s.charge(0.3) == pytest.approx(
        (a.charge(1.2) - a.charge(0.3)) + (b.charge(1.2) - b.charge(0.3)))
