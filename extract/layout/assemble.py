"""Placed cells to a :class:`~extract.circuit.Circuit`: joining, naming, devices.

The input is one or more extracted cells (:class:`~extract.layout.units.CellUnits`),
each placed at a list of offsets, and optional joins between units of
different placements.  Flat extraction is the case of one cell placed
once at (0, 0); hierarchical extraction places each distinct cell at every
one of its instances.

Rules (the README's "Extraction"), applied to the joined units exactly as
to the conductors of a flat cell:

- a net is a connected component of units (within a cell: conductors
  through cuts; across placements: the given joins);
- its point is the point of its best unit (diffusion first, largest area
  rounded to 1e-9 µm², then lowest y, then x); names follow
  :func:`extract.layout.connectivity.names_from_texts`; nets with one name are
  one net, whose location is the point of its best part by the same rule;
- devices are numbered ``M1``, ``M2``, ... in order of position (x, then
  y); the source is the rail side when there is one, else the later name.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from extract.circuit import CapParts, Circuit, Device, JunctionGeometry, Net
from extract.errors import Finding
from extract.layout.connectivity import names_from_texts
from extract.layout.units import CellUnits, best_of
from extract.tech import Tech

__all__ = ["assemble", "PlacedShapes"]


def assemble(placements, tech: Tech, cell: str, path: str, joins=None, wire_fix=None, extra=None,
             shapes: bool = True) -> Circuit:
    """Build the circuit of placed cells.

    Parameters
    ----------
    placements : list of (CellUnits, ndarray (m, 2))
        Each extracted cell and the offsets (µm) it is placed at.  Global
        unit numbers run placement by placement, instance by instance:
        ``base + instance * cell.n + unit``.
    tech : Tech
    cell, path : str
        Name and file of the circuit.
    joins : ndarray (j, 2) of int, optional
        Pairs of global units that are one conductor path (touching metal).
    wire_fix : list of (int, float), optional
        Wire capacitance (fF) to add to a global unit's net (negative for
        the fringe of edges that touching shapes no longer have).
    extra : list of (int, float, float, float), optional
        Extra candidates for a net's point: ``(global unit, area, x, y)``
        of a conductor made of touching shapes of several placements.
    shapes : bool
        Whether to give :attr:`Circuit.shapes`: a dict for one placement,
        else a :class:`PlacedShapes` that translates a net's pieces when asked.

    Returns
    -------
    Circuit

    Notes
    -----
    Arrays over all placed units and devices (numpy repeat/tile), one
    sparse connected-components pass for the joins, one lexsort for the
    points and one for the device order: O(N log N) in placed units and
    devices, plus Python loops that build the ``Net`` and ``Device``
    records.

    Examples
    --------
    >>> import os
    >>> from extract.layout.units import cell_units
    >>> from extract.layout.reader import FlatLayout
    >>> from extract.techfile import load_tech
    >>> tech = load_tech(os.path.join(os.path.dirname(__file__), "..", "..", "sample_layouts", "dsk18.toml"))
    >>> act, poly = tech.layers["active"].gds, tech.layers["poly"].gds
    >>> box = lambda x0, y0, x1, y1: np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], float)
    >>> u = cell_units(FlatLayout("x.gds", "T", 0.001, {act: [box(0, 0, 3, 1)], poly: [box(1, -0.5, 1.2, 1.5)]}), tech)
    >>> c = assemble([(u, np.array([[0.0, 0.0], [10.0, 0.0]]))], tech, "TOP", "x.gds")
    >>> [d.name for d in c.devices], sorted(c.nets)
    (['M1', 'M2'], ['net1', 'net2', 'net3', 'net4', 'net5', 'net6'])
    """
    sizes = [u.n * len(off) for u, off in placements]
    base = np.cumsum([0] + sizes)
    total = int(base[-1])
    points = np.empty((total, 2))
    best_diff = np.empty(total, bool)
    best_area = np.empty(total)
    cap = np.empty((total, 6))
    for (u, off), b in zip(placements, base):
        m = len(off)
        sl = slice(int(b), int(b) + u.n * m)
        points[sl] = (u.points[None, :, :] + off[:, None, :]).reshape(-1, 2)
        best_diff[sl] = np.tile(u.best_diff, m)
        best_area[sl] = np.tile(u.best_area, m)
        cap[sl] = np.tile(u.cap, (m, 1))

    # nets: connected components of the joins, numbered by first unit
    if joins is not None and len(joins):
        j = np.asarray(joins, dtype=np.intp)
        graph = coo_matrix((np.ones(len(j)), (j[:, 0], j[:, 1])), shape=(total, total))
        _, comp = connected_components(graph, directed=False)
        _, first, inverse = np.unique(comp, return_index=True, return_inverse=True)
        rank = np.empty(len(first), dtype=np.intp)
        rank[np.argsort(first)] = np.arange(len(first))
        group = rank[inverse]
    else:
        group = np.arange(total)
    n_groups = int(group.max()) + 1 if total else 0
    if wire_fix:
        for unit, value in wire_fix:
            cap[unit, 3] += value

    # candidates for each net's point: every unit's own, plus merged conductors
    c_group, c_diff, c_area, c_pts = group, best_diff, best_area, points
    if extra:
        e = np.asarray(extra, dtype=float)
        c_group = np.concatenate([group, group[e[:, 0].astype(np.intp)]])
        c_diff = np.concatenate([best_diff, np.zeros(len(e), bool)])
        c_area = np.concatenate([best_area, np.round(e[:, 1], 9)])
        c_pts = np.concatenate([points, e[:, 2:4]])
    pick = best_of(c_group, c_diff, c_area, c_pts, n_groups)
    g_points = c_pts[pick] if n_groups else np.empty((0, 2))
    g_diff, g_area = c_diff[pick], c_area[pick]

    g_texts = _group_texts(placements, base, group, n_groups)
    names, name_findings = names_from_texts(g_texts, g_points, tech.role_of)

    # one net per name: parts summed, location from the best group
    # (a sort of the distinct names in Python: numpy's sort of an object array is slower)
    order_names = sorted(set(names))
    index = {n: i for i, n in enumerate(order_names)}
    name_idx = np.fromiter(map(index.__getitem__, names), dtype=np.intp, count=len(names))
    distinct = np.empty(len(order_names), dtype=object)
    distinct[:] = order_names
    del index, order_names
    loc = best_of(name_idx, g_diff, g_area, g_points, len(distinct))
    per_unit_name = name_idx[group]
    sums = np.zeros((len(distinct), 6))
    for k in range(6):  # bincount adds in array order, as np.add.at does, and faster
        sums[:, k] = np.bincount(per_unit_name, weights=cap[:, k], minlength=len(distinct))
    nets: dict[str, Net] = {}  # made in name order (``distinct`` is sorted)
    role_of = tech.role_of
    net_list = []
    parts = row_objects(sums, CapParts)  # equal parts: one (frozen) record
    points = _floats(g_points[loc], 6)
    for name, cap, xy in zip(distinct.tolist(), parts, zip(*[iter(points)] * 2)):
        net = nets[name] = Net(name, role_of(name), cap, location_um=xy)
        net_list.append(net)
    for g, texts in enumerate(g_texts):
        if texts:
            net = nets[names[g]]
            net.labels = tuple(sorted(set(net.labels).union(texts)))
            net.labelled = True
    del g_texts
    unit_name = distinct[per_unit_name]
    single = len(placements) == 1 and len(placements[0][1]) == 1
    shape_lists = {name: [] for name in nets} if single else PlacedShapes(placements, base, unit_name, list(nets))
    _add_junctions(placements, base, per_unit_name, net_list)
    findings: list[Finding] = []
    for (u, off), b in zip(placements, base):
        for i, (dx, dy) in enumerate(off.tolist()):
            for f in u.findings:
                loc_f = None if f.location_um is None else (f.location_um[0] + dx, f.location_um[1] + dy)
                findings.append(Finding(f.message, loc_f))
            if shapes and single:
                start = int(b) + i * u.n
                _place_shapes(u, dx, dy, unit_name[start : start + u.n], shape_lists)
    findings.extend(name_findings)
    devices = _devices(placements, base, unit_name, per_unit_name, net_list, tech)
    return Circuit(cell=cell, nets=nets, devices=devices, findings=findings, source=path,
                   shapes=shape_lists if shapes else {})


class PlacedShapes(Mapping):
    """``Circuit.shapes`` of placed cells, made per net when asked for.

    Net name -> ``(layer, Polygon)`` pieces, translated to each instance.
    Only drawing reads shapes, and only of the nets it draws, so a block of
    many instances does not hold a translated copy of every piece.  The
    first look-up indexes units by net (numpy), O(placed units).
    """

    def __init__(self, placements, base, unit_name, names):
        self._placements, self._base, self._unit_name, self._names = placements, base, unit_name, names
        self._index = None

    def __len__(self):
        return len(self._names)

    def __iter__(self):
        return iter(self._names)

    def __getitem__(self, name):
        if self._index is None:
            order = np.argsort(self._unit_name, kind="stable")
            keys = self._unit_name[order]
            self._index = (order, keys)
        order, keys = self._index
        lo, hi = np.searchsorted(keys, name, "left"), np.searchsorted(keys, name, "right")
        if lo == hi:
            raise KeyError(name)
        out = []
        bounds = self._base
        for g in np.sort(order[lo:hi]).tolist():
            p = int(np.searchsorted(bounds, g, "right")) - 1
            u, off = self._placements[p]
            inst, k = divmod(g - int(bounds[p]), u.n)
            items = u.shapes[k]
            if items:
                moved = shapely.transform(np.asarray([x for _, x in items], dtype=object), lambda c: c + off[inst])
                out.extend(zip([l for l, _ in items], moved))
        return out


def _place_shapes(u: CellUnits, dx: float, dy: float, unit_names, shape_lists) -> None:
    if dx == 0 and dy == 0:
        for k, items in enumerate(u.shapes):
            shape_lists[unit_names[k]].extend(items)
        return
    for k, items in enumerate(u.shapes):
        if items:
            moved = shapely.transform(np.asarray([g for _, g in items], dtype=object), lambda c: c + (dx, dy))
            shape_lists[unit_names[k]].extend(zip([l for l, _ in items], moved))


_NO_TEXTS = frozenset()


def _group_texts(placements, base, group, n_groups) -> list:
    """The label texts on each group of joined units, distinct: a 1-tuple
    or a set per labelled group, an empty frozenset (shared) for every other."""
    texts: list = [_NO_TEXTS] * n_groups
    for (u, off), b in zip(placements, base):
        pairs = [(k, t) for k, tx in enumerate(u.texts) for t in tx]
        if not pairs:
            continue
        ks = np.array([k for k, _ in pairs], dtype=np.intp)
        starts = int(b) + np.arange(len(off), dtype=np.intp) * u.n
        groups = group[(starts[:, None] + ks[None, :]).ravel()].tolist()
        words = [t for _, t in pairs] * len(off)
        for g, t in zip(groups, words):
            got = texts[g]
            if got is _NO_TEXTS:
                texts[g] = (t,)  # most groups carry one text: a 1-tuple, not a set
            elif type(got) is tuple:
                texts[g] = {*got, t}
            else:
                got.add(t)
    return texts


def _add_junctions(placements, base, per_unit_name, nets: list) -> None:
    """Sum every placed unit's junction geometry into its net.

    Per net and device type the parts are added in the order placement,
    instance, unit (``numpy.bincount`` adds in index order), from 0, as a
    running ``JunctionGeometry`` sum would; the types of a net's dict come
    in the order first met.  Equal geometries share one (frozen) record."""
    idx, kinds, vals = [], [], []
    names: dict = {}  # device type -> code, in the order first met
    for (u, off), b in zip(placements, base):
        rows = [(k, names.setdefault(t, len(names)), (g.area_um2, g.field_perimeter_um, g.gate_perimeter_um))
                for k, jn in enumerate(u.junctions) if jn for t, g in jn.items()]
        if not rows:
            continue
        ks = np.array([k for k, _, _ in rows], dtype=np.intp)
        starts = int(b) + np.arange(len(off), dtype=np.intp) * u.n
        idx.append(per_unit_name[(starts[:, None] + ks[None, :]).ravel()])
        kinds.append(np.tile(np.array([t for _, t, _ in rows], dtype=np.intp), len(off)))
        vals.append(np.tile(np.array([v for _, _, v in rows], dtype=float), (len(off), 1)))
    if not idx:
        return
    idx, kinds, vals = np.concatenate(idx), np.concatenate(kinds), np.concatenate(vals)
    n, types = len(nets), list(names)
    firsts = np.full((len(types), n), len(idx))
    geos = []
    for j in range(len(types)):
        sel = np.flatnonzero(kinds == j)
        on = idx[sel]
        acc = np.stack([np.bincount(on, weights=vals[sel, c], minlength=n) for c in range(3)], axis=1)
        np.minimum.at(firsts[j], on, sel)
        rows = np.flatnonzero(firsts[j] < len(idx))
        geo = [None] * n
        for k, g in zip(rows.tolist(), row_objects(acc[rows], JunctionGeometry)):
            geo[k] = g
        geos.append(geo)
    has = firsts < len(idx)
    count = has.sum(axis=0)
    for j, t in enumerate(types):  # one type on the net: its dict at once
        geo = geos[j]
        for k in np.flatnonzero(has[j] & (count == 1)).tolist():
            nets[k].junctions = {t: geo[k]}
    multi = np.flatnonzero(count > 1)
    if len(multi):  # several types: in the order first met
        order = np.argsort(firsts[:, multi], axis=0, kind="stable").T.tolist()
        for k, js in zip(multi.tolist(), order):
            nets[k].junctions = {types[j]: geos[j][k] for j in js if geos[j][k] is not None}


def row_objects(values, make) -> list:
    """``make(*row)`` for each row of ``values`` (floats), one object per
    distinct row (bit pattern): ``make``'s objects must be values (frozen),
    as they are shared.

    Parameters
    ----------
    values : array_like (n, k)
    make : callable

    Returns
    -------
    list
        n objects; rows with equal bits get the same one.

    Notes
    -----
    Rows are grouped by a 64-bit hash of their bits (one sort of n
    integers) and the grouping is checked against the bits; on a
    collision the rows themselves are sorted (``numpy.unique`` with
    ``axis=0``).  O(n log n) in numpy, ``make`` called once per distinct row.

    Examples
    --------
    >>> rows = row_objects([[1.0, 2.0], [1.0, 2.0], [0.0, 2.0]], complex)
    >>> rows, rows[0] is rows[1]
    ([(1+2j), (1+2j), 2j], True)
    >>> row_objects(np.empty((0, 2)), complex)
    []
    """
    v = np.ascontiguousarray(values, dtype=float)
    if not len(v):
        return []
    bits = v.view(np.uint64).reshape(len(v), -1)
    h = np.zeros(len(v), dtype=np.uint64)
    for c in range(bits.shape[1]):  # wraps modulo 2**64
        h = h * np.uint64(0x100000001B3) ^ bits[:, c]
    _, first, inverse = np.unique(h, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
    if not np.array_equal(bits[first][inverse], bits):  # a collision: sort the rows
        _, first, inverse = np.unique(bits, axis=0, return_index=True, return_inverse=True)
        inverse = inverse.ravel()
    made = [make(*r) for r in v[first].tolist()]
    return list(map(made.__getitem__, inverse.tolist()))


def _floats(values, digits: int | None = None) -> list:
    """The values (row by row) as Python floats, ``round(v, digits)``
    when ``digits`` is given; one float object per distinct value (bit
    pattern), so that a block's repeated numbers are stored once and
    Python's rounding runs once per value."""
    return _Floats()(values, digits)


