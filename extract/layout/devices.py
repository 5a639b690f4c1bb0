"""Transistor recognition: channels, source/drain pieces, W/L and type.

A channel is diffusion ∩ poly; the source/drain pieces are diffusion −
poly.  A channel that shares edges with exactly two pieces is a
transistor; its W is half the total length of those shared edges and
L = channel area / W.  This works for any-angle shapes, bent gates and
multi-finger devices (each finger is its own channel, neighbouring
fingers share a piece).

Device type follows the tech-file rule: pmos when the channel lies in a
``pimplant`` shape; otherwise nmos when it lies in an ``nimplant`` shape;
otherwise pmos inside ``nwell``, else nmos.  Source/drain pieces get
their type by the same rule.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from extract.errors import Finding
from extract.layout.geometry import grouped, inside_any, parts, representative_points, subtract_overlapping

__all__ = ["DiffusionPieces", "Channels", "device_type", "find_channels"]


@dataclass
class DiffusionPieces:
    """Source/drain pieces of one diffusion layer (arrays, one entry each).

    Attributes
    ----------
    layer : str
    geoms : ndarray of Polygon
    type : ndarray of str   ("nmos" / "pmos")
    area, perimeter, gate_edge : ndarray of float
        µm², µm, µm.  ``gate_edge`` is the part of the perimeter shared
        with channels; the rest is field edge.
    points : ndarray (n, 2)
        A point inside each piece.
    """

    layer: str
    geoms: np.ndarray
    type: np.ndarray
    area: np.ndarray
    perimeter: np.ndarray
    gate_edge: np.ndarray
    points: np.ndarray

    @property
    def field_edge(self) -> np.ndarray:
        return np.maximum(self.perimeter - self.gate_edge, 0.0)


@dataclass
class Channels:
    """The transistor channels found on one diffusion layer.

    Attributes
    ----------
    geoms : ndarray of Polygon
    type : ndarray of str
    w, l : ndarray of float   (µm)
    piece_a, piece_b : ndarray of int
        Indices into the layer's :class:`DiffusionPieces`.
    edge_a, edge_b : ndarray of float
        Gate-edge length shared with piece a / piece b (µm).
    points : ndarray (n, 2)
    """

    geoms: np.ndarray
    type: np.ndarray
    w: np.ndarray
    l: np.ndarray
    piece_a: np.ndarray
    piece_b: np.ndarray
    edge_a: np.ndarray
    edge_b: np.ndarray
    points: np.ndarray


def device_type(points: np.ndarray, pimplant, nimplant, nwell) -> np.ndarray:
    """Type of the device or diffusion at each point, by the tech-file rule.

    Parameters
    ----------
    points : ndarray (n, 2)
    pimplant, nimplant, nwell : ndarray of Polygon (may be empty)

    Returns
    -------
    ndarray of str

    Examples
    --------
    >>> import numpy as np
    >>> from shapely import box
    >>> pts = np.array([[0.5, 0.5], [5.5, 0.5], [9.5, 0.5]])
    >>> none = np.array([], dtype=object)
    >>> device_type(pts, none, np.array([box(5, 0, 6, 1)]), np.array([box(0, 0, 1, 1)])).tolist()
    ['pmos', 'nmos', 'nmos']
    """
    geoms = shapely.points(points) if len(points) else points
    in_p = inside_any(pimplant, geoms)
    in_n = inside_any(nimplant, geoms)
    in_w = inside_any(nwell, geoms)
    is_p = in_p | (~in_n & in_w)
    return np.where(is_p, "pmos", "nmos")


def find_channels(layer: str, diffusion, poly, implants, tol: float = 1e-6):
    """Channels and source/drain pieces of one diffusion layer.

    Parameters
    ----------
    layer : str
        Name of the diffusion layer (for messages).
    diffusion, poly : ndarray of Polygon
        Merged (disjoint) shapes of the diffusion layer and of all poly layers.
    implants : tuple of ndarray of Polygon
        ``(pimplant, nimplant, nwell)`` shapes (may be empty).
    tol : float
        Shared edges shorter than this (µm) do not count (corner touches).

    Returns
    -------
    channels : Channels
    pieces : DiffusionPieces
    findings : list of Finding
        One per poly–diffusion overlap that is not a transistor (it does not
        split the diffusion into two sides, or touches more than two).

    Notes
    -----
    STR-tree queries pair each diffusion shape with the poly shapes that
    meet it; one vectorised intersection per pair gives the channels and
    one vectorised difference per diffusion shape the pieces; a query of
    channels against pieces and one boundary intersection per touching
    pair give the shared edges.  O(n log n) in the number of shapes, no
    Python loop over pairs.

    Examples
    --------
    >>> from shapely import box
    >>> none = np.array([], dtype=object)
    >>> ch, pc, f = find_channels("active", np.array([box(0, 0, 3, 1)]),
    ...                           np.array([box(1, -0.5, 1.2, 1.5)]), (none, none, none))
    >>> [round(float(v), 6) for v in (ch.w[0], ch.l[0])], len(pc.geoms), f
    ([1.0, 0.2], 2, [])
    """
    diffusion = np.asarray(diffusion, dtype=object)
    poly = np.asarray(poly, dtype=object)
    if len(diffusion) and len(poly):
        di, pj = shapely.STRtree(poly).query(diffusion, predicate="intersects")
        channel_geoms = _flat_parts(shapely.intersection(diffusion[di], poly[pj]))
        # the same pairs give each diffusion shape the poly it loses
        # (what subtract_overlapping(diffusion, poly) would query again)
        piece_geoms = _flat_parts(shapely.difference(diffusion, grouped(poly[pj], di, len(diffusion))))
    else:
        channel_geoms = np.empty(0, dtype=object)
        piece_geoms = _flat_parts(subtract_overlapping(diffusion, poly))
    findings: list[Finding] = []
    ch_pts = representative_points(channel_geoms)
    pc_pts = representative_points(piece_geoms)

    n_pc = len(piece_geoms)
    gate_edge = np.zeros(n_pc)
    if len(channel_geoms) and n_pc:
        tree = shapely.STRtree(piece_geoms)
        ci, pi = tree.query(channel_geoms, predicate="intersects")
        shared = shapely.length(
            shapely.intersection(shapely.boundary(channel_geoms[ci]), shapely.boundary(piece_geoms[pi]))
        )
        keep = shared > tol
        ci, pi, shared = ci[keep], pi[keep], shared[keep]
        order = np.lexsort((pi, ci))
        ci, pi, shared = ci[order], pi[order], shared[order]
        np.add.at(gate_edge, pi, shared)
    else:
        ci = pi = np.empty(0, dtype=np.intp)
        shared = np.empty(0)

    count = np.bincount(ci, minlength=len(channel_geoms))
    first = np.searchsorted(ci, np.arange(len(channel_geoms)))
    good = np.flatnonzero(count == 2)
    for k in np.flatnonzero(count != 2):
        x, y = ch_pts[k]
        if count[k] < 2:
            what = "does not split it into two sides" if count[k] == 1 else "covers a whole diffusion shape"
            findings.append(Finding(f"poly over {layer} {what}: not a transistor", (float(x), float(y))))
        else:
            findings.append(
                Finding(f"poly over {layer} touches {count[k]} source/drain pieces: not a transistor", (float(x), float(y)))
            )
    a, b = first[good], first[good] + 1
    w = (shared[a] + shared[b]) / 2.0
    area = shapely.area(channel_geoms[good]) if len(good) else np.empty(0)
    pimp, nimp, nwell = implants
    channels = Channels(
        geoms=channel_geoms[good],
        type=device_type(ch_pts[good], pimp, nimp, nwell),
        w=w,
        l=area / np.where(w > 0, w, 1.0),
        piece_a=pi[a],
        piece_b=pi[b],
        edge_a=shared[a],
        edge_b=shared[b],
        points=ch_pts[good],
    )
    pieces = DiffusionPieces(
        layer=layer,
        geoms=piece_geoms,
        type=device_type(pc_pts, pimp, nimp, nwell),
        area=shapely.area(piece_geoms) if n_pc else np.empty(0),
        perimeter=shapely.length(piece_geoms) if n_pc else np.empty(0),
        gate_edge=gate_edge,
        points=pc_pts,
    )
    return channels, pieces, findings


def _flat_parts(geoms) -> np.ndarray:
    """All polygon parts of an array of geometries (non-polygons dropped)."""
    if len(geoms) == 0:
        return np.empty(0, dtype=object)
    flat = shapely.get_parts(geoms)
    if not len(flat):
        return np.empty(0, dtype=object)
    types = shapely.get_type_id(flat)
    if (types != 3).any():
        flat = np.concatenate([flat[types == 3]] + [parts(g) for g in flat[(types == 6) | (types == 7)]])
    return flat[shapely.area(flat) > 0]
