"""Table lookup of one point: the same number as ``numpy.interp``, faster.

The charge-conservation solver (:mod:`analyze.physics.settling`) looks
up a measured table at one voltage thousands of times per stage (inside a
stiff ODE's right-hand side).  ``numpy.interp`` on a scalar costs a few
microseconds of argument handling for a handful of floating-point
operations; :func:`interp_point` does the same operations on Python floats,
so it returns the very same double (bit for bit), in a fraction of the time.

Examples
--------
>>> import numpy as np
>>> xp, fp = [0.0, 0.5, 1.0], [1.0, 3.0, 2.0]
>>> [interp_point(x, xp, fp) for x in (-1.0, 0.25, 0.5, 0.8, 1.0, 2.0)]
[1.0, 2.0, 3.0, 2.4, 2.0, 2.0]
>>> all(interp_point(x, xp, fp) == float(np.interp(x, xp, fp)) for x in np.linspace(-1, 2, 301))
True
"""

from __future__ import annotations

import math
from bisect import bisect_right

__all__ = ["interp_point", "interp_rows", "uniform_lookup", "bilinear_lookup", "bilinear_lookups",
           "cell_finder"]


def interp_point(x: float, xp: list, fp: list) -> float:
    """Piecewise-linear interpolation of ``fp`` over ``xp`` at ``x``.

    Parameters
    ----------
    x : float
    xp : list of float
        Strictly increasing.
    fp : list of float
        Same length as ``xp``.

    Returns
    -------
    float
        ``fp[0]`` left of the table, ``fp[-1]`` right of it (and at its
        last point), ``fp[j]`` at a grid point, else
        ``slope · (x − xp[j]) + fp[j]`` with
        ``slope = (fp[j+1] − fp[j]) / (xp[j+1] − xp[j])``.

    Notes
    -----
    The branches and the arithmetic of numpy's ``interp`` (its C loop for
    one point: binary search, the same expression in the same order), so
    the result is the same double; NaN and the rare NaN of an infinite
    slope are left to ``numpy.interp`` itself.  Cost: O(log len(xp)).
    """
    return interp_rows(x, xp, fp.__getitem__)


def interp_rows(x: float, xp: list, at) -> float:
    """:func:`interp_point` with the table's values computed on demand:
    ``at(k)`` is the value at ``xp[k]`` (at most two are asked for).

    Parameters
    ----------
    x : float
    xp : list of float
        Strictly increasing.
    at : callable
        Index -> value, for ``0 <= k < len(xp)``.

    Returns
    -------
    float

    Examples
    --------
    >>> interp_rows(0.25, [0.0, 0.5, 1.0], lambda k: [1.0, 3.0, 2.0][k])
    2.0
    """
    n = len(xp)
    if x != x:  # NaN
        return _numpy(x, xp, at)
    j = bisect_right(xp, x) - 1
    if j < 0:
        return at(0)
    if j >= n - 1:
        return at(n - 1)
    if xp[j] == x:
        return at(j)
    lo = at(j)
    slope = (at(j + 1) - lo) / (xp[j + 1] - xp[j])
    out = slope * (x - xp[j]) + lo
    if math.isnan(out):
        return _numpy(x, xp, at)
    return out


def _numpy(x, xp, at) -> float:
    import numpy as np

    return float(np.interp(x, xp, [at(k) for k in range(len(xp))]))


def uniform_lookup(grid, values):
    """``f(x)``: piecewise-linear interpolation of ``values`` over ``grid``,
    held at the end values outside it, on plain floats.

    Parameters
    ----------
    grid : array_like
        Increasing; evenly spaced for the fast path (an index from
        (x − x0)/step), else looked up by bisection.
    values : array_like
        Same length as ``grid`` (at least 2).

    Returns
    -------
    callable
        Float -> float (NaN for NaN).

    Notes
    -----
    What ``numpy.interp`` computes, to rounding (the weight t = u − j of
    the cell j = ⌊u⌋, u = (x − x0)/step, in place of the slope times the
    offset), at a fraction of its per-call cost: the creep's right-hand
    side looks tables up thousands of times per stage.  O(1) per call
    (O(log n) on an uneven grid).

    Examples
    --------
    >>> f = uniform_lookup([0.0, 0.5, 1.0], [1.0, 3.0, 2.0])
    >>> [f(x) for x in (-1.0, 0.25, 0.5, 0.75, 1.0, 2.0)]
    [1.0, 2.0, 3.0, 2.5, 2.0, 2.0]
    >>> f(float("nan")) != f(float("nan"))
    True
    >>> g = uniform_lookup([0.0, 0.1, 1.0], [0.0, 1.0, 10.0])  # uneven: bisection
    >>> round(g(0.55), 12)
    5.5
    >>> uniform_lookup([0.0, 1e-10, 1e-9], [0.0, 1.0, 2.0])(5e-11)  # uneven at any scale
    0.5
    """
    grid = [float(x) for x in grid]
    values = [float(y) for y in values]
    cell = cell_finder(grid)

    def f(x):
        j, t = cell(x)
        if j is None:
            return math.nan
        lo = values[j]
        return lo + (values[j + 1] - lo) * t
    return f


