"""Indices over a circuit's devices, for recognising circuit structures.

A :class:`Topology` answers, in constant or near-constant time, the
questions that stage recognition and clock inference ask many times:
which devices of a type have a channel terminal on a net, which devices a
net gates, which devices hang from a supply rail onto a net, and which
nets are joined by channels of one device type (its channel-connected
components).  A :class:`Side` names the device types and rails of one
polarity of dynamic stage, so every rule is written once for both.

Units: µm (locations only).
"""

from __future__ import annotations

from collections import Counter, defaultdict, deque
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from extract.circuit import Circuit, Device
from extract.tech import Tech

from analyze.stages.stage import Receiver

__all__ = ["Side", "N_SIDE", "P_SIDE", "SIDES", "Component", "Topology"]


@dataclass(frozen=True)
class Side:
    """The device types and rails of one polarity of dynamic stage.

    Parameters
    ----------
    polarity : str
        ``"n"`` (precharged high) or ``"p"`` (predischarged low).
    eval_type : str
        Device type of the evaluation network (and of the footer).
    pull_type : str
        Device type of the precharge devices and keepers.
    supply_role : str
        Role of the net the dynamic node is precharged from.
    rail_role : str
        Role of the net the evaluation network discharges towards.
    precharge_word, footer_word : str
        What the trade calls the two clocked devices, for messages.
    """

    polarity: str
    eval_type: str
    pull_type: str
    supply_role: str
    rail_role: str
    precharge_word: str
    footer_word: str


#: n-type stage: pmos precharge from power, nmos evaluation to ground.
N_SIDE = Side("n", "nmos", "pmos", "power", "ground", "precharge", "footer")
#: p-type stage: nmos predischarge from ground, pmos evaluation to power.
P_SIDE = Side("p", "pmos", "nmos", "ground", "power", "predischarge", "header")
SIDES = (N_SIDE, P_SIDE)

_RAILS = ("power", "ground")
#: Circuits of at most this many devices get their components in plain
#: Python (:class:`_SmallComponents`), larger ones with scipy.
SMALL = 256


@dataclass
class Component:
    """One channel-connected component of one device type (or of both).

    Nets are joined by the channels of the component's devices; supply
    rails are never joined through (a device with a terminal on a rail
    belongs to the component of its other terminal).

    Attributes
    ----------
    nets : list of str
        Non-rail nets of the component.
    devices : list of int
        Indices into ``Topology.devices``.
    gate_count : Counter
        Number of the component's devices gated by each net.
    rail_by_gate : dict of str to list of int
        The component's devices with a terminal on a rail, by gate net.
    """

    nets: list[str]
    devices: list[int]
    gate_count: Counter
    rail_by_gate: dict[str, list[int]]

    @property
    def touches_rail(self) -> bool:
        return bool(self.rail_by_gate)


