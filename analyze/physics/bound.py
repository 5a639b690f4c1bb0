"""A bound on the dynamic node's final voltage over every pattern and case.

Wide stages have too many patterns to solve each with the foundry models;
:func:`equalised_bound` gives, in one root search, a voltage that no
counted pattern in any arrival case ends below (n-type; p-type: above),
so a stage whose bound clears the threshold passes without solving every
pattern (:func:`analyze.search.analysis.worst_patterns`' heuristic then
only picks what to report).

Notes
-----
Charge conservation over every node a pattern could join, each term at
the largest value a pattern can give it; the terms are grouped by the
stack pieces a pattern turns on together (see :func:`equalised_bound`).
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import product

import numpy as np
from scipy.optimize import brentq

from analyze.physics.device_charge import ChargeContext, gate_held, gate_levels
from analyze.physics.threshold import pass_limit

__all__ = ["equalised_bound", "bound_parts", "BoundParts", "COMBINATIONS"]

#: Largest number of device-state combinations enumerated for one stack
#: piece; past it the piece's terms are bounded one by one.
COMBINATIONS = 4096


def equalised_bound(ctx: ChargeContext, nodes, inputs, late=frozenset(), precharged=frozenset()) -> float | None:
    """A bound on the dynamic node's final voltage over every pattern and
    arrival case: never above the true lowest value (n-type; p-type: never
    below the highest).

    Parameters
    ----------
    ctx : ChargeContext
    nodes : iterable of str
        Every internal node some pattern can join to the dynamic node.
    inputs : iterable of str
        The stage's inputs.
    late : iterable of str
        Inputs that are at their off level before the edge in every
        arrival case (the top inputs, those low in precharge).
    precharged : iterable of str
        Internal nodes that start precharged (predischarged).

    Returns
    -------
    float or None
        None when the bound's equation has no root in range.

    Notes
    -----
    The solver's V(X) is never below the equalised voltage of its group
    (past the pass limit the internal nodes stop short and X keeps more;
    the transient of the window is clipped there), and the equalised
    voltage is the root of F(V) = Σ_n [Q_n,after(V) − Q_n,before(V_n,0)]
    over the group, increasing in V.  An internal node of an n-type stage
    ends no higher than max(V_lim, V_cap), V_cap where it would be after
    ``evaluation_ns`` if every device that can feed it carried its largest
    current (far terminal at the dynamic node's highest voltage) into its
    smallest capacitance (:func:`_creep_caps`), so its term is taken there.

    What a pattern and case choose: each input device's gate levels before
    and after the edge (off/off, on/on or off/on; only off for a device to
    the rail or the footer node, which on would discharge the group; never
    on before the edge for a late input), and with them which internal
    nodes join the group (those the devices on after the edge connect to
    the dynamic node).  The internal nodes fall into *pieces* (nodes joined
    by devices between two internal nodes: the stack of one leg), which no
    device joins to another except through the dynamic node, so F is the
    dynamic node's own terms plus one sum per piece, each fixed by the
    states of the devices on that piece alone.  Taking each piece's sum at
    its largest over every combination of its devices' states (joined
    nodes as those states connect them; internal nodes discharged, the
    lowest start) gives a function never below F for any pattern, whose
    root is never above V(X) (p-type: the mirror, smallest sums).  A piece
    with more than :data:`COMBINATIONS` combinations has each term taken
    at its largest on its own (a node joined or not: max(0, ·)), looser but
    still a bound.  One root search: O(combinations × devices ×
    log(1/tolerance)).
    """
    parts = bound_parts(ctx, nodes, inputs, late, precharged)
    pick = max if parts.n_type else min
    plans = []
    for nodes_in, devices in parts.pieces:
        count = 1
        for _, states, _ in devices:
            count *= len(states)
        if count <= COMBINATIONS:
            choices = list(product(*[range(len(states)) for _, states, _ in devices]))
            plans.append(lambda v, devices=devices, choices=choices:
                         pick(parts.piece_sum(devices, ch, v) for ch in choices))
        else:
            plans.append(lambda v, devices=devices, nodes_in=nodes_in: parts.piece_loose(devices, nodes_in, v))

    def f(v):
        return parts.own_sum(v) + sum(plan(v) for plan in plans)

    lo, hi = parts.bracket
    if f(lo) * f(hi) > 0:
        return None
    v = brentq(f, lo, hi, xtol=1e-7)
    return min(v, parts.start_x) if parts.n_type else max(v, parts.start_x)


@dataclass
class BoundParts:
    """The terms of the bound's charge balance, grouped by stack piece
    (:func:`bound_parts`).

    Attributes
    ----------
    n_type : bool
    x : str
        The dynamic node.
    start_x : float
        The dynamic node's precharge level (V).
    pieces : list of (list of str, list of (Device, list, list))
        Per piece, its internal nodes and its devices, each with its
        (before, after) charge functions per state and whether it conducts
        in each state.
    own : list of (Device, list)
        Devices on the dynamic node and no internal node, with their states.
    bracket : (float, float)
        The voltage range of the root search.
    rest, term : callable
        ``rest(n, v)``: node ``n``'s lumped charge at ``v`` less its start;
        ``term(n, state, v)``: a device state's terminal charge on ``n``.
    inside : frozenset of str
        The internal nodes.
    receivers : callable
        The receivers' input charge at ``v`` less its start.
    """

    n_type: bool
    x: str
    start_x: float
    pieces: list
    own: list
    bracket: tuple
    rest: object
    term: object
    inside: frozenset
    receivers: object

    def joined(self, devices, choice) -> set:
        """The nodes the devices conducting in ``choice`` join to the
        dynamic node (the dynamic node included)."""
        adj = {}
        for (d, _, conducts), k in zip(devices, choice):
            if conducts[k]:
                adj.setdefault(d.drain, []).append(d.source)
                adj.setdefault(d.source, []).append(d.drain)
        joined, todo = {self.x}, [self.x]
        while todo:
            for m in adj.get(todo.pop(), ()):
                if m not in joined:
                    joined.add(m)
                    todo.append(m)
        return joined

    def piece_sum(self, devices, choice, v) -> float:
        """One piece's terms with its devices in the states ``choice``."""
        joined = self.joined(devices, choice)
        c = sum(self.rest(n, v) for n in joined if n != self.x and n in self.inside)
        for (d, states, _), k in zip(devices, choice):
            for t in (d.drain, d.source):
                if t in joined:
                    c += self.term(t, states[k], v)
        return c

    def piece_loose(self, devices, nodes_in, v) -> float:
        """The piece's terms each at its largest alone (too many combinations)."""
        pick = max if self.n_type else min
        c = 0.0
        for d, states, _ in devices:
            for t in (d.drain, d.source):
                if t == self.x:
                    c += pick(self.term(self.x, s, v) for s in states)
        for n in nodes_in:
            cn = self.rest(n, v)
            for d, states, _ in devices:
                for t in (d.drain, d.source):
                    if t == n:
                        cn += pick(self.term(n, s, v) for s in states)
            c += pick(0.0, cn)
        return c

    def on_x(self, d, state, v) -> float:
        """Device ``d``'s terminal charge on the dynamic node in ``state``
        (both terminals when both are on it)."""
        return sum(self.term(self.x, state, v) for t in (d.drain, d.source) if t == self.x)

    def own_sum(self, v) -> float:
        """The dynamic node's own terms: its rest and receivers, and the
        devices on it alone, each at its largest (p-type: smallest)."""
        pick = max if self.n_type else min
        c = self.rest(self.x, v) + self.receivers(v)
        for d, states in self.own:
            for t in (d.drain, d.source):
                if t == self.x:
                    c += pick(self.term(self.x, s, v) for s in states)
        return c


