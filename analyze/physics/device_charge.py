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
- the receivers' input charge over the whole input swing, the output
  following (not a flat cox·W·L), and the switching point from the same
  models;
- junction bottom and field sidewall by the depletion formula of
  :mod:`analyze.physics.charge` (fitted); the gate-edge sidewall of the
  devices measured here is in their tables.

Conservation: Σ Q_final(V) over the joined nodes equals Σ Q_initial(V0)
with every device's gate at its level before and after evaluation.  The
joined nodes end at one voltage; an internal node of an n-type stage cannot
rise above the nmos pass limit V_lim = VDD − VT(V_lim) (p-type: the mirror),
and where the equalised voltage would pass it the internal nodes stop there
and the dynamic node keeps the rest.

Notes
-----
Each evaluation is a root search (Brent's method) over table lookups:
O(devices × log(1/tolerance)).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from analyze.physics.charge import node_charge
from analyze.physics.threshold import pass_limit
from extract.circuit import JunctionGeometry, Net

__all__ = ["GateLevels", "gate_levels", "final_voltage_with_devices", "table_devices"]


@dataclass(frozen=True)
class GateLevels:
    """Gate voltage of each device before and after evaluation starts."""

    before: dict
    after: dict


def table_devices(circuit, stage) -> list:
    """Devices whose charge comes from the tables: every device with a
    source/drain on the dynamic node or an internal node."""
    inner = {stage.dynamic_node, *stage.internal_nodes}
    return [d for d in circuit.devices if d.drain in inner or d.source in inner]


def gate_levels(circuit, stage, tech, inputs: dict, late: set) -> GateLevels:
    """Gate levels (V) before and after the clock edge for a pattern.

    Parameters
    ----------
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
    for d in table_devices(circuit, stage):
        role = circuit.nets[d.gate].role if d.gate in circuit.nets else tech.role_of(d.gate)
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
    from dataclasses import replace

    rest = Net(net.name, net.role, replace(parts, overlap=max(0.0, overlap), gate=max(0.0, gate),
                                           junction_gate_edge=0.0),
               junctions)
    return node_charge(rest, tech)


def final_voltage_with_devices(circuit, stage, tech, tables, group: list[str], levels: GateLevels,
                               start: dict, passes=()) -> float:
    """The dynamic node's final voltage with the models' device charges.

    Parameters
    ----------
    circuit, stage, tech
    tables : StageTables
    group : list of str
        The dynamic node first, then the nodes it ends joined to.
    levels : GateLevels
    start : dict of str to float
        Each node's voltage before evaluation.
    passes : iterable of str
        The conducting devices between the dynamic node and the internal
        nodes; past the pass limit, their subthreshold current (from the
        tables) keeps charging the internal nodes until ``evaluation_ns``.

    Returns
    -------
    float
        V(X) at the end, V.
    """
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    tdevs = table_devices(circuit, stage)
    members = set(group)
    rests = {n: _lumped_rest(circuit.nets.get(n), circuit, stage, tech, tdevs, stage.receivers) for n in group}
    terms = {n: [] for n in group}
    for d in tdevs:
        for t in (d.drain, d.source):
            if t in members:
                terms[t].append((tables.terminal(d.name, levels.before[d.name]),
                                 tables.terminal(d.name, levels.after[d.name])))
    rx = [tables.receiver(r.nmos) for r in stage.receivers if circuit.device(r.nmos).gate == stage.dynamic_node]

    def q_node(n, v, which):
        q = float(rests[n].charge(float(v)))
        for before, after in terms[n]:
            q += 0.5 * float((before if which == 0 else after)(v))
        if n == stage.dynamic_node:
            q += sum(float(f(v)) for f in rx)
        return q

    total = sum(q_node(n, start[n], 0) for n in group)

    def f_equal(v):
        return sum(q_node(n, v, 1) for n in group) - total

    pbs = [float(x) for n in group for x in rests[n].pb] or [1.0]
    margin = 0.9 * min(pbs)
    v_eq = brentq(f_equal, -margin, vdd + margin, xtol=1e-7)
    internal = [n for n in group if n != stage.dynamic_node]
    if not internal:
        return v_eq
    v_lim = pass_limit(tech.mos["nmos" if n_type else "pmos"], vdd)
    v_lim = v_lim if n_type else vdd - v_lim
    if (n_type and v_eq <= v_lim) or (not n_type and v_eq >= v_lim):
        return v_eq
    v_end = v_lim
    currents = [tables.current(p) for p in passes if p in tables.currents]
    if currents:
        v_end = _creep(lambda v: sum(q_node(n, v, 1) for n in internal), currents, v_eq,
                       float(start[internal[0]]), tech.evaluation_ns, n_type)
    rest = total - sum(q_node(n, v_end, 1) for n in internal)
    import os
    if os.environ.get('DYNSHARE_DEBUG'): print('v_eq', v_eq, 'v_lim', v_lim, 'v_end', v_end)
    return brentq(lambda v: q_node(stage.dynamic_node, v, 1) - rest, -margin, vdd + margin, xtol=1e-7)


def _creep(q_internal, currents, v_eq: float, v0: float, t_ns: float, n_type: bool) -> float:
    """Where the internal nodes are after ``t_ns``, charged through the pass
    devices: t = ∫ C(V)/I(V) dV from their start, C = dQ/dV of the
    internal nodes, I the sum of the pass currents (µA); never past the
    equalised voltage.  fC / µA = ns."""
    grid = np.linspace(v0, v_eq, 400)
    q = np.array([q_internal(v) for v in grid])
    i = np.sum([f(grid if n_type else grid) for f in currents], axis=0)
    dq = np.abs(np.diff(q))
    i_mid = 0.5 * (i[1:] + i[:-1])
    t = np.concatenate([[0.0], np.cumsum(dq / np.maximum(i_mid, 1e-12) * 1e-3)])  # fC/µA = 1e-9 s -> ns: x1e-3? see below
    # fC / µA = 1e-15 C / 1e-6 A = 1e-9 s = 1 ns
    t = t * 1e3
    if t[-1] <= t_ns:
        return v_eq
    return float(np.interp(t_ns, t, grid))


def precharge_voltages(circuit, stage, tech, tables, levels: GateLevels) -> dict:
    """Each internal node's voltage at the end of precharge.

    The earlier evaluation left every node at the rail with every input on
    (``levels.before``); as the inputs fall to their precharge levels
    (``levels.after``) the devices that turn off leave their channel charge
    on the nodes, which float, so an internal node of an n-type stage ends
    below 0 V (p-type: above VDD).  Internal nodes joined by devices still
    on during precharge share one voltage; charge is conserved per such
    group.

    Returns
    -------
    dict of str to float
        Internal node -> voltage; secondary precharged nodes are at the
        supply (n-type VDD, p-type 0).
    """
    vdd = float(tech.vdd)
    n_type = stage.polarity == "n"
    rail = 0.0 if n_type else vdd
    tdevs = table_devices(circuit, stage)
    internal = [n for n in stage.internal_nodes if n not in stage.secondary_precharge]
    out = {n: (vdd if n_type else 0.0) for n in stage.secondary_precharge}
    on_level = {"nmos": lambda g: g > vdd / 2, "pmos": lambda g: g < vdd / 2}
    parent = {n: n for n in internal}

    def find(n):
        while parent[n] != n:
            n = parent[n]
        return n

    for d in tdevs:
        if d.drain in parent and d.source in parent and on_level[d.type](levels.after.get(d.name, rail)):
            parent[find(d.drain)] = find(d.source)
    groups: dict[str, list] = {}
    for n in internal:
        groups.setdefault(find(n), []).append(n)
    rests = {n: _lumped_rest(circuit.nets.get(n), circuit, stage, tech, tdevs, stage.receivers) for n in internal}
    for members in groups.values():
        mset = set(members)
        terms = []
        for d in tdevs:
            for t in (d.drain, d.source):
                if t in mset:
                    terms.append((tables.terminal(d.name, levels.before.get(d.name, rail)),
                                  tables.terminal(d.name, levels.after.get(d.name, rail))))
        total = sum(float(rests[n].charge(rail)) for n in members) + sum(0.5 * float(b(rail)) for b, _ in terms)

        def f(v):
            return (sum(float(rests[n].charge(float(v))) for n in members)
                    + sum(0.5 * float(a(v)) for _, a in terms) - total)

        pbs = [float(x) for n in members for x in rests[n].pb] or [1.0]
        margin = 0.9 * min(pbs)
        v0 = brentq(f, -margin, vdd + margin, xtol=1e-7)
        out.update({n: v0 for n in members})
    return out
