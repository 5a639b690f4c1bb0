"""Charge redistribution between the dynamic node and the nodes it shares with.

Written for an n-type stage (dynamic node precharged to ``vdd``); a p-type
stage is solved by the same code in the mirrored voltage ``u = vdd − V``
(see :meth:`analyze.physics.charge.NodeCharge.mirrored`).

Three kinds of node meet when a pattern joins the dynamic node X to
internal nodes: X itself (starts at ``vdd``), *discharged* nodes (start at
0 V) and *precharged* nodes (start at ``vdd``, held there by a secondary
precharge device).  Every join is a conducting nmos with its gate at
``vdd``, which passes no higher than ``v_lim = vdd − VT(v_lim)``
(:func:`analyze.physics.threshold.pass_limit`): it conducts only while its lower
terminal is below ``v_lim``.  Charge is conserved; the final state is one
of three regimes:

``"a"``
    all nodes at one voltage ``V <= v_lim``;
``"b"``
    X above ``v_lim``: every discharged node ends at ``v_lim``, X paid for
    those joined to it (below), precharged nodes for the rest, ending at or
    above ``v_lim``;
``"c"``
    X at ``v_lim``, discharged nodes at ``v_lim``, precharged nodes gave up
    charge to hold X there and end at or above ``v_lim``.

Which node pays (:func:`network_final_voltage`).  If the common voltage of
the whole component (charge conservation over all of it) is at or below
``v_lim``, that is the answer (regime ``a``).  Otherwise no node ends below
``v_lim`` (a set of nodes strictly below it would have no conducting
neighbour above it, so it would be the whole component) and every
discharged node ends at ``v_lim``.  The *low* nodes (at or below
``v_lim``; at first the discharged ones) form connected *regions* through
conducting devices, and a device between two high nodes does not conduct,
so a region is fed only by the high nodes next to it:

1. X pays for the regions joined to it through low nodes.  How a region's
   charge splits between X and a precharged node beside it depends on
   device strengths, so taking it from X first is the safe, pessimistic
   choice.
2. A region reached only through precharged nodes is fed by them; X pays
   for it only once one of them has run out (fallen to ``v_lim``, so that
   the device from X conducts).  Which one runs out first depends on
   device strengths too, so the worst is taken: the set S of precharged
   nodes that, each drained to ``v_lim`` by what lies behind it while the
   others give nothing, makes X pay most (X's bill: the need of the nodes
   joined to X through low nodes and S, S's own charge counted as given).
   A precharged node that alone reaches a region therefore always feeds
   it (nothing else can), and a region with several precharged neighbours
   costs X what is left after the cheapest way in has run out.
3. Regions still not joined to X are fed by the precharged nodes next to
   them, pooled at one common voltage (regions sharing such a node share
   the pool); a pool that cannot stay at or above ``v_lim`` runs out, its
   nodes join the low ones, and step 2 is taken again.
4. If X can pay its bill from above ``v_lim``, that is regime ``b``.
   Otherwise X ends at ``v_lim`` (regime ``c``), held there by the
   precharged nodes next to the low nodes, pooled (a pool that runs out
   joins the low nodes and the next ones hold).

Precharging one more node never lowers X's result (it only closes ways in
and adds charge).  :func:`final_voltage` is the older, topology-free form
(every discharged node taken to touch X, every precharged node pooled): it
is exact when every region touches X and a lower bound otherwise (X never
pays more in the network form), and it is monotone in the capacitances,
so the worst-case search uses it for its bounds.

Units: V, fF, fC.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from analyze.physics.charge import NodeCharge
from analyze.physics.regions import SearchLimit, adjacency, joined, pools, worst_opening

__all__ = ["Redistribution", "final_voltage", "network_final_voltage", "linear_final_voltage"]

_XTOL = 1e-12

#: Sets of precharged nodes :func:`network_final_voltage` may weigh for one
#: component before it falls back to the topology-free :func:`final_voltage`.
SEARCH_LIMIT = 4096


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
        Final voltage of the precharged shared nodes: taken as one group by
        :func:`final_voltage`; the lowest of them in
        :func:`network_final_voltage` (``vdd`` outside regime ``a`` when
        there are none), V.
    voltages : tuple of float
        Final voltage of every node, in input order
        (:func:`network_final_voltage` only; empty otherwise), V.
    """

    v_final: float
    regime: str
    v_discharged: float
    v_precharged: float
    voltages: tuple[float, ...] = ()


