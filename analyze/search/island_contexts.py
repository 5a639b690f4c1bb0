"""Stage analysis once per distinct island, for blocks recognised by islands.

A block recognised by islands (:mod:`analyze.stages.by_islands`) knows,
for every stage, its island and its place among the stages of islands
with the same key and clock set.  Two such stages whose islands also
carry the same numbers — per device, in the island's order: W, L, AD,
AS, PD, PS and model; per net, by rank: the capacitance parts and the
junction geometry per device type — are the same analysis problem with
names substituted, because the island holds every device and net that
:func:`analyze.search.contexts.stage_context` reads for its stages (the
evaluation network, precharge, footer, keepers and receivers of a stage
have a terminal on one of the island's own nets; their other nets, rails
and inputs, are nets of the island too).  :class:`IslandContexts` keys
each stage by ``(group, index, the island's numbers)``, computed for all
islands at once with numpy, analyses the first stage of each key through
:class:`analyze.search.contexts.StageContexts` and renames that result to
the others through the two islands' names of equal rank.  It saves the
per-stage key of :class:`StageContexts` (about 60 µs a stage in Python).

Used only where the result cannot depend on more than that: the
tech file's lumped model (no ``[models]``) and no constraints file.
"""

from __future__ import annotations

from operator import attrgetter

import numpy as np

from analyze.search.contexts import StageContexts, result_renamed
from extract.circuit import CapParts

__all__ = ["IslandContexts", "island_numbers"]

_TYPES = ("nmos", "pmos")
_DEVICE_FIELDS = ("w_um", "l_um", "ad_um2", "as_um2", "pd_um", "ps_um")
_CAP_FIELDS = ("junction_area", "junction_sidewall", "junction_gate_edge", "wire", "gate", "overlap")
_NO_CAP = CapParts()
#: An odd 64-bit multiplier for the row hash (wrapping arithmetic).
_MIX = np.uint64(0x9E3779B97F4A7C15)


def island_numbers(isl):
    """A number per island: equal for islands of one key whose numbers
    are all equal.

    Parameters
    ----------
    isl : analyze.stages.islands.Islands

    Returns
    -------
    numpy.ndarray of int or None
        Per island, a class number (islands of different keys never share
        one).  The numbers compared: the devices' W, L, AD, AS, PD, PS and
        model, in the island's device order, then per net by rank its six
        capacitance parts and, for nmos and pmos, the junction area, field
        and gate perimeters and whether it has one; floats bit for bit.
        None when some net has a junction of another device type (not
        keyed here).

    Notes
    -----
    The records are read into columns (one pass per field); then, per
    key, every number of the islands' rows is gathered column by column
    into a hash, and the classes checked exactly against each class's
    first row (:func:`_classes`).  Cost O(devices + nets), vectorised per
    column, plus a sort of one 64-bit hash per island.
    """
    circuit = isl.circuit
    devs = circuit.devices
    n = len(devs)
    models: dict = {}
    dev = np.empty((n, 7))
    for c, f in enumerate(_DEVICE_FIELDS):
        dev[:, c] = np.fromiter(map(attrgetter(f), devs), dtype=float, count=n)
    dev[:, 6] = np.fromiter((models.setdefault(d.model, len(models)) for d in devs), dtype=float, count=n)
    get = circuit.nets.get
    records = [get(name) for name in isl.net_ids]
    m = len(records)
    caps = [_NO_CAP if x is None else x.cap for x in records]
    net = np.zeros((m, 14))
    for c, f in enumerate(_CAP_FIELDS):
        net[:, c] = np.fromiter(map(attrgetter(f), caps), dtype=float, count=m)
    rows, cols, vals = [], [], []
    for k, x in enumerate(records):
        if x is not None and x.junctions:
            for t, j in x.junctions.items():
                if t not in _TYPES:
                    return None
                o = 6 + 4 * _TYPES.index(t)
                rows += (k, k, k, k)
                cols += (o, o + 1, o + 2, o + 3)
                vals += (j.area_um2, j.field_perimeter_um, j.gate_perimeter_um, 1.0)
    net[rows, cols] = vals
    del records, caps, rows, cols, vals
    ds, ns = isl.device_starts, isl.net_starts
    out = np.empty(len(isl), dtype=np.int64)
    base = 0
    for k in range(len(isl.keys)):
        members = np.flatnonzero(isl.key_of == k)
        i0 = isl.first[k]
        columns = [(dev, isl.device_order[ds[members] + p], c) for p in range(ds[i0 + 1] - ds[i0]) for c in range(7)]
        columns += [(net, isl.net_order[ns[members] + p], c) for p in range(ns[i0 + 1] - ns[i0]) for c in range(14)]
        cls = _classes(columns, len(members))
        out[members] = base + cls
        base += int(cls.max()) + 1
    return out


def _classes(columns, count: int) -> np.ndarray:
    """Class numbers of ``count`` rows given column by column as
    ``(array, row indices, column)``: equal rows (bit for bit) share a
    number.  A 64-bit polynomial hash of each row groups them; every row is
    then compared with its group's first row, and a row that differs (a
    hash collision) gets a class of its own, so the classes are exact."""
    h = np.zeros(count, dtype=np.uint64)
    for src, rows, c in columns:
        h = h * _MIX + src[rows, c].view(np.uint64)
    _, first, cls = np.unique(h, return_index=True, return_inverse=True)
    cls = cls.ravel()
    rep = first[cls]
    differs = np.zeros(count, dtype=bool)
    for src, rows, c in columns:
        v = src[rows, c]
        differs |= v.view(np.uint64) != v.view(np.uint64)[rep]
    if differs.any():
        cls = cls.copy()
        cls[differs] = int(cls.max()) + 1 + np.arange(int(differs.sum()))
    return cls


class IslandContexts:
    """Stage results of a block recognised by islands, one analysis per
    distinct ``(group, index, island numbers)``.

    Parameters
    ----------
    circuit : Circuit
    tech : Tech
    recognition : Recognition
        With ``recognition.islands`` set.
    analyse : callable
        :func:`analyze.search.analysis.analyze_stage`.

    Attributes
    ----------
    contexts : StageContexts
        Analyses the first stage of each key (and so shares results
        between different islands whose stages are alike).
    """

    def __init__(self, circuit, tech, recognition, analyse):
        self.circuit = circuit
        self.isl, self.origins = recognition.islands
        self.contexts = StageContexts(circuit, tech, None, analyse)
        self._numbers = island_numbers(self.isl)
        self._first: dict = {}
        self._maps: dict = {}

    def analyse(self, k: int, stage):
        """The result of ``stage``, the ``k``-th stage of the recognition."""
        if self._numbers is None:
            return self.contexts.analyse(stage)
        island, group, index = self.origins[k]
        key = (group, index, int(self._numbers[island]))
        hit = self._first.get(key)
        if hit is None:
            result = self.contexts.analyse(stage)
            self._first[key] = (island, result)
            return result
        first, result = hit
        net, device = self._map(first, island)
        return result_renamed(result, stage, self.circuit, net.__getitem__, device.__getitem__)

    def _map(self, first: int, island: int):
        got = self._maps.get(island)
        if got is None or got[0] != first:
            isl = self.isl
            got = (first, dict(zip(isl.names(first), isl.names(island))),
                   dict(zip(isl.device_names(first), isl.device_names(island))))
            self._maps = {island: got}
        return got[1], got[2]
