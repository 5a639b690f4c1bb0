"""Fitting the level-1 formulas dynshare uses to measured curves.

Two fits: the body-effect formula of the threshold voltage and the
depletion formula of a junction capacitance, plus the constant-current
reading of a threshold from a gate sweep.  Pure numpy/scipy; the
measurements come from :mod:`analyze.characterize.measure`.

Examples
--------
>>> import numpy as np
>>> vsb = np.linspace(0, 1.8, 7)
>>> fit = fit_body_effect(vsb, 0.5 + 0.4 * (np.sqrt(0.7 + vsb) - np.sqrt(0.7)))
>>> round(fit.vt0, 6), round(fit.gamma, 6), round(fit.phi, 6), fit.rms_v < 1e-9
(0.5, 0.4, 0.7, True)
>>> v = np.linspace(0, 1.8, 7)
>>> dep = fit_depletion(v, 1.3 / (1 + v / 0.73) ** 0.44)
>>> round(dep.c0, 6), round(dep.pb, 6), round(dep.m, 6)
(1.3, 0.73, 0.44)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

__all__ = ["BodyEffectFit", "DepletionFit", "fit_body_effect", "fit_depletion", "constant_current_vt"]


@dataclass(frozen=True)
class BodyEffectFit:
    """VT(Vsb) = vt0 + gamma·(√(phi + Vsb) − √phi), magnitudes (a pmos's
    threshold is −VT).

    Parameters
    ----------
    vt0 : float
        V, at Vsb = 0.
    gamma : float
        V^½.
    phi : float
        V.
    rms_v : float
        Root-mean-square residual of the fit, V.
    max_v : float
        Largest absolute residual, V.
    """

    vt0: float
    gamma: float
    phi: float
    rms_v: float
    max_v: float

    def vt(self, vsb):
        """The fitted threshold magnitude at source–body bias ``vsb`` (V)."""
        vsb = np.asarray(vsb, dtype=float)
        return self.vt0 + self.gamma * (np.sqrt(self.phi + vsb) - np.sqrt(self.phi))


@dataclass(frozen=True)
class DepletionFit:
    """C(V) = c0 / (1 + V/pb)^m at reverse bias V.

    Parameters
    ----------
    c0 : float
        Zero-bias capacitance (the unit of the data).
    pb : float
        Built-in potential, V.
    m : float
        Grading exponent.
    rel_errors : tuple of float
        (fit − data)/data at each bias, in order.
    """

    c0: float
    pb: float
    m: float
    rel_errors: tuple[float, ...]

    def c(self, v):
        """The fitted capacitance at reverse bias ``v``."""
        return self.c0 / (1 + np.asarray(v, dtype=float) / self.pb) ** self.m


def fit_body_effect(vsb, vt) -> BodyEffectFit:
    """Least-squares fit of the level-1 body-effect formula.

    Parameters
    ----------
    vsb : array_like
        Source–body reverse bias, V (≥ 0).
    vt : array_like
        Threshold magnitudes measured there, V.

    Returns
    -------
    BodyEffectFit

    Raises
    ------
    ValueError
        With fewer than three points.

    Notes
    -----
    The formula is that of the Shichman–Hodges model (SPICE level 1),
    VT = VT0 + γ(√(2φF + VSB) − √(2φF)) with PHI = 2φF (Weste & Harris,
    CMOS VLSI Design, ch. 2; Rabaey, Digital Integrated Circuits, ch. 3;
    both from memory).  All three parameters are free: phi within
    0.05–3 V, gamma within 0–5 V^½ (trust-region least squares, a few
    dozen evaluations of a handful of points).  The result is a fit of
    the curve, not the physical surface potential.
    """
    vsb = np.asarray(vsb, dtype=float)
    vt = np.asarray(vt, dtype=float)
    if vsb.size < 3:
        raise ValueError("need at least three points to fit vt0, gamma and phi")

    def residual(x):
        return x[0] + x[1] * (np.sqrt(x[2] + vsb) - np.sqrt(x[2])) - vt

    best = None
    for phi0 in (0.2, 0.7, 1.5):
        sol = least_squares(residual, [vt[0], 0.4, phi0], bounds=([-5, 0, 0.05], [5, 5, 3]),
                            xtol=1e-14, ftol=1e-14, gtol=1e-14)
        if best is None or sol.cost < best.cost:
            best = sol
    r = best.fun
    return BodyEffectFit(float(best.x[0]), float(best.x[1]), float(best.x[2]),
                         float(np.sqrt(np.mean(r ** 2))), float(np.max(np.abs(r))))


def fit_depletion(v, c) -> DepletionFit:
    """Least-squares fit of the SPICE depletion formula to C(V).

    Parameters
    ----------
    v : array_like
        Reverse bias, V (≥ 0, including 0).
    c : array_like
        Capacitance measured there (any unit, > 0).

    Returns
    -------
    DepletionFit

    Notes
    -----
    C(V) = C0/(1 + V/PB)^M, the junction formula of SPICE level 1 and
    BSIM (Sze, Physics of Semiconductor Devices, ch. 2, for the abrupt
    and graded junction; from memory).  The residual minimised is the
    relative error at each bias; M within 0–0.99, PB within 0.05–5 V.
    A nearly flat curve (M → 0) leaves PB undetermined; any PB then fits.
    Cost: a few dozen evaluations of a handful of points.
    """
    v = np.asarray(v, dtype=float)
    c = np.asarray(c, dtype=float)

    def residual(x):
        return x[0] / (1 + v / x[1]) ** x[2] / c - 1

    best = None
    for pb0 in (0.3, 0.8, 2.0):
        sol = least_squares(residual, [c[0], pb0, 0.3], bounds=([c[0] * 0.5, 0.05, 0.0], [c[0] * 2, 5.0, 0.99]),
                            xtol=1e-14, ftol=1e-14, gtol=1e-14)
        if best is None or sol.cost < best.cost:
            best = sol
    return DepletionFit(float(best.x[0]), float(best.x[1]), float(best.x[2]),
                        tuple(float(e) for e in best.fun))


def constant_current_vt(vg, current, i_crit: float) -> float:
    """The gate voltage at which a rising current first reaches ``i_crit``.

    Parameters
    ----------
    vg : array_like
        Gate-voltage magnitudes of a sweep, increasing.
    current : array_like
        Drain-current magnitudes there.
    i_crit : float
        The criterion current.

    Returns
    -------
    float
        Interpolated linearly in log(current) between the two sweep points
        around the crossing; NaN when the sweep never reaches ``i_crit``.

    Notes
    -----
    The constant-current threshold (common practice in device
    characterisation).  O(n) in the sweep length.

    Examples
    --------
    >>> round(constant_current_vt([0.0, 0.1, 0.2], [1e-9, 1e-8, 1e-7], 1e-8 * 10 ** 0.5), 6)
    0.15
    """
    vg = np.asarray(vg, dtype=float)
    logi = np.log(np.maximum(np.abs(np.asarray(current, dtype=float)), 1e-30))
    target = np.log(i_crit)
    above = np.nonzero(logi >= target)[0]
    if above.size == 0 or above[0] == 0:
        return float("nan")
    j = above[0]
    return float(vg[j - 1] + (target - logi[j - 1]) * (vg[j] - vg[j - 1]) / (logi[j] - logi[j - 1]))