def _solve(q: NodeCharge, target: float, lo: float, hi: float) -> float:
    """The ``V`` in ``[lo, hi]`` with ``q.charge(V) = target`` (Q increases with V)."""
    f_lo = q.charge_at(lo) - target
    if f_lo >= 0.0:
        return lo
    f_hi = q.charge_at(hi) - target
    if f_hi <= 0.0:
        return hi
    scalar = q._charge_scalar  # brentq asks at Python floats: what charge() does for them
    return brentq(lambda v: scalar(v) - target, lo, hi, xtol=_XTOL)


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
    :mod:`analyze.physics.charge` (SPICE junction depletion-charge formula) and the
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
    # charge_at: the charges at 0, v_lim and vdd are remembered per sum of nodes
    q_tot = float(x.charge_at(vdd) + discharged.charge_at(0.0) + precharged.charge_at(vdd))
    everything = x + discharged + precharged
    if float(everything.charge_at(v_lim)) >= q_tot:
        v = _solve(everything, q_tot, 0.0, v_lim)
        return Redistribution(v, "a", v, v)
    need = float(discharged.charge_at(v_lim) - discharged.charge_at(0.0))
    target = float(x.charge_at(vdd)) - need
    if float(x.charge_at(v_lim)) <= target:
        v = _solve(x, target, v_lim, vdd)
        return Redistribution(v, "b", v_lim, vdd)
    rest = q_tot - float(x.charge_at(v_lim) + discharged.charge_at(v_lim))
    v_p = _solve(precharged, rest, v_lim, vdd)
    return Redistribution(v_lim, "c", v_lim, v_p)


