"""The creep past the pass limit: where a stack's internal nodes get to
within the evaluation window.

An internal node of an n-type stage charges from the dynamic node quickly
until its voltage nears the pass limit (VDD − VT, body effect included);
from there the device above it is in weak inversion and the node creeps up
on its subthreshold current, ever slower.  How far it gets by the end of
``evaluation_ns`` decides how much charge the dynamic node loses.
:func:`creep_network` sets up and solves that small stiff system, one
equation per node: C_n(V_n)·dV_n/dt = Σ I_k, with the capacitances and the
channel currents measured from the foundry's models
(:mod:`analyze.physics.device_tables`); :func:`integrate_stiff` is its
solver.

Examples
--------
A stiff pair (time constants 1 ps and 1 ns) against its closed form
y = (e^{−1000 t}, e^{−t}) (the tolerance is per step; the error at the
end is of its order):

>>> import math
>>> y = integrate_stiff(lambda t, y: np.array([-1000.0 * y[0], -y[1]]), [1.0, 1.0], 1.0)
>>> bool(abs(y[1] - math.exp(-1.0)) < 5e-4 and abs(y[0]) < 1e-4)
True

Nothing to integrate over an empty window:

>>> integrate_stiff(lambda t, y: -y, [0.5, 0.25], 0.0).tolist()
[0.5, 0.25]
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.integrate import ODEintWarning, odeint, solve_ivp

from analyze.physics.lookup import uniform_lookup

__all__ = ["creep_network", "integrate_stiff", "node_capacitances"]


def integrate_stiff(rates, y0, t_end: float, rtol: float = 1e-4, atol: float = 1e-5,
                    max_steps: int = 5000, times=None) -> np.ndarray:
    """The state at ``t_end`` of dy/dt = rates(t, y), y(0) = y0, for a
    small stiff system.

    Parameters
    ----------
    rates : callable
        ``rates(t, y)`` -> array of dy/dt, ``y`` an array.
    y0 : sequence of float
    t_end : float
        End of the interval (same unit as ``rates``' time); at most 0
        returns ``y0``.
    rtol, atol : float
        Error tolerances per step (relative, absolute; the absolute one in
        the unit of ``y``).
    max_steps : int
        Steps LSODA may take before it gives up.
    times : sequence of float, optional
        Increasing times from 0 to ``t_end``: the states at each are
        returned (the solver's own interpolation between its steps).

    Raises
    ------
    ArithmeticError
        With ``times``, when both solvers stop short of ``t_end`` (without
        ``times`` the state where scipy's BDF stopped is returned).

    Returns
    -------
    ndarray
        y(t_end); with ``times``, one row per time.

    Notes
    -----
    LSODA (L. Petzold, "Automatic selection of methods for solving stiff
    and nonstiff systems of ordinary differential equations", SIAM J. Sci.
    Stat. Comput. 4, 1983; A. C. Hindmarsh's ODEPACK) through
    :func:`scipy.integrate.odeint`: variable-order, variable-step, Adams
    while the system is not stiff and backward differentiation (BDF) once
    it is, its Jacobian by finite differences.  Its steps run in compiled
    code and call back only for ``rates``; on a system of a few nodes that
    makes it several times faster than :func:`scipy.integrate.solve_ivp`'s
    BDF, whose Python steps cost more than the right-hand side.  Where
    LSODA reports a failure (too many steps, repeated error-test or
    convergence failures), the solve is done again with ``solve_ivp``'s BDF
    at the same tolerances (where that fails too, its state where it
    stopped is returned, as the solver did before LSODA); LSODA's warning
    of the failure is not shown
    (a ``warnings.catch_warnings`` block: the process's warning filters
    for the length of the call).  Cost: O(steps × (rates + n³)), some fifty to a
    hundred steps for a creep.
    """
    y0 = np.asarray(y0, dtype=float)
    if not t_end > 0.0:
        return y0.copy() if times is None else np.tile(y0, (len(times), 1))
    at = [0.0, float(t_end)] if times is None else [float(t) for t in times]
    with warnings.catch_warnings():
        # a failure is handled below (scipy's BDF takes over): its warning
        # is kept off the user's stderr
        warnings.simplefilter("ignore", ODEintWarning)
        y, info = odeint(rates, y0, at, rtol=rtol, atol=atol, mxstep=int(max_steps),
                         full_output=True, tfirst=True)
    # (scipy's message for LSODA's success; any other, or a scipy that words
    # it otherwise, takes the BDF path: slower, the same answer)
    if info["message"] == "Integration successful." and np.isfinite(y).all():
        return np.array(y[-1] if times is None else y, dtype=float)
    sol = solve_ivp(rates, (0.0, at[-1]), y0, method="BDF", rtol=rtol, atol=atol,
                    t_eval=None if times is None else at)
    if times is None:
        return np.array(sol.y[:, -1], dtype=float)
    if sol.status != 0 or sol.y.shape[1] < len(at):
        # a path cut short would hide where it went: the caller decides
        raise ArithmeticError(f"the stiff solve stopped at t = {sol.t[-1] if len(sol.t) else 0.0:g}: {sol.message}")
    return np.array(sol.y.T, dtype=float)


def node_capacitances(ctx, group, q_of, margin: float, keys=None) -> list:
    """Per node of ``group``, ``C_n(V) = |dQ_n/dV|`` (fF, at least 1e-6) as
    a float lookup over −margin … VDD + margin: the gradient of
    ``q_of(node, ·)`` on a grid twice as fine as the tables'.  With
    ``keys`` (per node, what its curve depends on besides the context),
    each is made once per context (kept in ``ctx.creep_caps``).  O(grid)
    per curve made."""
    vdd = float(ctx.tech.vdd)
    grid = np.linspace(-margin, vdd + margin, 2 * len(ctx.tables.v) + 1)
    memo = ctx.creep_caps
    out = []
    for n in group:
        key = (keys[n], margin, len(grid)) if keys is not None else None
        f = memo.get(key)
        if f is None:
            f = uniform_lookup(grid, np.maximum(np.abs(np.gradient(q_of(n, grid), grid)), 1e-6))
            if key is not None:
                memo[key] = f
        out.append(f)
    return out


def creep_network(ctx, group, links, q_of, v_x0, v_from: float, v_eq: float, t_ns: float, margin: float,
                  keys=None) -> dict:
    """Where each node of the group is after ``t_ns`` of conduction through
    ``links`` past the pass limit.

    Every internal node starts at ``v_from`` (the end of the fast phase; the
    dynamic node where conservation puts it) and the node voltages follow
    C_n(V_n)·dV_n/dt = Σ I_k, I_k the measured channel current of each
    conducting device from its higher to its lower terminal (gate on; the
    current table's near terminal is the lower one).  A node deep in a stack
    is charged through several devices in series, each with little
    drain–source voltage, so it lags the nodes above it (one lumped
    internal node would fill as fast as the top node).

    Parameters
    ----------
    ctx : analyze.physics.device_charge.ChargeContext
    group : list of str
        The dynamic node first.
    links : list of (str, str, str)
        Device name and its two terminals, both in the group.
    q_of : callable
        ``q_of(node, v)``: the node's charge after the edge over an array
        of voltages, fC.
    v_x0 : callable
        The dynamic node's voltage for the internal nodes at one voltage.
    v_from, v_eq : float
        Start of the creep and the equalised voltage (never passed).
    t_ns : float
    margin : float
        How far past the rails voltages may go (the junction bracket).
    keys : dict of str to hashable, optional
        Per node, what its charge curve ``q_of(node, ·)`` depends on besides
        the context: with it, each curve's C_n(V) is made once per context
        (kept in ``ctx.creep_caps``).

    Returns
    -------
    dict of str to float
        Each internal node's voltage at ``t_ns``, within [v_from, v_eq]
        (p-type: [v_eq, v_from]).

    Notes
    -----
    C_n(V) = |dQ_n/dV| from the node's charge tabulated on a grid (charge
    conservation's own Q(V), so the creep moves the charge the solver
    counts); currents from
    :meth:`analyze.physics.device_tables.StageTables.pass_current`; fC / µA =
    1 ns, so time is in ns.  The stiff ODE is integrated by
    :func:`integrate_stiff` with a relative tolerance of 1e-4 and an
    absolute one of 10 µV.  Cost: some hundred evaluations of O(links)
    interpolations.
    """
    tables = ctx.tables
    n_type = ctx.stage.polarity == "n"
    cap_at = node_capacitances(ctx, group, q_of, margin, keys)
    currents = [tables.pass_current(name) for name, _, _ in links]
    index = {n: k for k, n in enumerate(group)}
    ends = [(index[a], index[b]) for _, a, b in links]
    sign = 1.0 if n_type else -1.0
    wiring = list(zip(currents, ends))
    size = len(group)

    def rates(_t, v):
        v = v.tolist()
        flow = [0.0] * size
        for f, (i, j) in wiring:
            # the receiving node: the lower one (n-type), the higher (p-type)
            r, g = (j, i) if (v[i] >= v[j]) == n_type else (i, j)
            cur = sign * f(v[r], v[g])
            flow[r] += cur
            flow[g] -= cur
        return np.array([flow[m] / cap_at[m](v[m]) for m in range(size)])

    v0 = np.full(len(group), v_from)
    v0[0] = v_x0(v_from)
    v_end = integrate_stiff(rates, v0, t_ns)
    lo, hi = (v_from, v_eq) if n_type else (v_eq, v_from)
    return {n: float(np.clip(v_end[index[n]], lo, hi)) for n in group[1:]}
