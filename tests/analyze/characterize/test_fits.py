"""The fits recover parameters from curves written with the formulas
themselves (hand-chosen values; formulas: SPICE level-1 body effect,
Weste & Harris, CMOS VLSI Design, ch. 2, from memory; SPICE depletion
capacitance, Sze, Physics of Semiconductor Devices, ch. 2, from memory)."""

import numpy as np
import pytest

from analyze.characterize.fits import constant_current_vt, fit_body_effect, fit_depletion


@pytest.mark.parametrize("vt0, gamma, phi", [(0.45, 0.4, 0.8), (0.88, 0.24, 0.14), (0.3, 0.0, 0.7)])
def test_body_effect_fit_recovers_the_formula(vt0, gamma, phi):
    vsb = np.linspace(0, 1.8, 7)
    vt = vt0 + gamma * (np.sqrt(phi + vsb) - np.sqrt(phi))
    fit = fit_body_effect(vsb, vt)
    assert fit.rms_v < 1e-7
    assert fit.vt0 == pytest.approx(vt0, abs=1e-6)
    assert fit.vt(1.2) == pytest.approx(vt0 + gamma * (np.sqrt(phi + 1.2) - np.sqrt(phi)), abs=1e-6)
    if gamma:
        assert (fit.gamma, fit.phi) == pytest.approx((gamma, phi), rel=1e-4)


def test_body_effect_fit_reports_its_residual():
    # Hand calculation: a straight line VT = 0.5 + 0.1*Vsb has curvature
    # the formula can take up only partly; the fit is then not exact.
    vsb = np.linspace(0, 1.8, 7)
    fit = fit_body_effect(vsb, 0.5 + 0.1 * vsb)
    assert 0 <= fit.rms_v <= fit.max_v
    assert fit.rms_v == pytest.approx(np.sqrt(np.mean((fit.vt(vsb) - 0.5 - 0.1 * vsb) ** 2)), rel=1e-9)


@pytest.mark.parametrize("c0, pb, m", [(1.34, 0.73, 0.44), (0.25, 1.39, 0.70), (0.04, 0.2, 0.0)])
def test_depletion_fit_recovers_the_formula(c0, pb, m):
    v = np.linspace(0, 1.8, 7)
    fit = fit_depletion(v, c0 / (1 + v / pb) ** m)
    assert max(abs(e) for e in fit.rel_errors) < 1e-8
    assert fit.c0 == pytest.approx(c0, rel=1e-6)
    if m:
        assert (fit.pb, fit.m) == pytest.approx((pb, m), rel=1e-4)


def test_constant_current_threshold_interpolates_in_log_current():
    # Hand calculation: current 1e-8 A at 0.4 V and 1e-6 A at 0.5 V; 1e-7 A
    # is halfway in log, at 0.45 V.  A sweep that never reaches the
    # criterion gives NaN.
    assert constant_current_vt([0.3, 0.4, 0.5], [1e-9, 1e-8, 1e-6], 1e-7) == pytest.approx(0.45)
    assert np.isnan(constant_current_vt([0.3, 0.4], [1e-9, 1e-8], 1e-7))
