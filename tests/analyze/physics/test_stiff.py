"""The creep's stiff solver (analyze.physics.stiff).

Source: scipy's own BDF (scipy.integrate.solve_ivp(method="BDF")) — LeanBDF
must take the very same steps to the very same numbers, compared bit for
bit, on the Robertson chemical-kinetics problem (the classic stiff test
system, Hairer & Wanner, Solving Ordinary Differential Equations II, sec.
IV.1, from memory) and on chains of nonlinear RC nodes like the creep's
(random sizes, brute force over seeds).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from analyze.physics.stiff import LeanBDF


def _both(f, span, y0, **kw):
    a = solve_ivp(f, span, y0, method="BDF", **kw)
    b = solve_ivp(f, span, y0, method=LeanBDF, **kw)
    return a, b


def _same(a, b):
    assert a.status == b.status
    assert (a.nfev, a.njev, a.nlu) == (b.nfev, b.njev, b.nlu)
    assert np.array_equal(a.t, b.t) and np.array_equal(a.y, b.y)


def test_robertson_problem_bit_for_bit():
    def f(_t, y):
        return np.array([-0.04 * y[0] + 1e4 * y[1] * y[2],
                         0.04 * y[0] - 1e4 * y[1] * y[2] - 3e7 * y[1] ** 2,
                         3e7 * y[1] ** 2])

    a, b = _both(f, (0.0, 40.0), [1.0, 0.0, 0.0], rtol=1e-4, atol=1e-8)
    _same(a, b)
    # the conserved total stays 1 (the problem's invariant)
    assert a.y[:, -1].sum() == pytest.approx(1.0, abs=1e-6)


@pytest.mark.parametrize("seed", range(8))
def test_rc_chains_bit_for_bit(seed):
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
    a, b = _both(f, (0.0, 1.0), v0, rtol=1e-4, atol=1e-5)
    _same(a, b)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # scipy's own, on the way to the refusal
def test_non_finite_refused_as_scipy_does():
    def f(_t, y):
        return np.array([np.inf * y[0]])

    for method in ("BDF", LeanBDF):
        with pytest.raises(ValueError):
            solve_ivp(f, (0.0, 1.0), [1.0], method=method)
