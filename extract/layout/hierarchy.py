"""Hierarchical extraction: each distinct cell once, its instances stitched.

Applies to a top cell whose only contents on the tech layers are
references (single or arrayed) to other cells, placed by translation only
(no rotation, reflection or magnification, offsets on the database grid).
Each referenced cell is flattened and extracted once
(:func:`extract.layout.units.cell_units`); its units and devices are placed
at every instance and named by :func:`extract.layout.assemble.assemble`
with the flat rules, so names, devices and capacitance parts are those of
the flat extraction.

The rule (when stitching equals flattening).  Instances interact only
where their bounding boxes meet.  For each distinct *pair context* (cell
A, cell B, offset of B from A) among meeting instances, once:

- diffusion, poly and cut shapes of A and B do not meet (not even at an
  edge), on any layer of those kinds; poly of one does not meet diffusion
  of the other; no implant or well shape of one meets diffusion of the
  other; no cut of one overlaps (positive area) a conductor of the other
  it joins; no label of one lies on a shape of the other's labelled layer;
- metal shapes of one layer do not overlap (positive area).  Where they
  touch along an edge of length s > 0, flattening would merge them: the
  two units are joined into one net, the net's wire capacitance loses
  ``2·fringe·s`` (the merged shape's perimeter is the sum less twice the
  shared edge), and the merged shape competes for the net's point.

Each check is an intersection test whose "no" proves that the flat
extraction sees each instance's geometry as it sees the cell alone: the
same merged shapes, channels, pieces, implant tests, cut joins and label
hits.  When any check fails, or the top cell is not of this form,
:func:`extract_hierarchical` returns None and the caller flattens (never
a wrong answer).

Names are the flat names (the contract): devices ``M1`` ... in order of
position, nets by their labels and points, so the JSON is the same and
deterministic.  Findings are the flat findings, per instance in instance
order (references in file order, array elements in gdstk's order), then
the naming findings.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from extract.circuit import Circuit
from extract.errors import Finding
from extract.layout.assemble import assemble
from extract.layout.geometry import parts
from extract.layout.reader import LayoutFile, check_flat_size, flatten_cell, top_cells
from extract.layout.units import cell_units, layer_shapes
from extract.tech import Tech

__all__ = ["instances_of", "extract_hierarchical", "translated"]


def instances_of(layout: LayoutFile, cell: str, wanted: set) -> dict | None:
    """Offsets (µm, on the grid) of each cell placed in ``cell``, or None
    when ``cell`` is not a translation-only placement of other cells.

    Parameters
    ----------
    layout : LayoutFile
    cell : str
    wanted : set of (int, int)
        The tech layers (shapes and labels); the top cell must have none.

    Returns
    -------
    dict of str to ndarray (m, 2), or None
    """
    lib = layout.lib
    top = next((c for c in lib.cells if c.name == cell), None)
    if top is None or not top.references:
        return None
    for p in top.polygons:
        if (p.layer, p.datatype) in wanted:
            return None
    for path in top.paths:
        if any((l, d) in wanted for l, d in zip(path.layers, path.datatypes)):
            return None
    for lab in top.labels:
        if (lab.layer, lab.texttype) in wanted:
            return None
    grid = lib.precision / 1e-6
    out: dict[str, list] = {}
    for ref in top.references:
        if isinstance(ref.cell, str) or ref.x_reflection or (ref.magnification or 1.0) != 1.0:
            return None
        if abs(math.remainder(ref.rotation or 0.0, 2 * math.pi)) > 1e-12:
            return None
        origin = np.asarray(ref.origin, dtype=float)
        rep = ref.repetition
        offs = origin + (np.asarray(rep.get_offsets(), dtype=float) if rep is not None and rep.size else np.zeros((1, 2)))
        steps = offs / grid
        if not np.all(np.abs(steps - np.round(steps)) < 1e-6):
            return None
        out.setdefault(ref.cell.name, []).append(np.round(steps) * grid)
    return {name: np.concatenate(v) for name, v in sorted(out.items())}


def _meets(a, b, interior=False):
    """Index pairs (i of a, j of b) of shapes that meet (or overlap)."""
    if len(a) == 0 or len(b) == 0:
        return np.empty(0, np.intp), np.empty(0, np.intp)
    j, i = shapely.STRtree(b).query(a, predicate="intersects")
    if interior and len(i):
        keep = ~shapely.touches(a[j], b[i])
        return j[keep], i[keep]
    return j, i


def _pair(tech, A, B, d):
    """The rule for cell A at 0 and cell B at offset ``d``: None when
    flattening could differ, else the touching metal
    ``(layer, shape of A, shape of B, shared length)``."""
    kinds = {n: l.kind for n, l in tech.layers.items()}
    sa, la = A
    sb = {n: translated(g, np.tile(d, (len(g), 1))) for n, g in B[0].items()}
    lb = [(lab[0], lab[1] + d[0], lab[2] + d[1], lab[3]) for lab in B[1]]

    def cat(shapes, names):
        arrays = [shapes[n] for n in names if len(shapes[n])]
        return np.concatenate(arrays) if arrays else np.empty(0, dtype=object)

    diff = [n for n in tech.layers if kinds[n] == "diffusion"]
    poly = [n for n in tech.layers if kinds[n] == "poly"]
    implant = [n for n in tech.layers if kinds[n] in ("pimplant", "nimplant", "nwell")]
    for n in tech.layers:
        if kinds[n] in ("diffusion", "poly", "cut") and len(_meets(sa[n], sb[n])[0]):
            return None
    for x, y in ((sa, sb), (sb, sa)):
        if len(_meets(cat(x, poly), cat(y, diff + poly))[0]) or len(_meets(cat(x, implant), cat(y, diff))[0]):
            return None
        for n in tech.layers:
            if kinds[n] == "cut" and len(_meets(x[n], cat(y, list(tech.layers[n].joins)), interior=True)[0]):
                return None
    for labs, shapes in ((la, sb), (lb, sa)):
        for text, x, y, pair in labs:
            for n, layer in tech.layers.items():
                if pair in layer.labels and len(shapes[n]) and shapely.intersects_xy(shapes[n], x, y).any():
                    return None
    touching = []
    for n in tech.layers:
        if kinds[n] != "metal":
            continue
        i, j = _meets(sa[n], sb[n])
        if len(i) == 0:
            continue
        if (~shapely.touches(sa[n][i], sb[n][j])).any():
            return None
        shared = shapely.length(shapely.intersection(sa[n][i], sb[n][j]))
        touching += [(n, int(p), int(q), float(s)) for p, q, s in zip(i, j, shared) if s > 0]
    return touching


def extract_hierarchical(layout: LayoutFile, tech: Tech, cell: str | None, wanted: set) -> Circuit | None:
    """Extract ``cell`` by its instances, or None to flatten (see the module).

    Parameters
    ----------
    layout : LayoutFile
    tech : Tech
    cell : str or None
        None: the single top cell.
    wanted : set of (int, int)
        The tech layers.

    Returns
    -------
    Circuit or None

    Notes
    -----
    Each distinct cell is flattened and extracted once.  Instance boxes go
    into one STR-tree; each distinct pair context is checked once by the
    rule; joins and fixes are replicated to every pair with numpy.
    O(D + P log P + I log I) for D the distinct cells' shapes, P the
    placed units and devices, I the instances.

    Examples
    --------
    >>> import os, tempfile
    >>> from extract.layout.reader import open_layout
    >>> from extract.layout.pipeline import tech_layers
    >>> from extract.techfile import load_tech
    >>> from sample_layouts.make_samples import nand3_array
    >>> root = os.path.join(os.path.dirname(__file__), "..", "..")
    >>> tech = load_tech(os.path.join(root, "sample_layouts", "dsk18.toml"))
    >>> path = os.path.join(tempfile.mkdtemp(), "a.gds")
    >>> nand3_array(3, 2).write_gds(path)
    >>> c = extract_hierarchical(open_layout(path), tech, None, tech_layers(tech))
    >>> len(c.devices), c.devices[0].name
    (48, 'M1')
    """
    if cell is None:
        tops = top_cells(layout.graph)
        if len(tops) != 1:
            return None
        cell = tops[0]
    if cell not in layout.graph:
        return None
    check_flat_size(layout, cell)  # the limits hold before any work, whichever path runs
    placed = instances_of(layout, cell, wanted)
    if placed is None:
        return None
    names = list(placed)
    flats = [flatten_cell(layout, n, layers=wanted) for n in names]
    shapes = [layer_shapes(f, tech) for f in flats]
    units = [cell_units(f, tech, s) for f, s in zip(flats, shapes)]
    labels = [[(lab.text, lab.x, lab.y, lab.layer) for lab in f.labels] for f in flats]

    # instance table: cell index, offset, box, first global unit
    cell_of = np.concatenate([np.full(len(placed[n]), k) for k, n in enumerate(names)])
    offs = np.concatenate([placed[n] for n in names])
    counts = [len(placed[n]) for n in names]
    first_unit = np.concatenate([b + np.arange(m) * u.n for b, m, u in
                                 zip(np.cumsum([0] + [m * u.n for m, u in zip(counts, units)])[:-1], counts, units)])
    bounds = []
    for s, labs in zip(shapes, labels):
        all_g = [g for arr in s.values() for g in arr] + [shapely.Point(x, y) for _, x, y, _ in labs]
        bounds.append(shapely.total_bounds(np.asarray(all_g, dtype=object)) if all_g else np.full(4, np.nan))
    bounds = np.asarray(bounds)[cell_of] + np.c_[offs, offs]
    live = np.flatnonzero(~np.isnan(bounds[:, 0]))  # instances of cells with nothing on the tech layers: none
    boxes = shapely.box(*bounds[live].T)
    i, j = (live[k] for k in shapely.STRtree(boxes).query(boxes, predicate="intersects"))
    keep = i < j
    i, j = i[keep], j[keep]

    joins, fixes, members = [], [], []
    if len(i):
        grid = layout.lib.precision / 1e-6
        d = np.round((offs[j] - offs[i]) / grid).astype(np.int64)
        # normalise: lower cell index first; for one cell, offset positive in (x, then y)
        neg = (d[:, 0] < 0) | ((d[:, 0] == 0) & (d[:, 1] < 0))
        swap = (cell_of[i] > cell_of[j]) | ((cell_of[i] == cell_of[j]) & neg)
        i, j = np.where(swap, j, i), np.where(swap, i, j)
        d = np.where(swap[:, None], -d, d)
        key = np.c_[cell_of[i], cell_of[j], d]
        contexts, which = np.unique(key, axis=0, return_inverse=True)
        which = which.ravel()
        for c, (ca, cb, dx, dy) in enumerate(contexts.tolist()):
            touching = _pair(tech, (shapes[ca], labels[ca]), (shapes[cb], labels[cb]), (dx * grid, dy * grid))
            if touching is None:
                return None
            sel = np.flatnonzero(which == c)
            for layer, p, q, s in touching:
                ua = first_unit[i[sel]] + units[ca].layer_units[layer][p]
                ub = first_unit[j[sel]] + units[cb].layer_units[layer][q]
                joins.append(np.c_[ua, ub])
                fixes.append(np.c_[ua, np.full(len(sel), -2.0 * tech.layers[layer].fringe * s)])
                members.append((layer, ca, p, i[sel], cb, q, j[sel]))
    extra = _merged_points(members, shapes, offs, first_unit, units) if members else None
    circuit = assemble(
        [(u, placed[n]) for u, n in zip(units, names)], tech, cell, layout.path,
        joins=np.concatenate(joins) if joins else None,
        wire_fix=[(int(u), float(v)) for u, v in np.concatenate(fixes)] if fixes else None,
        extra=extra,
    )
    for kind in ("diffusion", "poly"):
        layers = [n for n, layer in tech.layers.items() if layer.kind == kind]
        if not any(f.polygons.get(tech.layers[n].gds) for f in flats for n in layers):
            circuit.findings.extend(
                Finding(f"tech layer {n} {list(tech.layers[n].gds)} has no shapes in cell {cell}") for n in layers
            )
    return circuit


def translated(geoms, offsets):
    """Each geometry moved by its own offset, in one vectorised call.

    >>> from shapely import box
    >>> [g.bounds for g in translated(np.array([box(0, 0, 1, 1)] * 2), np.array([[0.0, 0.0], [2.0, 1.0]]))]
    [(0.0, 0.0, 1.0, 1.0), (2.0, 1.0, 3.0, 2.0)]
    """
    geoms = np.asarray(geoms, dtype=object)
    if len(geoms) == 0:
        return geoms
    per = np.repeat(np.asarray(offsets, dtype=float), shapely.get_num_coordinates(geoms), axis=0)
    return shapely.transform(geoms, lambda c: c + per)


def _merged_points(members, shapes, offs, first_unit, units):
    """``(global unit, area, x, y)`` of every shape that touching metal of
    several instances forms when merged (a candidate for its net's point).

    Nodes are (layer, instance, cell, shape); touching pairs are edges;
    each connected group is unioned once (shapely ``union_all``)."""
    node: dict[tuple, int] = {}
    edges = []
    for layer, ca, p, ia, cb, q, jb in members:
        for x, y in zip(ia.tolist(), jb.tolist()):
            a = node.setdefault((layer, x, ca, p), len(node))
            b = node.setdefault((layer, y, cb, q), len(node))
            edges.append((a, b))
    e = np.asarray(edges)
    n = len(node)
    _, comp = connected_components(coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(n, n)), directed=False)
    keys = list(node)
    geoms = np.empty(n, dtype=object)
    for layer in {k[0] for k in keys}:
        idx = [t for t, k in enumerate(keys) if k[0] == layer]
        base = np.asarray([shapes[keys[t][2]][layer][keys[t][3]] for t in idx], dtype=object)
        geoms[idx] = translated(base, offs[[keys[t][1] for t in idx]])
    unit = np.asarray([first_unit[k[1]] + units[k[2]].layer_units[k[0]][k[3]] for k in keys])
    order = np.argsort(comp, kind="stable")
    cuts = np.flatnonzero(np.diff(comp[order])) + 1
    out = []
    has_diff = np.zeros(len(unit), bool)
    for t, k in enumerate(keys):
        has_diff[t] = units[k[2]].best_diff[units[k[2]].layer_units[k[0]][k[3]]]
    for group in np.split(order, cuts):
        if has_diff[group].any():
            continue  # the net has diffusion, whose piece gives its point: no union needed
        for part in parts(shapely.union_all(geoms[group])):
            x, y = shapely.get_coordinates(shapely.point_on_surface(part))[0]
            out.append((int(unit[group[0]]), float(part.area), float(x), float(y)))
    return out