def network_final_voltage(charges, precharged, edges, v_lim: float) -> Redistribution:
    """Final dynamic-node voltage after charge sharing, with the topology (n-type view).

    Parameters
    ----------
    charges : sequence of NodeCharge
        Every node of the dynamic node's component; node 0 is the dynamic
        node X (starts at ``vdd`` = ``charges[0].vdd``).
    precharged : iterable of int
        Nodes (never 0) that start at ``vdd``; every other node but X
        starts at 0 V.
    edges : iterable of (int, int)
        Conducting devices between nodes (repeats and loops are ignored).
    v_lim : float
        Highest voltage a conducting evaluation device passes, V.

    Returns
    -------
    Redistribution
        With ``voltages`` holding every node's final voltage.

    Raises
    ------
    ValueError
        For an edge naming a node outside ``charges``, a node not joined
        to node 0, or node 0 among ``precharged``.

    Notes
    -----
    The rule of the module text.  Charge conservation with the junction
    charge of :mod:`analyze.physics.charge` (SPICE junction depletion-charge
    formula) and the pass limit of the SPICE level-1 threshold with body
    effect; each node's *need* is ``Q(v_lim) − Q(start)``.  Regions are
    found by union-find in O(nodes + edges) per round; every round after
    the first adds a precharged node to the low set, so there are at most
    ``2·len(precharged) + 2`` rounds.  X's worst bill is a maximum-weight
    connected node set, found by branch-and-bound over the precharged
    nodes next to it (exponential at worst, a few sets for the stacks of
    real gates); after :data:`SEARCH_LIMIT` sets the topology-free
    :func:`final_voltage` is returned instead (a lower bound, without
    ``voltages``).  Root searches (scipy.optimize.brentq): one for X in
    regimes ``a`` and ``b``, one per pool that gave charge.  X never pays
    more than in :func:`final_voltage`, so the result is at or above its
    one, and equal when every region touches X.

    Examples
    --------
    Linear capacitances, ``v_lim = 1.2`` V.  X (30 fF) – P (40 fF) – D
    (20 fF): D, behind P, needs 20·1.2 = 24 fC; P gives it and ends at
    (72 − 24)/40 = 1.2 V, X keeps VDD.

    >>> lin = lambda c: NodeCharge.linear(c, 1.8)
    >>> r = network_final_voltage([lin(30.0), lin(40.0), lin(20.0)], [1], [(0, 1), (1, 2)], 1.2)
    >>> (r.v_final, r.regime, round(r.v_precharged, 9))
    (1.8, 'b', 1.2)

    A 10 fF P can give only 10·0.6 = 6 fC: it ends at 1.2 V and X (40 fF)
    pays the other 18 fC, 1.8 − 18/40 = 1.35 V.

    >>> r = network_final_voltage([lin(40.0), lin(10.0), lin(20.0)], [1], [(0, 1), (1, 2)], 1.2)
    >>> (round(r.v_final, 9), r.regime, tuple(round(v, 9) for v in r.voltages))
    (1.35, 'b', (1.35, 1.2, 1.2))

    A second precharged node P2 (40 fF) behind D: the worst is that P
    still runs out first and P2 gives nothing, so X pays the same.

    >>> r = network_final_voltage([lin(40.0), lin(10.0), lin(20.0), lin(40.0)], [1, 3],
    ...                           [(0, 1), (1, 2), (2, 3)], 1.2)
    >>> (round(r.v_final, 9), r.regime)
    (1.35, 'b')
    """
    charges, precharged = list(charges), sorted(set(precharged))
    n = len(charges)
    x = charges[0]
    vdd = x.vdd
    v_lim = min(max(v_lim, 0.0), vdd)
    low = [i != 0 for i in range(n)]
    for i in precharged:
        if not 0 < i < n:
            raise ValueError(f"precharged node {i} is not one of 1..{n - 1}")
        low[i] = False
    adj = adjacency(n, edges)
    start = [0.0 if low[i] else vdd for i in range(n)]
    q0 = [float(c.charge(v)) for c, v in zip(charges, start)]
    ql = [float(c.charge(v_lim)) for c in charges]
    q_tot = sum(q0)
    if sum(ql) >= q_tot:
        return _common(charges, q_tot, v_lim)
    need = [b - a for a, b in zip(q0, ql)]  # < 0 for X and precharged nodes: what they can give
    while True:  # X above v_lim: the worst precharged nodes run out first
        try:
            opened, x_pays = worst_opening(adj, low, need, SEARCH_LIMIT)
        except SearchLimit:
            return _topology_free(charges, precharged, v_lim)
        for p in opened:
            low[p] = True
        fed = pools(adj, low, need, skip=joined(adj, low))
        short = [p for feeders, demand in fed if demand > -sum(need[i] for i in feeders) for p in feeders]
        if not short:
            break
        for p in short:  # what is left is fed by the precharged nodes beside it, or they run out
            low[p] = True
    target = q0[0] - x_pays
    if ql[0] <= target:
        return _settle(charges, precharged, low, fed, _solve(x, target, v_lim, vdd), v_lim, "b")
    low[0] = True
    while True:  # X at v_lim: the precharged nodes next to the low nodes hold it there
        fed = pools(adj, low, need)
        if any(not feeders for feeders, _ in fed):
            return _common(charges, q_tot, v_lim)  # every node low: only rounding gets here
        short = [p for feeders, demand in fed if demand > -sum(need[i] for i in feeders) for p in feeders]
        if not short:
            return _settle(charges, precharged, low, fed, v_lim, v_lim, "c")
        for p in short:
            low[p] = True


def _topology_free(charges, precharged, v_lim: float) -> Redistribution:
    """:func:`final_voltage` of the same nodes (no per-node voltages)."""
    zero = NodeCharge.linear(0.0, charges[0].vdd)
    discharged, pre = zero, zero
    for i, q in enumerate(charges[1:], start=1):
        if i in precharged:
            pre = pre + q
        else:
            discharged = discharged + q
    return final_voltage(charges[0], discharged, pre, v_lim)


def _common(charges, q_tot: float, v_lim: float) -> Redistribution:
    """Regime ``a``: every node at one voltage in ``[0, v_lim]``."""
    everything = charges[0]
    for q in charges[1:]:
        everything = everything + q
    v = _solve(everything, q_tot, 0.0, v_lim)
    return Redistribution(v, "a", v, v, (v,) * len(charges))


def _settle(charges, precharged, low, pools, v_x: float, v_lim: float, regime: str) -> Redistribution:
    """Final voltages once the low set is stable: low nodes at ``v_lim``,
    the precharged nodes of each pool at their common voltage, the rest
    at vdd."""
    vdd = charges[0].vdd
    volts = [v_lim if low[i] else vdd for i in range(len(charges))]
    volts[0] = v_x
    for feeders, demand in pools:
        q = charges[feeders[0]]
        for i in feeders[1:]:
            q = q + charges[i]
        v = _solve(q, float(q.charge(vdd)) - demand, v_lim, vdd)
        for i in feeders:
            volts[i] = v
    return Redistribution(v_x, regime, v_lim, min((volts[i] for i in precharged), default=vdd), tuple(volts))


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
