"""Pre-layout against post-layout: the same stages analysed on the
schematic and on the layout, with the droop increase attributed to nodes.

:func:`compare_circuits` is the whole comparison as a pure function of
two circuits (and a :class:`analyze.compare.match.Match` between them).
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field

from extract.circuit import CAP_PART_NAMES, Circuit

__all__ = ["NetDelta", "NodeAttribution", "StageComparison", "Comparison", "net_deltas",
           "attribute_droop", "compare_circuits"]


@dataclass
class NetDelta:
    """One net before and after layout (fF).

    ``grew`` lists the capacitance parts that are larger after layout,
    largest increase first.
    """

    name: str
    schematic_name: str
    cap_ff_pre: float
    cap_ff_post: float
    parts_pre: dict[str, float]
    parts_post: dict[str, float]

    @property
    def delta_ff(self) -> float:
        return self.cap_ff_post - self.cap_ff_pre

    @property
    def grew(self) -> list[str]:
        d = {k: self.parts_post[k] - self.parts_pre[k] for k in CAP_PART_NAMES}
        return [k for k, v in sorted(d.items(), key=lambda kv: -kv[1]) if v > 1e-9]


@dataclass
class NodeAttribution:
    """How much of a stage's droop increase one node's added capacitance causes.

    ``droop_reduction_v`` is the post-layout worst-case droop minus the
    worst-case droop with only this node's capacitance (and junction
    geometry) set back to its pre-layout value.
    """

    node: str
    schematic_name: str
    delta_ff: float
    droop_reduction_v: float


@dataclass
class StageComparison:
    """One stage analysed on both circuits."""

    dynamic_node: str
    pre: object | None
    post: object | None
    attribution: list[NodeAttribution] = field(default_factory=list)

    @property
    def droop_increase_v(self) -> float | None:
        if self.pre is None or self.post is None:
            return None
        d_pre = self.pre.worst_case.droop_v if self.pre.worst_case else 0.0
        d_post = self.post.worst_case.droop_v if self.post.worst_case else 0.0
        return d_post - d_pre


@dataclass
class Comparison:
    """The whole comparison (also what the HTML report draws)."""

    pre: Circuit
    post: Circuit
    tech: object
    net_map: dict[str, str]
    nets: list[NetDelta]
    stages: list[StageComparison]
    notes: list[str] = field(default_factory=list)

    @property
    def failed(self) -> bool:
        return any(r is not None and r.status == "fail" for s in self.stages for r in (s.pre, s.post))


def net_deltas(pre: Circuit, post: Circuit, net_map: dict[str, str]) -> list[NetDelta]:
    """Per mapped net, pre and post capacitance, largest increase first.

    >>> from extract.circuit import CapParts, Circuit, Net
    >>> a = Circuit("c", {"n": Net("n", cap=CapParts(wire=1.0))}, [])
    >>> b = Circuit("c", {"m": Net("m", cap=CapParts(wire=1.5, junction_area=1.0))}, [])
    >>> d, = net_deltas(a, b, {"m": "n"})
    >>> d.delta_ff, d.grew
    (1.5, ['junction_area', 'wire'])
    """
    out = []
    for lay, sch in net_map.items():
        if lay not in post.nets or sch not in pre.nets:
            continue
        a, b = pre.nets[sch], post.nets[lay]
        out.append(NetDelta(lay, sch, a.cap_ff, b.cap_ff, a.cap.as_dict(), b.cap.as_dict()))
    out.sort(key=lambda d: (-d.delta_ff, d.name))
    return out


def _with_node_reverted(post: Circuit, pre: Circuit, lay: str, sch: str) -> Circuit:
    """A shallow copy of ``post`` whose net ``lay`` has the pre-layout
    capacitance and junction geometry of ``sch``."""
    c = copy.copy(post)
    c.nets = dict(post.nets)
    net = copy.copy(post.nets[lay])
    net.cap = copy.copy(pre.nets[sch].cap)
    net.junctions = dict(pre.nets[sch].junctions)
    c.nets[lay] = net
    return c


def attribute_droop(post_result, pre: Circuit, post: Circuit, net_map: dict[str, str], tech,
                    constraints=None) -> list[NodeAttribution]:
    """Droop increase per node: re-run the worst case with each node's
    post-layout capacitance set back to its pre-layout value.

    Parameters
    ----------
    post_result : analyze.search.analysis.StageResult
        The stage analysed on the layout.
    pre, post : Circuit
    net_map : dict
        Layout net -> schematic net.
    tech : Tech
    constraints : optional

    Returns
    -------
    list of NodeAttribution
        For the dynamic node and every internal node of the stage, largest
        droop reduction first.

    Notes
    -----
    One exact worst-case search per node (the worst pattern may change when
    a node shrinks), so the cost is (internal nodes + 1) searches.  The
    reductions need not add up to the whole increase: charge sharing is not
    linear in the capacitances.
    """
    st = post_result.stage
    base = post_result.worst_case.droop_v if post_result.worst_case else 0.0
    out = []
    for node in (st.dynamic_node, *st.internal_nodes):
        sch = net_map.get(node)
        if sch is None or sch not in pre.nets:
            continue
        delta = post.nets[node].cap_ff - pre.nets[sch].cap_ff
        wc = _worst(_with_node_reverted(post, pre, node, sch), st, tech, constraints)
        droop = wc.droop_v if wc else 0.0
        out.append(NodeAttribution(node, sch, delta, base - droop))
    out.sort(key=lambda a: (-a.droop_reduction_v, a.node))
    return out


def _worst(circuit, stage, tech, constraints):
    """The exact worst case alone (no threshold, count or flags)."""
    from analyze.search.analysis import find_worst_case

    return find_worst_case(circuit, stage, tech, constraints)


def compare_circuits(pre: Circuit, post: Circuit, match, tech, constraints=None, constraints_path=None) -> Comparison:
    """Recognise and analyse the stages of both circuits and pair them.

    Parameters
    ----------
    pre : Circuit
        From the schematic.
    post : Circuit
        From the layout.
    match : analyze.compare.match.Match
        ``net_map`` layout -> schematic.
    tech : Tech
    constraints : Constraints, optional
        Applied to both (inputs are ports, so their names agree).

    Returns
    -------
    Comparison
    """
    from analyze.search.analysis import analyse_circuit

    rec_pre, res_pre = analyse_circuit(pre, tech, constraints, constraints_path)
    rec_post, res_post = analyse_circuit(post, tech, constraints, constraints_path)
    net_map = dict(match.net_map)
    back = {v: k for k, v in net_map.items()}
    by_pre = {back.get(r.stage.dynamic_node, r.stage.dynamic_node): r for r in res_pre}
    notes = list(getattr(match, "notes", []))
    stages = []
    for r in res_post:
        node = r.stage.dynamic_node
        pre_r = by_pre.pop(node, None)
        if pre_r is None:
            notes.append(f"stage {node} is recognised in the layout but not in the schematic")
        sc = StageComparison(node, pre_r, r)
        if pre_r is not None:
            sc.attribution = attribute_droop(r, pre, post, net_map, tech, constraints)
        stages.append(sc)
    for node, pre_r in sorted(by_pre.items()):
        notes.append(f"stage {node} is recognised in the schematic but not in the layout")
        stages.append(StageComparison(node, pre_r, None))
    stages.sort(key=lambda s: s.dynamic_node)
    return Comparison(pre, post, tech, net_map, net_deltas(pre, post, net_map), stages, notes)
