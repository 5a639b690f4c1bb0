"""Stage recognition once per distinct island, renamed back.

:func:`find_stages_by_islands` gives what
:func:`analyze.stages.recognize.find_stages` gives on the whole circuit,
doing the work of each step once per distinct island key
(:mod:`analyze.stages.islands`):

1. candidates (:func:`analyze.stages.clocks.find_candidates`) on each
   distinct island's placeholder circuit, renamed to every island with
   that key and sorted as on the whole circuit (unless every candidate is
   gated by a declared clock: the decision then reads none of them);
2. the clock decision (:func:`analyze.stages.clocks.decide_clocks`) once,
   over all of them; the receivers of a clock are gathered from the
   islands that hold it (a receiver's two devices share their output,
   which is no shared net, so they lie in one island);
3. the stages and findings of both polarities on each distinct pair of
   (key, which of the island's nets are clocks), renamed to every island
   with that pair.  An island with no clock net has neither: every stage
   and every finding of that step starts from a clocked device.

Locations are read from the real circuit (a device's, else its net's),
as the whole-circuit recognition reads them.
"""

from __future__ import annotations

from extract.errors import Finding

from analyze.stages.clocks import Candidate, decide_clocks, find_candidates
from analyze.stages.islands import Islands, placeholder_net
from analyze.stages.side_stages import recognition_of, side_stages
from analyze.stages.stage import Receiver, Recognition, Stage
from analyze.stages.static import StaticNets
from analyze.stages.topology import SIDES, Topology

__all__ = ["find_stages_by_islands"]


def _place(net, device):
    """A finding's place in a placeholder circuit, located once renamed."""
    return ("@", net, device)


def find_stages_by_islands(isl: Islands, tech) -> Recognition:
    """Recognise the stages of ``isl.circuit`` once per distinct island.

    Parameters
    ----------
    isl : Islands
        From :func:`analyze.stages.islands.circuit_islands`.
    tech : Tech

    Returns
    -------
    Recognition
        Equal to ``find_stages(isl.circuit, tech, islands=False)``.

    Notes
    -----
    Cost: one recognition per distinct key (and per distinct clock set of
    a key), plus renaming every island's candidates, stages and findings.
    """
    circuit = isl.circuit
    subs = []  # per key: the placeholder circuit's topology, staticness test and candidates
    for k in range(len(isl.keys)):
        topo = Topology(isl.placeholder(k), tech)
        static = StaticNets(topo)
        subs.append((topo, static, find_candidates(topo, static)))
    candidates = []
    key_of = isl.key_of.tolist()
    # When every candidate is gated by a declared clock, the clock decision
    # reads none of them (each rule only adds clocks for undeclared gates):
    # they need not be renamed.
    needed = any(topo.role(c.gate) != "clock" for topo, _, found in subs for c in found)
    for i, k in enumerate(key_of if needed else ()):
        found = subs[k][2]
        if found:
            rn = isl.renamer(i)
            candidates += [Candidate(c.side, rn(c.node), rn(c.gate), tuple(map(rn, c.precharge)),
                                     tuple(map(rn, c.footers))) for c in found]
    candidates.sort(key=lambda c: (c.node, c.side.polarity, c.gate))
    declared = sorted(n for n, r in isl.roles.items()
                      if r == "clock" and (n in circuit.nets or isl.drives_gate(n)))
    seen_receivers: dict[str, list[Receiver]] = {}

    def receivers(net: str) -> list[Receiver]:
        got = seen_receivers.get(net)
        if got is None:
            got = []
            for i in isl.islands_with(net):
                topo = subs[key_of[i]][0]
                rn = isl.renamer(i)
                got += [Receiver(rn(r.nmos), rn(r.pmos), rn(r.output))
                        for r in topo.receivers(placeholder_net(isl.rank(i, net)))]
            got = seen_receivers[net] = sorted(got, key=lambda r: r.output)
        return got

    def locate(node, gate, device):
        return _location(circuit, node, device)

    inference = decide_clocks(candidates, declared, isl.drives_gate, receivers, locate)
    clock_ranks: dict[int, list[int]] = {}
    for c in inference.clocks:
        for i in isl.islands_with(c):
            clock_ranks.setdefault(i, []).append(isl.rank(i, c))
    built: dict[tuple, tuple] = {}
    stages: list[Stage] = []
    findings: dict[str, list[Finding]] = {s.polarity: [] for s in SIDES}
    for i in sorted(clock_ranks):
        pair = (key_of[i], tuple(sorted(set(clock_ranks[i]))))
        got = built.get(pair)
        if got is None:
            topo, static, _ = subs[pair[0]]
            clocks = {placeholder_net(r) for r in pair[1]}
            got = []
            for side in SIDES:
                found, notes = side_stages(topo, side, clocks, static, _place)
                got.append(([_StageTemplate(st) for st in found], notes))
            got = built[pair] = tuple(got)
        nets, devs = isl.names(i), isl.device_names(i)
        for side, (found, notes) in zip(SIDES, got):
            stages += [t.stage(nets, devs, circuit) for t in found]
            if notes:
                rn, topo = isl.renamer(i), subs[pair[0]][0]
                findings[side.polarity] += [_renamed_finding(f, rn, topo, circuit) for f in notes]
    return recognition_of(inference, stages, findings)


