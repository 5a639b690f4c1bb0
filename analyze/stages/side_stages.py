"""Steps 1-6 of stage recognition for one polarity, on one circuit.

:func:`side_stages` is what :func:`analyze.stages.recognize.find_stages`
runs per polarity once the clocks are known, on the whole circuit or on
one island's placeholder circuit (:mod:`analyze.stages.by_islands`); the
rules are documented there.
"""

from __future__ import annotations

from extract.errors import Finding

from analyze.stages.stage import Recognition, Stage
from analyze.stages.static import StaticNets
from analyze.stages.topology import SIDES, Side, Topology

__all__ = ["side_stages", "recognition_of"]


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


def side_stages(topo: Topology, side: Side, clocks: set[str], static: StaticNets, locate=None):
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


def recognition_of(inference, stages: list[Stage], notes: dict[str, list[Finding]]) -> Recognition:
    """The :class:`Recognition` of the stages and findings of both polarities.

    Parameters
    ----------
    inference : analyze.stages.clocks.ClockInference
    stages : list of Stage
    notes : dict of str to list of Finding
        Findings per polarity (``"n"``, ``"p"``).

    Returns
    -------
    Recognition
        Stages sorted by dynamic node, then polarity; findings: the clock
        inference's, then each polarity's (n, then p) sorted by text, so
        that the order does not depend on how the circuit was visited.
    """
    findings = list(inference.findings)
    for side in SIDES:
        findings += sorted(notes.get(side.polarity, ()), key=Finding.text)
    return Recognition(stages=sorted(stages, key=lambda s: (s.dynamic_node, s.polarity)), findings=findings,
                       clocks=inference.clocks, clock_inferred=inference.inferred, clock_note=inference.note)
