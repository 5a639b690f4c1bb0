"""The evaluation window as a transient, with the receiver's output free.

Charge conservation gives where the dynamic node ends with the receiver's
output held where it was before evaluation.  When the node falls into the
receiver's switching region the output swings while the charge is still
spreading, and its gate–drain (Miller) charge pushes the node back up: the
node's lowest point comes with the output part-way, above the held value
and below the value with the output following quasi-statically.  Where it
falls between depends on how fast the charge spreads against how fast the
receiver drives its output, so :func:`receiver_transient` integrates the
node equations over the window:

- every node of the shared group: ``d Q_n(V_n)/dt = Σ I_k``, the charges
  those of charge conservation (the same functions), the currents the
  measured channel currents of the conducting devices with their gates on
  (the inputs switch as steps at the start of the window: the fastest
  sharing a slew allows, so the deepest dip);
- each receiver output: ``C_o(V_o)·dV_o/dt + ∂Q_g/∂V_o·dV_X/dt = I(V_X,
  V_o)``, with ``C_o`` its node's lumped capacitance (junctions,
  overlaps, the next stage's gates, wire), ``I`` the measured static output
  current and the coupling term the reciprocal of the input's
  (:mod:`analyze.physics.receiver_tables`);
- the dynamic node's charge adds ``Q_g(V_X, V_o) − Q_g(V_X, V_held)``, the
  receiver's input charge as the output moves.

The result is the lowest V(X) in the window (p-type: highest).

Approximations, each named: the output row's coupling from V(X) is taken
equal to the input's from V_o (reciprocity; a BSIM charge model's
partition makes the drain's C_dg differ from C_gd in saturation, where a
larger C_dg would delay the output and lift X less); ``C_o`` holds the
receiver's drain junctions and overlaps but not its channel's share of
the output charge (a faster output, a larger lift); a keeper gated by
the output couples nothing back to X as its gate moves (pessimistic).
The first two lean optimistic; on our sky130 stages the result is within
+3.7 mV (optimistic) of the simulation (tests/bench/bench_accuracy.py).

Notes
-----
A capacitance matrix couples V(X) with each output (2×2 blocks around the
dynamic node's row), solved by eliminating the outputs (a Schur
complement: O(outputs) per evaluation).  Integrated by LSODA
(:func:`analyze.physics.creep.integrate_stiff`) with the states read every
2 ps over the first 0.5 ns and every 20 ps after; the extreme is refined
by the parabola through the three samples around it.  Cost: a few hundred
evaluations of O(links + outputs) lookups.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analyze.physics.creep import integrate_stiff, node_capacitances
from analyze.physics.lookup import uniform_lookup

__all__ = ["OutputNode", "WindowExtreme", "receiver_transient", "sample_times", "lowest_sample", "RTOL", "ATOL"]

#: The integration's tolerances per step: relative, and absolute in V.
RTOL, ATOL = 1e-4, 1e-5


@dataclass
class OutputNode:
    """A receiver output in the transient.

    Attributes
    ----------
    net : str
    capacitance : callable
        ``C_o(V)``, fF: the node's lumped capacitance.
    responses : list
        :class:`analyze.physics.receiver_tables.ReceiverResponse` of each
        receiver driving it (input on the dynamic node).
    held : float
        Where it is before evaluation, V (0 below an n-type stage's node,
        VDD above a p-type one's).
    """

    net: str
    capacitance: object
    responses: list
    held: float


@dataclass
class WindowExtreme:
    """The dynamic node's extreme in the window.

    Attributes
    ----------
    v : float
        Lowest V(X) (p-type: highest), V.
    t_ns : float
        When, ns after evaluation starts.
    outputs : dict of str to float
        Each receiver output's voltage then, V.
    """

    v: float
    t_ns: float
    outputs: dict


def sample_times(t_ns: float) -> np.ndarray:
    """Where the transient is read: every 2 ps up to 0.5 ns, every 20 ps
    after, and the window's end.

    Examples
    --------
    >>> t = sample_times(1.0)
    >>> len(t), float(t[1]), float(t[-1])
    (276, 0.002, 1.0)
    >>> sample_times(0.004).tolist()
    [0.0, 0.002, 0.004]
    """
    # from integer counts, so that no sample falls a rounding error short of another
    early = 0.002 * np.arange(int(math.ceil(min(0.5, t_ns) / 0.002 - 1e-9)))
    late = 0.5 + 0.02 * np.arange(int(math.ceil((t_ns - 0.5) / 0.02 - 1e-9))) if t_ns > 0.5 else np.empty(0)
    return np.concatenate([early, late, [t_ns]])


def lowest_sample(times, values) -> tuple:
    """``(t, value)`` of the lowest of ``values`` sampled at ``times``,
    refined by the parabola through the lowest sample and its neighbours
    (when it opens upwards and its vertex lies between them; never above
    the lowest sample).

    Examples
    --------
    A parabola's vertex between samples is found exactly:

    >>> t = np.arange(0.0, 0.02, 0.002)
    >>> tv, v = lowest_sample(t, (t - 0.0031) ** 2 + 0.5)
    >>> round(float(tv), 9), round(float(v), 12)
    (0.0031, 0.5)

    At an end of the samples (or on a flat run) the sample itself:

    >>> lowest_sample([0.0, 1.0, 2.0], [3.0, 2.0, 1.0])
    (2.0, 1.0)
    """
    times = np.asarray(times, dtype=float)
    x = np.asarray(values, dtype=float)
    k = int(np.argmin(x))
    t, low = float(times[k]), float(x[k])
    if 0 < k < len(times) - 1:
        (t0, t1, t2), (a, b, c) = times[k - 1:k + 2], x[k - 1:k + 2]
        den = (t0 - t1) * (t0 - t2) * (t1 - t2)
        if den != 0.0:
            p = (t2 * (b - a) + t1 * (a - c) + t0 * (c - b)) / den
            q = (t2 * t2 * (a - b) + t1 * t1 * (c - a) + t0 * t0 * (b - c)) / den
            if p > 0.0:
                tv = -q / (2.0 * p)
                if t0 <= tv <= t2:
                    r0 = a - p * t0 * t0 - q * t0
                    t, low = float(tv), min(float(p * tv * tv + q * tv + r0), float(b))
    return t, low


def receiver_transient(ctx, group, links, q_of, v0, outputs, t_ns: float, margin: float,
                       keys=None) -> WindowExtreme:
    """The dynamic node's extreme over the window with its receivers'
    outputs moving.

    Parameters
    ----------
    ctx, group, links, q_of
        As for :func:`analyze.physics.creep.creep_network` (the dynamic
        node first; each link with a current table; the dynamic node's
        charge with the receivers' outputs held).
    v0 : dict of str to float
        Each node's voltage just after the edge (the charge it held before,
        on its curve after the edge).
    outputs : list of OutputNode
    t_ns : float
        The evaluation window, ns.
    margin : float
        How far past the rails the charge curves are made.
    keys : dict, optional
        As for :func:`analyze.physics.creep.node_capacitances`.

    Returns
    -------
    WindowExtreme

    Notes
    -----
    fC / µA = 1 ns, so time is in ns.  Tolerances :data:`RTOL` and
    :data:`ATOL` (10 µV): within 0.07 mV of a solve a hundred times tighter
    on our sky130 stages (measured).  The inputs step at t = 0; the receiver tables' inputs are taken
    at their edge (0 or VDD) past them.
    """
    tables = ctx.tables
    vdd = float(ctx.tech.vdd)
    n_type = ctx.stage.polarity == "n"
    cap_at = node_capacitances(ctx, group, q_of, margin, keys)
    index = {n: k for k, n in enumerate(group)}
    wiring = [(tables.pass_current(name), (index[a], index[b])) for name, a, b in links]
    size = len(group)
    sign = 1.0 if n_type else -1.0
    # per output: its capacitance, each receiver's joint lookup and its
    # ∂Q_g/∂V_in at the held level (in the dynamic node's curve already)
    outs = [(o.capacitance, [(r.at, uniform_lookup(tables.v, [r.dq_din(float(v), float(o.held))
                                                              for v in tables.v])) for r in o.responses],
             float(o.held)) for o in outputs]
    nan3 = [float("nan")] * 3

    def rates(_t, y):
        v = y.tolist()
        flow = [0.0] * size
        for f, (i, j) in wiring:
            r, g = (j, i) if (v[i] >= v[j]) == n_type else (i, j)
            near = min(max(v[r], 0.0), vdd)
            cur = sign * f(near, v[g])
            flow[r] += cur
            flow[g] -= cur
        dv = [0.0] + [flow[m] / cap_at[m](v[m]) for m in range(1, size)]  # dv[0] below
        vx = min(max(v[0], 0.0), vdd)
        cx = cap_at[0](v[0])
        rhs_x = flow[0]
        # eliminate the outputs: C_o·dV_o = I − m·dV_X, m = ∂Q_g/∂V_o
        per = []
        for k, (cap, responses, held) in enumerate(outs):
            vo = v[size + k]
            co = max(cap(vo), 1e-3)  # an output has its drains' junctions at least
            m = i = 0.0
            for at, din_held in responses:
                d_in, d_out, cur = at(vx, vo, nan3)
                cx += d_in - din_held(vx)
                m += d_out
                i += cur
            cx -= m * m / co
            rhs_x -= m * i / co
            per.append((co, m, i))
        dvx = rhs_x / max(cx, 1e-6)
        dv[0] = dvx
        for co, m, i in per:
            dv.append((i - m * dvx) / co)
        return np.array(dv)

    y0 = [float(v0[n]) for n in group] + [held for _, _, held in outs]
    times = sample_times(float(t_ns))
    path = integrate_stiff(rates, y0, float(t_ns), rtol=RTOL, atol=ATOL, times=times)
    t, low = lowest_sample(times, path[:, 0] * sign)
    v = sign * low
    at = {o.net: float(np.interp(t, times, path[:, size + j])) for j, o in enumerate(outputs)}
    return WindowExtreme(v, t, at)
