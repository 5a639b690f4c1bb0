"""Charge conservation with the foundry models' device charges.

The lumped model (:mod:`analyze.physics.sharing`) keeps every gate and
overlap capacitance fixed and the gates still.  When the tech file names the
foundry's models (``[models]``), :func:`final_voltage_with_devices` solves
the same charge conservation over the dynamic node and the nodes it shares
with, but counts each device's charge as the models give it
(:mod:`analyze.physics.device_tables`):

- the channel charge of every conducting device: a device whose gate
  settled before evaluation holds an inversion channel that gives its
  charge back to the nodes as they rise; a device whose gate rises during
  evaluation draws its channel from the nodes and pushes charge through its
  overlaps — the input's driver pays for the gate side;
- the clock edge: the precharge device's gate goes on from where it turned
  off (VDD − |VTp|) to VDD, coupling through its overlap;
- the receivers' input charge over the whole input swing with the output
  held where it was before evaluation (not a flat cox·W·L), and the
  switching point from the same models; where the node falls far enough
  for a receiver's output to move, the window is solved as a transient
  with the outputs free (:mod:`analyze.physics.transient`): their
  gate–drain charge pushes the node back while the charge is still
  spreading, and the node's lowest point comes with the output part-way;
- junction bottom and field sidewall by the depletion formula of
  :mod:`analyze.physics.charge` (fitted); the gate-edge sidewall of the
  devices measured here is in their tables.

Conservation: Σ Q_final(V) over the joined nodes equals Σ Q_initial(V0)
with every device's gate at its level before and after evaluation.  The
joined nodes end at one voltage; an internal node of an n-type stage cannot
rise above the nmos pass limit V_lim = VDD − VT(V_lim) (p-type: the mirror),
and where the equalised voltage would pass it the internal nodes stop near
it — each where the measured subthreshold currents through the stack take it
within ``evaluation_ns`` (:func:`analyze.physics.creep.creep_network`) — and the dynamic node
keeps the rest.  Internal nodes that start precharged share among themselves
first.

Notes
-----
Each evaluation is a root search (Brent's method) over table lookups:
O(devices × log(1/tolerance)).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import brentq

from analyze.physics.charge import node_charge
from analyze.physics.creep import creep_network
from analyze.physics.lookup import uniform_lookup
from analyze.physics.transient import OutputNode, receiver_transient
from analyze.physics.threshold import pass_limit
from extract.circuit import JunctionGeometry, Net

__all__ = ["GateLevels", "ChargeContext", "charge_context", "gate_levels", "final_voltage_with_devices",
           "Settling", "settle", "BOUND_TOLERANCE",
           "table_devices", "clock_setup"]


@dataclass(frozen=True)
class GateLevels:
    """Gate voltage of each device before and after evaluation starts."""

    before: dict
    after: dict


def table_devices(circuit, stage) -> list:
    """Devices whose charge comes from the tables: every device with a
    source/drain on the dynamic node or an internal node, in circuit order
    (from the circuit's index of devices by channel net)."""
    return circuit.devices_on(stage.dynamic_node, *stage.internal_nodes)


def gate_held(circuit, stage, tech, net: str) -> bool:
    """Whether :func:`gate_levels` holds a gate on ``net`` at fixed levels
    whatever the pattern: the stage's clock, or a net whose role is clock,
    power or ground (a listed input or not)."""
    role = circuit.role_of(net, tech)
    return net == stage.clock or role in ("clock", "power", "ground")


def gate_levels(circuit, stage, tech, inputs: dict, late: set, devices=None) -> GateLevels:
    """Gate levels (V) before and after the clock edge for a pattern.

    Parameters
    ----------
    devices : list of Device, optional
        :func:`table_devices` of the stage, when already known.
    inputs : dict of str to int
        The pattern.
    late : set of str
        Inputs that change at the start of evaluation (the others already
        hold their evaluation value).
    """
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    off = 0.0 if n_type else vdd
    eval_clk = vdd if n_type else 0.0
    before, after = {}, {}
    clocked = set(stage.precharge) | set(stage.secondary_precharge.values())
    for d in table_devices(circuit, stage) if devices is None else devices:
        role = circuit.role_of(d.gate, tech)
        if d.name in stage.keepers:
            level = vdd if d.type == "pmos" else 0.0  # keeper help left out: held off
            before[d.name] = after[d.name] = level
        elif d.gate == stage.clock or role == "clock":
            after[d.name] = eval_clk
            if d.name in clocked:
                # on until its gate passes the threshold: charge coupled before
                # that flows to the supply
                vt = abs(tech.mos[d.type].vt0)
                before[d.name] = vdd - vt if d.type == "pmos" else vt
            else:
                before[d.name] = eval_clk
        elif role in ("power", "ground"):
            before[d.name] = after[d.name] = vdd if role == "power" else 0.0
        elif d.gate in inputs:
            v = inputs[d.gate] * vdd
            after[d.name] = v
            before[d.name] = off if d.gate in late else v
        else:
            before[d.name] = after[d.name] = 0.0 if d.type == "nmos" else vdd
    return GateLevels(before, after)


def clock_setup(circuit, stage, tech, devices=None) -> dict:
    """What the clock-edge measurement of
    :func:`analyze.physics.device_tables.stage_tables` needs: the devices on
    the dynamic node (clocked ones, receivers, the rest held off) and the
    zero-bias capacitance of everything else on it (``devices``: the
    stage's :func:`table_devices`, when already known)."""
    tdevs = table_devices(circuit, stage) if devices is None else devices
    out = []
    for d in tdevs:
        if stage.dynamic_node not in (d.drain, d.source):
            continue
        role = circuit.role_of(d.gate, tech)
        out.append((d.name, "clocked" if (d.gate == stage.clock or role == "clock") and d.name not in stage.evaluation
                    else "off"))
    for j, rx in enumerate(stage.receivers):
        if circuit.device(rx.nmos).gate == stage.dynamic_node:
            out += [(rx.nmos, f"receiver:{j}"), (rx.pmos, f"receiver:{j}")]
    rest = _lumped_rest(circuit.nets.get(stage.dynamic_node), circuit, stage, tech, tdevs, stage.receivers)
    return {"devices": out, "cap_ff": rest.zero_bias_total}


def _lumped_rest(net: Net | None, circuit, stage, tech, table_devs, receivers):
    """The node's NodeCharge without what the tables hold: overlaps and
    gate-edge sidewalls of table devices, the receivers' gate parts."""
    if net is None:
        return node_charge(None, tech)
    parts = net.cap
    overlap, gate = parts.overlap, parts.gate
    junctions = dict(net.junctions)
    for d in table_devs:
        p = tech.mos[d.type]
        for term in (d.drain, d.source):
            if term == net.name:
                overlap -= p.cgo * d.w_um
                j = junctions.get(d.type)
                if j is not None:
                    junctions[d.type] = JunctionGeometry(j.area_um2, j.field_perimeter_um,
                                                         max(0.0, j.gate_perimeter_um - d.w_um))
    for rx in receivers:
        for name in (rx.nmos, rx.pmos):
            d = circuit.device(name)
            if d.gate == net.name:
                p = tech.mos[d.type]
                gate -= p.cox * d.w_um * d.l_um
                overlap -= 2 * p.cgo * d.w_um
    rest = Net(net.name, net.role, replace(parts, overlap=max(0.0, overlap), gate=max(0.0, gate),
                                           junction_gate_edge=0.0),
               junctions)
    return node_charge(rest, tech)


@dataclass
class ChargeContext:
    """What the solver needs of one stage, prepared once for all its
    patterns and cases (:func:`charge_context`).

    Attributes
    ----------
    circuit, stage, tech, tables
    devices : list of Device
        :func:`table_devices` of the stage.
    clocked : set of str
        Devices on the dynamic node gated by a clock (the clock-edge
        measurement covers them).
    receivers : list of callable
        Input charge functions of the receivers on the dynamic node.
    rests : dict of str to NodeCharge
        Each node's lumped charge without what the tables hold, filled as
        nodes are met.
    tables_increasing : bool or None
        Whether every measured charge table is nondecreasing (None until
        :meth:`increasing` first looks).
    creep_caps : dict
        The creep's lookups (:func:`analyze.physics.creep.creep_network`),
        filled as met: each capacitance curve C_n(V) on its grid, per node,
        its devices' gate levels after the edge and the grid's margin.
    outputs : list of OutputNode
        The outputs of the receivers on the dynamic node, for the
        transient (:mod:`analyze.physics.transient`); empty when a receiver
        has no response tables.
    """

    circuit: object
    stage: object
    tech: object
    tables: object
    devices: list
    clocked: set
    receivers: list
    rests: dict
    tables_increasing: bool | None = None
    creep_caps: dict = field(default_factory=dict, repr=False)
    outputs: list = field(default_factory=list)

    def rest(self, net: str):
        if net not in self.rests:
            self.rests[net] = _lumped_rest(self.circuit.nets.get(net), self.circuit, self.stage, self.tech,
                                           self.devices, self.stage.receivers)
        return self.rests[net]

    def increasing(self, nodes) -> bool:
        """Whether every node's charge after the edge is a nondecreasing
        function of its voltage: each measured table of the stage
        (terminals, receivers; linear interpolation and extrapolation of a
        nondecreasing table are nondecreasing) and each node's lumped rest
        (``c_lin·V`` plus depletion charges, increasing when ``c_lin`` and
        every ``C0`` are not negative: :mod:`analyze.physics.charge`)."""
        if self.tables_increasing is None:
            self.tables_increasing = self.tables.nondecreasing()
        if not self.tables_increasing:
            return False
        for n in nodes:
            r = self.rest(n)
            if not (r.c_lin >= 0.0 and bool(np.all(r.c0 >= 0.0)) and bool(np.all(r.pb > 0.0))):
                return False
        return True


def charge_context(circuit, stage, tech, tables) -> ChargeContext:
    """Prepare :class:`ChargeContext` (O(devices of the circuit), once per stage)."""
    devices = table_devices(circuit, stage)
    clocked = {name for name, role in clock_setup(circuit, stage, tech, devices)["devices"] if role == "clocked"}
    # the receivers' input charge with the output held where it was (the
    # transient of the window adds the output's swing where it moves)
    held = "lo" if stage.polarity == "n" else "hi"
    on_x = [r for r in stage.receivers if circuit.device(r.nmos).gate == stage.dynamic_node]
    receivers = [tables.receiver(r.nmos, held) for r in on_x]
    ctx = ChargeContext(circuit, stage, tech, tables, devices, clocked, receivers, {})
    responses = [tables.response(r.nmos) for r in on_x]
    if on_x and all(r is not None for r in responses):
        vdd = float(tech.vdd)
        by_net = {}
        for r, resp in zip(on_x, responses):
            by_net.setdefault(r.output, []).append(resp)
        for net, resps in by_net.items():
            rest = ctx.rest(net)
            # as far past the rails as the junction formula holds (settle's bracket)
            margin = 0.9 * min([float(p) for p in rest.pb] or [1.0])
            grid = np.linspace(-margin, vdd + margin, 401)
            cap = np.maximum(np.gradient(np.asarray(rest.charge(grid), dtype=float), grid), 1e-6)
            ctx.outputs.append(OutputNode(net, uniform_lookup(grid, cap), resps, 0.0 if held == "lo" else vdd))
    return ctx


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

    pbs = [float(x) for n in group for x in rests[n].pb] or [1.0]
    margin = 0.9 * min(pbs)
    v_eq = brentq(f_equal, -margin, vdd + margin, xtol=1e-7)
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
        v_int0 = brentq(lambda v: sum(q_node(n, v, 1) for n in internal) - q_int, -margin, vdd + margin,
                        xtol=1e-7)
    links = [ln for ln in links if ln[0] in tables.currents]
    v_end = {n: v_lim if v_int0 is None else (max(v_lim, v_int0) if n_type else min(v_lim, v_int0))
             for n in internal}

    def x_final(v_end):
        rest = total - sum(q_node(n, v_end[n], 1) for n in internal)
        return brentq(lambda v: q_node(x, v, 1) - rest, -margin, vdd + margin, xtol=1e-7)

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
