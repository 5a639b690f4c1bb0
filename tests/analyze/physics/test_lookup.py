"""Table lookup of one point (analyze.physics.lookup).

Source: numpy.interp itself — the lookup must return the very same double
(compared bit for bit), so the foundry-model solver's results do not move
when it uses the lookup instead; brute force over random tables and points,
the grid points and their neighbouring doubles, and points off both ends.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from analyze.physics.lookup import interp_point, interp_rows


def _same(a: float, b: float) -> bool:
    return np.float64(a).view(np.int64) == np.float64(b).view(np.int64)


def test_bit_for_bit_against_numpy_interp_on_random_tables():
    rng = np.random.default_rng(11)
    for trial in range(60):
        n = int(rng.integers(2, 300))
        xp = np.unique(rng.uniform(-3, 3, n)) if trial % 2 else np.linspace(-0.5, 2.3, n)
        fp = rng.normal(0, 1, len(xp)) * 10.0 ** rng.integers(-15, 4)
        xs = np.concatenate([rng.uniform(-4, 4, 400), xp, np.nextafter(xp, -np.inf), np.nextafter(xp, np.inf),
                             [np.inf, -np.inf]])
        xl, fl = xp.tolist(), fp.tolist()
        for x in xs:
            assert _same(interp_point(float(x), xl, fl), float(np.interp(x, xp, fp))), (trial, x)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6), min_size=2, max_size=30, unique=True),
       st.lists(st.floats(-1e300, 1e300), min_size=30, max_size=30),
       st.floats(allow_nan=False))
def test_bit_for_bit_any_table(xs, fs, x):
    xp = sorted(xs)
    fp = fs[: len(xp)]
    assert _same(interp_point(x, xp, fp), float(np.interp(x, xp, fp)))


def test_nan_and_lazy_rows():
    xp, fp = [0.0, 1.0, 2.0], [5.0, 7.0, 1.0]
    assert math.isnan(interp_point(float("nan"), xp, fp))
    asked = []

    def at(k):
        asked.append(k)
        return fp[k]

    # 1.25: between xp[1] and xp[2], 7 + 0.25 * (1 - 7) = 5.5; only those two looked up
    assert interp_rows(1.25, xp, at) == 5.5
    assert sorted(asked) == [1, 2]