class Topology:
    """Terminal indices of a circuit.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech
        Used for the role of a net that ``circuit.nets`` does not list or
        lists as ``"signal"`` (names compared case-blind, as SPICE does).

    Notes
    -----
    Building costs O(devices); every index is a dict of lists.
    Components are computed per device type (or for both types together)
    on first use with a union-find, O(devices · α).

    Examples
    --------
    >>> from extract.circuit import Circuit, Device, Net
    >>> from extract.tech import NetRoles, Tech
    >>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {})
    >>> c = Circuit("inv", {}, [Device("MN", "nmos", "Y", "A", "VSS", 1, 0.2),
    ...                         Device("MP", "pmos", "Y", "A", "VDD", 2, 0.2)])
    >>> t = Topology(c, tech)
    >>> [r.output for r in t.receivers("A")]
    ['Y']
    >>> [t.devices[i].name for i in t.attached("pmos", "power", "Y")]
    ['MP']
    """

    def __init__(self, circuit: Circuit, tech: Tech):
        self.circuit = circuit
        self.tech = tech
        self.devices: list[Device] = list(circuit.devices)
        self._roles = self._special_roles(circuit, tech)
        self._rails = {n for n, r in self._roles.items() if r in _RAILS}
        self.gates: dict[str, list[int]] = defaultdict(list)
        self._channels: dict[str, dict[str, list[int]]] = {
            "nmos": defaultdict(list),
            "pmos": defaultdict(list),
        }
        self._attached: dict[tuple[str, str], dict[str, list[int]]] = defaultdict(
            lambda: defaultdict(list)
        )
        self._components: dict[str | None, _Components] = {}
        self._arrays = None
        self._rail_end: list[tuple[str, str] | None] = []
        gates, channels, attached, rail_end = self.gates, self._channels, self._attached, self._rail_end
        rails, roles = self._rails, self._roles
        for i, d in enumerate(self.devices):
            gates[d.gate].append(i)
            chan = channels.get(d.type)
            if chan is None:
                chan = channels[d.type] = defaultdict(list)
            drain, source = d.drain, d.source
            chan[drain].append(i)
            if source != drain:
                chan[source].append(i)
            rd, rs = drain in rails, source in rails
            if rd != rs:
                hit = (roles[drain], source) if rd else (roles[source], drain)
                attached[(d.type, hit[0])][hit[1]].append(i)
                rail_end.append(hit)
            else:
                rail_end.append(None)

    # -- roles -----------------------------------------------------------
    @staticmethod
    def _special_roles(circuit: Circuit, tech: Tech) -> dict[str, str]:
        """Every net whose role is not ``"signal"``."""
        by_upper = {}
        for role, names in (("clock", tech.nets.clock), ("ground", tech.nets.ground), ("power", tech.nets.power)):
            by_upper.update({n.upper(): role for n in names})
        nets = circuit.nets
        out = {}
        for n, net in nets.items():
            r = net.role if net.role != "signal" else by_upper.get(n.upper(), "signal")
            if r != "signal":
                out[n] = r
        for d in circuit.devices:  # terminals the circuit lists no net for
            for n in (d.drain, d.gate, d.source):
                if n not in nets:
                    r = by_upper.get(n.upper(), "signal")
                    if r != "signal":
                        out[n] = r
        return out

    def role(self, net: str) -> str:
        """Role of a net: from the circuit, else from the tech file."""
        return self._roles.get(net, "signal")

    def is_rail(self, net: str) -> bool:
        return net in self._rails

    def _find_rail_end(self, d: Device) -> tuple[str, str] | None:
        rd, rs = d.drain in self._rails, d.source in self._rails
        if rd and not rs:
            return self._roles[d.drain], d.source
        if rs and not rd:
            return self._roles[d.source], d.drain
        return None

    def rail_end(self, d: Device | int) -> tuple[str, str] | None:
        """``(role, other net)`` when exactly one channel terminal of a
        device (or device index) is on a rail and the other is not; else
        None."""
        if isinstance(d, int):
            return self._rail_end[d]
        return self._find_rail_end(d)

    def rail_net(self, d: Device) -> str:
        """The rail terminal of a device with one (see :meth:`rail_end`)."""
        return d.drain if self.is_rail(d.drain) else d.source

    # -- indices ---------------------------------------------------------
    def channels(self, dtype: str, net: str) -> list[int]:
        """Devices of ``dtype`` with a channel terminal on ``net``."""
        return self._channels.get(dtype, {}).get(net, [])

    def attached(self, dtype: str, role: str, net: str) -> list[int]:
        """Devices of ``dtype`` from a rail of ``role`` to ``net``."""
        return self._attached[(dtype, role)].get(net, [])

    def attached_nets(self, dtype: str, role: str) -> list[str]:
        """Every non-rail net that some ``dtype`` device joins to a rail of
        ``role``, sorted."""
        return sorted(self._attached[(dtype, role)])

    def names(self, indices) -> tuple[str, ...]:
        """Sorted device names."""
        return tuple(sorted(self.devices[i].name for i in indices))

    def location(self, net: str | None = None, device: int | None = None):
        """A layout point for a device (preferred) or a net, or None."""
        if device is not None and self.devices[device].location_um is not None:
            return self.devices[device].location_um
        n = self.circuit.nets.get(net) if net is not None else None
        return n.location_um if n is not None else None

    def receivers(self, net: str) -> list[Receiver]:
        """Static inverters whose input is ``net``, sorted by output.

        A receiver is an nmos gated by ``net`` from ground to Y together
        with a pmos gated by ``net`` from power to the same Y.
        """
        down: dict[str, list[str]] = defaultdict(list)
        up: dict[str, list[str]] = defaultdict(list)
        for i in self.gates.get(net, []):
            d = self.devices[i]
            hit = self._rail_end[i]
            if hit is None or hit[1] == net:
                continue
            if d.type == "nmos" and hit[0] == "ground":
                down[hit[1]].append(d.name)
            elif d.type == "pmos" and hit[0] == "power":
                up[hit[1]].append(d.name)
        return [
            Receiver(nmos=min(down[y]), pmos=min(up[y]), output=y)
            for y in sorted(set(down) & set(up))
        ]

    # -- channel-connected components -------------------------------------
    def _net_arrays(self):
        """Net numbers (channel terminals), made once: ``(ids, names,
        ends (devices × 2), type codes, rail flag per net)``."""
        if self._arrays is None:
            ids: dict[str, int] = {}
            ends = np.fromiter((ids.setdefault(n, len(ids)) for d in self.devices for n in (d.drain, d.source)),
                               dtype=np.intp, count=2 * len(self.devices)).reshape(-1, 2)
            kinds = np.fromiter((_KINDS.get(d.type, -1) for d in self.devices), dtype=np.int8,
                                count=len(self.devices))
            names = list(ids)
            rail = np.fromiter((n in self._rails for n in names), dtype=bool, count=len(names))
            self._arrays = (ids, names, ends, kinds, rail)
        return self._arrays

    def _comps(self, dtype: str | None) -> "_Components":
        comps = self._components.get(dtype)
        if comps is None:
            types = ("nmos", "pmos") if dtype is None else (dtype,)
            make = _SmallComponents if len(self.devices) <= SMALL else _Components
            comps = self._components[dtype] = make(self, types)
        return comps

    def component_of(self, dtype: str | None, net: str) -> Component | None:
        """The ``dtype`` channel-connected component containing ``net``
        (``dtype`` None: joined through nmos and pmos channels alike).
        A new record on each call (see :meth:`component_id`)."""
        comps = self._comps(dtype)
        c = comps.label_of(net)
        return None if c is None else comps.make(c)

    def component_id(self, dtype: str | None, net: str) -> int | None:
        """A number for the component :meth:`component_of` gives, the same
        for every net of it (None: no component)."""
        return self._comps(dtype).label_of(net)

    def reach(self, start: str, dtype: str, stops: tuple[set[str], ...], skip: set[int]):
        """Breadth-first search through ``dtype`` channels from ``start``.

        Parameters
        ----------
        start : str
        dtype : str
        stops : tuple of set of str
            Nets that are reached but not gone through (rails are always;
            ``start`` never is).
        skip : set of int
            Devices not to go through.

        Returns
        -------
        nets : dict of str to int
            Every net reached, with its distance in devices from ``start``.
        devices : list of int
            Devices with a terminal on a net gone through, in search order.

        Notes
        -----
        O(nets + devices reached).
        """
        dist = {start: 0}
        seen: set[int] = set()
        found: list[int] = []
        queue = deque([start])
        while queue:
            net = queue.popleft()
            if net != start and (self.is_rail(net) or any(net in st for st in stops)):
                continue
            for i in self.channels(dtype, net):
                if i in skip or i in seen:
                    continue
                seen.add(i)
                found.append(i)
                other = self.devices[i].other_terminal(net)
                if other is not None and other not in dist:
                    dist[other] = dist[net] + 1
                    queue.append(other)
        return dist, found


