"""Parallel devices merged into groups, and one circuit prepared for matching.

:func:`merge_parallel` takes devices with the same type, gate and channel
nets (L within a tolerance) as one of summed W, so layout fingers compare
with a schematic ``NF=``/``M=`` device.  :class:`Side` holds a circuit's
groups and its bipartite device-net graph.

Notes
-----
Merging is one pass with a dictionary of buckets and a sort per bucket:
O(n log n) in the number of devices.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import networkx as nx

from extract.circuit import Circuit

__all__ = ["DeviceGroup", "Side", "merge_parallel"]


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
