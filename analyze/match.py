"""Match a schematic against a layout: which layout net and device is which.

:func:`match_circuits` pairs the nets and devices of a schematic circuit
(:func:`extract.schematic.read_schematic`) with those of a layout circuit
(:func:`extract.pipeline.extract_layout`) so that pre-layout and
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
Colour refinement (1-dimensional Weisfeiler–Leman) over both graphs at
once gives every node a structural colour, O(iterations · edges); nodes
may only be paired with nodes of the same colour, which leaves the VF2
search of :mod:`networkx` (Cordella et al., 2004) almost nothing to
try on real cells.  If the colour histograms differ the graphs cannot be
isomorphic and VF2 is skipped.  A failed match is explained by
:mod:`analyze.match_report`.
"""

from __future__ import annotations

from collections import Counter, defaultdict
from dataclasses import dataclass, field

import networkx as nx
import numpy as np
from networkx.algorithms.isomorphism import GraphMatcher

from extract.circuit import Circuit
from extract.errors import InputError

__all__ = ["Match", "DeviceGroup", "Side", "match_circuits", "merge_parallel", "refine_colours"]


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


@dataclass(frozen=True)
class DeviceGroup:
    """Parallel devices with the same terminals, taken as one.

    ``ends`` are the two channel nets, sorted; ``w`` the summed width.
    """

    names: tuple[str, ...]
    type: str
    gate: str
    ends: tuple[str, str]
    w: float
    l: float

    @property
    def label(self) -> str:
        return "+".join(self.names)


def merge_parallel(circuit: Circuit, l_tol: float = 0.02) -> list[DeviceGroup]:
    """Merge parallel devices of ``circuit``.

    Parameters
    ----------
    circuit : Circuit
    l_tol : float
        Devices whose L differs by more than this fraction are not merged.

    Returns
    -------
    list of DeviceGroup
        Sorted by first device name.

    Examples
    --------
    >>> from extract.circuit import Device
    >>> c = Circuit("c", {}, [Device("M1", "nmos", "a", "g", "b", 0.5, 0.18),
    ...                      Device("M2", "nmos", "b", "g", "a", 0.5, 0.18),
    ...                      Device("M3", "nmos", "a", "g", "b", 0.5, 0.36)])
    >>> [(g.names, g.w) for g in merge_parallel(c)]
    [(('M1', 'M2'), 1.0), (('M3',), 0.5)]
    """
    buckets: dict[tuple, list] = defaultdict(list)
    for d in circuit.devices:
        buckets[(d.type, d.gate, tuple(sorted((d.drain, d.source))))].append(d)
    groups = []
    for (mos_type, gate, ends), devs in buckets.items():
        devs.sort(key=lambda d: (d.l_um, d.name))
        cluster = [devs[0]]
        for d in devs[1:] + [None]:
            if d is not None and d.l_um <= cluster[0].l_um * (1 + l_tol):
                cluster.append(d)
                continue
            names = tuple(sorted(x.name for x in cluster))
            groups.append(DeviceGroup(names, mos_type, gate, ends, sum(x.w_um for x in cluster),
                                      sum(x.l_um for x in cluster) / len(cluster)))
            cluster = [d]
    return sorted(groups, key=lambda g: g.names)


@dataclass
class Side:
    """One circuit prepared for matching.

    Attributes
    ----------
    circuit : Circuit
    groups : list of DeviceGroup
    graph : networkx.Graph
        Nodes ``("d", i)`` for ``groups[i]`` and ``("n", net)``; edge
        attribute ``kind`` = ``(gate count, channel count)``.
    seeds : dict of str to str
        Net -> lower-case port name, for port nets of both sides.
    """

    circuit: Circuit
    groups: list[DeviceGroup]
    graph: nx.Graph
    seeds: dict[str, str]


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


_U64 = np.uint64


def _mix(x: np.ndarray) -> np.ndarray:
    """splitmix64 (Steele, Lea & Flood, 2014): a well-spread 64-bit hash."""
    x = x + _U64(0x9E3779B97F4A7C15)
    x = (x ^ (x >> _U64(30))) * _U64(0xBF58476D1CE4E5B9)
    x = (x ^ (x >> _U64(27))) * _U64(0x94D049BB133111EB)
    return x ^ (x >> _U64(31))


