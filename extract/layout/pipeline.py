"""The extraction pipeline: layout cell + tech -> :class:`Circuit`.

Steps, each a pure function of the one before:

1. :func:`extract.layout.reader.read_layout` — flatten the cell, µm.
2. merge every layer's shapes (:func:`extract.layout.geometry.merge_parts`);
3. :func:`extract.layout.devices.find_channels` — transistors and source/drain pieces;
4. :func:`extract.layout.connectivity.connect` / ``name_nets`` — nets and names;
5. capacitance per net with :mod:`extract.capacitance`;
6. devices with AD/AS/PD/PS, each junction given to exactly one device.
"""

from __future__ import annotations

import warnings

import numpy as np
import shapely
import shapely.errors

from extract.capacitance import gate_parts, junction_parts, overlap_per_side, wire_parts
from extract.circuit import Circuit, Device, JunctionGeometry, Net
from extract.layout.connectivity import Conductors, connect, name_nets
from extract.errors import Finding, InputError
from extract.layout.devices import find_channels
from extract.layout.geometry import merge_parts, polygons_from_arrays, representative_points, subtract_overlapping
from extract.layout.reader import FlatLayout, LayoutFile, flatten_cell, read_layout
from extract.tech import Tech

__all__ = ["extract_layout", "extract_cell", "extract_flat", "tech_layers"]


def extract_layout(path: str, tech: Tech, cell: str | None = None) -> Circuit:
    """Extract devices, nets and per-net capacitance from a layout cell.

    Parameters
    ----------
    path : str
        GDSII or OASIS file.
    tech : Tech
    cell : str, optional
        Cell name; the single top cell when omitted.

    Returns
    -------
    Circuit

    Raises
    ------
    InputError
        For every problem with the layout file (see :func:`read_layout`).
    """
    return extract_flat(read_layout(path, cell, layers=tech_layers(tech)), tech)


def tech_layers(tech: Tech) -> set[tuple[int, int]]:
    """The ``(layer, datatype)`` pairs the tech file uses (shapes and text).

    Raises
    ------
    InputError
        The tech file has no ``[layers]`` (it can describe netlists only).
    """
    if not tech.layers:
        raise InputError(tech.path, "has no [layers] tables, so it can read netlists only; "
                                    "describe the drawn layers to read a layout", "layers")
    wanted = {layer.gds for layer in tech.layers.values()}
    return wanted | {pair for layer in tech.layers.values() for pair in layer.labels}


def extract_cell(layout: LayoutFile, tech: Tech, cell: str | None = None) -> Circuit:
    """Like :func:`extract_layout`, from a file already opened with
    :func:`extract.layout.reader.open_layout` (for many cells of one library)."""
    return extract_flat(flatten_cell(layout, cell, layers=tech_layers(tech)), tech)


def _layer_shapes(flat: FlatLayout, tech: Tech):
    """Merged (disjoint) polygons of every tech layer."""
    return {
        layer.name: merge_parts(polygons_from_arrays(flat.polygons.get(layer.gds, [])))
        for layer in tech.layers.values()
    }


def _union(arrays):
    """Merged parts of several layers together."""
    arrays = [a for a in arrays if len(a)]
    if not arrays:
        return np.empty(0, dtype=object)
    if len(arrays) == 1:
        return arrays[0]
    return merge_parts(np.concatenate(arrays))


def extract_flat(flat: FlatLayout, tech: Tech) -> Circuit:
    """Extract from an already flattened layout (see :func:`extract_layout`).

    Raises
    ------
    InputError
        When the geometry cannot be processed (degenerate shapes the
        geometry engine refuses), naming the file and cell.

    Notes
    -----
    Cost is dominated by the polygon overlays and STR-tree queries,
    O(n log n) in the number of shapes.
    """
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        try:
            circuit = _extract_flat(flat, tech)
        except shapely.errors.GEOSException as exc:
            raise InputError(flat.path, f"geometry cannot be processed ({exc})", f"cell {flat.cell}") from None
    # wrong layer numbers show as a missing kind: warn when no diffusion (no
    # poly) layer has shapes; one empty layer of several (a tap layer in a
    # logic cell) is normal
    for kind in ("diffusion", "poly"):
        names = [n for n, layer in tech.layers.items() if layer.kind == kind]
        if not any(flat.polygons.get(tech.layers[n].gds) for n in names):
            circuit.findings.extend(
                Finding(f"tech layer {name} {list(tech.layers[name].gds)} has no shapes in cell {flat.cell}")
                for name in names
            )
    return circuit