def bound_parts(ctx: ChargeContext, nodes, inputs, late=frozenset(), precharged=frozenset()) -> BoundParts:
    """The terms of :func:`equalised_bound`'s charge balance, by piece
    (arguments as there).  Each input device's states: off/off, then
    on/on unless its input is ``late``, then off/on; a device to the rail
    or the footer node only off/off.  O(devices + internal nodes × creep
    grid)."""
    stage, tech, tables = ctx.stage, ctx.tech, ctx.tables
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    x = stage.dynamic_node
    inputs = set(inputs)
    off, on = (0.0, vdd) if n_type else (vdd, 0.0)
    fixed = gate_levels(ctx.circuit, stage, tech, {}, set(), ctx.devices)
    if tables.clock_v is not None:
        fixed.before.update({name: fixed.after[name] for name in ctx.clocked})
    start_x, start_int = (vdd, 0.0) if n_type else (0.0, vdd)
    pre = set(stage.secondary_precharge) | set(precharged)
    # the footer node is held at the rail during evaluation: never shared
    members = [x, *[n for n in nodes if n != x and n != stage.footer_node]]
    inside = set(members) - {x}
    starts = {n: (start_x if n in pre or n == x else start_int) for n in members}
    x_start = tables.clock_v if tables.clock_v is not None else start_x
    starts[x] = x_start
    grounded = {stage.rail, stage.footer_node} - {None}
    # a gate held at a supply or clocked is no input, whatever the stage
    # lists: the solver holds it at its fixed levels (gate_levels)
    inputs = {n for n in inputs if not gate_held(ctx.circuit, stage, tech, n)}
    devs = []  # (device, [(before, after) charge functions per state], [conducts per state])
    terms = {n: [] for n in members}
    for d in ctx.devices:
        if d.gate in inputs and d.name not in stage.keepers and grounded & {d.drain, d.source}:
            # on, it ties its node to the rail: that node is never shared then
            levels = [(off, off)]
        elif d.gate in inputs and d.name not in stage.keepers:
            levels = [(off, off), (off, on)] if d.gate in late else [(off, off), (on, on), (off, on)]
        else:
            levels = [(fixed.before[d.name], fixed.after[d.name])]
        states = [(tables.terminal(d.name, b), tables.terminal(d.name, a)) for b, a in levels]
        conducts = [d.name in stage.evaluation and a == on for _, a in levels]
        if {d.drain, d.source} & set(members):
            devs.append((d, states, conducts))
        for t in (d.drain, d.source):
            if t in terms:
                terms[t].append(states)

    # the caps time the creep from V_lim − 0.3 V: a node sharing with a
    # precharged one may start past that, so then none are taken
    caps = (_creep_caps(ctx, [n for n in members if n != x], x_start, terms)
            if n_type and not (pre & inside) else {})

    def at(n, v):
        return min(v, caps[n]) if n in caps else v

    def rest(n, v):
        r = ctx.rest(n)
        return float(r.charge(float(at(n, v)))) - float(r.charge(float(starts[n])))

    def term(n, state, v):
        b, a = state
        return 0.5 * (float(a(at(n, v))) - float(b(starts[n])))

    # pieces: internal nodes joined by devices between two of them
    parent = {n: n for n in inside}

    def root(n):
        while parent[n] != n:
            parent[n] = parent[parent[n]]
            n = parent[n]
        return n

    for d, _, _ in devs:
        if d.drain in inside and d.source in inside:
            parent[root(d.drain)] = root(d.source)
    pieces = {}
    own = []  # devices on the dynamic node and no internal node: their own best state
    for d, states, conducts in devs:
        touched = [t for t in (d.drain, d.source) if t in inside]
        if touched:
            pieces.setdefault(root(touched[0]), []).append((d, states, conducts))
        else:
            own.append((d, states))

    margin = min([ctx.rest(n).forward_margin() for n in members] or [0.9])

    def receivers(v):
        return sum(float(g(v)) - float(g(x_start)) for g in ctx.receivers)

    return BoundParts(n_type, x, start_x,
                      [([n for n in inside if root(n) == key], devices) for key, devices in pieces.items()],
                      own, (-margin, vdd + margin), rest, term, frozenset(inside), receivers)


