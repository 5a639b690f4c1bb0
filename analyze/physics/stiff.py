"""The stiff ODE solver of the creep past the pass limit.

:func:`analyze.physics.device_charge.final_voltage_with_devices` integrates
a small stiff system (one equation per node of a group) with scipy's BDF
method.  On a system this small, most of each step goes to the argument
handling around LAPACK's LU factorisation and solve that scipy's
``lu_factor``/``lu_solve`` do on every call.  :class:`LeanBDF` is scipy's
BDF with those two calls made straight to LAPACK (``dgetrf``/``dgetrs``,
what ``lu_factor``/``lu_solve`` call), with the same checks: every step,
every number the same, about a quarter less time.

Examples
--------
>>> import numpy as np
>>> from scipy.integrate import solve_ivp
>>> def f(t, y):
...     return np.array([-1000.0 * (y[0] - y[1]), 1000.0 * (y[0] - y[1]) - y[1]])
>>> a = solve_ivp(f, (0.0, 1.0), [1.0, 0.0], method="BDF", rtol=1e-4, atol=1e-6)
>>> b = solve_ivp(f, (0.0, 1.0), [1.0, 0.0], method=LeanBDF, rtol=1e-4, atol=1e-6)
>>> bool(np.array_equal(a.t, b.t) and np.array_equal(a.y, b.y))
True
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.integrate import BDF
from scipy.linalg import LinAlgWarning
from scipy.linalg.lapack import dgetrf, dgetrs

__all__ = ["LeanBDF"]


class LeanBDF(BDF):
    """scipy's :class:`scipy.integrate.BDF` with its dense LU factorisation
    and solve called straight to LAPACK (real systems; anything else, or a
    scipy whose BDF keeps them elsewhere, runs scipy's own).

    Notes
    -----
    The factorisation is ``dgetrf`` on ``I − c·J`` and the solve ``dgetrs``
    with the factors, as ``scipy.linalg.lu_factor(A, overwrite_a=True)``
    and ``lu_solve(LU, b, overwrite_b=True)`` make them, after the same
    finiteness checks (a ValueError on inf or NaN) and with the same
    warning for an exactly singular matrix.  Cost per step: scipy's BDF
    less the wrappers' overhead (tens of microseconds a call).
    """

    def __init__(self, fun, t0, y0, t_bound, **options):
        super().__init__(fun, t0, y0, t_bound, **options)
        if self.y.dtype != np.float64 or not isinstance(self.J, np.ndarray) or not hasattr(self, "solve_lu"):
            return

        def lu(a):
            self.nlu += 1
            _finite(a)
            factors, piv, info = dgetrf(a, overwrite_a=True)
            if info < 0:
                raise ValueError(f"illegal value in {-info}th argument of internal getrf (lu_factor)")
            if info > 0:
                warnings.warn(f"Diagonal number {info} is exactly zero. Singular matrix.", LinAlgWarning,
                              stacklevel=2)
            return factors, piv

        def solve_lu(lu_and_piv, b):
            _finite(b)
            x, info = dgetrs(lu_and_piv[0], lu_and_piv[1], b, trans=0, overwrite_b=True)
            if info != 0:
                raise ValueError(f"illegal value in {-info}th argument of internal gesv|posv")
            return x

        self.lu = lu
        self.solve_lu = solve_lu


def _finite(a: np.ndarray) -> None:
    if not np.isfinite(a).all():
        raise ValueError("array must not contain infs or NaNs")
