"""Islands: the parts of a circuit that stage recognition sees apart.

Stage recognition (:func:`analyze.stages.recognize.find_stages`) follows
channels, gates and inverter chains outward from a net, but it never
learns anything by crossing a supply rail or a net that only drives gates
(an input or a clock distributed to many cells: no device has a channel
terminal on it).  Cutting the circuit at those *shared* nets leaves
*islands*: devices joined through every other net.  Everything the
recognition reads about one island — device types, which net each
terminal is on, the roles of those nets, and the order of the names,
which decides sorting and tie-breaks — is gathered into a hashable *key*
with every name replaced by its rank among the island's own names.  Two
islands with equal keys are recognised alike, names substituted: the
recognition runs once per distinct key on a small circuit of
placeholder names that sort in rank order (:func:`placeholder_circuit`),
and its results are renamed back to each island (:meth:`Islands.renamer`).

The one decision that needs the whole circuit — which gate nets are
clocks, when the tech file does not declare them — is taken once over
the candidates of every island (see :func:`analyze.stages.clocks.decide_clocks`).

Examples
--------
Two copies of a footless NAND2 on a shared clock, inputs and rails are
two islands with one key:

>>> from extract.circuit import Circuit, Device
>>> from extract.tech import NetRoles, Tech
>>> tech = Tech("t", 1.8, NetRoles(("VDD",), ("VSS",), ("CLK",)), {}, {})
>>> def nand2(k):
...     return [Device(f"MP{k}", "pmos", f"X{k}", "CLK", "VDD", 1.0, 0.18),
...             Device(f"MA{k}", "nmos", f"X{k}", "A", f"n{k}", 1.0, 0.18),
...             Device(f"MB{k}", "nmos", f"n{k}", "B", "VSS", 1.0, 0.18)]
>>> isl = circuit_islands(Circuit("two", {}, nand2(1) + nand2(2)), tech)
>>> len(isl), len(isl.keys), isl.names(1)
(2, 1, ['A', 'B', 'CLK', 'VDD', 'VSS', 'X2', 'n2'])
>>> isl.renamer(1)("~N0000005 and ~D0000001")
'X2 and MB2'

A circuit with no devices has no islands:

>>> len(circuit_islands(Circuit("empty", {}, []), tech))
0
"""

from __future__ import annotations

import bisect
import re
from itertools import repeat

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from extract.circuit import Circuit, Device, Net
from extract.tech import Tech

__all__ = ["Islands", "circuit_islands", "placeholder_circuit", "placeholder_net", "PLACEHOLDER"]

#: A placeholder name: ``~N`` (net) or ``~D`` (device) and a 7-digit rank,
#: so that placeholders sort in rank order and never occur in our messages.
PLACEHOLDER = re.compile(r"~([ND])(\d{7})")
_ROLE_CODES = {"signal": 0, "power": 1, "ground": 2, "clock": 3}
_ROLE_NAMES = {v: k for k, v in _ROLE_CODES.items()}


def placeholder_net(rank: int) -> str:
    """The placeholder name of the net of rank ``rank``.

    >>> placeholder_net(12)
    '~N0000012'
    """
    return f"~N{rank:07d}"


def _device(rank: int) -> str:
    return f"~D{rank:07d}"


