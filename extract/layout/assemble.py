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
from extract.layout.units import CellUnits, best_of, round_each
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

    g_texts: list[set] = [set() for _ in range(n_groups)]
    for (u, off), b in zip(placements, base):
        labelled = [k for k, t in enumerate(u.texts) if t]
        for i in range(len(off)):
            start = int(b) + i * u.n
            for k in labelled:
                g_texts[group[start + k]].update(u.texts[k])
    names, name_findings = names_from_texts(g_texts, g_points, tech.role_of)

    # one net per name: parts summed, location from the best group
    distinct, name_idx = np.unique(np.asarray(names, dtype=object), return_inverse=True)
    name_idx = name_idx.ravel()
    loc = best_of(name_idx, g_diff, g_area, g_points, len(distinct))
    per_unit_name = name_idx[group]
    sums = np.zeros((len(distinct), 6))
    np.add.at(sums, per_unit_name, cap)
    nets: dict[str, Net] = {}
    at = g_points[loc] if len(distinct) else np.empty((0, 2))
    for k, (name, x, y) in enumerate(zip(distinct.tolist(), round_each(at[:, 0], 6), round_each(at[:, 1], 6))):
        nets[name] = Net(name=name, role=tech.role_of(name), cap=CapParts(*sums[k]), location_um=(x, y))
    for g, texts in enumerate(g_texts):
        if texts:
            net = nets[names[g]]
            net.labels = tuple(sorted(set(net.labels) | texts))
            net.labelled = True
    unit_name = distinct[per_unit_name]
    single = len(placements) == 1 and len(placements[0][1]) == 1
    shape_lists = {name: [] for name in nets} if single else PlacedShapes(placements, base, unit_name, list(nets))
    findings: list[Finding] = []
    _net_junctions(placements, base, per_unit_name, distinct, nets)
    for (u, off), b in zip(placements, base):
        for i, (dx, dy) in enumerate(off.tolist()):
            start = int(b) + i * u.n
            for f in u.findings:
                loc_f = None if f.location_um is None else (f.location_um[0] + dx, f.location_um[1] + dy)
                findings.append(Finding(f.message, loc_f))
            if shapes and single:
                _place_shapes(u, dx, dy, unit_name[start : start + u.n], shape_lists)
    findings.extend(name_findings)
    devices = _devices(placements, base, unit_name, nets, tech)
    return Circuit(cell=cell, nets=dict(sorted(nets.items())), devices=devices, findings=findings, source=path,
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


def _net_junctions(placements, base, per_unit_name, distinct, nets) -> None:
    """Sum the junction geometry of every placed unit into its net.

    The sums run in the order placement, instance, unit, type (``np.add.at``
    is sequential), and each net's dict holds its types in order of their
    first unit: what adding the records one by one gives.
    """
    types = sorted({t for u, _ in placements for jn in u.junctions for t in jn})
    code_of = {t: i for i, t in enumerate(types)}
    units, codes, values = [], [], []
    for (u, off), b in zip(placements, base):
        rows = [(k, code_of[t], geo.area_um2, geo.field_perimeter_um, geo.gate_perimeter_um)
                for k, jn in enumerate(u.junctions) for t, geo in jn.items()]
        if not rows:
            continue
        r = np.array(rows, dtype=float)
        m = len(off)
        units.append((int(b) + np.arange(m)[:, None] * u.n + r[:, 0].astype(np.intp)[None, :]).ravel())
        codes.append(np.tile(r[:, 1].astype(np.intp), m))
        values.append(np.tile(r[:, 2:], (m, 1)))
    if not units:
        return
    net, code = per_unit_name[np.concatenate(units)], np.concatenate(codes)
    sums = np.zeros((len(distinct), len(types), 3))
    np.add.at(sums, (net, code), np.concatenate(values))
    _, first = np.unique(net * len(types) + code, return_index=True)
    first.sort()
    net, code = net[first], code[first]
    for k, c, vals in zip(net.tolist(), code.tolist(), sums[net, code].tolist()):
        nets[distinct[k]].junctions[types[c]] = JunctionGeometry(*vals)


def _devices(placements, base, unit_name, nets, tech) -> list[Device]:
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
    c = {k: np.concatenate(v) for k, v in cols.items()}
    order = np.lexsort((np.round(c["y"], 6), np.round(c["x"], 6)))
    gate, a, b = (unit_name[c[k][order]].tolist() for k in ("gate", "a", "b"))
    # Python's round on Python floats, as the records always had
    w, l, x, y, area_a, perim_a, area_b, perim_b = (
        round_each(c[k][order], r)
        for k, r in (("w", 9), ("l", 9), ("x", 6), ("y", 6), ("area_a", 9), ("perim_a", 9), ("area_b", 9), ("perim_b", 9))
    )
    models = {t: (mos.models[0] if mos.models else None) for t, mos in tech.mos.items()}
    role = {name: net.role for name, net in nets.items()}
    devices = []
    for n, t in enumerate(c["type"][order].tolist()):
        rail = "ground" if t == "nmos" else "power"
        if (role[a[n]] == rail, a[n]) <= (role[b[n]] == rail, b[n]):  # drain first: not the rail, else the earlier name
            dn, ad, pd, sn, as_, ps = a[n], area_a[n], perim_a[n], b[n], area_b[n], perim_b[n]
        else:
            dn, ad, pd, sn, as_, ps = b[n], area_b[n], perim_b[n], a[n], area_a[n], perim_a[n]
        devices.append(Device(
            name=f"M{n + 1}", type=t, drain=dn, gate=gate[n], source=sn, w_um=w[n], l_um=l[n],
            ad_um2=ad, as_um2=as_, pd_um=pd, ps_um=ps, location_um=(x[n], y[n]), model=models[t],
        ))
    return devices