def _extract_flat(flat: FlatLayout, tech: Tech) -> Circuit:
    grid = flat.grid_um
    shapes = _layer_shapes(flat, tech)
    kinds = {name: layer.kind for name, layer in tech.layers.items()}
    of_kind = lambda k: [n for n in tech.layers if kinds[n] == k]  # noqa: E731
    poly_all = _union([shapes[n] for n in of_kind("poly")])
    diff_all = _union([shapes[n] for n in of_kind("diffusion")])
    implants = tuple(_union([shapes[n] for n in of_kind(k)]) for k in ("pimplant", "nimplant", "nwell"))

    findings = []
    chans, pieces = [], []
    for name in of_kind("diffusion"):
        ch, pc, f = find_channels(name, shapes[name], poly_all, implants, tol=grid / 2)
        chans.append(ch)
        pieces.append(pc)
        findings.extend(f)

    # conductor array: diffusion pieces, then poly and metal parts
    geoms, layer_of = [], []
    piece_offset = []
    for pc in pieces:
        piece_offset.append(len(geoms))
        geoms.extend(pc.geoms)
        layer_of.extend([pc.layer] * len(pc.geoms))
    wire_layers = [n for n in tech.layers if kinds[n] in ("poly", "metal")]
    for name in wire_layers:
        p = shapes[name]
        geoms.extend(p)
        layer_of.extend([name] * len(p))
    geoms = np.asarray(geoms, dtype=object)
    conductors = Conductors(geoms, np.asarray(layer_of, dtype=object), representative_points(geoms))
    cuts = []
    for name in of_kind("cut"):
        cuts.append((shapes[name], tech.layers[name].joins))
    net_of = connect(conductors, cuts)
    n_nets = int(net_of.max()) + 1 if len(net_of) else 0

    # a point per net: its largest diffusion piece, else its largest shape
    area = shapely.area(geoms) if len(geoms) else np.empty(0)
    is_diff = np.isin(conductors.layer, of_kind("diffusion")) if len(geoms) else np.empty(0, bool)
    score = area + np.where(is_diff, 1e12, 0.0)
    best = np.full(n_nets, -1)
    best_score = np.full(n_nets, -np.inf)
    for i in np.argsort(score, kind="stable"):
        k = net_of[i]
        if score[i] >= best_score[k]:
            best[k], best_score[k] = i, score[i]
    net_points = conductors.points[best] if n_nets else np.empty((0, 2))

    label_layers = {n: set(layer.labels) for n, layer in tech.layers.items() if layer.labels}
    names, label_texts, f = name_nets(net_of, conductors, flat.labels, label_layers, tech.role_of, net_points)
    findings.extend(f)

    nets: dict[str, Net] = {}
    for k, name in enumerate(names):
        if name not in nets:
            nets[name] = Net(
                name=name,
                role=tech.role_of(name),
                location_um=(round(float(net_points[k][0]), 6), round(float(net_points[k][1]), 6)),
                labelled=bool(label_texts[k]),
            )
        net = nets[name]
        net.labels = tuple(sorted(set(net.labels) | set(label_texts[k])))
        net.labelled = net.labelled or bool(label_texts[k])
    net_name = np.asarray(names, dtype=object)
    cond_net = net_name[net_of] if len(net_of) else np.empty(0, dtype=object)

    # wire capacitance of poly (outside diffusion) and metal shapes
    shape_lists: dict[str, list] = {name: [] for name in nets}
    for i, g in enumerate(geoms):
        shape_lists[cond_net[i]].append((conductors.layer[i], g))
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
        for j, i in enumerate(idx):
            net = nets[cond_net[i]]
            net.cap = net.cap + wire_parts(layer, float(a[j]), float(p[j]))

    # junctions per piece
    for pc, off in zip(pieces, piece_offset):
        field = pc.field_edge
        for j in range(len(pc.geoms)):
            net = nets[cond_net[off + j]]
            t = str(pc.type[j])
            geo = JunctionGeometry(round(float(pc.area[j]), 9), round(float(field[j]), 9), round(float(pc.gate_edge[j]), 9))
            net.junctions[t] = net.junctions.get(t, JunctionGeometry()) + geo
            net.cap = net.cap + junction_parts(tech.mos[t], geo)

    devices = _devices(tech, chans, pieces, piece_offset, conductors, cond_net, nets)
    circuit = Circuit(
        cell=flat.cell,
        nets=dict(sorted(nets.items())),
        devices=devices,
        findings=findings,
        source=flat.path,
        shapes=shape_lists,
    )
    return circuit


