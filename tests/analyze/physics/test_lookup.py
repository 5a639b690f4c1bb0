"""Table lookup of one point (analyze.physics.lookup).

Source: numpy.interp itself — the lookup must return the very same double
(compared bit for bit), so the foundry-model solver's results do not move
when it uses the lookup instead; brute force over random tables and points,
the grid points and their neighbouring doubles, and points off both ends.
The creep's lookups on plain floats (uniform_lookup, StageTables.pass_current)
agree with numpy.interp and StageTables.current to rounding.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
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


def test_pass_current_lookup_bit_for_bit_against_numpy():
    # The pass current of analyze.physics.device_tables written with numpy
    # (eleven numpy.interp rows in the near voltage, then numpy.interp in
    # log V_DS) against StageTables.current, which looks up only the rows it
    # needs on plain floats: the same doubles, NaN where numpy gives NaN.
    from analyze.physics.device_tables import StageTables

    rng = np.random.default_rng(5)
    grid = np.linspace(0.0, 1.8, 181)

    def reference(t, name):
        logs, lds = np.log(np.maximum(t.currents[name], 1e-15)), np.log(t.v_ds)

        def i(v_near, v_far):
            vds = abs(float(v_far) - float(v_near))
            if vds <= 0.0:
                return 0.0
            rows = np.array([np.interp(v_near, t.v, row) for row in logs])
            if vds < t.v_ds[0]:
                return float(np.exp(rows[0]) * vds / t.v_ds[0])
            return float(np.exp(np.interp(np.log(vds), lds, rows)))
        return i

    for _ in range(4):
        t = StageTables(grid)
        t.currents["d"] = np.exp(rng.normal(0, 6, (11, 181))) * (rng.random((11, 181)) > 0.05)  # zeros too
        want, got = reference(t, "d"), t.current("d")
        nears = np.concatenate([rng.uniform(-0.3, 2.1, 300), grid, np.nextafter(grid, np.inf)])
        for x in nears:
            for far in (x, x + 1e-4, x + 0.003, x - 0.05, x + 0.9, x + 2.5, x + float(rng.uniform(-2, 2)),
                        float("nan")):
                a, b = want(x, far), got(x, far)
                assert (math.isnan(a) and math.isnan(b)) or _same(a, b), (x, far)
        assert math.isnan(got(float("nan"), 1.0)) and math.isnan(want(float("nan"), 1.0))


@pytest.mark.parametrize("seed", range(6))
def test_uniform_lookup_is_numpy_interp(seed):
    """Source: numpy.interp, on even and uneven grids, inside, outside and
    on the grid points."""
    from analyze.physics.lookup import uniform_lookup

    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 40))
    grid = np.linspace(-0.3, 2.1, n) if seed % 2 == 0 else np.cumsum(rng.uniform(0.01, 0.3, n))
    values = rng.normal(size=n)
    f = uniform_lookup(grid, values)
    xs = np.concatenate([rng.uniform(grid[0] - 1, grid[-1] + 1, 500), grid])
    got = np.array([f(float(x)) for x in xs])
    assert np.allclose(got, np.interp(xs, grid, values), rtol=1e-12, atol=1e-12)


def test_pass_current_is_the_tables_current():
    """Source: StageTables.current (numpy.interp's arithmetic, checked bit for
    bit in test_lookup.py) on a synthetic table of subthreshold-like
    currents: the fast form agrees to rounding everywhere, below the
    V_DS grid's first step, past its last, outside the voltage grid and at
    V_DS = 0."""
    from analyze.physics.device_tables import VDS_GRID, StageTables

    v = np.linspace(0.0, 1.8, 37)
    vds = np.asarray(VDS_GRID)
    # I = I0·exp((VG − VT − V)/(n·VT_th))·(1 − exp(−VDS/VT_th)), a subthreshold form (EKV, from memory)
    table = 0.1 * np.exp((1.8 - 0.45 - v[None, :]) / (1.4 * 0.0259)) * (1.0 - np.exp(-vds[:, None] / 0.0259))
    tables = StageTables(v=v, currents={"M1": table}, v_ds=vds)
    ref, fast = tables.current("M1"), tables.pass_current("M1")
    rng = np.random.default_rng(1)
    near = np.concatenate([rng.uniform(-0.2, 2.0, 400), v])
    far = near + np.concatenate([10.0 ** rng.uniform(-4, 0.4, 400), 10.0 ** rng.uniform(-4, 0.4, len(v))])
    for a, b in zip(near.tolist(), far.tolist()):
        assert fast(a, b) == pytest.approx(ref(a, b), rel=1e-11)
    assert fast(0.7, 0.7) == ref(0.7, 0.7) == 0.0
    assert math.isnan(fast(float("nan"), 1.0))