def refine_colours(graphs: list[nx.Graph], max_rounds: int | None = None) -> list[list[dict]]:
    """Colour refinement of several graphs with one shared palette.

    Parameters
    ----------
    graphs : list of networkx.Graph
        Node attribute ``label`` (hashable) is the starting colour; edge
        attribute ``kind`` is part of each neighbour's contribution.
    max_rounds : int, optional
        Default: until the partition stops getting finer.

    Returns
    -------
    list of list of dict
        ``history[r][k]``: node -> colour (int) of graph k after round r
        (round 0 is the starting colours; the last round is stable).
        Equal colours in two graphs mean equal neighbourhoods up to that
        depth.

    Notes
    -----
    The graphs are refined as one disjoint union, so colours compare
    across them.  A node's new colour is its old colour plus the multiset
    of (edge kind, neighbour colour), the multiset taken as a sum of
    64-bit hashes; a collision could only merge two colours (weaker
    pruning, never a wrong answer: every mapping is verified).  Each round
    is a few numpy passes over the edges.

    Examples
    --------
    >>> a, b = nx.path_graph(3), nx.path_graph(3)
    >>> for g in (a, b):
    ...     nx.set_node_attributes(g, "x", "label"); nx.set_edge_attributes(g, 0, "kind")
    >>> h = refine_colours([a, b])
    >>> h[-1][0] == h[-1][1], h[-1][0][0] == h[-1][0][2], h[-1][0][0] == h[-1][0][1]
    (True, True, False)
    """
    nodes = [list(g) for g in graphs]
    offset = np.cumsum([0] + [len(n) for n in nodes])
    index = [{n: int(offset[k]) + i for i, n in enumerate(ns)} for k, ns in enumerate(nodes)]
    labels: dict = {}
    col = np.array([labels.setdefault(g.nodes[n]["label"], len(labels)) for g, ns in zip(graphs, nodes)
                    for n in ns], dtype=np.int64)
    kinds: dict = {}
    u, v, kind = [], [], []
    for g, idx in zip(graphs, index):
        for a, b, k in g.edges(data="kind"):
            kid = kinds.setdefault(k, len(kinds))
            u += [idx[a], idx[b]]
            v += [idx[b], idx[a]]
            kind += [kid, kid]
    u, v, kind = np.array(u, dtype=np.int64), np.array(v, dtype=np.int64), np.array(kind, dtype=np.uint64)

    def split(c: np.ndarray) -> list[dict]:
        return [dict(zip(ns, c[offset[k]:offset[k + 1]].tolist())) for k, ns in enumerate(nodes)]

    history = [split(col)]
    count = len(labels)
    rounds = max_rounds if max_rounds is not None else len(col) + 1
    for _ in range(rounds):
        acc = np.zeros(len(col), dtype=np.uint64)
        if len(u):
            np.add.at(acc, u, _mix(kind * _U64(len(col) + 1) + col[v].astype(np.uint64)))
        pairs = np.stack([col, acc.view(np.int64)], axis=1)
        _, new = np.unique(pairs, axis=0, return_inverse=True)
        new = new.reshape(-1).astype(np.int64)
        new_count = int(new.max()) + 1 if len(new) else 0
        if new_count == count:
            break
        col, count = new, new_count
        history.append(split(col))
    return history


def _forced(g_l: nx.Graph, g_s: nx.Graph, col_l: dict, col_s: dict) -> dict | None:
    """The mapping when every colour class has one node on each side (or
    None when the partition is not discrete); None too when an edge does
    not carry over."""
    by_colour = {c: n for n, c in col_s.items()}
    if len(by_colour) != len(col_s) or len(set(col_l.values())) != len(col_l):
        return None
    mapping = {n: by_colour[c] for n, c in col_l.items()}
    if g_l.number_of_edges() != g_s.number_of_edges():
        return None
    for a, b, k in g_l.edges(data="kind"):
        sa, sb = mapping[a], mapping[b]
        if not g_s.has_edge(sa, sb) or g_s.edges[sa, sb]["kind"] != k:
            return None
    return mapping


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


def _close(a: float, b: float, tol: float) -> bool:
    return abs(a - b) <= tol * abs(b) + 1e-9


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
    from analyze.match_report import explain

    file = schematic.source or "<schematic>"
    groups_s, groups_l = merge_parallel(schematic, l_tol), merge_parallel(layout, l_tol)
    seeds_s, seeds_l, notes = _seeds(schematic, layout, _used(groups_s), _used(groups_l), file)
    side_s = Side(schematic, groups_s, _graph(groups_s, seeds_s), seeds_s)
    side_l = Side(layout, groups_l, _graph(groups_l, seeds_l), seeds_l)
    history = refine_colours([side_l.graph, side_s.graph])
    col_l, col_s = history[-1]
    if Counter(col_l.values()) == Counter(col_s.values()):
        mapping = _forced(side_l.graph, side_s.graph, col_l, col_s)
        if mapping is None:
            mapping = _search(side_l.graph, side_s.graph, col_l, col_s, w_tol, l_tol)
        if mapping is not None:
            if _sizes_agree(side_l.graph, side_s.graph, mapping, w_tol, l_tol):
                return _result(side_s, side_l, mapping, notes)
            raise InputError(file, explain(side_s, side_l, history, mapping, w_tol, l_tol))
    raise InputError(file, explain(side_s, side_l, history, None, w_tol, l_tol))


def _sizes_agree(g_l: nx.Graph, g_s: nx.Graph, mapping: dict, w_tol: float, l_tol: float) -> bool:
    for a, b in mapping.items():
        da, db = g_l.nodes[a], g_s.nodes[b]
        if "w" in da and not (_close(da["w"], db["w"], w_tol) and _close(da["l"], db["l"], l_tol)):
            return False
    return True


def _search(g_l: nx.Graph, g_s: nx.Graph, col_l: dict, col_s: dict, w_tol: float, l_tol: float):
    """VF2 among nodes of equal colour: first with sizes in tolerance, then
    on structure alone (so that a size mismatch can be reported)."""
    nx.set_node_attributes(g_l, col_l, "colour")
    nx.set_node_attributes(g_s, col_s, "colour")

    def sized(a, b):
        return a["colour"] == b["colour"] and ("w" not in a or (
            _close(a["w"], b["w"], w_tol) and _close(a["l"], b["l"], l_tol)))

    def structural(a, b):
        return a["colour"] == b["colour"]

    def edges(a, b):
        return a["kind"] == b["kind"]

    for node_match in (sized, structural):
        gm = GraphMatcher(g_l, g_s, node_match=node_match, edge_match=edges)
        if gm.is_isomorphic():
            return dict(gm.mapping)
    return None


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
