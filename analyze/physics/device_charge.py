"""The foundry models' device charges, as charge conservation needs them.

The lumped model (:mod:`analyze.physics.sharing`) keeps every gate and
overlap capacitance fixed and the gates still.  When the tech file names the
foundry's models (``[models]``), :func:`analyze.physics.settling.final_voltage_with_devices` solves
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

The charge balance itself is solved in :mod:`analyze.physics.settling`;
this module holds what it is solved over: each device's gate levels before
and after the clock edge (:func:`gate_levels`), and per stage the node
charges, the device tables' lookups and the receivers
(:func:`charge_context`, made once per stage).

Notes
-----
Made once per stage: O(devices + nodes) lookups over the tables' grid.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from analyze.physics.charge import node_charge
from analyze.physics.lookup import uniform_lookup
from analyze.physics.transient import OutputNode
from extract.circuit import JunctionGeometry, Net

__all__ = ["GateLevels", "ChargeContext", "charge_context", "gate_levels", "gate_held", "table_devices",
           "clock_setup"]


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
            margin = rest.forward_margin()
            grid = np.linspace(-margin, vdd + margin, 401)
            cap = np.maximum(np.gradient(np.asarray(rest.charge(grid), dtype=float), grid), 1e-6)
            ctx.outputs.append(OutputNode(net, uniform_lookup(grid, cap), resps, 0.0 if held == "lo" else vdd))
    return ctx