class _Components:
    """The channel-connected components of some device types, as arrays;
    a :class:`Component` record is made the first time it is asked for.

    Nets are numbered; a device with both channel terminals off the rails
    is an edge, and scipy's connected components label the nets.  Each
    component's devices are its member devices (a channel terminal off
    the rails) in index order, its nets in order of first appearance
    (drain before source, device by device).  O(devices) numpy work plus
    O(size) per record made; records are not kept (a block would hold
    hundreds of thousands).
    """

    def __init__(self, topo: Topology, types: tuple[str, ...]):
        # holds the device list and rail set, not the Topology (no reference cycle)
        self.devices, self.rails = topo.devices, topo._rails
        ids, names, ends, kinds, rail = topo._net_arrays()
        mask = np.zeros(len(kinds), bool)
        for t in types:
            mask |= kinds == _KINDS.get(t, -1)
        members = np.flatnonzero(mask)
        a, b = ends[members, 0], ends[members, 1]
        ra, rb = rail[a], rail[b]
        both = ~ra & ~rb
        n = len(names)
        graph = coo_matrix((np.ones(int(both.sum()), dtype=np.int8), (a[both], b[both])), shape=(n, n))
        _, label = connected_components(graph, directed=False)
        flat = np.stack([a, b], axis=1).ravel()
        off = ~rail[flat]
        first = np.full(n, len(flat))
        np.minimum.at(first, flat[off], np.flatnonzero(off))
        present = first < len(flat)
        label = np.where(present, label, -1)
        keep = ~(ra & rb)
        dev_label = np.where(ra, label[b], label[a])[keep]
        order = np.argsort(dev_label, kind="stable")
        self.dev_sorted, self.dev_cuts = members[keep][order], _cuts(dev_label[order], n)
        net_ids = np.flatnonzero(present)
        order = np.lexsort((first[net_ids], label[net_ids]))
        self.net_sorted, self.net_cuts = net_ids[order], _cuts(label[net_ids][order], n)
        self.ids, self.names, self.label = ids, names, label

    def label_of(self, net: str) -> int | None:
        k = self.ids.get(net)
        if k is None:
            return None
        c = int(self.label[k])
        return None if c < 0 else c

    def parts(self, c: int) -> tuple[list[int], list[int]]:
        """Component ``c``'s net numbers and member device indices, in order."""
        lo, hi = self.net_cuts[c:c + 2].tolist()
        nets = self.net_sorted[lo:hi].tolist()
        lo, hi = self.dev_cuts[c:c + 2].tolist()
        return nets, self.dev_sorted[lo:hi].tolist()

    def make(self, c: int) -> Component:
        rails, names = self.rails, self.names
        nets, members = self.parts(c)
        mine = [self.devices[i] for i in members]
        rail_by_gate: dict[str, list[int]] = defaultdict(list)
        for i, d in zip(members, mine):
            if (d.drain in rails) != (d.source in rails):
                rail_by_gate[d.gate].append(i)
        return Component([names[k] for k in nets], members, Counter([d.gate for d in mine]), rail_by_gate)


