"""Table lookup of one point: the same number as ``numpy.interp``, faster.

The charge-conservation solver (:mod:`analyze.physics.device_charge`) looks
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

__all__ = ["interp_point", "interp_rows"]


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