def bilinear_lookup(xs, ys, table):
    """``f(x, y)``: bilinear interpolation of ``table`` over the grid
    ``xs`` × ``ys``, held at the edges outside it, on plain floats.

    Parameters
    ----------
    xs, ys : array_like
        Increasing (evenly spaced for the fast path, :func:`cell_finder`),
        at least 2 points each.
    table : array_like
        Shape ``(len(xs), len(ys))``.

    Returns
    -------
    callable
        ``(float, float) -> float`` (NaN for a NaN argument).

    Notes
    -----
    The weights of the cell's four corners, (1 − s)(1 − t), s(1 − t),
    (1 − s)t, st, s and t each point's place in its cell along one axis
    (the standard bilinear form; Press et al., Numerical Recipes, 3rd ed.,
    sec. 3.6, from memory).  O(1) per call on even grids.

    Examples
    --------
    >>> f = bilinear_lookup([0.0, 1.0], [0.0, 2.0], [[0.0, 2.0], [1.0, 3.0]])  # x + y
    >>> f(0.5, 1.0), f(0.25, 0.5), f(-1.0, 3.0), f(2.0, -1.0)
    (1.5, 0.75, 2.0, 1.0)
    >>> f(float("nan"), 0.0) != f(float("nan"), 0.0)
    True
    """
    g = bilinear_lookups(xs, ys, [table])
    nan = [math.nan]

    def f(x, y):
        return g(x, y, nan)[0]
    return f


def bilinear_lookups(xs, ys, tables):
    """``f(x, y, nan)``: :func:`bilinear_lookup` of several tables on one
    grid at once (the cell and weights found once), as a list; ``nan`` is
    returned (as given) for a NaN argument.

    Examples
    --------
    >>> f = bilinear_lookups([0.0, 1.0], [0.0, 1.0], [[[0.0, 1.0], [1.0, 2.0]], [[1.0, 1.0], [1.0, 1.0]]])
    >>> f(0.5, 0.25, None)
    [0.75, 1.0]
    """
    tabs = [[[float(v) for v in row] for row in table] for table in tables]
    cx = cell_finder([float(x) for x in xs])
    cy = cell_finder([float(y) for y in ys])

    def f(x, y, nan):
        i, s = cx(x)
        j, t = cy(y)
        if i is None or j is None:
            return nan
        out = []
        for rows in tabs:
            r0, r1 = rows[i], rows[i + 1]
            a = r0[j] + (r0[j + 1] - r0[j]) * t
            b = r1[j] + (r1[j + 1] - r1[j]) * t
            out.append(a + (b - a) * s)
        return out
    return f


def cell_finder(grid: list):
    """``cell(x) -> (j, t)``: the grid cell of ``x`` and its weight in it,
    clamped to the first and last cell (t in [0, 1]); (None, nan) for
    NaN.  An index from (x − x0)/step on an evenly spaced grid (even to
    1e-9 of its step), bisection otherwise.

    >>> cell = cell_finder([0.0, 0.5, 1.0])
    >>> cell(0.75), cell(-1.0), cell(2.0)
    ((1, 0.5), (0, 0.0), (1, 1.0))
    """
    n = len(grid)
    x0, step = grid[0], (grid[-1] - grid[0]) / (n - 1)
    even = step > 0.0 and all(abs(grid[k] - (x0 + k * step)) <= 1e-9 * step for k in range(n))
    last = n - 1

    if even:
        inv = 1.0 / step

        def cell(x):
            u = (x - x0) * inv
            if u != u:
                return None, math.nan
            if u <= 0.0:
                return 0, 0.0
            if u >= last:
                return last - 1, 1.0
            j = int(u)
            return j, u - j
        return cell

    def cell(x):
        if x != x:
            return None, math.nan
        j = bisect_right(grid, x) - 1
        if j < 0:
            return 0, 0.0
        if j >= last:
            return last - 1, 1.0
        return j, (x - grid[j]) / (grid[j + 1] - grid[j])
    return cell