class Islands:
    """The islands of a circuit, their keys and their names by rank.

    Attributes
    ----------
    circuit : Circuit
    keys : list of bytes
        The distinct keys, in order of first island.
    key_of : numpy.ndarray
        Per island, the index of its key in ``keys``.
    first : list of int
        Per key, the first island that has it (the one recognised).
    roles : dict of str to str
        Every net whose role is not ``"signal"`` (the circuit's, else the
        tech file's by name).
    """

    def __init__(self, circuit, keys, key_of, first, roles, parts):
        self.circuit, self.keys, self.key_of, self.first, self.roles = circuit, keys, key_of, first, roles
        (self._net_start, self._net_names, self._net_roles, self._dev_start, self._dev_index,
         self._dev_rows, self._dev_sorted, self.net_ids, self._islands_of, self._is_gate) = parts

    def __len__(self) -> int:
        return len(self.key_of)

    def largest(self) -> int:
        """Devices in the largest island (0 when there is none)."""
        return int(np.diff(self._dev_start).max()) if len(self) else 0

    def names(self, island: int) -> list[str]:
        """The island's net names, in rank (name) order."""
        a, b = self._net_start[island], self._net_start[island + 1]
        return self._net_names[a:b]

    def device_names(self, island: int) -> list[str]:
        """The island's device names, in rank (name) order."""
        a, b = self._dev_start[island], self._dev_start[island + 1]
        return self._dev_sorted[a:b]

    def drives_gate(self, net: str) -> bool:
        """True when ``net`` gates some device."""
        i = self.net_ids.get(net)
        return i is not None and bool(self._is_gate[i])

    def islands_with(self, net: str) -> list[int]:
        """Every island with a device on ``net`` (a terminal of any kind)."""
        i = self.net_ids.get(net)
        return [] if i is None else self._islands_of(i)

    def rank(self, island: int, net: str) -> int:
        """The rank of ``net`` among the island's nets (ValueError if absent)."""
        names = self.names(island)
        k = bisect.bisect_left(names, net)
        if k == len(names) or names[k] != net:
            raise ValueError(net)
        return k

    def renamer(self, island: int):
        """A function that puts the island's real names for placeholders,
        in a name or anywhere in a message."""
        nets, devs = self.names(island), self.device_names(island)

        def one(m: re.Match) -> str:
            return (nets if m.group(1) == "N" else devs)[int(m.group(2))]

        def rename(text: str | None):
            if text is None or "~" not in text:
                return text
            if len(text) == 9 and text[0] == "~":  # a placeholder alone: no search
                return (nets if text[1] == "N" else devs)[int(text[2:])]
            return PLACEHOLDER.sub(one, text)

        return rename

    def placeholder(self, key: int) -> Circuit:
        """The circuit of placeholder names recognised for key ``key``."""
        isl = self.first[key]
        a, b = self._dev_start[isl], self._dev_start[isl + 1]
        roles = self._net_roles[self._net_start[isl]:self._net_start[isl + 1]]
        return placeholder_circuit(self._dev_rows[a:b], [self.circuit.devices[i].type for i in self._dev_index[a:b]],
                                   roles)


def placeholder_circuit(rows, types, roles) -> Circuit:
    """A circuit of placeholder names from an island's key.

    Parameters
    ----------
    rows : array of int, shape (devices, 5)
        Per device in circuit order: type code (unused here), drain, gate
        and source net ranks, name rank.
    types : list of str
        Device types in the same order.
    roles : array of int
        Role code per net rank.

    Returns
    -------
    Circuit
        Nets ``~N0000000`` … with their roles, devices ``~D…`` with W/L of
        1 µm (recognition reads no sizes).

    Examples
    --------
    >>> c = placeholder_circuit([[0, 1, 0, 2, 0]], ["nmos"], [0, 0, 2])
    >>> c.devices[0].drain, c.devices[0].source, c.nets["~N0000002"].role
    ('~N0000001', '~N0000002', 'ground')
    """
    nets = {placeholder_net(j): Net(placeholder_net(j), role=_ROLE_NAMES[int(r)]) for j, r in enumerate(roles)}
    net = placeholder_net
    devices = [Device(_device(int(r[4])), t, net(int(r[1])), net(int(r[2])), net(int(r[3])), 1.0, 1.0)
               for r, t in zip(rows, types)]
    return Circuit("island", nets, devices)