def _devices(tech, chans, pieces, piece_offset, conductors, cond_net, nets):
    """Devices from channels; gate net by the poly shape holding the channel."""
    poly_idx = np.flatnonzero(np.isin(conductors.layer, [n for n, l in tech.layers.items() if l.kind == "poly"]))
    poly_tree = shapely.STRtree(conductors.geoms[poly_idx]) if len(poly_idx) else None
    raw = []
    for ch, pc, off in zip(chans, pieces, piece_offset):
        if len(ch.geoms) == 0:
            continue
        pts = shapely.points(ch.points)
        pi, gi = poly_tree.query(pts, predicate="intersects")
        gate_of = np.full(len(ch.geoms), -1)
        gate_of[pi[::-1]] = poly_idx[gi[::-1]]  # first hit wins
        for k in range(len(ch.geoms)):
            raw.append(
                dict(
                    type=str(ch.type[k]),
                    a=off + int(ch.piece_a[k]),
                    b=off + int(ch.piece_b[k]),
                    ea=float(ch.edge_a[k]),
                    eb=float(ch.edge_b[k]),
                    w=float(ch.w[k]),
                    l=float(ch.l[k]),
                    gate=cond_net[gate_of[k]],
                    point=(float(ch.points[k][0]), float(ch.points[k][1])),
                )
            )
    raw.sort(key=lambda r: (round(r["point"][0], 6), round(r["point"][1], 6)))
    piece_geo = {}
    for pc, off in zip(pieces, piece_offset):
        field = pc.field_edge
        for j in range(len(pc.geoms)):
            piece_geo[off + j] = (float(pc.area[j]), float(field[j]))
    owner: dict[int, int] = {}
    devices = []
    for n, r in enumerate(raw):
        mos = tech.mos[r["type"]]
        rail_roles = ("ground",) if r["type"] == "nmos" else ("power",)
        ends = [(r["a"], r["ea"]), (r["b"], r["eb"])]
        # source is the rail side when there is one, else the later name
        ends.sort(key=lambda e: (nets[cond_net[e[0]]].role in rail_roles, cond_net[e[0]]))
        (dp, de), (sp, se) = ends
        geo = []
        for piece, edge in ((dp, de), (sp, se)):
            if piece not in owner:
                owner[piece] = n
                a, f = piece_geo[piece]
                geo.append((a, f + edge))
            else:
                geo.append((0.0, edge))
        dev = Device(
            name=f"M{n + 1}",
            type=r["type"],
            drain=cond_net[dp],
            gate=r["gate"],
            source=cond_net[sp],
            w_um=round(r["w"], 9),
            l_um=round(r["l"], 9),
            ad_um2=round(geo[0][0], 9),
            as_um2=round(geo[1][0], 9),
            pd_um=round(geo[0][1], 9),
            ps_um=round(geo[1][1], 9),
            location_um=(round(r["point"][0], 6), round(r["point"][1], 6)),
            model=mos.models[0] if mos.models else None,
        )
        devices.append(dev)
        g = nets[dev.gate]
        g.cap = g.cap + gate_parts(mos, r["w"], r["l"])
        for side in (dev.drain, dev.source):
            nets[side].cap = nets[side].cap + overlap_per_side(mos, r["w"])
    return devices