def _creep_caps(ctx: ChargeContext, nodes, v_far: float, terms: dict) -> dict:
    """For each internal node of an n-type stage, a voltage it cannot pass
    by the end of the window in :func:`analyze.physics.settling.final_voltage_with_devices`:
    max(V_lim, V_cap), t(V_cap) = ∫ C_min(V) / I_max(V) dV from the creep's
    start (V_lim − 0.3 V) = ``evaluation_ns``; C_min is the node's
    capacitance with each device's part at its smallest over the gate
    levels a pattern can give it (``terms``: node -> per device, the
    (before, after) charge functions of each option), I_max the sum of
    the currents of every evaluation device on it with its far terminal at
    ``v_far``.  fC / µA = 1 ns."""
    stage, tech, tables = ctx.stage, ctx.tech, ctx.tables
    vdd = float(tech.vdd)
    v_lim = pass_limit(tech.mos["nmos"], vdd)
    grid = np.linspace(v_lim - 0.3, vdd, 120)
    grounded = {stage.rail, stage.footer_node} - {None}
    out = {}
    for n in nodes:
        # a device whose other terminal is the rail or the footer node (held
        # at the rail) carries charge away from the node, never into it
        funcs = [tables.current(d.name) for d in ctx.devices
                 if d.name in stage.evaluation and n in (d.drain, d.source) and d.name in tables.currents
                 and ({d.drain, d.source} - {n}).isdisjoint(grounded)]
        if not funcs:
            out[n] = v_lim
            continue
        c = np.asarray(ctx.rest(n).capacitance(grid), dtype=float)
        for opts in terms.get(n, ()):
            c = c + np.min([np.maximum(0.5 * np.gradient(np.asarray(a(grid), dtype=float), grid), 0.0)
                            for _, a in opts], axis=0)
        i = np.array([sum(f(v, max(v_far, v)) for f in funcs) for v in grid])
        dt = 0.5 * (c[1:] / np.maximum(i[1:], 1e-15) + c[:-1] / np.maximum(i[:-1], 1e-15)) * np.diff(grid)
        t = np.concatenate([[0.0], np.cumsum(dt)])
        v_cap = vdd if t[-1] <= tech.evaluation_ns else float(np.interp(tech.evaluation_ns, t, grid))
        out[n] = max(v_lim, v_cap)
    return out
