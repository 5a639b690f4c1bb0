"""Thresholds (analyze.physics.threshold).

Sources: the square-law inverter switching threshold
VM = (VDD − |VTp| + VTn·r)/(1 + r), r = √(kpn(W/L)n / kpp(W/L)p) (Rabaey,
Chandrakasan & Nikolić, Digital Integrated Circuits, 2nd ed., ch. 5, from
memory); the SPICE level-1 threshold with body effect
VT = VT0 + γ(√(φ + VSB) − √φ) (Shichman–Hodges, from memory); hand
calculations written out below.
"""

from __future__ import annotations

import math

import pytest

from analyze.physics.threshold import body_effect_vt, pass_limit, receiver_threshold, switching_threshold
from sharing_circuits import domino, make_tech

TECH = make_tech()


def test_square_law_threshold_hand_calculation():
    # dsk18-like: kpn = 280, kpp = 65 µA/V², (W/L)n = 1/0.18, (W/L)p = 2/0.18.
    # r = sqrt(280 * 5.5556 / (65 * 11.111)) = sqrt(1555.56 / 722.22) = sqrt(2.15385) = 1.46760
    # VM = (1.8 - 0.48 + 0.45 * 1.46760) / (1 + 1.46760) = (1.32 + 0.66042) / 2.46760 = 0.80257 V
    r = math.sqrt((280 * (1 / 0.18)) / (65 * (2 / 0.18)))
    assert r == pytest.approx(1.46760, abs=1e-5)
    assert switching_threshold(TECH, 1 / 0.18, 2 / 0.18) == pytest.approx(0.80257, abs=1e-5)


def test_symmetric_inverter_switches_at_half_supply():
    # Common practice: a symmetric inverter on 1.8 V switches at VDD/2 = 0.9 V.
    tech = make_tech(pmos={"vt0": -0.45, "kp": 70.0})
    assert switching_threshold(tech, 1.0, 4.0) == pytest.approx(0.9)


def test_body_effect_hand_value():
    # VT(1.0) = 0.45 + 0.45 * (sqrt(0.85 + 1.0) - sqrt(0.85)) = 0.45 + 0.45 * (1.360147 - 0.921954)
    #         = 0.45 + 0.197187 = 0.647187 V
    assert body_effect_vt(TECH.mos["nmos"], 1.0) == pytest.approx(0.647187, abs=1e-6)


def test_pass_limit_closed_form():
    # V = VDD - VT0 - γ(s - √φ) with s = √(φ + V), so s² - φ = VDD - VT0 + γ√φ - γ s:
    # s² + γ s - (φ + VDD - VT0 + γ√φ) = 0,  s = (-γ + √(γ² + 4(φ + VDD - VT0 + γ√φ)))/2.
    for t in ("nmos", "pmos"):
        p = TECH.mos[t]
        k = p.phi + TECH.vdd - abs(p.vt0) + p.gamma * math.sqrt(p.phi)
        s = (-p.gamma + math.sqrt(p.gamma**2 + 4 * k)) / 2
        assert pass_limit(p, TECH.vdd) == pytest.approx(s * s - p.phi, abs=1e-10)
    # Hand number for the nmos: k = 0.85 + 1.35 + 0.414879 = 2.614879,
    # s = (-0.45 + sqrt(0.2025 + 10.459516))/2 = (-0.45 + 3.265275)/2 = 1.407637,
    # V = 1.981443 - 0.85 = 1.131443 V
    assert pass_limit(TECH.mos["nmos"], 1.8) == pytest.approx(1.13144, abs=1e-5)


def test_pass_limit_when_the_device_never_turns_on():
    assert pass_limit(TECH.mos["nmos"], 0.4) == 0.0


def test_most_demanding_receiver():
    # Two receivers: a strong-n one (low VM) and a strong-p one (high VM).
    # n-type stage: the highest VM counts; p-type: the lowest.
    recs = ((4.0, 0.18, 1.0, 0.18), (1.0, 0.18, 8.0, 0.18))
    ev = [("MA", "X", "A", "FOOT")]
    vm = [switching_threshold(TECH, wn / ln, wp / lp) for wn, ln, wp, lp in recs]
    assert vm[0] < vm[1]
    for polarity, expect in (("n", vm[1]), ("p", vm[0])):
        circuit, stage = domino(TECH, ev, {}, polarity=polarity, receivers=recs)
        assert receiver_threshold(circuit, stage, TECH) == pytest.approx(expect)


def test_no_receiver_half_supply():
    circuit, stage = domino(TECH, [("MA", "X", "A", "FOOT")], {}, receivers=())
    assert receiver_threshold(circuit, stage, TECH) == pytest.approx(0.9)
