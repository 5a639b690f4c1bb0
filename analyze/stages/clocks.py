"""Clock nets of a cell: declared in the tech file, or inferred.

:func:`find_candidates` lists every structure that looks like the
precharge half of a dynamic stage (a *candidate*: a net X, a device from
the supply to X and the net G gating it, with an evaluation network below
X that G does not drive).  :func:`infer_clocks` decides which gate nets
are clocks.

The textbook dynamic gate (Weste & Harris, *CMOS VLSI Design*, 4th ed.,
ch. 9 "Circuit Families", from memory): the clock gates a pmos from VDD
to the dynamic node (precharge) and, in a footed gate, an nmos between
the evaluation network and ground (footer); the data inputs gate only the
evaluation network.  A p-type stage is the mirror image.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

from extract.errors import Finding

from analyze.stages.static import StaticNets
from analyze.stages.topology import SIDES, Side, Topology

__all__ = ["Candidate", "ClockInference", "find_candidates", "infer_clocks", "decide_clocks"]


@dataclass(frozen=True)
class Candidate:
    """A structure that looks like a precharged dynamic node.

    Attributes
    ----------
    side : Side
        Polarity of the would-be stage.
    node : str
        The would-be dynamic node X.
    gate : str
        The net G gating the would-be precharge devices.
    precharge : tuple of str
        Devices of ``side.pull_type`` from the supply to X gated by G.
    footers : tuple of str
        Devices gated by G from X's evaluation network to the rail.
    """

    side: Side
    node: str
    gate: str
    precharge: tuple[str, ...]
    footers: tuple[str, ...] = ()


@dataclass
class ClockInference:
    """Which nets are clocks, and why.

    Attributes
    ----------
    clocks : list of str
        Every clock net, sorted.
    reasons : dict of str to str
        Clock net -> ``"from tech file"`` or the inference that found it.
    inferred : bool
        True when some clock was not declared.
    findings : list of Finding
        Candidates left unexplained (gated by a net that is not a clock).
    """

    clocks: list[str]
    reasons: dict[str, str]
    inferred: bool
    findings: list[Finding] = field(default_factory=list)

    @property
    def note(self) -> str:
        """One line saying where each clock came from.

        >>> ClockInference(["CLK"], {"CLK": "from tech file"}, False).note
        'clock CLK from tech file'
        """
        if not self.clocks:
            return "no clock: none declared in the tech file and none inferred"
        parts = []
        for c in self.clocks:
            why = self.reasons[c]
            sep = " " if why == "from tech file" else " inferred: "
            parts.append(f"clock {c}{sep}{why}")
        return "; ".join(parts)


def find_candidates(topo: Topology, static: StaticNets | None = None) -> list[Candidate]:
    """Every precharge-like structure of the circuit, both polarities.

    Parameters
    ----------
    topo : Topology
    static : StaticNets, optional
        The staticness test of ``topo`` (made when not given).

    Returns
    -------
    list of Candidate
        Sorted by node, polarity and gate.

    Notes
    -----
    For polarity n (p mirrors it, swapping nmos/pmos and power/ground):
    for each non-rail, non-clock net X with a pmos from power and each
    gate net G of such pmos, let C be the nmos channel-connected
    component of X (rails not gone through), F the devices of C gated by G
    with a terminal on ground, and E = C − F.  (X, G) is a candidate when

    1. G is no rail, not X, and not the output of an inverter fed by X
       (that pmos is a keeper);
    2. E is not empty and G gates no device of E;
    3. C reaches ground;
    4. no other pmos from power to X is gated by a net that gates a
       device of E (that is a complementary static gate: each pull-up
       input also drives the pull-down);
    5. no device of E is gated by X or by an inverter output fed by X
       (feedback is no evaluation input);
    6. no G-gated nmos joins X itself to ground (X would be the output of
       an inverter of G);
    7. X is not static (:class:`analyze.stages.static.StaticNets`): some
       assignment of the gate nets of X's channel-connected component,
       G included, leaves X joined to no rail.  A static complex gate
       whose pull-up has one pmos straight from power and whose pull-down
       has a series nmos on ground (a set/reset NAND in a flip-flop)
       passes 1–6 with that input as G, and fails here.

    Candidates whose G is itself the node of a candidate are dropped (a
    dynamic node gating a cross-coupled keeper is no clock).
    Cost: O(devices) with the component counts of :class:`Topology`, plus
    one staticness search per net X that passes 1–6.

    Examples
    --------
    >>> from extract.circuit import Circuit, Device
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ()), {}, {})
    >>> D = lambda *a: Device(*a, 1.0, 0.18)
    >>> c = Circuit("dyn", {}, [D("MP", "pmos", "X", "PHI", "VDD"),
    ...                         D("MA", "nmos", "X", "A", "n1"),
    ...                         D("MF", "nmos", "n1", "PHI", "VSS")])
    >>> [(k.node, k.gate, k.footers) for k in find_candidates(Topology(c, tech))]
    [('X', 'PHI', ('MF',))]
    """
    if static is None:
        static = StaticNets(topo)
    raw: list[Candidate] = []
    for side in SIDES:
        for x in topo.attached_nets(side.pull_type, side.supply_role):
            if topo.role(x) == "clock":
                continue
            comp = topo.component_of(side.eval_type, x)
            if comp is None or not comp.touches_rail:
                continue
            by_gate: dict[str, list[int]] = defaultdict(list)
            for i in topo.attached(side.pull_type, side.supply_role, x):
                by_gate[topo.devices[i].gate].append(i)
            fed_back = {x} | {r.output for r in topo.receivers(x)}
            if any(n in comp.gate_count for n in fed_back):
                continue
            direct = {topo.devices[i].gate for i in topo.attached(side.eval_type, side.rail_role, x)}
            for g, devs in by_gate.items():
                if topo.is_rail(g) or g in fed_back or g in direct:
                    continue
                footers = comp.rail_by_gate.get(g, [])
                if comp.gate_count[g] != len(footers) or len(comp.devices) == len(footers):
                    continue
                if any(h != g and not topo.is_rail(h) and h in comp.gate_count for h in by_gate):
                    continue
                if static(x):
                    break
                raw.append(Candidate(side, x, g, topo.names(devs), topo.names(footers)))
    nodes = {c.node for c in raw}
    kept = [c for c in raw if c.gate not in nodes]
    return sorted(kept, key=lambda c: (c.node, c.side.polarity, c.gate))


def _declared(topo: Topology) -> list[str]:
    nets = set(topo.circuit.nets) | set(topo.gates)
    return sorted(n for n in nets if topo.role(n) == "clock")


def infer_clocks(
    topo: Topology, candidates: list[Candidate] | None = None, static: StaticNets | None = None
) -> ClockInference:
    """Decide the clock nets.

    Parameters
    ----------
    topo : Topology
    candidates : list of Candidate, optional
        From :func:`find_candidates` (computed when not given).
    static : StaticNets, optional
        Passed to :func:`find_candidates` when it is called here.

    Returns
    -------
    ClockInference

    Notes
    -----
    Rules, applied in this order (a candidate is *explained* when some
    candidate on its node is gated by a clock):

    1. Declared: every net whose role is ``"clock"`` (tech file
       ``[nets] clock``).
    2. Precharge and footer: the gate net of a footed candidate (it gates
       both the precharge device and the footer).
    3. Complement: the gate net of a candidate that is the output of a
       static inverter whose input is a clock (repeated until no change).
    4. Only one left: when the unexplained candidates are all gated by one
       net, that net (it is the only net gating precharge-like devices);
       else the net that gates candidates on strictly more nodes than any
       other net does (one clock shared by several stages, as in a
       footless dual-rail pair, where each input alone also reads as the
       clock of a mirrored one-device stage).  Applied once.

    Candidates still unexplained become findings.  One pmos and one nmos
    in series between the rails, gated by two different nets, read both
    ways (an n-type stage clocked by one, a p-type stage clocked by the
    other); unless one of the two is declared they stay unexplained.  Static
    nets never become candidates (:func:`find_candidates`, rule 7), so a
    net whose only evidence of being a clock comes from static gates — a
    data or set/reset input, or a clock feeding a clocked static NAND — is
    never taken for a clock.  Cost: O(candidates · clocks).

    Examples
    --------
    >>> from extract.circuit import Circuit, Device
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ()), {}, {})
    >>> D = lambda *a: Device(*a, 1.0, 0.18)
    >>> c = Circuit("dyn", {}, [D("MP", "pmos", "X", "PHI", "VDD"),
    ...                         D("MA", "nmos", "X", "A", "n1"),
    ...                         D("MB", "nmos", "n1", "B", "VSS")])
    >>> infer_clocks(Topology(c, tech)).note
    'clock PHI inferred: the only net gating precharge-like devices (MP on X)'
    """
    if candidates is None:
        candidates = find_candidates(topo, static)

    def locate(node: str, gate: str, device: str):
        i = next(j for j in topo.gates[gate] if topo.devices[j].name == device)
        return topo.location(node, i)

    return decide_clocks(candidates, _declared(topo), lambda n: bool(topo.gates.get(n)), topo.receivers, locate)


def decide_clocks(candidates: list[Candidate], declared: list[str], drives_gate, receivers, locate) -> ClockInference:
    """The rules of :func:`infer_clocks`, given what they read of the circuit.

    Parameters
    ----------
    candidates : list of Candidate
        Every candidate of the circuit, sorted by node, polarity and gate.
    declared : list of str
        Nets whose role is ``"clock"``, sorted.
    drives_gate : callable
        ``drives_gate(net)``: True when ``net`` gates some device.
    receivers : callable
        ``receivers(net)``: the static inverters whose input is ``net``
        (:meth:`analyze.stages.topology.Topology.receivers`).
    locate : callable
        ``locate(node, gate, device)``: the location of the finding on an
        unexplained candidate (the device ``device`` gated by ``gate``).

    Returns
    -------
    ClockInference

    Notes
    -----
    :func:`infer_clocks` calls it with a :class:`Topology`; recognition
    by islands (:mod:`analyze.stages.islands`) with the candidates of
    every island renamed back, so that this one global decision sees the
    whole circuit either way.
    """
    reasons = {n: "from tech file" for n in declared}
    declared = set(reasons)
    # Name a node that drives a gate (a dynamic node rather than an internal
    # node with a secondary precharge device) in the reason when there is one.
    for c in sorted(candidates, key=lambda c: (not drives_gate(c.node), c.node)):
        if c.footers and c.gate not in reasons:
            reasons[c.gate] = (
                f"gates {c.side.precharge_word} {c.precharge[0]} and "
                f"{c.side.footer_word} {c.footers[0]} of {c.node}"
            )
    changed = True
    while changed:
        changed = False
        inverted = {r.output: k for k in sorted(reasons) for r in receivers(k)}
        for c in candidates:
            if c.gate not in reasons and c.gate in inverted:
                reasons[c.gate] = f"complement of clock {inverted[c.gate]}"
                changed = True
    by_node: dict[str, list[Candidate]] = defaultdict(list)
    for c in candidates:
        by_node[c.node].append(c)

    def unexplained() -> list[Candidate]:
        return [c for c in candidates if not any(k.gate in reasons for k in by_node[c.node])]

    left = unexplained()
    nodes_of: dict[str, list[Candidate]] = defaultdict(list)
    for c in left:
        nodes_of[c.gate].append(c)
    ranked = sorted(nodes_of.items(), key=lambda kv: -len(kv[1]))
    if ranked and (len(ranked) == 1 or len(ranked[0][1]) > len(ranked[1][1])):
        g, cands = ranked[0]
        where = ", ".join(f"{c.precharge[0]} on {c.node}" for c in cands)
        which = "the only net" if len(ranked) == 1 else f"the net of the most nodes ({len(cands)})"
        reasons[g] = f"{which} gating precharge-like devices ({where})"
        left = unexplained()
    findings = []
    for c in left:
        findings.append(
            Finding(
                f"{c.precharge[0]} looks like a {c.side.precharge_word} device of "
                f"{c.node} but its gate {c.gate} is not a known clock "
                f"(declare it in the tech file's [nets] clock)",
                locate(c.node, c.gate, c.precharge[0]),
            )
        )
    return ClockInference(
        clocks=sorted(reasons),
        reasons=reasons,
        inferred=bool(set(reasons) - declared),
        findings=findings,
    )