def _location(circuit, net: str | None, device: str | None):
    """Where the whole-circuit recognition would place it: the device's
    location, else the net's (:meth:`Topology.location`)."""
    if device is not None:
        loc = circuit.device(device).location_um
        if loc is not None:
            return loc
    n = circuit.nets.get(net) if net is not None else None
    return n.location_um if n is not None else None


def _renamed_finding(f: Finding, rn, topo: Topology, circuit) -> Finding:
    _, net, device = f.location_um
    dname = rn(topo.devices[device].name) if device is not None else None
    return Finding(rn(f.message), _location(circuit, rn(net), dname))


def _rank(name: str | None):
    """The rank in a placeholder name (``~N0000012`` -> 12); None stays None."""
    return None if name is None else int(name[2:])


class _StageTemplate:
    """A stage of a placeholder circuit as ranks, made into the stage of
    any island with that key by indexing its names (:meth:`stage`)."""

    def __init__(self, s: Stage):
        r = _rank
        self.polarity = s.polarity
        self.nets = (r(s.dynamic_node), r(s.clock), r(s.supply), r(s.rail), r(s.footer_node))
        self.footer = r(s.footer)
        self.precharge, self.evaluation = [r(d) for d in s.precharge], [r(d) for d in s.evaluation]
        self.keepers = [r(d) for d in s.keepers]
        self.inputs, self.internal = [r(n) for n in s.inputs], [r(n) for n in s.internal_nodes]
        self.receivers = [(r(x.nmos), r(x.pmos), r(x.output)) for x in s.receivers]
        self.secondary = [(r(n), r(d)) for n, d in s.secondary_precharge.items()]

    def stage(self, nets: list[str], devs: list[str], circuit) -> Stage:
        """The stage with the island's names (``nets``, ``devs`` by rank);
        located on the real dynamic node, as the whole-circuit recognition
        locates it."""
        x, clock, supply, rail, foot = self.nets
        x = nets[x]
        net = circuit.nets.get(x)
        return Stage(
            dynamic_node=x, polarity=self.polarity, clock=nets[clock], supply=nets[supply], rail=nets[rail],
            precharge=tuple([devs[k] for k in self.precharge]),
            evaluation=tuple([devs[k] for k in self.evaluation]),
            footer=None if self.footer is None else devs[self.footer],
            footer_node=None if foot is None else nets[foot],
            inputs=tuple([nets[k] for k in self.inputs]),
            internal_nodes=tuple([nets[k] for k in self.internal]),
            keepers=tuple([devs[k] for k in self.keepers]),
            receivers=tuple([Receiver(devs[a], devs[b], nets[c]) for a, b, c in self.receivers]),
            secondary_precharge={nets[n]: devs[d] for n, d in self.secondary},
            location_um=None if net is None else net.location_um,
        )