def circuit_islands(circuit: Circuit, tech: Tech) -> Islands:
    """Cut a circuit into islands and key them.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech
        For the roles of nets the circuit lists as ``"signal"`` or not at
        all (as :class:`analyze.stages.topology.Topology` reads them).

    Returns
    -------
    Islands

    Notes
    -----
    A net is *shared* when its role is a rail or no device has a channel
    terminal on it.  Every other net joins the devices on it (any
    terminal) into one island (connected components of the net graph,
    scipy); a device on shared nets only is an island of its own.  Names
    are ranked by a sort of all net names and of all device names; an
    island's key is, per device in circuit order, its type and the ranks
    of its drain, gate, source and name, then the role of each of its
    nets by rank.  Cost: O(T log T) for T device terminals, in vectorised
    calls apart from the name sorts and one pass over the islands to cut
    the keys.
    """
    from analyze.stages.topology import Topology

    devs = circuit.devices
    n = len(devs)
    roles = Topology._special_roles(circuit, tech)
    ids: dict[str, int] = {name: k for k, name in enumerate(circuit.nets)}
    flat = [t for d in devs for t in (d.drain, d.gate, d.source)]
    term = np.fromiter(map(ids.get, flat, repeat(-1)), dtype=np.int64, count=3 * n)
    for k in np.flatnonzero(term < 0).tolist():  # terminals the circuit lists no net for
        term[k] = ids.setdefault(flat[k], len(ids))
    del flat
    term = term.reshape(-1, 3)
    names = list(ids)
    m = len(names)
    types: dict[str, int] = {}
    tcode = np.fromiter((types.setdefault(d.type, len(types)) for d in devs), dtype=np.int64, count=n)
    role = np.zeros(m, dtype=np.int8)
    for name, r in roles.items():
        j = ids.get(name)
        if j is not None:
            role[j] = _ROLE_CODES[r]
    is_gate = np.zeros(m, dtype=bool)
    is_gate[term[:, 1]] = True
    has_channel = np.zeros(m, dtype=bool)
    has_channel[term[:, 0]] = True
    has_channel[term[:, 2]] = True
    shared = (role == 1) | (role == 2) | ~has_channel
    # Islands: nets joined through devices, never through shared nets.
    a = np.concatenate([term[:, 0], term[:, 0], term[:, 2]])
    b = np.concatenate([term[:, 2], term[:, 1], term[:, 1]])
    keep = ~shared[a] & ~shared[b]
    graph = coo_matrix((np.ones(int(keep.sum()), dtype=np.int8), (a[keep], b[keep])), shape=(m, m))
    _, label = connected_components(graph, directed=False)
    local = ~shared[term]
    first_local = np.argmax(local, axis=1)
    dev_label = np.where(local.any(axis=1), label[term[np.arange(n), first_local]], m + np.arange(n))
    _, dev_island = np.unique(dev_label, return_inverse=True)
    count = int(dev_island.max()) + 1 if n else 0
    # Net ranks within each island.
    order = sorted(range(m), key=names.__getitem__)
    net_rank = np.empty(m, dtype=np.int64)
    net_rank[order] = np.arange(m)
    pair = np.repeat(dev_island, 3) * max(m, 1) + net_rank[term.ravel()]
    upair, inv = np.unique(pair, return_inverse=True)
    pair_island = upair // max(m, 1)
    net_start = np.searchsorted(pair_island, np.arange(count + 1))
    local_rank = (np.arange(len(upair)) - net_start[pair_island])[inv].reshape(-1, 3)
    net_ids = np.asarray(order, dtype=np.int64)[upair % max(m, 1)] if m else np.zeros(0, dtype=np.int64)
    net_names = [names[j] for j in net_ids]
    net_roles = role[net_ids]
    # Devices: circuit order within each island, and their name ranks.
    by_island = np.argsort(dev_island, kind="stable")
    dev_start = np.searchsorted(dev_island[by_island], np.arange(count + 1))
    dnames = [d.name for d in devs]
    name_rank = np.empty(n, dtype=np.int64)
    name_rank[sorted(range(n), key=dnames.__getitem__)] = np.arange(n)
    by_name = np.lexsort((name_rank, dev_island))
    dev_local = np.empty(n, dtype=np.int64)
    dev_local[by_name] = np.arange(n) - dev_start[dev_island[by_name]]
    rows = np.column_stack([tcode, local_rank, dev_local])[by_island].astype(np.int32)
    dev_sorted = [dnames[i] for i in by_name]
    # Keys, cut per island.
    row_bytes, role_bytes = rows.tobytes(), net_roles.tobytes()
    width = rows.shape[1] * 4 if n else 20
    keys: list[bytes] = []
    index: dict[bytes, int] = {}
    first: list[int] = []
    key_of = np.empty(count, dtype=np.int64)
    for i in range(count):
        k = (row_bytes[dev_start[i] * width:dev_start[i + 1] * width] + b"|"
             + role_bytes[net_start[i]:net_start[i + 1]])
        j = index.get(k)
        if j is None:
            j = index[k] = len(keys)
            keys.append(k)
            first.append(i)
        key_of[i] = j
    pair_net = upair % max(m, 1)
    by_net = np.argsort(pair_net, kind="stable")  # island order kept within a net
    sorted_net = pair_net[by_net]

    def islands_of(net_id: int) -> list[int]:
        r = net_rank[net_id]
        lo, hi = np.searchsorted(sorted_net, [r, r + 1])
        return pair_island[by_net[lo:hi]].tolist()

    parts = (net_start, net_names, net_roles, dev_start, by_island, rows, dev_sorted, ids, islands_of, is_gate)
    return Islands(circuit, keys, key_of, first, roles, parts)