class _Floats:
    """:func:`_floats` over several calls, sharing the float objects of
    equal values (per number of digits) between them."""

    def __init__(self):
        self.known: dict[tuple, float] = {}

    def __call__(self, values, digits: int | None = None) -> list:
        v = np.ascontiguousarray(values, dtype=float).ravel()
        bits, inverse = np.unique(v.view(np.int64), return_inverse=True)
        known = self.known
        once = []
        for b, x in zip(bits.tolist(), bits.view(np.float64).tolist()):
            got = known.get((b, digits))
            if got is None:
                got = known[b, digits] = x if digits is None else round(x, digits)
            once.append(got)
        return list(map(once.__getitem__, inverse.ravel().tolist()))


_CHUNK = 1 << 16


def _devices(placements, base, unit_name, per_unit_name, nets: list, tech) -> list[Device]:
    """The placed devices, numbered by position, drain first (not the rail,
    else the earlier name); numbers rounded as Python's ``round`` does."""
    cols: dict[str, list] = {k: [] for k in ("type", "gate", "a", "b", "w", "l", "x", "y",
                                              "area_a", "perim_a", "area_b", "perim_b")}
    for (u, off), b in zip(placements, base):
        m, d = len(off), u.dev
        nd = len(d["w"])
        if nd == 0:
            continue
        shift = (int(b) + np.arange(m) * u.n).repeat(nd)
        for key in ("gate", "a", "b"):
            cols[key].append(np.tile(d[key], m) + shift)
        for key in ("type", "w", "l", "area_a", "perim_a", "area_b", "perim_b"):
            cols[key].append(np.tile(d[key], m))
        cols["x"].append((d["x"][None, :] + off[:, 0:1]).ravel())
        cols["y"].append((d["y"][None, :] + off[:, 1:2]).ravel())
    if not cols["w"]:
        return []
    c = {k: v[0] if len(v) == 1 else np.concatenate(v) for k, v in cols.items()}
    del cols
    order = np.lexsort((np.round(c["y"], 6), np.round(c["x"], 6)))
    floats = _Floats()
    role = np.array([net.role for net in nets], dtype=object)
    models = {k: (mos.models[0] if mos.models else None) for k, mos in tech.mos.items()}
    devices: list[Device] = []
    for lo in range(0, len(order), _CHUNK):  # in slices: the temporaries stay small
        part = order[lo:lo + _CHUNK]
        t = c["type"][part]
        ga, ua, ub = c["gate"][part], c["a"][part], c["b"][part]
        ia, ib = per_unit_name[ua], per_unit_name[ub]
        rail = np.where(t == "nmos", "ground", "power")
        ra, rb = role[ia] == rail, role[ib] == rail
        a_first = (ra < rb) | ((ra == rb) & (ia <= ib))  # names sort as their indices
        pick = lambda x, y: np.where(a_first, c[x][part], c[y][part])  # noqa: E731
        types = t.tolist()
        devices += map(
            Device, [f"M{k}" for k in range(lo + 1, lo + len(part) + 1)], types,
            unit_name[np.where(a_first, ua, ub)].tolist(), unit_name[ga].tolist(),
            unit_name[np.where(a_first, ub, ua)].tolist(),
            floats(c["w"][part], 9), floats(c["l"][part], 9),
            floats(pick("area_a", "area_b"), 9), floats(pick("area_b", "area_a"), 9),
            floats(pick("perim_a", "perim_b"), 9), floats(pick("perim_b", "perim_a"), 9),
            list(zip(floats(c["x"][part], 6), floats(c["y"][part], 6))), [models[k] for k in types],
        )
    return devices
