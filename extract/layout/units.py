"""A flattened cell extracted up to, but not including, net naming.

A *unit* is one connected component of the cell's conductors (diffusion
pieces, poly, metal joined through cuts).  Everything that does not depend
on net names is computed here once per cell: per unit its label texts,
capacitance parts, junction geometry, conductor shapes and its
representative point; per device its type, W/L, the units of its gate and
channel ends, and the AD/PD each end carries.  Naming and the
:class:`~extract.circuit.Circuit` are made by
:func:`extract.layout.assemble.assemble`, from one placement of the cell
(flat extraction) or many (hierarchical extraction).

Representative point of a unit: the point of its largest diffusion piece,
else of its largest conductor; areas are compared rounded to 1e-9 µm²
(so float noise never decides) and ties go to the lowest y, then x.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely

from extract.capacitance import gate_parts, junction_parts, overlap_per_side
from extract.circuit import JunctionGeometry
from extract.errors import Finding
from extract.layout.connectivity import Conductors, connect, label_hits
from extract.layout.devices import find_channels
from extract.layout.geometry import merge_parts, polygons_from_arrays, representative_points, subtract_overlapping
from extract.layout.reader import FlatLayout
from extract.tech import Tech

__all__ = ["CellUnits", "cell_units", "layer_shapes", "best_of", "round_each"]


@dataclass
class CellUnits:
    """One cell's extraction before naming (see the module notes).

    Attributes
    ----------
    cell, path : str
    texts : list of tuple of str
        Label texts on each unit.
    points : ndarray (n, 2)
        Representative point of each unit.
    best_diff : ndarray of bool
        Whether the unit's point is that of a diffusion piece.
    best_area : ndarray of float
        Area of the conductor giving the point, rounded to 1e-9 µm².
    cap : ndarray (n, 6)
        Capacitance parts per unit, in :data:`extract.circuit.CAP_PART_NAMES` order.
    junctions : list of dict of str to JunctionGeometry
    shapes : list of list of (str, Polygon)
    layer_units : dict of str to ndarray
        For each poly and metal layer, the unit of each of its merged shapes
        (in the order of :func:`layer_shapes`).
    dev : dict of str to ndarray
        One entry per device, in order of position (x, then y, rounded
        to 1e-6 µm): ``type``, ``gate``, ``a``, ``b`` (units), ``w``, ``l``,
        ``x``, ``y``, ``area_a``, ``perim_a``, ``area_b``, ``perim_b`` (the
        AD/PD each end carries once pieces are given to their first device).
    findings : list of Finding
        Findings that do not depend on naming (channels, stray labels).
    """

    cell: str
    path: str
    texts: list
    points: np.ndarray
    best_diff: np.ndarray
    best_area: np.ndarray
    cap: np.ndarray
    junctions: list
    shapes: list
    layer_units: dict
    dev: dict
    findings: list = field(default_factory=list)

    @property
    def n(self) -> int:
        return len(self.texts)


def layer_shapes(flat: FlatLayout, tech: Tech) -> dict:
    """Merged (disjoint) polygons of every tech layer of a flattened cell."""
    return {
        layer.name: merge_parts(polygons_from_arrays(flat.polygons.get(layer.gds, [])))
        for layer in tech.layers.values()
    }


def _union(arrays):
    arrays = [a for a in arrays if len(a)]
    if not arrays:
        return np.empty(0, dtype=object)
    if len(arrays) == 1:
        return arrays[0]
    return merge_parts(np.concatenate(arrays))


def round_each(values, ndigits: int) -> list:
    """``[round(float(v), ndigits) for v in values]``, computed once per distinct value.

    Python's ``round`` rounds the exact binary value to a decimal place
    (numpy's multiplies first, and can differ in the last bit); an array of
    placed cells repeats few distinct values, so each is rounded once and
    the results spread with numpy.  Values are told apart by their bits, so
    -0.0 stays -0.0.

    Examples
    --------
    >>> round_each(np.array([0.1 + 0.2, 0.1 + 0.2, -0.0, 2.675]), 2)
    [0.3, 0.3, -0.0, 2.67]

    Notes
    -----
    One ``np.unique`` (O(n log n)) and one ``round`` per distinct value.
    """
    values = np.ascontiguousarray(values, dtype=float)
    if len(values) == 0:
        return []
    bits, inverse = np.unique(values.view(np.int64), return_inverse=True)
    rounded = np.array([round(v, ndigits) for v in bits.view(float).tolist()])
    return rounded[inverse.ravel()].tolist()


def best_of(group: np.ndarray, is_diff: np.ndarray, area: np.ndarray, points: np.ndarray, n: int) -> np.ndarray:
    """Index of the representative member of each group 0..n-1 (-1 if empty).

    The member with a diffusion piece first, then the largest area rounded
    to 1e-9, then the lowest y, then the lowest x.

    Examples
    --------
    >>> best_of(np.array([0, 0, 1]), np.array([False, True, False]), np.array([5.0, 1.0, 2.0]),
    ...         np.array([[0, 0], [1, 1], [2, 2]], float), 2).tolist()
    [1, 2]
    >>> best_of(np.array([0, 0]), np.zeros(2, bool), np.ones(2), np.array([[0, 3], [5, 1]], float), 1).tolist()
    [1]

    Notes
    -----
    One lexsort, O(m log m) for m members.
    """
    out = np.full(n, -1)
    if len(group) == 0:
        return out
    keys = (-np.round(points[:, 0], 6), -np.round(points[:, 1], 6), np.round(area, 9), is_diff, group)
    order = np.lexsort(keys)
    last = np.r_[group[order][1:] != group[order][:-1], True]
    out[group[order][last]] = order[last]
    return out


def cell_units(flat: FlatLayout, tech: Tech, shapes: dict | None = None) -> CellUnits:
    """Extract a flattened cell up to naming.

    Parameters
    ----------
    flat : FlatLayout
    tech : Tech
    shapes : dict, optional
        The merged layer shapes (:func:`layer_shapes`) when already made.

    Returns
    -------
    CellUnits

    Notes
    -----
    The steps of the README's "Extraction": channels and pieces per
    diffusion layer, conductors joined through cuts (sparse connected
    components), label hits, wire and junction capacitance per conductor,
    devices with gate and overlap capacitance.  O(n log n) in the shapes;
    the per-unit sums are ``np.add.at`` calls.

    Examples
    --------
    >>> from extract.layout.reader import FlatLayout
    >>> from extract.techfile import load_tech
    >>> import os
    >>> tech = load_tech(os.path.join(os.path.dirname(__file__), "..", "..", "sample_layouts", "dsk18.toml"))
    >>> act, poly = tech.layers["active"].gds, tech.layers["poly"].gds
    >>> box = lambda x0, y0, x1, y1: np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], float)
    >>> u = cell_units(FlatLayout("x.gds", "T", 0.001, {act: [box(0, 0, 3, 1)], poly: [box(1, -0.5, 1.2, 1.5)]}), tech)
    >>> u.n, [round(float(v), 6) for v in (u.dev["w"][0], u.dev["l"][0])]
    (3, [1.0, 0.2])
    """
    grid = flat.grid_um
    if shapes is None:
        shapes = layer_shapes(flat, tech)
    kinds = {name: layer.kind for name, layer in tech.layers.items()}
    of_kind = lambda k: [n for n in tech.layers if kinds[n] == k]  # noqa: E731
    poly_all = _union([shapes[n] for n in of_kind("poly")])
    diff_all = _union([shapes[n] for n in of_kind("diffusion")])
    implants = tuple(_union([shapes[n] for n in of_kind(k)]) for k in ("pimplant", "nimplant", "nwell"))

    findings: list[Finding] = []
    chans, pieces = [], []
    for name in of_kind("diffusion"):
        ch, pc, f = find_channels(name, shapes[name], poly_all, implants, tol=grid / 2)
        chans.append(ch)
        pieces.append(pc)
        findings.extend(f)

    geoms, layer_of, piece_offset = [], [], []
    for pc in pieces:
        piece_offset.append(len(geoms))
        geoms.extend(pc.geoms)
        layer_of.extend([pc.layer] * len(pc.geoms))
    wire_layers = [n for n in tech.layers if kinds[n] in ("poly", "metal")]
    layer_start = {}
    for name in wire_layers:
        layer_start[name] = len(geoms)
        geoms.extend(shapes[name])
        layer_of.extend([name] * len(shapes[name]))
    geoms = np.asarray(geoms, dtype=object)
    conductors = Conductors(geoms, np.asarray(layer_of, dtype=object), representative_points(geoms))
    cuts = [(shapes[name], tech.layers[name].joins) for name in of_kind("cut")]
    net_of = connect(conductors, cuts)
    n = int(net_of.max()) + 1 if len(net_of) else 0

    area = shapely.area(geoms) if len(geoms) else np.empty(0)
    is_diff = np.isin(conductors.layer, of_kind("diffusion")) if len(geoms) else np.empty(0, bool)
    best = best_of(net_of, is_diff, area, conductors.points, n)
    points = conductors.points[best] if n else np.empty((0, 2))

    label_layers = {nm: set(layer.labels) for nm, layer in tech.layers.items() if layer.labels}
    hits, f = label_hits(conductors, flat.labels, label_layers)
    findings.extend(f)
    texts: list[set] = [set() for _ in range(n)]
    for cond, text in hits:
        texts[net_of[cond]].add(text)

    cap = np.zeros((n, 6))
    unit_shapes: list[list] = [[] for _ in range(n)]
    for i, g in enumerate(geoms):
        unit_shapes[net_of[i]].append((conductors.layer[i], g))
    for name in wire_layers:
        idx = conductors.of_layer(name)
        if len(idx) == 0:
            continue
        g = geoms[idx]
        if kinds[name] == "poly" and len(diff_all):
            a = shapely.area(subtract_overlapping(g, diff_all))
            p = shapely.length(subtract_overlapping(shapely.boundary(g), diff_all))
        else:
            a, p = shapely.area(g), shapely.length(g)
        layer = tech.layers[name]
        np.add.at(cap[:, 3], net_of[idx], layer.area * a + layer.fringe * p)

    junctions = _junctions(tech, pieces, net_of[: sum(len(pc.geoms) for pc in pieces)], cap)
    dev = _devices(tech, chans, pieces, piece_offset, conductors, net_of, cap)
    return CellUnits(
        cell=flat.cell,
        path=flat.path,
        texts=[tuple(sorted(t)) for t in texts],
        points=points,
        best_diff=is_diff[best] if n else np.empty(0, bool),
        best_area=np.round(area[best], 9) if n else np.empty(0),
        cap=cap,
        junctions=junctions,
        shapes=unit_shapes,
        layer_units={nm: net_of[layer_start[nm] : layer_start[nm] + len(shapes[nm])] for nm in wire_layers},
        dev=dev,
        findings=findings,
    )


def _junctions(tech, pieces, piece_unit, cap) -> list:
    """Junction geometry per unit and type (rounded per piece to 1e-9, as
    reported) and the junction capacitance added to ``cap[:, :3]``.

    The sums run piece by piece in order (``np.add.at`` is sequential), and
    each unit's dict holds its types in order of their first piece.
    """
    n = len(cap)
    junctions: list[dict] = [{} for _ in range(n)]
    if len(piece_unit) == 0:
        return junctions
    names, code = np.unique(np.concatenate([pc.type for pc in pieces]).astype(str), return_inverse=True)
    code = code.ravel()
    # Python's round (correctly rounded decimal), as the records always had
    geo = np.array([round_each(np.concatenate([getattr(pc, f) for pc in pieces]), 9)
                    for f in ("area", "field_edge", "gate_edge")]).T
    sums = np.zeros((n, len(names), 3))
    np.add.at(sums, (piece_unit, code), geo)
    parts = np.empty_like(geo)
    for c, name in enumerate(names.tolist()):
        mask = code == c
        jp = junction_parts(tech.mos[name], JunctionGeometry(*geo[mask].T))
        parts[mask] = np.stack([jp.junction_area, jp.junction_sidewall, jp.junction_gate_edge], axis=1)
    np.add.at(cap[:, :3], piece_unit, parts)
    _, first = np.unique(piece_unit * len(names) + code, return_index=True)
    first.sort()
    units, codes = piece_unit[first], code[first]
    for k, c, vals in zip(units.tolist(), codes.tolist(), sums[units, codes].tolist()):
        junctions[k][str(names[c])] = JunctionGeometry(*vals)
    return junctions


def _devices(tech, chans, pieces, piece_offset, conductors, net_of, cap) -> dict:
    """Device arrays in order of position; each piece's junction given to
    the first device that uses it; gate and overlap capacitance added.

    Notes
    -----
    Array operations throughout: the order is a stable sort on the
    position rounded with Python's ``round`` (the same order as sorting
    the records), a piece's first device is its first occurrence in the
    interleaved (a, b) sequence, and the capacitance sums run device by
    device with ``np.add.at`` in that order, as the records were summed.
    """
    keys = ("type", "gate", "a", "b", "w", "l", "x", "y", "area_a", "perim_a", "area_b", "perim_b")
    types = {"type": object, "gate": np.intp, "a": np.intp, "b": np.intp}
    kept = [(ch, off) for ch, off in zip(chans, piece_offset) if len(ch.geoms)]
    if not kept:
        return {k: np.asarray([], dtype=types.get(k, float)) for k in keys}
    poly_idx = np.flatnonzero(np.isin(conductors.layer, [n for n, l in tech.layers.items() if l.kind == "poly"]))
    poly_tree = shapely.STRtree(conductors.geoms[poly_idx]) if len(poly_idx) else None
    gates = []
    for ch, _ in kept:
        pi, gi = poly_tree.query(shapely.points(ch.points), predicate="intersects")
        gate_of = np.full(len(ch.geoms), -1)
        gate_of[pi[::-1]] = poly_idx[gi[::-1]]  # first hit wins
        gates.append(net_of[gate_of])
    cat = lambda f: np.concatenate([f(ch, off) for ch, off in kept])  # noqa: E731
    points = cat(lambda ch, off: ch.points)
    # stable: ties keep the channel order
    order = np.lexsort((np.array(round_each(points[:, 1], 6)), np.array(round_each(points[:, 0], 6))))
    t = cat(lambda ch, off: ch.type).astype(str).astype(object)[order]
    a = cat(lambda ch, off: off + ch.piece_a)[order]
    b = cat(lambda ch, off: off + ch.piece_b)[order]
    edge_a, edge_b = cat(lambda ch, off: ch.edge_a)[order], cat(lambda ch, off: ch.edge_b)[order]
    w, l = cat(lambda ch, off: ch.w)[order], cat(lambda ch, off: ch.l)[order]
    gate = np.concatenate(gates)[order]
    piece_area = np.concatenate([pc.area for pc in pieces]).astype(float)
    piece_field = np.concatenate([pc.field_edge for pc in pieces]).astype(float)
    # a piece's junction goes to the first device, in this order, that uses it (side a before b)
    seq = np.stack([a, b], axis=1).ravel()
    owner = np.zeros(len(seq), bool)
    owner[np.unique(seq, return_index=True)[1]] = True
    own_a, own_b = owner[0::2], owner[1::2]
    cols = {
        "type": t, "gate": gate, "a": net_of[a], "b": net_of[b], "w": w, "l": l,
        "x": points[order, 0], "y": points[order, 1],
        "area_a": np.where(own_a, piece_area[a], 0.0), "perim_a": np.where(own_a, piece_field[a] + edge_a, edge_a),
        "area_b": np.where(own_b, piece_area[b], 0.0), "perim_b": np.where(own_b, piece_field[b] + edge_b, edge_b),
    }
    # gate and overlap on the gate, overlap on each side, summed device by
    # device (column 5 in the order gate, a, b)
    on_gate, overlap, per_side = np.empty(len(t)), np.empty(len(t)), np.empty(len(t))
    for name in dict.fromkeys(t.tolist()):
        mask = t == name
        g = gate_parts(tech.mos[name], w[mask], l[mask])
        on_gate[mask], overlap[mask] = g.gate, g.overlap
        per_side[mask] = overlap_per_side(tech.mos[name], w[mask]).overlap
    np.add.at(cap[:, 4], gate, on_gate)
    np.add.at(cap[:, 5], np.stack([gate, cols["a"], cols["b"]], axis=1).ravel(),
              np.stack([overlap, per_side, per_side], axis=1).ravel())
    return {k: np.asarray(cols[k], dtype=types.get(k, float)) for k in keys}
