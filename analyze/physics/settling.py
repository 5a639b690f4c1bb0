"""The dynamic node's final voltage by charge conservation with the
foundry models' device charges.

Conservation: Σ Q_final(V) over the joined nodes equals Σ Q_initial(V0)
with every device's gate at its level before and after evaluation.  The
joined nodes end at one voltage; an internal node of an n-type stage cannot
rise above the nmos pass limit V_lim = VDD − VT(V_lim) (p-type: the mirror),
and where the equalised voltage would pass it the internal nodes stop near
it — each where the measured subthreshold currents through the stack take it
within ``evaluation_ns`` (:func:`analyze.physics.creep.creep_network`) — and the dynamic node
keeps the rest.  Internal nodes that start precharged share among themselves
first.

:func:`settle` solves it in two steps: everything but the creep past the
pass limit first, with a bound on the result proven from it (which lets the
worst-case search leave out a pattern without solving its creep), then, on
demand, the creep (:meth:`Settling.value`);
:func:`final_voltage_with_devices` is both at once.  What it is solved
over, per stage, is :func:`analyze.physics.device_charge.charge_context`.

Notes
-----
Each evaluation is a root search (Brent's method) over table lookups:
O(devices × log(1/tolerance)); the creep a small stiff ODE
(:mod:`analyze.physics.creep`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from analyze.physics.creep import creep_network
from analyze.physics.device_charge import ChargeContext, GateLevels
from analyze.physics.threshold import pass_limit
from analyze.physics.transient import receiver_transient
from extract.errors import InputError

__all__ = ["final_voltage_with_devices", "Settling", "settle", "BOUND_TOLERANCE"]


def _responds(ctx: ChargeContext, v: float) -> bool:
    """Whether a receiver's output leaves its held level by more than 1 mV
    with the dynamic node at ``v``: its static current 1 mV away from the
    level still drives it away (the current falls monotonically as the
    output rises)."""
    vdd = float(ctx.tech.vdd)
    n_type = ctx.stage.polarity == "n"
    x = min(max(float(v), 0.0), vdd)
    for o in ctx.outputs:
        probe = o.held + (1e-3 if n_type else -1e-3)
        i = sum(r.current(x, probe) for r in o.responses)
        if (i > 0.0 if n_type else i < 0.0):
            return True
    return False


def final_voltage_with_devices(ctx: ChargeContext, group: list[str], levels: GateLevels, start: dict,
                               links=()) -> float:
    """The dynamic node's final voltage with the models' device charges.

    Parameters
    ----------
    ctx : ChargeContext
        The stage, its tables and what is prepared once per stage.
    group : list of str
        The dynamic node first, then the nodes it ends joined to.
    levels : GateLevels
    start : dict of str to float
        Each node's voltage before evaluation.
    links : iterable of (str, str, str)
        The conducting devices inside the group with their two channel
        terminals (both in ``group``).  Past the pass limit their measured
        currents keep charging the internal nodes until ``evaluation_ns``,
        node by node (:func:`analyze.physics.creep.creep_network`); without any, the internal
        nodes stop at the pass limit.

    Returns
    -------
    float
        V(X) at the end, V.
    """
    return settle(ctx, group, levels, start, links).value()


@dataclass
class Settling:
    """The dynamic node's final voltage, known or with only the creep past
    the pass limit left to solve (:func:`settle`).

    Attributes
    ----------
    bound : float or None
        A bound proven before the creep: V(X) never ends below it less
        :data:`BOUND_TOLERANCE` (n-type; p-type: never above it plus that);
        None when not proven.  The final voltage itself once known.
    finish : callable or None
        Solves the rest; None once the value is known.
    """

    bound: float | None
    finish: object = None

    def value(self) -> float:
        """The final voltage (solving the creep on first call)."""
        if self.finish is not None:
            self.bound, self.finish = self.finish(), None
        return self.bound


#: Slack of the bound for the root searches behind it (``xtol`` 1e-7 V each;
#: the equalised voltage's residual charge, left to the dynamic node alone,
#: moves it by that times the group's capacitance over the node's): 1 mV, V.
BOUND_TOLERANCE = 1e-3


def settle(ctx: ChargeContext, group: list[str], levels: GateLevels, start: dict, links=()) -> Settling:
    """:func:`final_voltage_with_devices` in two steps: everything but the
    creep past the pass limit, then (:meth:`Settling.value`) the creep.

    Parameters
    ----------
    ctx, group, levels, start, links
        As for :func:`final_voltage_with_devices`.

    Returns
    -------
    Settling
        With the value when no creep is needed; else with the bound the
        equalised voltage V_eq gives, when proven.

    Raises
    ------
    InputError
        Naming the tech file and the stage, when no voltage within the
        junction formula's range past the rails
        (:meth:`analyze.physics.charge.NodeCharge.forward_margin`) holds
        the charge (fitted PB values too small for the node's swing).

    Notes
    -----
    The bound: the internal nodes end between the creep's start and V_eq
    (its result is clipped there), so with every node charge
    nondecreasing in its voltage (:meth:`ChargeContext.increasing`) they
    hold no more charge than at V_eq (n-type) and the dynamic node keeps at
    least its share at V_eq: V(X) >= V_eq (p-type: the mirror, V(X) <= V_eq).
    The caller can then leave out a pattern whose bound is already past
    the worst found (:func:`analyze.search.foundry.solve_candidates`).
    """
    stage, tech, tables = ctx.stage, ctx.tech, ctx.tables
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    members = set(group)
    rests = {n: ctx.rest(n) for n in group}
    before = dict(levels.before)
    if tables.clock_v is not None:
        # the clock edge is measured as a whole: the clocked devices count
        # at their evaluation level, their coupling and channel charge come
        # in as the charge that moved the lone node to clock_v
        before.update({name: levels.after[name] for name in ctx.clocked})
    terms = {n: [] for n in group}
    for d in ctx.devices:
        for t in (d.drain, d.source):
            if t in members:
                terms[t].append((tables.terminal(d.name, before[d.name]),
                                 tables.terminal(d.name, levels.after[d.name])))

    def q_node(n, v, which):
        q = float(rests[n].charge(float(v)))
        for b, a in terms[n]:
            q += 0.5 * float((b if which == 0 else a)(v))
        if n == stage.dynamic_node:
            q += sum(float(f(v)) for f in ctx.receivers)
        return q

    def q_grid(n, v):
        """q_node(n, ·, after) over an array of voltages."""
        q = np.asarray(rests[n].charge(v), dtype=float)
        for _, a in terms[n]:
            q = q + 0.5 * a(v)
        if n == stage.dynamic_node:
            for f in ctx.receivers:
                q = q + f(v)
        return q

    total = sum(q_node(n, start[n], 0) for n in group)
    if tables.clock_v is not None:
        x = stage.dynamic_node
        total += q_node(x, tables.clock_v, 0) - q_node(x, start[x], 0)

    def f_equal(v):
        return sum(q_node(n, v, 1) for n in group) - total

    margin = min(rests[n].forward_margin() for n in group)
    def root(f, what):
        """The voltage where ``f`` is 0 within the junction formula's range,
        or a one-line error naming the tech file (the range is set by its
        fitted PB values, :meth:`NodeCharge.forward_margin`)."""
        try:
            return brentq(f, -margin, vdd + margin, xtol=1e-7)
        except ValueError:
            raise InputError(tech.path or "tech", f"no voltage from {-margin:.3g} to {vdd + margin:.3g} V holds "
                             f"{what} (the junction formula holds to 0.9 x the smallest graded pb past the "
                             "rails): the mos.nmos/mos.pmos junction numbers do not fit these models",
                             f"stage {stage.dynamic_node}") from None

    v_eq = root(f_equal, "the charge shared after the clock edge")
    x = stage.dynamic_node
    keys = {n: (n, tuple(a for _, a in terms[n])) for n in group}

    given = list(links)  # the conducting devices as the caller gave them

    def moving(v_held):
        """``v_held``, or where a receiver's output moving leaves the node's
        extreme: the transient of the window, never below ``v_held``
        (n-type; p-type: never above) — with the same sharing, the
        output's swing only adds charge to the dynamic node."""
        if not ctx.outputs or not _responds(ctx, v_held):
            return v_held
        conducting = [ln for ln in given if ln[0] in tables.currents]
        reach, todo = {x}, [x]
        while todo:
            n = todo.pop()
            for _, a, b in conducting:
                for p, q in ((a, b), (b, a)):
                    if p == n and q not in reach:
                        reach.add(q)
                        todo.append(q)
        if not members <= reach:
            return v_held  # nodes the transient could not charge (no current table, no link): keep the held value
        q0 = {n: q_node(n, start[n], 0) for n in group}
        if tables.clock_v is not None:
            q0[x] = q_node(x, tables.clock_v, 0)
        v0 = {}
        for n in group:
            try:
                v0[n] = brentq(lambda v: q_node(n, v, 1) - q0[n], -margin, vdd + margin, xtol=1e-7)
            except ValueError:
                return v_held  # no voltage after the edge holds its charge: keep the held value
        try:
            ext = receiver_transient(ctx, group, conducting, q_grid, v0, ctx.outputs, tech.evaluation_ns, margin,
                                     keys).v
        except ArithmeticError:
            return v_held  # the integration failed: keep the held value
        if ext != ext:
            return v_held
        return max(ext, v_held) if n_type else min(ext, v_held)

    def known(v_held):
        if ctx.outputs and _responds(ctx, v_held):
            # the transient never ends past the held value: it is the bound
            return Settling(v_held, lambda: moving(v_held))
        return Settling(v_held)

    internal = [n for n in group if n != x]
    if not internal:
        return known(v_eq)
    v_lim = pass_limit(tech.mos["nmos" if n_type else "pmos"], vdd)
    v_lim = v_lim if n_type else vdd - v_lim
    if (n_type and v_eq <= v_lim) or (not n_type and v_eq >= v_lim):
        return known(v_eq)

    def v_x(v_int):
        rest = total - sum(q_node(n, v_int, 1) for n in internal)
        return brentq(lambda v: q_node(x, v, 1) - rest, -margin, vdd + margin, xtol=1e-7)

    def v_x_near(v_int):
        """The dynamic node's voltage for the pass current (VDD where the
        lone-node bracket does not hold, early in the fast phase)."""
        try:
            return v_x(v_int)
        except ValueError:
            return vdd if n_type else 0.0

    # internal nodes that start precharged (predischarged) share among
    # themselves first; where that already leaves them past the pass limit,
    # the dynamic node gives them nothing but the subthreshold creep
    v_int0 = None
    if any((start[n] > 0.5 * vdd) == n_type for n in internal):
        q_int = sum(q_node(n, start[n], 0) for n in internal)
        v_int0 = root(lambda v: sum(q_node(n, v, 1) for n in internal) - q_int,
                      "the internal nodes' shared charge")
    links = [ln for ln in links if ln[0] in tables.currents]
    v_end = {n: v_lim if v_int0 is None else (max(v_lim, v_int0) if n_type else min(v_lim, v_int0))
             for n in internal}

    def x_final(v_end):
        rest = total - sum(q_node(n, v_end[n], 1) for n in internal)
        return root(lambda v: q_node(x, v, 1) - rest, "the dynamic node's charge")

    if not links:
        return known(x_final(v_end))
    # the fast phase up to a few hundred mV short of the pass limit takes
    # no time worth counting; the creep is solved from there
    v_from = v_lim - 0.3 if n_type else v_lim + 0.3
    if v_int0 is not None:
        v_from = max(v_from, v_int0) if n_type else min(v_from, v_int0)

    def finish():
        # a node's curve depends on the context and its devices' levels after
        # the edge only (keys)
        return moving(x_final(creep_network(ctx, group, links, q_grid, v_x_near, v_from, v_eq,
                                            tech.evaluation_ns, margin, keys)))

    # the creep ends each internal node in [v_from, v_eq] (p-type: [v_eq, v_from])
    proven = (v_from <= v_eq if n_type else v_eq <= v_from) and ctx.increasing(group)
    return Settling(v_eq if proven else None, finish)