class _SmallComponents(_Components):
    """:class:`_Components` of a small circuit, in plain Python: the same
    numbering (scipy labels a component by its lowest net number), the
    same member order, without the array set-up that dominates for a
    stage of a few devices.  A union-find with path halving over the
    nets, O(devices · α)."""

    def __init__(self, topo: Topology, types: tuple[str, ...]):
        self.devices, self.rails = topo.devices, topo._rails
        rails = self.rails
        ids: dict[str, int] = {}
        ends = [(ids.setdefault(d.drain, len(ids)), ids.setdefault(d.source, len(ids))) for d in self.devices]
        names = list(ids)
        rail = [n in rails for n in names]
        n = len(names)
        parent = list(range(n))

        def root(k):
            while parent[k] != k:
                parent[k] = parent[parent[k]]
                k = parent[k]
            return k

        first = [-1] * n  # first place of each net among the members' channel terminals off the rails
        members = []
        place = 0
        for i, d in enumerate(self.devices):
            if d.type not in types:
                continue
            members.append(i)
            a, b = ends[i]
            ra, rb = rail[a], rail[b]
            if not ra and first[a] < 0:
                first[a] = place
            if not rb and first[b] < 0:
                first[b] = place + 1
            place += 2
            if not ra and not rb:
                x, y = root(a), root(b)
                if x != y:
                    parent[max(x, y)] = min(x, y)
        number: dict[int, int] = {}
        label = []
        for k in range(n):
            r = root(k)
            c = number.setdefault(r, len(number))
            label.append(c if first[k] >= 0 else -1)
        devs: list[list[int]] = [[] for _ in range(n)]
        for i in members:
            a, b = ends[i]
            ra, rb = rail[a], rail[b]
            if not (ra and rb):
                devs[label[b] if ra else label[a]].append(i)
        nets: list[list[int]] = [[] for _ in range(n)]
        for k in sorted((k for k in range(n) if first[k] >= 0), key=first.__getitem__):
            nets[label[k]].append(k)
        self.ids, self.names, self.label = ids, names, label
        self._devs, self._nets = devs, nets

    def parts(self, c: int) -> tuple[list[int], list[int]]:
        return self._nets[c], list(self._devs[c])


_KINDS = {"nmos": 0, "pmos": 1}


def _cuts(sorted_labels: np.ndarray, n: int) -> np.ndarray:
    """Start of each label 0..n in a sorted label array (label ``n`` past the end)."""
    return np.searchsorted(sorted_labels, np.arange(n + 1), side="left")
