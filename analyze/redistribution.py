"""Charge redistribution between the dynamic node and the nodes it shares with.

Written for an n-type stage (dynamic node precharged to ``vdd``); a p-type
stage is solved by the same code in the mirrored voltage ``u = vdd − V``
(see :meth:`analyze.charge.NodeCharge.mirrored`).

Three kinds of node meet when a pattern joins the dynamic node X to
internal nodes: X itself (starts at ``vdd``), *discharged* nodes (start at
0 V) and *precharged* nodes (start at ``vdd``, held there by a secondary
precharge device).  Every join is a conducting nmos with its gate at
``vdd``, which passes no higher than ``v_lim = vdd − VT(v_lim)``
(:func:`analyze.threshold.pass_limit`).  Charge is conserved; the final
state is one of three regimes:

``"a"``
    all nodes at one voltage ``V <= v_lim``;
``"b"``
    X above ``v_lim``: X alone charged the discharged nodes to ``v_lim``,
    precharged nodes kept ``vdd`` (a device stops once its lower terminal
    reaches ``v_lim``);
``"c"``
    X at ``v_lim``, discharged nodes at ``v_lim``, precharged nodes gave up
    charge to hold X there and end at or above ``v_lim``.

Units: V, fF, fC.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from analyze.charge import NodeCharge

__all__ = ["Redistribution", "final_voltage", "linear_final_voltage"]

_XTOL = 1e-12


@dataclass(frozen=True)
class Redistribution:
    """The final state of one charge-sharing event.

    Attributes
    ----------
    v_final : float
        Final voltage of the dynamic node, V.
    regime : str
        ``"a"``, ``"b"`` or ``"c"`` (see the module text).
    v_discharged : float
        Final voltage of the discharged shared nodes, V.
    v_precharged : float
        Final voltage of the precharged shared nodes (taken as one group), V.
    """

    v_final: float
    regime: str
    v_discharged: float
    v_precharged: float


def _solve(q: NodeCharge, target: float, lo: float, hi: float) -> float:
    """The ``V`` in ``[lo, hi]`` with ``q.charge(V) = target`` (Q increases with V)."""
    f_lo = q.charge(lo) - target
    if f_lo >= 0.0:
        return lo
    f_hi = q.charge(hi) - target
    if f_hi <= 0.0:
        return hi
    return brentq(lambda v: q.charge(v) - target, lo, hi, xtol=_XTOL)


def final_voltage(
    x: NodeCharge, discharged: NodeCharge, precharged: NodeCharge, v_lim: float
) -> Redistribution:
    """Final dynamic-node voltage after charge sharing (n-type view).

    Parameters
    ----------
    x : NodeCharge
        The dynamic node; starts at ``vdd`` (= ``x.vdd``).
    discharged : NodeCharge
        Sum of the shared nodes that start at 0 V.
    precharged : NodeCharge
        Sum of the shared nodes that start at ``vdd``.
    v_lim : float
        Highest voltage a conducting evaluation device passes, V.

    Returns
    -------
    Redistribution

    Notes
    -----
    Charge conservation with the junction charge of
    :mod:`analyze.charge` (SPICE junction depletion-charge formula) and the
    pass limit of the SPICE level-1 threshold with body effect.  Let
    ``Q_tot = Qx(vdd) + Qd(0) + Qp(vdd)``.  Regime ``a`` holds when
    ``(Qx + Qd + Qp)(v_lim) >= Q_tot``: solve the sum for ``V`` in
    ``[0, v_lim]``.  Otherwise regime ``b`` holds when X can supply
    ``Qd(v_lim) − Qd(0)`` without falling below ``v_lim``: solve ``Qx(V) =
    Qx(vdd) − (Qd(v_lim) − Qd(0))`` in ``[v_lim, vdd]``.  Otherwise regime
    ``c``: X ends at ``v_lim``.  The regime is decided by evaluating at
    ``v_lim``; at most one bracketed Brent root search
    (scipy.optimize.brentq) follows.  The result falls as discharged
    capacitance is added and rises as precharged capacitance is added.

    Examples
    --------
    >>> lin = lambda c: NodeCharge.linear(c, 1.8)
    >>> r = final_voltage(lin(30.0), lin(20.0), lin(0.0), v_lim=1.2)
    >>> (round(r.v_final, 9), r.regime)  # 30*1.8/50
    (1.08, 'a')
    >>> r = final_voltage(lin(30.0), lin(10.0), lin(0.0), v_lim=1.2)
    >>> (round(r.v_final, 9), r.regime)  # 1.8 - 10*1.2/30
    (1.4, 'b')
    >>> r = final_voltage(lin(30.0), lin(40.0), lin(60.0), v_lim=1.2)
    >>> (round(r.v_final, 9), r.regime, round(r.v_precharged, 9))  # P: (162-84)/60
    (1.2, 'c', 1.3)
    """
    vdd = x.vdd
    v_lim = min(max(v_lim, 0.0), vdd)
    q_tot = float(x.charge(vdd) + discharged.charge(0.0) + precharged.charge(vdd))
    everything = x + discharged + precharged
    if float(everything.charge(v_lim)) >= q_tot:
        v = _solve(everything, q_tot, 0.0, v_lim)
        return Redistribution(v, "a", v, v)
    need = float(discharged.charge(v_lim) - discharged.charge(0.0))
    target = float(x.charge(vdd)) - need
    if float(x.charge(v_lim)) <= target:
        v = _solve(x, target, v_lim, vdd)
        return Redistribution(v, "b", v_lim, vdd)
    rest = q_tot - float(x.charge(v_lim) + discharged.charge(v_lim))
    v_p = _solve(precharged, rest, v_lim, vdd)
    return Redistribution(v_lim, "c", v_lim, v_p)


def linear_final_voltage(caps, starts) -> float:
    """Lossless charge sharing with fixed capacitances, V.

    Parameters
    ----------
    caps : array_like
        Capacitance of each node (fF), e.g. zero-bias totals.
    starts : array_like
        Each node's starting voltage, V.

    Returns
    -------
    float
        ``Σ Cᵢ·Vᵢ(0) / Σ Cᵢ`` (charge conservation on linear capacitors,
        any circuits textbook); the mean start voltage when every
        capacitance is zero.

    Examples
    --------
    >>> round(linear_final_voltage([30.0, 10.0, 10.0], [1.8, 0.0, 0.0]), 9)
    1.08
    """
    c = np.asarray(caps, dtype=float)
    v = np.asarray(starts, dtype=float)
    total = c.sum()
    if total <= 0.0:
        return float(v.mean()) if v.size else 0.0
    return float((c * v).sum() / total)
