"""Recognition of dynamic stages in a flat circuit.

:func:`find_stages` finds every dynamic stage of a cell — its dynamic
node, precharge devices, evaluation network, footer, keepers, receiving
inverters and secondary precharge devices — for both polarities, and
reports half-recognised structures as findings.

The structure recognised is the textbook footed / footless dynamic gate
and domino gate (Weste & Harris, *CMOS VLSI Design*, 4th ed., ch. 9
"Circuit Families", from memory); the p-type stage is its mirror image.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from extract.circuit import Circuit
from extract.errors import Finding
from extract.tech import Tech

from analyze.stages.clocks import infer_clocks
from analyze.stages.stage import Stage
from analyze.stages.static import StaticNets
from analyze.stages.topology import SIDES, Side, Topology

__all__ = ["Recognition", "find_stages", "ISLANDS_FROM"]

#: Circuits of at least this many devices are recognised by islands when they repeat.
ISLANDS_FROM = 2000


@dataclass
class Recognition:
    """What :func:`find_stages` found.

    Attributes
    ----------
    stages : list of Stage
        Sorted by dynamic node (then polarity).
    findings : list of Finding
        Half-recognised structures.
    clocks : list of str
        Clock nets, declared and inferred, sorted.
    clock_inferred : bool
        True when some clock was not declared in the tech file.
    clock_note : str
        Where each clock came from, e.g. ``"clock CLK from tech file"``.
    """

    stages: list[Stage] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    clocks: list[str] = field(default_factory=list)
    clock_inferred: bool = False
    clock_note: str = ""


def find_stages(circuit: Circuit, tech: Tech, islands: bool | None = None) -> Recognition:
    """Recognise the dynamic stages of a circuit.

    Parameters
    ----------
    circuit : Circuit
        Net roles are taken from ``circuit.nets[...].role``, falling back
        to the tech file's ``[nets]`` for nets listed as ``"signal"``.
    tech : Tech
    islands : bool, optional
        Recognise once per distinct island (:mod:`analyze.stages.islands`)
        and rename the results back; by default when the circuit has at
        least ``ISLANDS_FROM`` devices and the islands repeat (the
        largest island times the number of distinct ones is at most half
        the devices).  The result is the same either way.

    Returns
    -------
    Recognition
        A cell without dynamic stages gives no stages and no error.
        Findings: those of the clock inference, then those of n-type and
        of p-type stages, each sorted by text.

    Notes
    -----
    Clocks come first (:func:`analyze.stages.clocks.infer_clocks`).  Then, for
    polarity n (p is the mirror image, nmos/pmos and power/ground swapped):

    1. Footers are nmos gated by a clock from ground to a net (their
       *footer nodes*); precharged nets are non-rail, non-clock nets with a
       clock-gated pmos from power that are not static
       (:class:`analyze.stages.static.StaticNets`: some assignment of the
       gate nets around them, the clock included, leaves them joined to
       no rail — a clocked static NAND or a set/reset gate of a
       flip-flop never is a stage).
    2. Precharged nets are grouped by nmos channels (not through rails or
       footer nodes, not through footers).  In a group the dynamic nodes
       are the precharged nets that drive a gate; when none does, those
       farthest (in series devices) from ground or a footer node.  The
       other precharged nets of the group are internal nodes with a
       secondary precharge device.
    3. The evaluation network of a dynamic node X is every nmos reached
       from X through nmos channels, not through rails, footer nodes,
       other dynamic nodes or footers.  Its footer is the footer on a
       reached footer node.  Keepers are pmos from power to X gated by a
       non-clock; receivers are inverters with input X.
    4. Not a stage, silently: X a footer node (an inverter of the clock);
       no evaluation device while X has other channels; a keeper gated by
       an evaluation input (a complementary static gate).
    5. Not a stage, with a finding: a clocked pmos onto a net that has no
       other channel (precharge without evaluation network); a clock
       gating an evaluation device; no path to ground.  A stage with
       footers on several nets is kept (first footer node) with a finding,
       and so is a device joining two dynamic nodes (left out of both).
    6. A finding for each clocked nmos from ground whose upper net leads
       into an nmos network none of whose nets has any pmos (footer
       without precharge).

    Cost: O(devices) for the indices and components, plus one search per
    precharged net over its own evaluation network, plus one staticness
    search per net with a clocked pull device from the supply.

    Examples
    --------
    A footless dynamic NAND2 (Weste & Harris ch. 9, from memory):

    >>> from extract.circuit import Circuit, Device
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {})
    >>> D = lambda *a: Device(*a, 1.0, 0.18)
    >>> c = Circuit("nand2", {}, [D("MP", "pmos", "X", "CLK", "VDD"),
    ...                           D("MA", "nmos", "X", "A", "n1"),
    ...                           D("MB", "nmos", "n1", "B", "VSS")])
    >>> r = find_stages(c, tech)
    >>> s = r.stages[0]
    >>> (s.dynamic_node, s.polarity, s.footed, s.inputs, s.internal_nodes)
    ('X', 'n', False, ('A', 'B'), ('n1',))
    >>> r.clock_note
    'clock CLK from tech file'
    """
    if islands is None or islands:
        from analyze.stages.islands import circuit_islands

        isl = circuit_islands(circuit, tech) if islands or len(circuit.devices) >= ISLANDS_FROM else None
        if isl is not None and (islands or isl.largest() * len(isl.keys) <= len(circuit.devices) // 2):
            from analyze.stages.by_islands import find_stages_by_islands

            return find_stages_by_islands(isl, tech)
    topo = Topology(circuit, tech)
    static = StaticNets(topo)
    inference = infer_clocks(topo, static=static)
    clocks = set(inference.clocks)
    stages: list[Stage] = []
    findings = []
    for side in SIDES:
        found, notes = _side_stages(topo, side, clocks, static)
        stages += found
        findings += sorted(notes, key=Finding.text)
    stages.sort(key=lambda s: (s.dynamic_node, s.polarity))
    return Recognition(
        stages=stages,
        findings=list(inference.findings) + findings,
        clocks=inference.clocks,
        clock_inferred=inference.inferred,
        clock_note=inference.note,
    )


class _SideContext:
    """Clocked devices of one polarity, shared by the steps below."""

    def __init__(self, topo: Topology, side: Side, clocks: set[str], static: StaticNets, locate=None):
        self.topo, self.side, self.clocks = topo, side, clocks
        self.locate = locate or topo.location
        devs = topo.devices
        self.footers: set[int] = set()
        self.footer_nodes: set[str] = set()
        for net in topo.attached_nets(side.eval_type, side.rail_role):
            for i in topo.attached(side.eval_type, side.rail_role, net):
                if devs[i].gate in clocks:
                    self.footers.add(i)
                    self.footer_nodes.add(net)
        self.precharged: dict[str, list[int]] = {}
        for net in topo.attached_nets(side.pull_type, side.supply_role):
            if topo.role(net) == "clock":
                continue
            on = [i for i in topo.attached(side.pull_type, side.supply_role, net) if devs[i].gate in clocks]
            if on and not static(net):
                self.precharged[net] = on

    def search(self, x: str, stop: set[str] = frozenset()):
        return self.topo.reach(x, self.side.eval_type, (stop, self.footer_nodes), self.footers)

    def depth(self, x: str) -> float:
        dist, _ = self.search(x)
        ends = [d for n, d in dist.items() if self.topo.is_rail(n) or n in self.footer_nodes]
        return min(ends, default=float("inf"))

    def finding(self, message: str, net: str, device: int | None = None) -> Finding:
        return Finding(message, self.locate(net, device))


def _dynamic_nodes(ctx: _SideContext) -> list[str]:
    """Step 2 of :func:`find_stages`: which precharged nets are dynamic nodes."""
    topo = ctx.topo
    group_of: dict[str, int] = {}
    groups: list[list[str]] = []
    for x in sorted(ctx.precharged):
        if x in ctx.footer_nodes or x in group_of:
            continue
        dist, _ = ctx.search(x)
        members = [n for n in dist if n in ctx.precharged and n not in ctx.footer_nodes]
        for n in members:
            group_of[n] = len(groups)
        groups.append(sorted(members))
    dynamic: list[str] = []
    for members in groups:
        drivers = [n for n in members if topo.gates.get(n)]
        if not drivers:
            depth = {n: ctx.depth(n) for n in members}
            deepest = max(depth.values())
            drivers = [n for n in members if depth[n] == deepest]
        dynamic += drivers
    return sorted(dynamic)


def _side_stages(topo: Topology, side: Side, clocks: set[str], static: StaticNets, locate=None):
    ctx = _SideContext(topo, side, clocks, static, locate)
    stages: list[Stage] = []
    findings: list[Finding] = []
    for x, pre in sorted(ctx.precharged.items()):
        if x in ctx.footer_nodes:
            continue
        if not topo.channels(side.eval_type, x) and len(topo.channels(side.pull_type, x)) == len(
            topo.attached(side.pull_type, side.supply_role, x)
        ):
            findings.append(
                ctx.finding(
                    f"{topo.names(pre)[0]}: clocked {side.pull_type} {side.precharge_word}s {x} "
                    f"but {x} has no {side.eval_type} evaluation network",
                    x,
                    pre[0],
                )
            )
    dynamic = _dynamic_nodes(ctx)
    dyn_set = set(dynamic)
    for x in dynamic:
        stage = _build_stage(ctx, x, dyn_set, findings)
        if stage is not None:
            stages.append(stage)
    findings += _orphan_footers(ctx)
    return stages, findings


def _build_stage(ctx: _SideContext, x: str, dynamic: set[str], findings: list[Finding]) -> Stage | None:
    """Step 3–5 of :func:`find_stages` for one dynamic node."""
    topo, side, devs = ctx.topo, ctx.side, ctx.topo.devices
    dist, reached = ctx.search(x, dynamic)
    evaluation = []
    for i in reached:
        ends = (devs[i].drain, devs[i].source)
        other = [n for n in ends if n != x and n in dynamic]
        if other:
            findings.append(
                ctx.finding(
                    f"{devs[i].name} joins dynamic nodes {x} and {other[0]}; "
                    f"left out of both evaluation networks",
                    x,
                    i,
                )
            )
        else:
            evaluation.append(i)
    if not evaluation:
        return None
    inputs = sorted({devs[i].gate for i in evaluation})
    pulls = topo.attached(side.pull_type, side.supply_role, x)
    keepers = [i for i in pulls if devs[i].gate not in ctx.clocks]
    if any(devs[i].gate in inputs for i in keepers):
        return None  # a complementary static gate
    clocked = [g for g in inputs if g in ctx.clocks]
    if clocked:
        findings.append(
            ctx.finding(
                f"clock {clocked[0]} gates a device inside the evaluation network of {x} "
                f"(not between the network and the rail); not analysed as a dynamic stage",
                x,
            )
        )
        return None
    footer_nodes = sorted(n for n in dist if n in ctx.footer_nodes)
    grounded = sorted(i for i in evaluation if topo.rail_end(i) is not None)
    if not footer_nodes and not grounded:
        findings.append(
            ctx.finding(
                f"evaluation network of {x} ({len(evaluation)} {side.eval_type}) has no path to "
                f"{side.rail_role}; not analysed as a dynamic stage",
                x,
            )
        )
        return None
    footer = footer_node = None
    pre_gates = sorted({devs[i].gate for i in ctx.precharged[x]})
    clock = pre_gates[0]
    if footer_nodes:
        footer_node = footer_nodes[0]
        fdevs = [i for i in topo.attached(side.eval_type, side.rail_role, footer_node) if i in ctx.footers]
        f = min(fdevs, key=lambda i: devs[i].name)
        footer, rail = devs[f].name, topo.rail_net(devs[f])
        if devs[f].gate in pre_gates:
            clock = devs[f].gate
        if len(footer_nodes) > 1:
            findings.append(
                ctx.finding(
                    f"{x} has {side.footer_word}s on several nets ({', '.join(footer_nodes)}); "
                    f"{footer_node} taken as the {side.footer_word} node, the others as internal nodes",
                    x,
                )
            )
    else:
        rail = topo.rail_net(devs[min(grounded, key=lambda i: devs[i].name)])
    nets = {n for i in evaluation for n in (devs[i].drain, devs[i].source)}
    internal = sorted(n for n in nets if n != x and n != footer_node and not topo.is_rail(n))
    pre = ctx.precharged[x]
    return Stage(
        dynamic_node=x,
        polarity=side.polarity,
        clock=clock,
        supply=topo.rail_net(devs[min(pre, key=lambda i: devs[i].name)]),
        rail=rail,
        precharge=topo.names(pre),
        evaluation=topo.names(evaluation),
        footer=footer,
        footer_node=footer_node,
        inputs=tuple(inputs),
        internal_nodes=tuple(internal),
        keepers=topo.names(keepers),
        receivers=tuple(topo.receivers(x)),
        secondary_precharge={n: topo.names(ctx.precharged[n])[0] for n in internal if n in ctx.precharged},
        location_um=topo.location(x),
    )


def _orphan_footers(ctx: _SideContext) -> list[Finding]:
    """Step 6 of :func:`find_stages`: footers with no precharge above."""
    topo, side, devs = ctx.topo, ctx.side, ctx.topo.devices
    out: list[Finding] = []
    seen: set[int] = set()
    for i in sorted(ctx.footers, key=lambda i: devs[i].name):
        net = topo.rail_end(i)[1]
        key = topo.component_id(side.eval_type, net)
        if key is None or key in seen:
            continue
        comp = topo.component_of(side.eval_type, net)
        if len(comp.devices) < 2:
            continue
        seen.add(key)
        if any(topo.channels(side.pull_type, n) for n in comp.nets):
            continue
        out.append(
            ctx.finding(
                f"{devs[i].name}: clocked {side.eval_type} looks like a {side.footer_word} "
                f"of an evaluation network above {net}, but nothing {side.precharge_word}s it",
                net,
                i,
            )
        )
    return out
