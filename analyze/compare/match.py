"""Match a schematic against a layout: which layout net and device is which.

:func:`match_circuits` pairs the nets and devices of a schematic circuit
(:func:`extract.netlist.reader.read_schematic`) with those of a layout circuit
(:func:`extract.layout.pipeline.extract_layout`) so that pre-layout and
post-layout numbers can be compared net by net.  When the two are not the
same circuit it says where they differ.

Rules
-----
- Ports by name: a labelled layout net whose name or one of whose labels
  equals a schematic port name (case-insensitive) is that port.  A port
  with no such layout net is matched by structure and said in
  :attr:`Match.notes`.
- Parallel devices (same type, same gate, same two channel nets, L
  within ``l_tol``) are merged into one of summed W on each side before
  matching, so layout fingers compare with a schematic ``NF=`` or ``M=``
  device or with one device of the total width.
- Everything else by graph isomorphism of the bipartite device–net graph:
  device nodes carry type, W and L (equal within ``w_tol``/``l_tol``,
  relative to the schematic), edges carry the terminal kind (gate or
  channel; drain and source are interchangeable), port nets their name.

Notes
-----
The isomorphism is found by colour refinement and individualisation
(:mod:`analyze.compare.refine`): each refinement round costs a few numpy passes
over the edges, and on real cells (ports break almost every symmetry)
one refinement settles everything; identical legs of a gate take one
individualisation per leg.  A search respecting W/L comes first; when
it fails, a search on structure alone tells a size mismatch from a
connection mismatch.  The reason of a failed match is worked out by
:mod:`analyze.compare.mismatch`.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

import networkx as nx

from analyze.compare.groups import DeviceGroup, Side, merge_parallel
from analyze.compare.mismatch import explain
from analyze.compare.refine import Refiner, SearchBudgetExceeded
from extract.circuit import Circuit
from extract.errors import InputError

__all__ = ["Match", "match_circuits"]


@dataclass
class Match:
    """The result of :func:`match_circuits`.

    Attributes
    ----------
    net_map : dict of str to str
        Layout net -> schematic net.
    device_map : dict of str to str
        Layout device -> schematic device.  Where a merged group has a
        different number of devices on the two sides (two layout fingers
        against one schematic device), several layout devices map to one
        schematic device, or some schematic devices are left out; see
        ``groups``.
    groups : list of (tuple of str, tuple of str)
        Every merged group: (layout devices, schematic devices).
    notes : list of str
        Things worth telling that are not mismatches.
    """

    net_map: dict[str, str]
    device_map: dict[str, str]
    groups: list[tuple[tuple[str, ...], tuple[str, ...]]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _graph(groups: list[DeviceGroup], seeds: dict[str, str]) -> nx.Graph:
    g = nx.Graph()
    kinds: dict[tuple, list[int]] = defaultdict(lambda: [0, 0])
    for i, grp in enumerate(groups):
        g.add_node(("d", i), label=("d", grp.type), w=grp.w, l=grp.l)
        kinds[(("d", i), ("n", grp.gate))][0] += 1
        for end in grp.ends:
            kinds[(("d", i), ("n", end))][1] += 1
    for (dev, net), (gc, cc) in kinds.items():
        if net not in g:
            g.add_node(net, label=("n", seeds.get(net[1], "")))
        g.add_edge(dev, net, kind=(gc, cc))
    return g


def _seeds(schematic: Circuit, layout: Circuit, used_s: set[str], used_l: set[str], file: str):
    ports = {}
    for net in schematic.nets.values():
        if net.labelled and net.name in used_s:
            ports[net.name.lower()] = net.name
    seeds_l: dict[str, str] = {}
    owner: dict[str, str] = {}
    for net in layout.nets.values():
        if not net.labelled or net.name not in used_l:
            continue
        hits = sorted({t.lower() for t in (net.name, *net.labels)} & ports.keys())
        if len(hits) > 1:
            raise InputError(file, f"layout net {net.name} joins schematic ports "
                                   f"{' and '.join(ports[h] for h in hits)}")
        if hits:
            if hits[0] in owner:
                raise InputError(file, f"schematic port {ports[hits[0]]} matches two layout nets: "
                                       f"{owner[hits[0]]} and {net.name}")
            owner[hits[0]] = net.name
            seeds_l[net.name] = hits[0]
    seeds_s = {ports[k]: k for k in owner}
    notes = [f"schematic port {ports[k]} has no labelled layout net; matched by structure"
             for k in sorted(ports.keys() - owner.keys())]
    return seeds_s, seeds_l, notes


def _used(groups: list[DeviceGroup]) -> set[str]:
    return {n for g in groups for n in (g.gate, *g.ends)}


def match_circuits(schematic: Circuit, layout: Circuit, *, w_tol: float = 0.02, l_tol: float = 0.02) -> Match:
    """Pair the nets and devices of a schematic and a layout.

    Parameters
    ----------
    schematic : Circuit
        From the schematic reader; ``schematic.source`` names the file in
        errors.
    layout : Circuit
        From the layout extractor.
    w_tol, l_tol : float
        Relative tolerance on W and L (of the schematic value).

    Returns
    -------
    Match

    Raises
    ------
    InputError
        The circuits differ; the message says where (stack order, a device
        without counterpart, a W or L out of tolerance, ...).

    Examples
    --------
    >>> from extract.circuit import Device, Net
    >>> def cell(names, devs):
    ...     return Circuit("c", {n: Net(n, labelled=n.isupper()) for n in names}, devs)
    >>> s = cell(["X", "A", "B", "VSS", "n1"], [Device("MA", "nmos", "X", "A", "n1", 1.0, 0.18),
    ...                                        Device("MB", "nmos", "n1", "B", "VSS", 1.0, 0.18)])
    >>> l = cell(["X", "A", "B", "VSS", "net3"], [Device("M1", "nmos", "net3", "B", "VSS", 1.0, 0.18),
    ...                                          Device("M2", "nmos", "net3", "A", "X", 1.0, 0.18)])
    >>> m = match_circuits(s, l)
    >>> m.net_map["net3"], m.device_map
    ('n1', {'M1': 'MB', 'M2': 'MA'})
    """

    file = schematic.source or "<schematic>"
    groups_s, groups_l = merge_parallel(schematic, l_tol), merge_parallel(layout, l_tol)
    seeds_s, seeds_l, notes = _seeds(schematic, layout, _used(groups_s), _used(groups_l), file)
    side_s = Side(schematic, groups_s, _graph(groups_s, seeds_s), seeds_s)
    side_l = Side(layout, groups_l, _graph(groups_l, seeds_l), seeds_l)
    ref = Refiner([side_l.graph, side_s.graph])
    try:
        mapping = ref.isomorphism(sized=True, w_tol=w_tol, l_tol=l_tol)
        if mapping is not None:
            return _result(side_s, side_l, mapping, notes)
    except SearchBudgetExceeded:
        pass
    try:
        mapping = ref.isomorphism()
    except SearchBudgetExceeded:
        raise InputError(file, "schematic and layout could not be matched: the circuit is too "
                               "symmetric for the search (no port or size tells its parts apart)") from None
    history = [ref.split(c) for c in ref.rounds()]
    raise InputError(file, explain(side_s, side_l, history, mapping, w_tol, l_tol))


def _result(side_s: Side, side_l: Side, mapping: dict, notes: list[str]) -> Match:
    net_map, device_map, groups = {}, {}, []
    for node_l, node_s in mapping.items():
        if node_l[0] == "n":
            net_map[node_l[1]] = node_s[1]
            continue
        names_l, names_s = side_l.groups[node_l[1]].names, side_s.groups[node_s[1]].names
        groups.append((names_l, names_s))
        for i, name in enumerate(names_l):
            device_map[name] = names_s[i * len(names_s) // len(names_l)]
    schematic_nets = {n.lower(): n for n in side_s.circuit.nets}
    for net in side_l.circuit.nets.values():
        if net.labelled and net.name not in net_map and net.name.lower() in schematic_nets:
            net_map[net.name] = schematic_nets[net.name.lower()]
    return Match(dict(sorted(net_map.items())), dict(sorted(device_map.items())), sorted(groups), notes)
